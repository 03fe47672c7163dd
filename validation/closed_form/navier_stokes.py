"""Incompressible Navier-Stokes: Taylor-Green vortex, ABC (Beltrami) flow, Stokes' oscillating
plate in a channel, Kovasznay flow.

The unknowns are the velocity components then the pressure; the surrogate is
``(u + eps phi, p + eps psi)`` with ``phi`` not divergence-free (the divergence residual is
exercised) and, per case, not periodic or not zero on the walls. The family bounds the
**velocity** error only (docs/theory/navier-stokes.md, hypothesis 5), so the true error here is
the L2 norm of ``eps * phi`` alone (:class:`FlowCase`); the pressure perturbation enters the
residuals and the sup bounds only. Residual layout (docs/api.md, systems): interior columns in
equation order (momentum per axis, then the divergence), initial/boundary columns in unknown
order (the pressure column is sent, the service does not use it), ``periodic`` with the
pressure mismatch, ``periodic_<axis>`` for ``nu > 0``: the registry's runner forms all of them.
"""

from __future__ import annotations

import math
from collections.abc import Sequence

import sympy as sp

from validation.closed_form._case import ClosedFormCase, VectorFn, t, x, y, z

FAMILY = "incompressible-navier-stokes"
PI = sp.pi
TWO_PI = 2 * math.pi
AXES = (x, y, z)


class FlowCase(ClosedFormCase):
    """A Navier-Stokes case: the last unknown is the pressure, whose error is not bounded."""

    def error_fn(self, eps: float) -> VectorFn:
        """The velocity error ``eps * phi`` (the pressure perturbation is left out)."""
        return VectorFn(self.variables, tuple(eps * p for p in self.perturbation[:-1]))


def _navier_stokes(nu: float, d: int, force: Sequence[float] = ()):  # type: ignore[no-untyped-def]
    """lhs - rhs of ``u_t + (u.grad) u + grad p - nu Lap u - f`` per axis, then ``div u``,
    written out here (not from the problem text)."""
    axes = AXES[:d]
    f = list(force) or [0.0] * d

    def op(v: Sequence[sp.Expr]) -> list[sp.Expr]:
        vel, p = list(v[:d]), v[d]
        out = []
        for i, c in enumerate(vel):
            conv = sum(vel[j] * sp.diff(c, a) for j, a in enumerate(axes))
            lap = sum(sp.diff(c, a, 2) for a in axes)
            out.append(sp.diff(c, t) + conv + sp.diff(p, axes[i]) - nu * lap - f[i])
        out.append(sum(sp.diff(c, a) for c, a in zip(vel, axes, strict=True)))
        return out

    return op


NS_2D = [
    "u_t + u*u_x + v*u_y + p_x = nu*(u_xx + u_yy)",
    "v_t + u*v_x + v*v_y + p_y = nu*(v_xx + v_yy)",
    "u_x + v_y = 0",
]
NS_3D = [
    "u_t + u*u_x + v*u_y + w*u_z + p_x = nu*(u_xx + u_yy + u_zz)",
    "v_t + u*v_x + v*v_y + w*v_z + p_y = nu*(v_xx + v_yy + v_zz)",
    "w_t + u*w_x + v*w_y + w*w_z + p_z = nu*(w_xx + w_yy + w_zz)",
    "u_x + v_y + w_z = 0",
]

# ------------------------------------------------------------ 2-D Taylor-Green vortex
NU_TG = 0.1
_F_TG = sp.exp(-2 * NU_TG * t)
_TG = (
    -sp.cos(x) * sp.sin(y) * _F_TG,
    sp.sin(x) * sp.cos(y) * _F_TG,
    -(sp.cos(2 * x) + sp.cos(2 * y)) * _F_TG**2 / 4,
)
# phi_v is not periodic in x and psi not in y: the periodicity mismatch terms are exercised
_TG_PHI = (
    sp.sin(x + t) * sp.cos(y + 1),
    x / (2 * PI) * sp.sin(y - t),
    sp.cos(x) * sp.sin(y) + y / (2 * PI),
)

