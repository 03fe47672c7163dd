"""Scalar conservation law family: viscous Burgers' equation ``u_t + u u_x = nu u_xx``.

* :func:`burgers_front`: the viscous travelling front (G. B. Whitham, *Linear and Nonlinear
  Waves*, Wiley 1974, sec. 4.3; J. M. Burgers, Adv. Appl. Mech. 1 (1948) 171-199)

      u = s - (d/2) tanh(d (x - s t - x0)/(4 nu)),  s = (u_L + u_R)/2,  d = u_L - u_R,

  with ``sup |u_x| = d^2/(8 nu)`` and ``u_x <= 0`` everywhere (so ``sup (u_x)^- = sup |u_x|``).
* :func:`burgers_compressive`: the linear profile ``u = x/(t - t*)`` (``u_xx = 0``, so it solves
  the viscous and the inviscid equation; Whitham 1974, ch. 2 and 4, the similarity solutions
  ``u = (a x + b)/(1 + a t)``): ``u_x = -1/(t* - t)`` blows up at ``t*``.
* :func:`burgers_expansive`: ``u = x/(1 + t)`` from the same family with ``a = 1``: ``u_x > 0``,
  so the one-sided compressive bound ``sup (u_x)^-`` is 0 while ``sup |u_x| = 1/(1 + t)``.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

import numpy as np

from validation.problems._base import FloatArray, Lift, Problem, Reg, TrainConfig, const

CL = "scalar-conservation-law"
WHITHAM_FRONT = (
    "viscous Burgers travelling front: G. B. Whitham, Linear and Nonlinear Waves, Wiley 1974, "
    "sec. 4.3 (J. M. Burgers, Adv. Appl. Mech. 1 (1948))"
)
WHITHAM_LINEAR = (
    "linear similarity solutions u = (a x + b)/(1 + a t) of Burgers' equation (u_xx = 0): "
    "Whitham 1974, ch. 2 and 4"
)


def _burgers_op(nu: float):  # type: ignore[no-untyped-def]
    def op(f: Mapping[str, Any]) -> list[Any]:
        return [f["u_t"] + f["u"] * f["u_x"] - nu * f["u_xx"]]

    return op


NU_FRONT, UL, UR, X0 = 0.05, 1.0, 0.0, -0.25
S_FRONT, D_FRONT = (UL + UR) / 2, UL - UR


def _front_exact(t: FloatArray, x: FloatArray) -> FloatArray:
    return S_FRONT - D_FRONT / 2 * np.tanh(D_FRONT * (x - S_FRONT * t - X0) / (4 * NU_FRONT))


def _front_g(t: Any, x: Any, lib: Any) -> Any:
    xl, xr = -1.0, 1.0
    c = D_FRONT / (4 * NU_FRONT)
    bl = S_FRONT - D_FRONT / 2 * lib.tanh(c * (xl - X0 - S_FRONT * t))
    br = S_FRONT - D_FRONT / 2 * lib.tanh(c * (xr - X0 - S_FRONT * t))
    return bl * ((xr - x) / (xr - xl)) + br * ((x - xl) / (xr - xl))


def burgers_front(*, hard: bool = False) -> Problem:
    """The viscous Burgers travelling front (Whitham 1974, sec. 4.3)."""
    gmax = D_FRONT**2 / (8 * NU_FRONT)
    note = "sup |u_x| = d^2/(8 nu) = 2.5 (at the front centre, all t); u_x <= 0 everywhere"
    return Problem(
        key="burgers-front-hard" if hard else "burgers-front",
        title="viscous Burgers, travelling front" + (" (hard BC)" if hard else ""),
        family=CL,
        source=WHITHAM_FRONT,
        problem={
            "equation": "u_t + u*u_x = nu*u_xx",
            "space": {"x": [-1.0, 1.0]},
            "time": [0.0, 1.0],
            "parameters": {"nu": NU_FRONT},
            "boundary": "dirichlet",
            "initial_value": "0.5 - 0.5*tanh((x + 0.25)/(4*nu))",
            "boundary_value": "0.5 - 0.5*tanh((x - 0.5*t + 0.25)/(4*nu))",
        },
        operator=_burgers_op(NU_FRONT),
        fields=("u", "u_t", "u_x", "u_xx"),
        exact=_front_exact,
        regularity={"sup_abs_u_x": const(gmax, note), "sup_neg_u_x": const(gmax, note)},
        variants={"sup_abs_u_x only": {"sup_abs_u_x": const(gmax, note)}},
        model_keys={"sup_abs_model_u_x": "u_x"},
        train=TrainConfig(hidden=(24, 24), adam_steps=3000, lbfgs_iters=1200),
        lift=Lift(
            _front_g,
            "u = g(t, x) + (x + 1)(1 - x)/4 N(t, x), g the linear "
            "interpolant of the two boundary values",
        )
        if hard
        else None,
    )


def burgers_compressive(
    t_end: float = 1.0, *, t_star: float = 1.5, nu: float = 0.01, key: str | None = None
) -> Problem:
    """``u = x/(t - t*)`` on ``(0, 1)``: a gradient catastrophe at ``t*``."""

    def exact(t: FloatArray, x: FloatArray) -> FloatArray:
        return x / (t - t_star)

    grad = Reg(
        f"1/({t_star:g} - t)",
        lambda t: 1.0 / (t_star - t),
        f"u_x = -1/({t_star:g} - t) < 0 for every x: sup|u_x| = sup(u_x)^- = 1/(t* - t)",
    )
    t_c = min(t_end, t_star - 1e-3)
    cgrad = const(1.0 / (t_star - t_c), "sup over [0, T] of 1/(t* - t), i.e. at t = T")
    return Problem(
        key=key or f"burgers-compressive-T{t_end:g}",
        title=f"viscous Burgers, compressive u = x/(t - {t_star:g}), T = {t_end:g}",
        family=CL,
        source=WHITHAM_LINEAR,
        problem={
            "equation": "u_t + u*u_x = nu*u_xx",
            "space": {"x": [0.0, 1.0]},
            "time": [0.0, t_end],
            "parameters": {"nu": nu},
            "boundary": "dirichlet",
            "initial_value": f"-x/{t_star:g}",
            "boundary_value": f"x/(t - {t_star:g})",
        },
        operator=_burgers_op(nu),
        fields=("u", "u_t", "u_x", "u_xx"),
        exact=exact,
        regularity={"sup_abs_u_x": grad, "sup_neg_u_x": grad},
        variants={"constant sups": {"sup_abs_u_x": cgrad, "sup_neg_u_x": cgrad}},
        model_keys={"sup_abs_model_u_x": "u_x"},
        train=TrainConfig(
            hidden=(20, 20),
            adam_steps=3000,
            lbfgs_iters=800,
            out_scale=1.0 / (t_star - min(t_end, t_star - 0.05)),
        ),
    )


def burgers_expansive() -> Problem:
    """``u = x/(1 + t)``: an expansive profile (``u_x > 0``)."""
    nu = 0.01
    grad = Reg("1/(1 + t)", lambda t: 1.0 / (1.0 + t), "u_x = 1/(1 + t) > 0 for every x")
    zero = const(0.0, "u_x > 0 everywhere: the compressive part (u_x)^- is 0")
    return Problem(
        key="burgers-expansive",
        title="viscous Burgers, expansive u = x/(1 + t)",
        family=CL,
        source=WHITHAM_LINEAR,
        problem={
            "equation": "u_t + u*u_x = nu*u_xx",
            "space": {"x": [0.0, 1.0]},
            "time": [0.0, 1.0],
            "parameters": {"nu": nu},
            "boundary": "dirichlet",
            "initial_value": "x",
            "boundary_value": "x/(1 + t)",
        },
        operator=_burgers_op(nu),
        fields=("u", "u_t", "u_x", "u_xx"),
        exact=lambda t, x: x / (1.0 + t),
        regularity={"sup_abs_u_x": grad, "sup_neg_u_x": zero},
        variants={"sup_abs_u_x only": {"sup_abs_u_x": grad}},
        model_keys={"sup_abs_model_u_x": "u_x"},
        train=TrainConfig(hidden=(20, 20), adam_steps=3000, lbfgs_iters=800),
    )


__all__ = ["burgers_compressive", "burgers_expansive", "burgers_front"]
