"""Looking up problems and plans referenced by id, storing those sent inline."""

from __future__ import annotations

from api_schemas import ProblemSpec
from boundsvc.certify import build_plan, derive
from boundsvc.errors import NotFound, PlanInvalid
from boundsvc.families import Classified, problem_sha256
from boundsvc.quadrature import Plan
from boundsvc.store import Store


def problem_id_of(problem: ProblemSpec) -> str:
    return "prb_" + problem_sha256(problem)[:32]


def resolve_problem(
    store: Store, problem: ProblemSpec | None, problem_id: str | None
) -> tuple[ProblemSpec, str, Classified]:
    """The problem (inline, or stored under ``problem_id``), its id and classification.

    An inline problem is classified first and stored only when that succeeded.
    """
    if problem is None:
        assert problem_id is not None
        stored = store.get_problem(problem_id)
        if stored is None:
            raise NotFound("problem_not_found", f"no problem with id {problem_id!r}", "problem_id")
        problem = ProblemSpec.model_validate(stored.body)
        return problem, problem_id, derive(problem)
    classified = derive(problem)
    pid = problem_id_of(problem)
    store.put_problem(pid, problem.model_dump(mode="json"), classified.family.id)
    return problem, pid, classified


def resolve_plan(store: Store, classified: Classified, problem_id: str, plan_id: str) -> Plan:
    """The stored plan ``plan_id``, rebuilt; it must belong to ``problem_id``."""
    stored = store.get_plan(plan_id)
    if stored is None:
        raise NotFound("plan_not_found", f"no plan with id {plan_id!r}", "plan_id")
    spec = dict(stored.spec)
    if spec.get("problem_id") != problem_id:
        raise PlanInvalid(
            "plan_problem_mismatch",
            f"plan {plan_id} was made for problem {spec.get('problem_id')}, not {problem_id}",
            "plan_id",
        )
    return build_plan(classified, spec)
