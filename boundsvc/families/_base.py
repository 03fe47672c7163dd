"""What every family provides, and the energy inequality it hands to the Gronwall assembly."""

from __future__ import annotations

from abc import ABC, abstractmethod
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from typing import Literal

import numpy as np
from numpy.typing import NDArray

from boundsvc.families._analysis import AnalysedProblem
from boundsvc.gronwall import Rate
from boundsvc.quadrature import Plan
from boundsvc.regularity import RegularityValue

FloatArray = NDArray[np.float64]
Rigor = Literal["proven", "assumed", "statistical", "heuristic"]

_RIGOR_ORDER: dict[str, int] = {"proven": 0, "assumed": 1, "statistical": 2, "heuristic": 3}


def weakest(*rigors: Rigor) -> Rigor:
    """The weakest of several rigor labels (a term is as strong as its weakest ingredient)."""
    return max(rigors, key=lambda r: _RIGOR_ORDER[r]) if rigors else "proven"


@dataclass(frozen=True)
class Requirement:
    """A regularity input the theorem needs; any key in ``any_of`` satisfies it."""

    any_of: tuple[str, ...]
    purpose: str
    quantity: str


@dataclass(frozen=True)
class ConstantInfo:
    """A stability constant as shown to users (text, LaTeX, derivation, reference)."""

    name: str
    symbol: str
    expression: str
    latex: str
    derivation: tuple[str, ...]
    reference: str
    value: float | None = None
    rigor: Rigor | None = None

    def with_value(self, value: float | None, rigor: Rigor | None = None) -> ConstantInfo:
        return ConstantInfo(
            self.name,
            self.symbol,
            self.expression,
            self.latex,
            self.derivation,
            self.reference,
            value,
            rigor or self.rigor,
        )

    def as_json(self) -> dict[str, object]:
        return {
            "name": self.name,
            "symbol": self.symbol,
            "expression": self.expression,
            "latex": self.latex,
            "value": self.value,
            "derivation": list(self.derivation),
            "rigor": self.rigor,
            "reference": self.reference,
        }


@dataclass(frozen=True)
class SourceInfo:
    """Description of one forcing source of the energy inequality (becomes a term)."""

    name: str
    symbol: str
    formula: str
    rigor: Rigor
    detail: str = ""


@dataclass
class EnergyInequality:
    """``Y' <= (lambda + base_rate(t)) Y + residual(t)/lambda + sum_src forcing_src(t)``.

    ``Y(t) = ||u_model(., t) - u(., t)||^2_{L2(space)}`` (for an ODE system the squared
    Euclidean norm), ``Y(t0) <= initial``; ``lambda > 0`` is the free Young weight of
    ``2 (R, w) <= lambda ||w||^2 + ||R||^2 / lambda`` (chosen by the assembly); when
    ``young`` is False the inequality has no Young weight (``residual`` is then unused).

    ``squared = False`` selects the linear (non-squared) form: ``Y(t)`` is then the error norm
    itself (``||e(t)||``, not its square), ``Y' <= base_rate(t) Y + sum_src forcing_src(t)``
    with the forcing in norm units (e.g. ``||R(t)||``), ``residual`` is ``None`` (no Young
    weight), and the assembly reports ``Y`` without a square root
    (``l2_space_time = (int Y^2 dt)^(1/2)``).
    """

    base_rate: Rate
    initial: float
    initial_info: SourceInfo
    residual: FloatArray | None
    residual_info: SourceInfo | None
    forcing: dict[str, FloatArray] = field(default_factory=dict)
    forcing_info: dict[str, SourceInfo] = field(default_factory=dict)
    nonnegative: tuple[str, ...] = ()
    constants: list[ConstantInfo] = field(default_factory=list)
    warnings: list[str] = field(default_factory=list)
    failed_hypotheses: list[str] = field(default_factory=list)
    rate_rigor: Rigor = "proven"
    inputs: dict[str, float] = field(default_factory=dict)

    @classmethod
    def for_steady(cls, steady: SteadyBound) -> EnergyInequality:
        """A carrier of a steady bound's constants, warnings and data checks."""
        return cls(
            base_rate=Rate(constant=0.0),
            initial=0.0,
            initial_info=SourceInfo("none", "", "", "proven"),
            residual=None,
            residual_info=None,
            constants=list(steady.constants),
            warnings=list(steady.warnings),
            failed_hypotheses=list(steady.failed_hypotheses),
        )

    squared: bool = True
    # ``||e(t)|| <= sqrt(Y(t)) + norm_addition(t)`` (a lifting, triangle inequality); ``None``
    # when Y bounds the error itself
    norm_addition: NormAddition | None = None
    # largest admissible Young weight (None: any lambda > 0); an estimate that takes the weight
    # out of a finite dissipation budget (the H^-1 residual estimate) sets it
    young_cap: float | None = None
    # the lifted estimate: ||L B r|| at the time nodes (its H^-1 twin adds it again)
    lifting_residual: FloatArray | None = None
    # other valid inequalities for the same certificate: each is assembled and the one with
    # the smallest space-time bound is reported (``label`` names an inequality in warnings)
    alternatives: list[EnergyInequality] = field(default_factory=list)
    label: str = ""


