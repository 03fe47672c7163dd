"""The catalogue of stability theorems and the classifier that picks one for a problem."""

from __future__ import annotations

from api_schemas import ProblemSpec
from boundsvc.errors import ProblemInvalid, ProblemNotCovered
from boundsvc.families._analysis import AnalysedProblem, analyse, exact, problem_sha256
from boundsvc.families._base import (
    CertifyInputs,
    Classified,
    ConstantInfo,
    EnergyInequality,
    Family,
    Requirement,
    SourceInfo,
    weakest,
)
from boundsvc.families.advection_diffusion import AdvectionDiffusionFamily
from boundsvc.families.conservation_law import ConservationLawFamily
from boundsvc.families.elliptic import EllipticFamily
from boundsvc.families.navier_stokes import NavierStokesFamily
from boundsvc.families.ode_system import OdeSystemFamily
from boundsvc.families.semilinear import SemilinearParabolicFamily
from boundsvc.families.wave import WaveFamily

# the ODE family first: an ODE problem has no space axes, so the others refuse it anyway
CATALOGUE: tuple[Family, ...] = (
    OdeSystemFamily(),
    AdvectionDiffusionFamily(),
    SemilinearParabolicFamily(),
    ConservationLawFamily(),
    EllipticFamily(),
    WaveFamily(),
    NavierStokesFamily(),
)


def family_by_id(family_id: str) -> Family | None:
    """The family with this id, if the catalogue has it."""
    return next((f for f in CATALOGUE if f.id == family_id), None)


def _check_fields_used(classified: Classified) -> None:
    """A problem field the chosen theorem ignores is an error, never silently dropped."""
    spec = classified.problem.spec
    if spec.initial_velocity is not None and classified.family.id != "wave":
        raise ProblemInvalid(
            "problem_invalid",
            "initial_velocity is the initial value of u_t for an equation second order in "
            f"time; this problem is first order in time ({classified.family.id}), so it would "
            "be ignored: leave it out",
            "problem.initial_velocity",
        )


def classify(problem: ProblemSpec | AnalysedProblem) -> Classified:
    """Parse and classify a problem; raise ProblemNotCovered with every family's reason."""
    analysed = problem if isinstance(problem, AnalysedProblem) else analyse(problem)
    reasons: dict[str, str] = {}
    for family in CATALOGUE:
        result = family.recognise(analysed)
        if isinstance(result, Classified):
            _check_fields_used(result)
            return result
        reasons[family.id] = result
    detail = "no family of the catalogue covers this equation: " + "; ".join(
        f"{fid}: {why}" for fid, why in reasons.items()
    )
    raise ProblemNotCovered(detail, reasons)


__all__ = [
    "CATALOGUE",
    "AnalysedProblem",
    "CertifyInputs",
    "Classified",
    "ConstantInfo",
    "EnergyInequality",
    "Family",
    "Requirement",
    "SourceInfo",
    "analyse",
    "classify",
    "exact",
    "family_by_id",
    "problem_sha256",
    "weakest",
]
