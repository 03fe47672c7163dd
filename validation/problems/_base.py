"""What a validation problem is: the wire problem, its exact solution and what the theorem needs.

Every problem is written once and used three ways: the residual ``operator`` is plain
arithmetic on a mapping of fields (``u``, ``u_t``, ``u_x``, ``u_xx`` or ``y``, ``y_t``), so the
same function works on numpy arrays (certification, at the service's nodes) and on torch
tensors (training, at random collocation points); a hard-constraint ``lift`` is written against
a tiny function namespace (``lib.tanh``, ...) that exists for numpy, torch and the Taylor jets
of :mod:`boundsvc.client.mlp`.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import numpy.typing as npt

FloatArray = npt.NDArray[np.float64]
Operator = Callable[[Mapping[str, Any]], list[Any]]


@dataclass(frozen=True)
class Reg:
    """One regularity value of the exact solution: wire value, numpy evaluator, derivation."""

    value: float | str
    fn: Callable[[FloatArray], FloatArray]
    note: str

    @property
    def time_varying(self) -> bool:
        return isinstance(self.value, str)


def const(value: float, note: str) -> Reg:
    """A constant regularity value."""
    return Reg(float(value), lambda t: np.full_like(np.asarray(t, dtype=float), float(value)), note)


@dataclass(frozen=True)
class TrainConfig:
    """How the network is trained (see :mod:`validation.train`)."""

    hidden: tuple[int, ...] = (20, 20)
    adam_steps: int = 3000
    lbfgs_iters: int = 800
    lr: float = 3e-3
    n_col: int = 2000
    n_ic: int = 200
    n_bc: int = 200
    w_data: float = 10.0
    seed: int = 20250101
    out_scale: float = 1.0


@dataclass(frozen=True)
class Lift:
    """Hard-constrained Dirichlet output ``u = g(t, x) + d(x) * N(t, x)``.

    ``g(t, x, lib)`` matches the boundary data on both faces, ``d = (x - xL)(xR - x)/L^2``
    vanishes there, so the boundary residual ``u_model - g`` is exactly ``0.0`` in floating point.
    """

    g: Callable[[Any, Any, Any], Any]
    description: str


@dataclass(frozen=True)
class Problem:
    """A validation problem with a closed-form solution.

    Attributes
    ----------
    key : str
        File stem of the cached weights (``validation/weights/<key>.npz``).
    family : str
        The service family id the problem must be classified into.
    source : str
        Where the closed form comes from (named in the report).
    problem : dict
        The wire problem of ``POST /v1/problems``.
    axes, outputs : tuple of str
        Network inputs (``("t", "x")`` or ``("t",)``) and output names.
    operator : callable
        ``operator(fields) -> [residual of each equation]`` (``lhs - rhs``).
    fields : tuple of str
        The fields the operator needs.
    exact : callable
        ``exact(t, x) -> u`` (PDE) or ``exact(t) -> (n, m)`` (ODE), numpy.
    regularity : dict
        Exact-solution regularity (default variant: time-varying where the solution allows).
    variants : dict
        Further regularity variants for the tightening analysis (name -> full mapping).
    model_keys : dict
        Model quantities the family needs -> the field they bound (``"sup_abs_model_u_x": "u_x"``).
    """

    key: str
    title: str
    family: str
    source: str
    problem: dict[str, Any]
    operator: Operator
    fields: tuple[str, ...]
    exact: Callable[..., FloatArray]
    regularity: dict[str, Reg]
    model_keys: dict[str, str]
    axes: tuple[str, ...] = ("t", "x")
    outputs: tuple[str, ...] = ("u",)
    points: dict[str, int] = field(default_factory=lambda: {"t": 32, "x": 32})
    #: composite Gauss-Legendre panels per axis (``{}``: one panel); ODE networks use several,
    #: so the smoothing of ``|r|`` stays local (docs/theory/ode-system.md step 14)
    panels: dict[str, int] = field(default_factory=dict)
    train: TrainConfig = field(default_factory=TrainConfig)
    variants: dict[str, dict[str, Reg]] = field(default_factory=dict)
    lift: Lift | None = None
    notes: str = ""
    #: steady problems: the equation's right-hand side ``f(*space columns)`` (numpy), sent to
    #: the operator as the field ``"f"`` (the operator cannot see coordinates)
    source_term: Callable[..., FloatArray] | None = None

    @property
    def is_steady(self) -> bool:
        """No time axis: ``exact(*space columns)``, only ``l2_space`` is bounded."""
        return "t" not in self.axes

    @property
    def box(self) -> list[tuple[float, float]]:
        """``(lo, hi)`` of each space axis, in ``axes`` order (steady problems)."""
        sp = self.problem["space"]
        return [(float(sp[a][0]), float(sp[a][1])) for a in self.axes]

    @property
    def is_ode(self) -> bool:
        return self.axes == ("t",)

    @property
    def time(self) -> tuple[float, float]:
        t0, t1 = self.problem["time"]
        return float(t0), float(t1)

    @property
    def space(self) -> tuple[float, float]:
        lo, hi = self.problem["space"]["x"]
        return float(lo), float(hi)

    def initial(self, x: FloatArray) -> FloatArray:
        """Initial data (PDE: at ``(t0, x)``; ODE: ``x`` is ignored, shape ``(m,)``)."""
        t0 = self.time[0]
        if self.is_ode:
            return np.asarray(self.exact(np.array([t0])))[0]
        return self.exact(np.full_like(x, t0), x)

    def boundary(self, t: FloatArray, x: FloatArray) -> FloatArray:
        """Dirichlet data: the exact solution's trace."""
        return self.exact(t, x)

    def boundary_rate(self, t: FloatArray, x: FloatArray) -> FloatArray:
        """``d/dt`` of the Dirichlet data by the complex step ``Im g(t + i h, x) / h``,
        ``h = 1e-20`` (exact to rounding for the analytic closed forms used here; Squire &
        Trapp, SIAM Rev. 40 (1998) 110-112)."""
        h = 1e-20
        return np.asarray(np.imag(self.exact(t + 1j * h, x)) / h, dtype=np.float64)


class NumpyLib:
    """The function namespace of a lift for numpy arrays."""

    tanh = staticmethod(np.tanh)
    exp = staticmethod(np.exp)
    sin = staticmethod(np.sin)
    cos = staticmethod(np.cos)


class JetLib:
    """The same namespace for :class:`boundsvc.client.mlp.Jet` (exact Taylor arithmetic)."""

    @staticmethod
    def tanh(v: Any) -> Any:
        return v.tanh()

    @staticmethod
    def exp(v: Any) -> Any:
        return v.exp()

    @staticmethod
    def sin(v: Any) -> Any:
        return v.sin()

    @staticmethod
    def cos(v: Any) -> Any:
        return v.cos()
