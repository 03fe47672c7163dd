"""POST /v1/problems: classify a problem and derive its stability constants."""

from __future__ import annotations

from typing import Any

from fastapi import APIRouter, Depends

from api_schemas import ProblemRequest, ProblemResponse, ProblemSpec
from boundsvc.api.deps import get_store
from boundsvc.api.routes._resolve import resolve_problem
from boundsvc.certify import problem_summary
from boundsvc.store import Store

router = APIRouter(prefix="/v1", tags=["problems"])


@router.post("/problems", response_model=ProblemResponse, status_code=200)
def post_problem(body: ProblemRequest, store: Store = Depends(get_store)) -> Any:
    """Classify the problem and return the family, required regularity and constants."""
    _, pid, classified = resolve_problem(store, body.problem, None)
    return problem_summary(classified, pid, body.regularity)


@router.get("/problems/{problem_id}", response_model=ProblemResponse)
def get_problem(problem_id: str, store: Store = Depends(get_store)) -> Any:
    """A stored problem's classification (as returned when it was posted)."""
    problem, pid, classified = resolve_problem(store, None, problem_id)
    del problem
    return problem_summary(classified, pid)


__all__ = ["ProblemSpec", "router"]