# ------------------------------------------------------------ 3-D ABC (Beltrami) flow
NU_ABC, A_ABC, B_ABC, C_ABC = 0.05, 1.0, 0.7, 0.4
_F_ABC = sp.exp(-NU_ABC * t)
_ABC_VEL = (
    (A_ABC * sp.sin(z) + C_ABC * sp.cos(y)) * _F_ABC,
    (B_ABC * sp.sin(x) + A_ABC * sp.cos(z)) * _F_ABC,
    (C_ABC * sp.sin(y) + B_ABC * sp.cos(x)) * _F_ABC,
)
_ABC = (*_ABC_VEL, -sum(c**2 for c in _ABC_VEL) / 2)
# phi_w is not periodic in z
_ABC_PHI = (
    sp.cos(y + 2 * z - t),
    sp.sin(x - z) * sp.exp(-t),
    z / (2 * PI) * sp.cos(x + y),
    sp.sin(x - y + z),
)
_ABC_GRAD = {  # |d_j u_i| <= coefficient * e^{-nu t} (0 where the variable is absent)
    "u_x": 0.0,
    "u_y": C_ABC,
    "u_z": A_ABC,
    "v_x": B_ABC,
    "v_y": 0.0,
    "v_z": A_ABC,
    "w_x": B_ABC,
    "w_y": C_ABC,
    "w_z": 0.0,
}
_ABC_PHI_GRAD = {  # sup |d_j phi_i| on the closed box (z / (2 pi) <= 1)
    "u_x": 0.0,
    "u_y": 1.0,
    "u_z": 2.0,
    "v_x": 1.0,
    "v_y": 0.0,
    "v_z": 1.0,
    "w_x": 1.0,
    "w_y": 1.0,
    "w_z": 1 / TWO_PI,
}

# ------------------------------------- Stokes' second problem (oscillating plate), channel
NU_ST, OMEGA_ST = 0.25, 2.0
K_ST = math.sqrt(OMEGA_ST / (2 * NU_ST))  # penetration wavenumber sqrt(omega / (2 nu)) = 2
_STOKES = (
    sp.exp(-K_ST * y) * sp.cos(OMEGA_ST * t - K_ST * y),
    sp.Integer(0),
    sp.Integer(0),
)
# periodic in x (period 2), not zero on the walls y = 0, 1
_ST_PHI = (
    sp.cos(PI * x) * (1 + y) * sp.sin(t + 1),
    sp.sin(PI * x + y) * sp.exp(-t) / 2,
    sp.cos(PI * x) * y,
)

# ------------------------------------------------------------------ Kovasznay flow
RE_KOV = 40.0
NU_KOV = 1 / RE_KOV
LAM = RE_KOV / 2 - math.sqrt(RE_KOV**2 / 4 + 4 * math.pi**2)  # < 0
_E = sp.exp(LAM * x)
_KOV = (
    1 - _E * sp.cos(2 * PI * y),
    LAM / (2 * PI) * _E * sp.sin(2 * PI * y),
    (1 - sp.exp(2 * LAM * x)) / 2,
)
_EMAX = math.exp(-LAM / 2)  # sup of e^{lambda x} on [-0.5, 1] (lambda < 0)
_KOV_PHI = (
    sp.sin(2 * x + y + t),
    sp.cos(x - 2 * y) * sp.exp(-t),
    x * y,
)

