"""Certify a surrogate while it trains: ``CertifyEvery`` in the training loop.

>>> certifier = CertifyEvery(client, problem, regularity, every=50,
...                          plan_points={"t": 16, "x": 16}, residual_fn=residuals_of_net,
...                          model_name="pipe-wave", model_version="run-7")  # doctest: +SKIP
>>> for epoch in range(2000):  # doctest: +SKIP
...     train_one_epoch()
...     certifier(epoch)
>>> certifier.history[-1].l2_space_time  # doctest: +SKIP

The plan is requested once (on the first certification) and kept, so every bound of the history
uses the same quadrature and the numbers are comparable. A service outage never interrupts
training: the certification is recorded as a miss (``status == "missed"``) with the error, a
warning is logged, and the next scheduled epoch tries again. Pass ``raise_errors=True`` to get
the :class:`~boundsvc.client.BoundsvcClientError` instead.
"""

from __future__ import annotations

import logging
import time
from collections.abc import Callable, Mapping
from dataclasses import asdict, dataclass, field
from typing import Any, TypeAlias

from api_schemas import Certificate
from boundsvc.client._http import BoundsvcClient, Plan, ProblemLike, ResidualsLike
from boundsvc.client.errors import BoundsvcClientError

__all__ = ["BoundRecord", "CertifyEvery"]

log = logging.getLogger("boundsvc.client.training")

RegularityLike: TypeAlias = Mapping[str, float | str]
#: Fixed regularity values, or a callable giving them now (model quantities change as it trains).
RegularitySource: TypeAlias = RegularityLike | Callable[[], RegularityLike]

MISSED = "missed"


@dataclass(frozen=True)
class BoundRecord:
    """One point of the bound history.

    ``status`` is the certificate's (``valid``, ``vacuous``, ``invalid-hypotheses``) or
    ``"missed"`` when no certificate was obtained (then ``error`` says why).
    """

    epoch: int
    status: str
    l2_space_time: float | None = None
    l2_final_time: float | None = None
    terms: dict[str, float | None] = field(default_factory=dict)
    certificate_id: str | None = None
    error: str | None = None
    seconds: float = 0.0

    @property
    def missed(self) -> bool:
        return self.status == MISSED

    @classmethod
    def from_certificate(cls, epoch: int, cert: Certificate, seconds: float) -> BoundRecord:
        return cls(
            epoch=epoch,
            status=cert.status,
            l2_space_time=cert.bound.l2_space_time,
            l2_final_time=cert.bound.l2_final_time,
            terms={t.name: t.value for t in cert.terms},
            certificate_id=cert.id,
            seconds=seconds,
        )

    def as_dict(self) -> dict[str, Any]:
        return asdict(self)


