"""POST /v1/problems: classify a problem and derive its stability constants."""

from __future__ import annotations

import threading
from collections import OrderedDict
from typing import Any

import orjson
from fastapi import APIRouter, Depends
from pydantic import TypeAdapter
from starlette.responses import Response

from api_schemas import ProblemRequest, ProblemResponse, ProblemSpec
from boundsvc.api.deps import get_store
from boundsvc.api.routes._resolve import resolve_problem
from boundsvc.certify import problem_summary
from boundsvc.store import Store

router = APIRouter(prefix="/v1", tags=["problems"])


_RESPONSE = TypeAdapter(ProblemResponse)
_BODIES_MAX = 512
_bodies: OrderedDict[tuple[str, bytes], bytes] = OrderedDict()
_bodies_lock = threading.Lock()


def _summary_json(summary: dict[str, Any]) -> bytes:
    """The body FastAPI would send for ``response_model=ProblemResponse`` (same bytes)."""
    return _RESPONSE.dump_json(
        _RESPONSE.validate_python(summary, from_attributes=True), by_alias=True
    )


@router.post("/problems", response_model=ProblemResponse, status_code=200)
def post_problem(body: ProblemRequest, store: Store = Depends(get_store)) -> Any:
    """Classify the problem and return the family, required regularity and constants."""
    _, pid, classified = resolve_problem(store, body.problem, None)
    # the body is a function of the problem (its content hash ``pid``), the regularity
    # and the running version only: rendered once per process
    key = (pid, orjson.dumps(body.regularity, option=orjson.OPT_SORT_KEYS))
    with _bodies_lock:
        cached = _bodies.get(key)
        if cached is not None:
            _bodies.move_to_end(key)
    if cached is None:
        cached = _summary_json(problem_summary(classified, pid, body.regularity))
        with _bodies_lock:
            _bodies[key] = cached
            while len(_bodies) > _BODIES_MAX:
                _bodies.popitem(last=False)
    return Response(cached, status_code=200, media_type="application/json")


@router.get("/problems/{problem_id}", response_model=ProblemResponse)
def get_problem(problem_id: str, store: Store = Depends(get_store)) -> Any:
    """A stored problem's classification (as returned when it was posted)."""
    problem, pid, classified = resolve_problem(store, None, problem_id)
    del problem
    return problem_summary(classified, pid)


__all__ = ["ProblemSpec", "router"]