CASES: tuple[ClosedFormCase, ...] = (
    FlowCase(
        key="taylor-green-vortex-2d",
        family=FAMILY,
        title="2-D Taylor-Green vortex, nu = 0.1, periodic [0, 2 pi]^2, T = 1: "
        "u = -cos x sin y F, v = sin x cos y F, p = -(cos 2x + cos 2y) F^2/4, F = e^{-2 nu t} "
        "(velocity error)",
        source="G. I. Taylor, A. E. Green, Proc. R. Soc. Lond. A 158 (1937) 499-521, the "
        "decaying vortex; the form above [from memory], checked by its zero residual",
        problem={
            "equation": NS_2D,
            "unknowns": ["u", "v", "p"],
            "space": {"x": [0.0, TWO_PI], "y": [0.0, TWO_PI]},
            "time": [0.0, 1.0],
            "parameters": {"nu": NU_TG},
            "boundary": "periodic",
        },
        exact=_TG,
        perturbation=_TG_PHI,
        operator=_navier_stokes(NU_TG, 2),
        # |d_j u_i| <= F, |u|, |v| <= F, |p| <= F^2 / 2
        regularity={
            **{k: _F_TG for k in ("sup_abs_u_x", "sup_abs_u_y", "sup_abs_v_x", "sup_abs_v_y")},
            "sup_abs_u": _F_TG,
            "sup_abs_v": _F_TG,
            "sup_abs_p": _F_TG**2 / 2,
        },
        model_regularity={
            "sup_abs_model_u": 1.0,
            "sup_abs_model_v": 1.0,
            "sup_abs_model_p": 2.0,
            "sup_abs_model_u_x": 1.0,
            "sup_abs_model_u_y": 1.0,
            "sup_abs_model_v_x": 1 / TWO_PI,
            "sup_abs_model_v_y": 1.0,
        },
        points={"t": 8, "x": 16, "y": 16},
    ),
    FlowCase(
        key="abc-beltrami-flow-3d",
        family=FAMILY,
        title="3-D Arnold-Beltrami-Childress flow (A, B, C) = (1, 0.7, 0.4), nu = 0.05, "
        "periodic [0, 2 pi]^3, T = 0.5: u = (A sin z + C cos y, B sin x + A cos z, "
        "C sin y + B cos x) e^{-nu t}, p = -|u|^2/2 (velocity error)",
        source="V. I. Arnold, C. R. Acad. Sci. Paris 261 (1965) 17-20; S. Childress, J. Math. "
        "Phys. 11 (1970) 3063-3076; Dombre et al., J. Fluid Mech. 167 (1986) 353-391 (curl u = u, "
        "so (u.grad) u = grad |u|^2/2) [from memory]",
        problem={
            "equation": NS_3D,
            "unknowns": ["u", "v", "w", "p"],
            "space": {a: [0.0, TWO_PI] for a in ("x", "y", "z")},
            "time": [0.0, 0.5],
            "parameters": {"nu": NU_ABC},
            "boundary": "periodic",
        },
        exact=_ABC,
        perturbation=_ABC_PHI,
        operator=_navier_stokes(NU_ABC, 3),
        regularity={
            **{f"sup_abs_{k}": g * _F_ABC for k, g in _ABC_GRAD.items()},
            "sup_abs_u": (A_ABC + C_ABC) * _F_ABC,
            "sup_abs_v": (A_ABC + B_ABC) * _F_ABC,
            "sup_abs_w": (B_ABC + C_ABC) * _F_ABC,
            "sup_abs_p": ((A_ABC + C_ABC) ** 2 + (A_ABC + B_ABC) ** 2 + (B_ABC + C_ABC) ** 2)
            / 2
            * _F_ABC**2,
        },
        model_regularity={
            **{f"sup_abs_model_{k}": c for k, c in _ABC_PHI_GRAD.items()},
            "sup_abs_model_u": 1.0,
            "sup_abs_model_v": 1.0,
            "sup_abs_model_w": 1.0,
            "sup_abs_model_p": 1.0,
        },
        points={"t": 6, "x": 8, "y": 8, "z": 8},
        # the per-line Legendre-tail allowance sees cos(x + y) vary along every x and y line of
        # 8 nodes (the mean over the other axis is flat): at t0 the bound is about 1.5 x the
        # initial error, not within 1 % (the quadrature sum itself is)
        sharp_initial=False,
    ),
    FlowCase(
        key="stokes-oscillating-plate-channel",
        family=FAMILY,
        title="Stokes' second problem in a channel, nu = 0.25, omega = 2, walls y = 0, 1 "
        "(exact trace as data), periodic in x (period 2), T = 1: "
        "u = e^{-k y} cos(omega t - k y), k = sqrt(omega/(2 nu)) = 2, v = 0, p = 0 "
        "(velocity error)",
        source="G. G. Stokes, Trans. Camb. Phil. Soc. 9 (1851) 8-106, the oscillating plane; "
        "Batchelor, An Introduction to Fluid Dynamics, CUP 1967, sec. 4.3 [from memory]",
        problem={
            "equation": NS_2D,
            "unknowns": ["u", "v", "p"],
            "space": {"x": [0.0, 2.0], "y": [0.0, 1.0]},
            "time": [0.0, 1.0],
            "parameters": {"nu": NU_ST},
            "boundary": {"x": "periodic", "y": "dirichlet"},
        },
        exact=_STOKES,
        perturbation=_ST_PHI,
        operator=_navier_stokes(NU_ST, 2),
        # u_y = k e^{-k y} (sin a - cos a) with a = omega t - k y: |u_y| <= sqrt(2) k
        regularity={
            "sup_abs_u_x": 0.0,
            "sup_abs_u_y": math.sqrt(2) * K_ST,
            "sup_abs_v_x": 0.0,
            "sup_abs_v_y": 0.0,
            "sup_abs_u": 1.0,
            "sup_abs_v": 0.0,
            "sup_abs_p": 0.0,
        },
        model_regularity={
            "sup_abs_model_u": 2.0,
            "sup_abs_model_v": 0.5,
            "sup_abs_model_p": 1.0,
            "sup_abs_model_u_x": 2 * math.pi,
            "sup_abs_model_u_y": 1.0,
            "sup_abs_model_v_x": math.pi / 2,
            "sup_abs_model_v_y": 0.5,
        },
        points={"t": 8, "x": 14, "y": 12},
    ),
    FlowCase(
        key="kovasznay-flow",
        family=FAMILY,
        title="Kovasznay flow, Re = 1/nu = 40, walls on [-0.5, 1] x [-0.5, 1.5] (exact trace "
        "as data), T = 0.5: u = 1 - e^{lambda x} cos(2 pi y), v = lambda/(2 pi) e^{lambda x} "
        "sin(2 pi y), p = (1 - e^{2 lambda x})/2, lambda = Re/2 - sqrt(Re^2/4 + 4 pi^2) "
        "(velocity error)",
        source="L. I. G. Kovasznay, Proc. Camb. Phil. Soc. 44 (1948) 58-62, the steady wake "
        "behind a grid [from memory; domain as in common spectral-method tests]",
        problem={
            "equation": NS_2D,
            "unknowns": ["u", "v", "p"],
            "space": {"x": [-0.5, 1.0], "y": [-0.5, 1.5]},
            "time": [0.0, 0.5],
            "parameters": {"nu": NU_KOV},
            "boundary": "dirichlet",
        },
        exact=_KOV,
        perturbation=_KOV_PHI,
        operator=_navier_stokes(NU_KOV, 2),
        # every factor e^{lambda x} <= e^{-lambda/2}; p ranges over [(1 - e^{-lambda})/2,
        # (1 - e^{2 lambda})/2], and the left end has the larger modulus
        regularity={
            "sup_abs_u_x": -LAM * _EMAX,
            "sup_abs_u_y": TWO_PI * _EMAX,
            "sup_abs_v_x": LAM**2 / TWO_PI * _EMAX,
            "sup_abs_v_y": -LAM * _EMAX,
            "sup_abs_u": 1 + _EMAX,
            "sup_abs_v": -LAM / TWO_PI * _EMAX,
            "sup_abs_p": max((math.exp(-LAM) - 1) / 2, (1 - math.exp(2 * LAM)) / 2),
        },
        # |psi| = |x y| <= 1.5 on the box; first derivatives of phi: 2, 1, 1, 2
        model_regularity={
            "sup_abs_model_u": 1.0,
            "sup_abs_model_v": 1.0,
            "sup_abs_model_p": 1.5,
            "sup_abs_model_u_x": 2.0,
            "sup_abs_model_u_y": 1.0,
            "sup_abs_model_v_x": 1.0,
            "sup_abs_model_v_y": 2.0,
        },
        points={"t": 8, "x": 12, "y": 12},
    ),
)

__all__ = ["CASES", "FAMILY", "FlowCase"]