@dataclass(frozen=True)
class NormAddition:
    """A norm added to the bound by the triangle inequality, ``||e|| <= ||v|| + ||b||``.

    ``profile[k]`` is ``||b(t_k)||`` at the Gronwall output times of the plan's time grid
    (:func:`boundsvc.gronwall.output_times`), ``space_time`` is ``||b||`` over space-time.
    """

    profile: FloatArray
    space_time: float
    info: SourceInfo


@dataclass(frozen=True)
class CertifyInputs:
    """What a family needs to write down its energy inequality for one certificate."""

    plan: Plan
    residuals: Mapping[str, FloatArray]
    regularity: Mapping[str, RegularityValue]


@dataclass
class SteadyBound:
    """The result of a steady (elliptic) theorem: no time, no Gronwall."""

    l2_space: float
    terms: list[dict[str, object]]
    constants: list[ConstantInfo]
    rigor: Rigor
    sup_space: float | None = None
    warnings: list[str] = field(default_factory=list)
    failed_hypotheses: list[str] = field(default_factory=list)


class Classified(ABC):
    """A problem recognised by a family, with its coefficients extracted."""

    family: Family
    problem: AnalysedProblem

    @abstractmethod
    def components(self) -> list[str]:
        """Residual components the theorem needs (plan component names, in wire order)."""

    def optional_components(self) -> list[str]:
        """Components a plan may add on request (``optional_components`` of ``POST /v1/plans``)
        that the theorem uses when the client sends them (e.g. ``boundary_t``)."""
        return []

    @abstractmethod
    def requirements(self) -> list[Requirement]:
        """Regularity inputs that are always needed."""

    @abstractmethod
    def optional_keys(self) -> list[str]:
        """Regularity keys that are accepted in addition (tighten, or needed conditionally)."""

    @abstractmethod
    def constants(self) -> list[ConstantInfo]:
        """The stability constants in the problem's symbols (no regularity values needed)."""

    @abstractmethod
    def description(self) -> dict[str, object]:
        """The classification: the identified coefficients as text."""

    @abstractmethod
    def energy_inequality(self, inputs: CertifyInputs) -> EnergyInequality:
        """The energy inequality for given residuals and regularity values."""

    def residual_scale(self) -> float:
        """Factor from the typed interior residual to the theorem's residual.

        The contract's interior residual is ``lhs - rhs`` of the equation *as typed*; a family
        that states its theorem for the equation divided by the coefficient of the time
        derivative (``3*u_t = 0.3*u_xx`` is ``u_t = 0.1*u_xx``) returns ``1/coefficient``
        here and :func:`boundsvc.certify.certify` scales the interior residual by it.
        """
        return 1.0

    def steady_bound(self, inputs: CertifyInputs) -> SteadyBound:
        """For steady problems: the bound itself (families of steady problems override)."""
        raise NotImplementedError(f"{self.family.id} has no steady bound")

    def hypotheses(self) -> list[str]:
        return list(self.family.hypotheses)

    def allowed_keys(self) -> list[str]:
        keys: list[str] = []
        for req in self.requirements():
            keys.extend(k for k in req.any_of if k not in keys)
        keys.extend(k for k in self.optional_keys() if k not in keys)
        return keys


class Family(ABC):
    """A stability theorem of the catalogue."""

    id: str
    title: str
    equation_form: str
    hypotheses: Sequence[str]
    bounded_quantities: Sequence[str]
    reference: str
    theory_document: str
    typical_regularity: Sequence[str] = ()
    typical_optional: Sequence[str] = ()
    typical_components: Sequence[str] = ()

    @abstractmethod
    def recognise(self, problem: AnalysedProblem) -> Classified | str:
        """The classified problem, or a sentence saying why this family does not cover it."""
