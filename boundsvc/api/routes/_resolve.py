"""Looking up problems and plans referenced by id, storing those sent inline."""

from __future__ import annotations

import threading
import weakref
from collections import OrderedDict

from api_schemas import ProblemSpec
from boundsvc.certify import build_plan, derive
from boundsvc.errors import NotFound, PlanInvalid
from boundsvc.families import Classified, problem_sha256
from boundsvc.quadrature import Plan
from boundsvc.store import Store

_KNOWN_MAX = 4096


class _KnownIds:
    """Ids this process has stored (or found stored) in one store: a bounded LRU.

    Rows are immutable and content-addressed, so a known id needs no second write. The set
    is a hint only: if the row is gone (database reset behind the process), the next
    reader that needs it misses it and :func:`forget_stored` drops the id; a write skipped
    wrongly is never the only copy, as every write is an insert-if-absent anyway.
    """

    def __init__(self) -> None:
        self._ids: OrderedDict[str, None] = OrderedDict()
        self._lock = threading.Lock()

    def __contains__(self, key: str) -> bool:
        with self._lock:
            if key in self._ids:
                self._ids.move_to_end(key)
                return True
            return False

    def add(self, key: str) -> None:
        with self._lock:
            self._ids[key] = None
            self._ids.move_to_end(key)
            while len(self._ids) > _KNOWN_MAX:
                self._ids.popitem(last=False)

    def discard(self, key: str) -> None:
        with self._lock:
            self._ids.pop(key, None)


_known: weakref.WeakKeyDictionary[Store, _KnownIds] = weakref.WeakKeyDictionary()
_known_lock = threading.Lock()


def known_ids(store: Store) -> _KnownIds:
    """The ids known to be stored in ``store`` by this process."""
    with _known_lock:
        known = _known.get(store)
        if known is None:
            known = _known[store] = _KnownIds()
        return known


def forget_stored(store: Store, key: str) -> None:
    """``key`` was looked up and is not stored (any more): write it again next time."""
    known_ids(store).discard(key)


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
            forget_stored(store, problem_id)
            raise NotFound("problem_not_found", f"no problem with id {problem_id!r}", "problem_id")
        problem = ProblemSpec.model_validate(stored.body)
        return problem, problem_id, derive(problem)
    classified = derive(problem)
    pid = problem_id_of(problem)
    ensure_problem_stored(store, pid, problem, classified)
    return problem, pid, classified


def ensure_problem_stored(
    store: Store, pid: str, problem: ProblemSpec, classified: Classified
) -> None:
    """Store the problem unless it is stored: an id this process stored before is checked by
    a read (much cheaper than a write; a database emptied behind the process is seen), any
    other is written at once (insert-if-absent, so one stored by another process is kept)."""
    known = known_ids(store)
    if pid in known and store.get_problem(pid) is not None:
        return
    store.put_problem(pid, problem.model_dump(mode="json"), classified.family.id)
    known.add(pid)


def resolve_plan(store: Store, classified: Classified, problem_id: str, plan_id: str) -> Plan:
    """The stored plan ``plan_id``, rebuilt; it must belong to ``problem_id``."""
    stored = store.get_plan(plan_id)
    if stored is None:
        forget_stored(store, plan_id)
        raise NotFound("plan_not_found", f"no plan with id {plan_id!r}", "plan_id")
    spec = dict(stored.spec)
    if spec.get("problem_id") != problem_id:
        raise PlanInvalid(
            "plan_problem_mismatch",
            f"plan {plan_id} was made for problem {spec.get('problem_id')}, not {problem_id}",
            "plan_id",
        )
    return build_plan(classified, spec)