class CertifyEvery:
    """Certify every ``every`` epochs with one fixed plan; keep and log the bound history.

    Parameters
    ----------
    client : BoundsvcClient
    problem : ProblemSpec or mapping
        The problem the surrogate solves (registered once, then referred to by id).
    regularity : mapping or callable
        Regularity values; a callable is asked at each certification (for model quantities
        such as ``sup_abs_model_u_x`` that change as the model trains).
    every : int
        Certify at epochs ``0, every, 2 every, ...`` (call with ``force=True`` for the last).
    plan_points : mapping of axis to int
        Gauss-Legendre nodes per axis for the plan, e.g. ``{"t": 16, "x": 16}``.
    residual_fn : callable
        ``residual_fn(plan) -> {component: array}``: the current model's residuals at the
        plan's points (e.g. a :class:`~boundsvc.client.adapters.PlanEvaluator`'s
        ``residuals``). Its own exceptions propagate: they are bugs, not outages.
    model_name, model_version : str, optional
        Registry identity; the epoch is sent with each certificate.
    raise_errors : bool
        Re-raise client errors instead of recording misses.
    on_record : callable, optional
        Called with each new :class:`BoundRecord`.
    """

    def __init__(
        self,
        client: BoundsvcClient,
        problem: ProblemLike,
        regularity: RegularitySource,
        *,
        every: int,
        plan_points: Mapping[str, int],
        residual_fn: Callable[[Plan], ResidualsLike],
        plan_panels: Mapping[str, int] | None = None,
        model_name: str | None = None,
        model_version: str | None = None,
        raise_errors: bool = False,
        on_record: Callable[[BoundRecord], None] | None = None,
        logger: logging.Logger | None = None,
    ) -> None:
        if every < 1:
            raise ValueError(f"every must be a positive number of epochs, got {every}")
        if not plan_points:
            raise ValueError("plan_points must give the nodes per axis, e.g. {'t': 16, 'x': 16}")
        self.client = client
        self.problem = problem
        self.regularity = regularity
        self.every = int(every)
        self.plan_points = dict(plan_points)
        self.plan_panels = dict(plan_panels or {})
        self.residual_fn = residual_fn
        self.model_name = model_name
        self.model_version = model_version
        self.raise_errors = raise_errors
        self.on_record = on_record
        self.log = logger or log
        self.history: list[BoundRecord] = []
        self.problem_id: str | None = None
        self.plan: Plan | None = None

    # -- the loop hook ----------------------------------------------------------
    def due(self, epoch: int) -> bool:
        """Whether ``epoch`` is a scheduled certification."""
        return epoch % self.every == 0

    def __call__(self, epoch: int, *, force: bool = False) -> BoundRecord | None:
        """Certify if ``epoch`` is due (or ``force``); return the new record, else ``None``."""
        if not (force or self.due(epoch)):
            return None
        start = time.perf_counter()
        try:
            plan = self._plan()
            residuals = self.residual_fn(plan)
            regularity = self.regularity() if callable(self.regularity) else self.regularity
            cert = self.client.certify(
                self.problem_id or self.problem,
                plan,
                regularity,
                residuals,
                model={"name": self.model_name, "version": self.model_version, "epoch": int(epoch)},
            )
        except BoundsvcClientError as exc:
            if self.raise_errors:
                raise
            record = BoundRecord(
                epoch=int(epoch), status=MISSED, error=str(exc), seconds=time.perf_counter() - start
            )
            self.log.warning(
                "epoch %d: no certificate (%s %s): %s",
                epoch,
                exc.status or "-",
                exc.code,
                exc.detail,
            )
        else:
            record = BoundRecord.from_certificate(int(epoch), cert, time.perf_counter() - start)
            self.log.info(
                "epoch %d: L2 bound %s (final time %s), %s, %s",
                epoch,
                _fmt(record.l2_space_time),
                _fmt(record.l2_final_time),
                record.status,
                record.certificate_id,
            )
        self.history.append(record)
        if self.on_record is not None:
            self.on_record(record)
        return record

    def _plan(self) -> Plan:
        if self.problem_id is None:
            self.problem_id = self.client.problem(self.problem).problem_id
        if self.plan is None:
            self.plan = self.client.plan(
                self.problem_id, points=self.plan_points, panels=self.plan_panels or None
            )
        return self.plan

    # -- the history --------------------------------------------------------------
    @property
    def certified(self) -> list[BoundRecord]:
        """Records with a certificate (misses left out)."""
        return [r for r in self.history if not r.missed]

    @property
    def misses(self) -> list[BoundRecord]:
        return [r for r in self.history if r.missed]

    @property
    def latest(self) -> BoundRecord | None:
        """The newest record with a certificate."""
        done = self.certified
        return done[-1] if done else None

    def best(self, key: str = "l2_space_time") -> BoundRecord | None:
        """The valid record with the smallest bound ``key`` (``l2_space_time`` or
        ``l2_final_time``)."""
        finite = [r for r in self.certified if r.status == "valid" and getattr(r, key) is not None]
        return min(finite, key=lambda r: float(getattr(r, key))) if finite else None

    def table(self) -> str:
        """The history as a small text table."""
        head = f"{'epoch':>7}  {'status':<19} {'L2 space-time':>14} {'L2 final':>12}"
        lines = [f"{head}  certificate"]
        for r in self.history:
            lines.append(
                f"{r.epoch:>7}  {r.status:<19} {_fmt(r.l2_space_time):>14} "
                f"{_fmt(r.l2_final_time):>12}  {r.certificate_id or r.error or ''}"
            )
        return "\n".join(lines)


def _fmt(value: float | None) -> str:
    return "n/a" if value is None else f"{value:.4g}"
