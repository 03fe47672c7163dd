"""POST /v1/plans: quadrature nodes and weights for each residual component."""

from __future__ import annotations

from typing import Any

from fastapi import APIRouter, Depends

from api_schemas import PlanRequest, PlanResponse
from boundsvc.api.deps import get_store
from boundsvc.api.routes._resolve import resolve_plan, resolve_problem
from boundsvc.certify import build_plan, plan_body, plan_spec
from boundsvc.store import Store

router = APIRouter(prefix="/v1", tags=["plans"])


@router.post("/plans", response_model=PlanResponse, status_code=201)
def post_plan(body: PlanRequest, store: Store = Depends(get_store)) -> Any:
    """Make (or find) the plan for a problem; reproducible from the request."""
    _, pid, classified = resolve_problem(store, body.problem, body.problem_id)
    spec = plan_spec(body, pid)
    plan = build_plan(classified, spec)
    store.put_plan(plan.plan_id, spec, problem_id=pid)
    return plan_body(plan, pid)


@router.get("/plans/{plan_id}", response_model=PlanResponse)
def get_plan(plan_id: str, store: Store = Depends(get_store)) -> Any:
    """A stored plan, rebuilt from its request."""
    stored = store.get_plan(plan_id)
    if stored is None or stored.problem_id is None:
        from boundsvc.errors import NotFound

        raise NotFound("plan_not_found", f"no plan with id {plan_id!r}", "plan_id")
    _, pid, classified = resolve_problem(store, None, stored.problem_id)
    return plan_body(resolve_plan(store, classified, pid, plan_id), pid)
