"""POST /v1/plans: quadrature nodes and weights for each residual component.

``?format=json`` (default) gives JSON rows; ``?format=base64`` gives each component's points
(C order, shape ``[size, len(axes)]``) and weights as little-endian float64 base64 arrays;
``?format=npz`` gives an ``.npz`` file with ``<component>.points``, ``<component>.weights``
and a ``meta`` member (the JSON body without the arrays, as uint8 bytes).
"""

from __future__ import annotations

import base64
import io
from typing import Any, Literal

import numpy as np
import orjson
from fastapi import APIRouter, Depends, Query
from starlette.responses import Response

from api_schemas import PlanRequest, PlanResponse
from boundsvc.api.deps import get_store
from boundsvc.api.routes._resolve import known_ids, resolve_plan, resolve_problem
from boundsvc.certify import build_plan, plan_body, plan_spec
from boundsvc.errors import NotFound
from boundsvc.quadrature import Plan
from boundsvc.store import Store

router = APIRouter(prefix="/v1", tags=["plans"])

PlanFormat = Literal["json", "base64", "npz"]
_FORMATS: dict[int | str, dict[str, Any]] = {
    200: {
        "description": "the plan",
        "content": {
            "application/json": {"schema": {"$ref": "#/components/schemas/PlanResponse"}},
            "application/x-npz": {"schema": {"type": "string", "format": "binary"}},
        },
    },
}


def _b64(arr: np.ndarray) -> dict[str, Any]:
    data = np.ascontiguousarray(arr, dtype="<f8")
    return {
        "dtype": "float64",
        "encoding": "base64",
        "shape": list(data.shape),
        "data": base64.b64encode(data.tobytes()).decode(),
    }


def render_plan(plan: Plan, problem_id: str, fmt: PlanFormat, status: int) -> Response:
    """The plan in the requested format."""
    if fmt == "json":
        return Response(
            orjson.dumps(plan_body(plan, problem_id)),
            status_code=status,
            media_type="application/json",
        )
    meta = plan_body(plan, problem_id, with_arrays=False)
    if fmt == "base64":
        for item in meta["components"]:
            comp = plan.components[item["name"]]
            item["points"] = _b64(comp.points)
            item["weights"] = _b64(comp.weights)
        return Response(orjson.dumps(meta), status_code=status, media_type="application/json")
    arrays: dict[str, np.ndarray] = {"meta": np.frombuffer(orjson.dumps(meta), dtype=np.uint8)}
    for name, comp in plan.components.items():
        arrays[f"{name}.points"] = comp.points
        arrays[f"{name}.weights"] = comp.weights
    buf = io.BytesIO()
    np.savez(buf, **arrays)  # type: ignore[arg-type]
    return Response(
        buf.getvalue(),
        status_code=status,
        media_type="application/x-npz",
        headers={"Content-Disposition": f'attachment; filename="{plan.plan_id}.npz"'},
    )


@router.post("/plans", response_model=PlanResponse, status_code=201, responses={201: _FORMATS[200]})
def post_plan(
    body: PlanRequest,
    format: PlanFormat = Query(default="json"),
    store: Store = Depends(get_store),
) -> Response:
    """Make (or find) the plan for a problem; reproducible from the request."""
    _, pid, classified = resolve_problem(store, body.problem, body.problem_id)
    spec = plan_spec(body, pid)
    plan = build_plan(classified, spec)
    known = known_ids(store)  # as for problems: skip the write of a plan confirmed stored
    if plan.plan_id not in known or store.get_plan(plan.plan_id) is None:
        store.put_plan(plan.plan_id, spec, problem_id=pid)
        known.add(plan.plan_id)
    return render_plan(plan, pid, format, 201)


@router.get("/plans/{plan_id}", response_model=PlanResponse, responses=_FORMATS)
def get_plan(
    plan_id: str,
    format: PlanFormat = Query(default="json"),
    store: Store = Depends(get_store),
) -> Response:
    """A stored plan, rebuilt from its request."""
    stored = store.get_plan(plan_id)
    if stored is None or stored.problem_id is None:
        raise NotFound("plan_not_found", f"no plan with id {plan_id!r}", "plan_id")
    _, pid, classified = resolve_problem(store, None, stored.problem_id)
    return render_plan(resolve_plan(store, classified, pid, plan_id), pid, format, 200)
