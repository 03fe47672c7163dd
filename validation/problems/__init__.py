"""The validation problems (one module per family) and the sweeps built from them."""

from __future__ import annotations

from validation.problems._base import JetLib, Lift, NumpyLib, Problem, Reg, TrainConfig, const
from validation.problems.burgers import burgers_compressive, burgers_expansive, burgers_front
from validation.problems.elliptic import poisson_square_mode, wall_profile
from validation.problems.heat import advection_diffusion_mode, heat_dirichlet
from validation.problems.navier_stokes import FlowProblem, is_flow, kovasznay, taylor_green
from validation.problems.ode import oscillator, riccati_tan
from validation.problems.semilinear import allen_cahn_front, fisher_kpp
from validation.problems.wave import string_mode, travelling_pulse

#: Sweep of the network width (Adam only, fixed length) on the heat problem.
WIDTHS = (8, 16, 32)
#: Sweep of the training length (Adam steps, width 16) on the heat problem.
STEPS = (500, 2000, 5000)
SWEEP_STEPS_AT_WIDTH = 2000
SWEEP_WIDTH_AT_STEPS = 16
#: Final times of the Burgers blow-up sweep (u = x/(t - t*), t* = 1.5).
T_STAR = 1.5
BURGERS_T = (0.5, 0.8, 1.0, 1.2, 1.4)
#: Final times of the Riccati sweep towards pi/2.
TAN_T = (0.5, 1.0, 1.2, 1.4, 1.5)
#: Beyond the blow-up: certified with the network of the last sweep point.
BURGERS_BEYOND = 1.6
TAN_BEYOND = 1.6


def suite() -> list[Problem]:
    """The main table: at least two problems per time-dependent family of the catalogue."""
    return [
        heat_dirichlet(),
        advection_diffusion_mode(),
        burgers_front(),
        burgers_compressive(1.0),
        burgers_expansive(),
        allen_cahn_front(),
        fisher_kpp(),
        riccati_tan(1.2),
        oscillator(),
        string_mode(),
        travelling_pulse(),
        taylor_green(),
        kovasznay(),
    ]


def steady() -> list[Problem]:
    """The steady table (``l2_space`` only): the linear elliptic family."""
    return [poisson_square_mode(), wall_profile()]


def hard_constrained() -> dict[str, Problem]:
    """Hard-constrained twins of suite problems (key of the soft one -> hard problem)."""
    return {
        "heat-dirichlet": heat_dirichlet(hard=True),
        "burgers-front": burgers_front(hard=True),
        "allen-cahn-front": allen_cahn_front(hard=True),
    }


def heat_sweep_problem(width: int, steps: int) -> Problem:
    return heat_dirichlet(
        hidden=(width, width), adam_steps=steps, lbfgs_iters=0, key=f"heat-w{width}-s{steps}"
    )


def width_sweep() -> list[Problem]:
    return [heat_sweep_problem(w, SWEEP_STEPS_AT_WIDTH) for w in WIDTHS]


def steps_sweep() -> list[Problem]:
    return [heat_sweep_problem(SWEEP_WIDTH_AT_STEPS, s) for s in STEPS]


def burgers_sweep() -> list[Problem]:
    return [burgers_compressive(t, t_star=T_STAR) for t in BURGERS_T]


def tan_sweep() -> list[Problem]:
    return [riccati_tan(t) for t in TAN_T]


def all_trainable() -> list[Problem]:
    """Every network the suite needs, each once (by key)."""
    seen: dict[str, Problem] = {}
    for p in [
        *suite(),
        *steady(),
        *hard_constrained().values(),
        *width_sweep(),
        *steps_sweep(),
        *burgers_sweep(),
        *tan_sweep(),
    ]:
        seen.setdefault(p.key, p)
    return list(seen.values())


__all__ = [
    "BURGERS_BEYOND",
    "BURGERS_T",
    "STEPS",
    "TAN_BEYOND",
    "TAN_T",
    "T_STAR",
    "WIDTHS",
    "FlowProblem",
    "JetLib",
    "Lift",
    "NumpyLib",
    "Problem",
    "Reg",
    "TrainConfig",
    "all_trainable",
    "burgers_sweep",
    "const",
    "hard_constrained",
    "heat_sweep_problem",
    "is_flow",
    "kovasznay",
    "steady",
    "steps_sweep",
    "suite",
    "tan_sweep",
    "taylor_green",
    "width_sweep",
]
