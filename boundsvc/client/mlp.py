"""Multilayer perceptrons with exact input derivatives by Taylor propagation.

A client that wants a certificate from the service must evaluate its surrogate
and the partial derivatives that appear in the PDE residual at the quadrature
nodes the service hands out.  This module does that for the common case of a
fully connected ``tanh`` (or ``sin``) network given as plain weight arrays,
with derivatives that are exact up to floating-point rounding: no finite
differences and no dependence on an autodiff framework (numpy only).

The derivatives are computed in forward mode by propagating *truncated
multivariate Taylor polynomials* through the network.  Every intermediate
quantity ``v`` is represented by its Taylor coefficients
``v_alpha = (d^alpha v)(x) / alpha!`` for the multi-indices ``alpha`` in a
downward-closed set ``S`` (the requested multi-indices together with all of
their lower multi-indices).  Affine layers act coefficient-wise; products are
truncated Cauchy convolutions over ``S``; and a univariate activation ``f`` is
composed with a polynomial ``a = a_0 + h`` (``h`` without constant term) by the
finite Taylor expansion

.. math::

    f(a_0 + h) = \\sum_{k=0}^{K} \\frac{f^{(k)}(a_0)}{k!} h^k ,

which is exact because ``h^k`` vanishes in the truncated algebra for ``k``
above the maximal total order ``K``.  The activation derivatives come from the
recursion ``tanh' = 1 - tanh^2`` (so ``tanh^{(k)} = P_k(tanh)`` with
``P_{k+1}(s) = P_k'(s) (1 - s^2)``), and from the cyclic derivatives of ``sin``.
Mixed derivatives such as ``u_tx`` come out of the same arithmetic, exactly.

Wire format of :meth:`MLP.save_npz` / :meth:`MLP.load_npz` (a plain ``.npz``
archive, read with ``allow_pickle=False``):

===============  ==========================  =========================================
key              shape / dtype               meaning
===============  ==========================  =========================================
``W0, W1, ...``  ``(n_out_l, n_in_l)`` f8    layer weights (PyTorch ``Linear`` layout)
``b0, b1, ...``  ``(n_out_l,)`` f8           layer biases
``activation``   0-d unicode                 ``"tanh"`` or ``"sin"``
``in_shift``     ``(d,)`` f8                 input scaling: ``z = (x - in_shift) / in_scale``
``in_scale``     ``(d,)`` f8                 (nonzero entries)
``out_shift``    ``(m,)`` f8, optional       affine output: ``u = out_shift + out_scale * y``
``out_scale``    ``(m,)`` f8, optional       (both present or both absent)
``meta``         0-d unicode, optional       JSON object (provenance: seed, losses, ...)
===============  ==========================  =========================================

The network is ``y = W_L s(... s(W_1 s(W_0 z + b_0) + b_1) ...) + b_L`` with the
activation ``s`` applied after every layer but the last.

References
----------
.. [1] A. Griewank and A. Walther, *Evaluating Derivatives: Principles and
   Techniques of Algorithmic Differentiation*, 2nd ed., SIAM, 2008, ch. 13
   ("Taylor and Tensor Coefficients").
.. [2] A. Griewank, J. Utke and A. Walther, "Evaluating higher derivative
   tensors by forward propagation of univariate Taylor series", *Math. Comp.*
   69 (2000), 1117-1130.
"""

from __future__ import annotations

import json
import math
import os
from collections.abc import Callable, Iterable, Mapping, Sequence
from dataclasses import dataclass, field
from functools import lru_cache
from typing import Any, Literal, TypeAlias, cast

import numpy as np
import numpy.typing as npt

__all__ = [
    "DEFAULT_BATCH_SIZE",
    "MAX_ORDER",
    "MLP",
    "Jet",
    "TaylorSpace",
    "parse_derivative_name",
    "residual_fields",
]

FloatArray: TypeAlias = npt.NDArray[np.float64]
MultiIndex: TypeAlias = tuple[int, ...]
Activation: TypeAlias = Literal["tanh", "sin"]
OutputTransform: TypeAlias = Callable[["Jet", "Jet"], "Jet"]

#: Largest number of points propagated at once (rows of a batch).
DEFAULT_BATCH_SIZE = 65536
#: Largest total derivative order that :meth:`MLP.fields` accepts.
MAX_ORDER = 8
#: Soft memory budget in bytes for one batch of Taylor coefficients.
_BATCH_MEMORY_BUDGET = 1 << 28
_ACTIVATIONS: tuple[str, ...] = ("tanh", "sin")


# ---------------------------------------------------------------------------
# Truncated multivariate Taylor arithmetic
# ---------------------------------------------------------------------------


def _downward_closure(indices: Iterable[MultiIndex]) -> list[MultiIndex]:
    """All multi-indices ``beta <= alpha`` (componentwise) of the given ``alpha``."""
    closed: set[MultiIndex] = set()
    for alpha in indices:
        ranges = [range(a + 1) for a in alpha]
        grid = np.stack(np.meshgrid(*ranges, indexing="ij"), axis=-1).reshape(-1, len(alpha))
        closed.update(tuple(int(v) for v in row) for row in grid)
    return sorted(closed, key=lambda a: (sum(a), tuple(-v for v in a)))


@dataclass(frozen=True)
class TaylorSpace:
    """A downward-closed set of multi-indices and its truncated product table.

    Parameters
    ----------
    dim : int
        Number of independent variables.
    indices : tuple of tuple of int
        The multi-indices, closed under ``beta <= alpha``, sorted by total
        order (``indices[0]`` is the zero multi-index).

    Notes
    -----
    Build instances with :meth:`TaylorSpace.closure`.  For a downward-closed
    set ``S`` the truncated product ``(a b)_alpha = sum_{beta + gamma = alpha}
    a_beta b_gamma`` only ever involves members of ``S``, so the truncated
    polynomials over ``S`` form a commutative algebra (a quotient of the
    polynomial ring by the monomial ideal outside ``S``) [1]_.

    References
    ----------
    .. [1] A. Griewank and A. Walther, *Evaluating Derivatives*, 2nd ed., SIAM,
       2008, sec. 13.2 (multivariate Taylor arithmetic).
    """

    dim: int
    indices: tuple[MultiIndex, ...]
    position: Mapping[MultiIndex, int] = field(init=False, repr=False, compare=False)
    pairs: tuple[tuple[npt.NDArray[np.intp], npt.NDArray[np.intp]], ...] = field(
        init=False, repr=False, compare=False
    )

    def __post_init__(self) -> None:
        if self.dim < 1:
            raise ValueError("a Taylor space needs at least one variable")
        if not self.indices or any(v != 0 for v in self.indices[0]):
            raise ValueError("indices must start with the zero multi-index")
        position = {alpha: i for i, alpha in enumerate(self.indices)}
        if len(position) != len(self.indices):
            raise ValueError("duplicate multi-indices")
        pairs = []
        for alpha in self.indices:
            if len(alpha) != self.dim:
                raise ValueError(f"multi-index {alpha} does not have {self.dim} entries")
            for j, a in enumerate(alpha):
                lower = (*alpha[:j], a - 1, *alpha[j + 1 :])
                if a > 0 and lower not in position:
                    raise ValueError(f"indices are not downward closed: {lower} is missing")
            left: list[int] = []
            right: list[int] = []
            for beta in self.indices:
                gamma = tuple(a - b for a, b in zip(alpha, beta, strict=True))
                if min(gamma) < 0:
                    continue
                left.append(position[beta])
                right.append(position[gamma])
            pairs.append((np.asarray(left, dtype=np.intp), np.asarray(right, dtype=np.intp)))
        object.__setattr__(self, "position", position)
        object.__setattr__(self, "pairs", tuple(pairs))

    @staticmethod
    def closure(dim: int, indices: Iterable[Sequence[int]]) -> TaylorSpace:
        """The smallest downward-closed space containing ``indices``.

        Parameters
        ----------
        dim : int
            Number of variables.
        indices : iterable of sequence of int
            Multi-indices of length ``dim`` with nonnegative entries.

        Returns
        -------
        TaylorSpace
            The space; it always contains the zero multi-index.
        """
        normalized = [_normalize_index(a, dim) for a in indices]
        return _cached_space(dim, tuple(sorted(set(normalized))))

    @property
    def size(self) -> int:
        """Number of coefficients per quantity."""
        return len(self.indices)

    @property
    def order(self) -> int:
        """Largest total order present."""
        return max(sum(a) for a in self.indices)

    def unit(self, axis: int) -> int | None:
        """Position of the first-order multi-index ``e_axis``, or ``None`` if absent."""
        e = tuple(1 if i == axis else 0 for i in range(self.dim))
        return self.position.get(e)


@lru_cache(maxsize=128)
def _cached_space(dim: int, indices: tuple[MultiIndex, ...]) -> TaylorSpace:
    closed = _downward_closure(indices or ((0,) * dim,))
    if (0,) * dim not in closed:  # pragma: no cover - closure always has it
        closed.insert(0, (0,) * dim)
    return TaylorSpace(dim, tuple(closed))


def _normalize_index(alpha: Sequence[int], dim: int) -> MultiIndex:
    try:
        out = tuple(int(a) for a in alpha)
    except TypeError as exc:
        raise TypeError(f"a multi-index must be a sequence of ints, got {alpha!r}") from exc
    if any(int(a) != a for a in alpha):
        raise ValueError(f"multi-index entries must be integers, got {alpha!r}")
    if len(out) != dim:
        raise ValueError(f"multi-index {out} must have {dim} entries (one per input axis)")
    if min(out) < 0:
        raise ValueError(f"multi-index {out} has a negative entry")
    return out


class Jet:
    """A truncated multivariate Taylor polynomial with array-valued coefficients.

    ``coeffs[i]`` is the normalized Taylor coefficient ``d^alpha v / alpha!``
    for ``alpha = space.indices[i]``; the trailing axes of ``coeffs`` are the
    shape of the quantity (for instance ``(n_points, width)``).

    Parameters
    ----------
    space : TaylorSpace
        The multi-index set.
    coeffs : numpy.ndarray
        Array of shape ``(space.size, *shape)``.

    Notes
    -----
    Jets support ``+``, ``-``, ``*`` (with jets, scalars and arrays that
    broadcast against ``shape``), division by scalars/arrays, indexing of the
    trailing axes, and the elementwise functions :meth:`tanh`, :meth:`sin`,
    :meth:`cos` and :meth:`exp`.  They are what an ``output_transform`` of
    :class:`MLP` receives and returns.

    References
    ----------
    .. [1] A. Griewank and A. Walther, *Evaluating Derivatives*, 2nd ed., SIAM,
       2008, ch. 13.
    """

    __slots__ = ("coeffs", "space")
    __array_ufunc__ = None  # make ``ndarray * Jet`` defer to Jet.__rmul__

    def __init__(self, space: TaylorSpace, coeffs: npt.ArrayLike) -> None:
        arr = np.asarray(coeffs, dtype=np.float64)
        if arr.ndim < 1 or arr.shape[0] != space.size:
            raise ValueError(f"coefficient array must have leading axis {space.size}")
        self.space = space
        self.coeffs: FloatArray = arr

    # -- construction -----------------------------------------------------
    @classmethod
    def constant(cls, space: TaylorSpace, value: npt.ArrayLike) -> Jet:
        """A jet with the given value and vanishing higher coefficients."""
        v = np.asarray(value, dtype=np.float64)
        c = np.zeros((space.size, *v.shape))
        c[0] = v
        return cls(space, c)

    @classmethod
    def variables(cls, space: TaylorSpace, points: npt.ArrayLike) -> Jet:
        """The independent variables ``x_j`` at ``points`` (shape ``(n, dim)``)."""
        x = np.asarray(points, dtype=np.float64)
        if x.ndim != 2 or x.shape[1] != space.dim:
            raise ValueError(f"points must have shape (n, {space.dim})")
        c = np.zeros((space.size, *x.shape))
        c[0] = x
        for j in range(space.dim):
            pos = space.unit(j)
            if pos is not None:
                c[pos, :, j] = 1.0
        return cls(space, c)

    # -- accessors ----------------------------------------------------------
    @property
    def shape(self) -> tuple[int, ...]:
        """Shape of the represented quantity."""
        return tuple(self.coeffs.shape[1:])

    @property
    def value(self) -> FloatArray:
        """The zeroth-order coefficient (the value itself)."""
        return self.coeffs[0]

    def derivative(self, alpha: Sequence[int]) -> FloatArray:
        """The partial derivative ``d^alpha v`` (``alpha!`` times the coefficient)."""
        a = _normalize_index(alpha, self.space.dim)
        pos = self.space.position.get(a)
        if pos is None:
            raise KeyError(f"multi-index {a} is not in this jet's Taylor space")
        scale = float(math.prod(math.factorial(k) for k in a))
        return self.coeffs[pos] * scale

    def __getitem__(self, key: Any) -> Jet:
        if not isinstance(key, tuple):
            key = (key,)
        return Jet(self.space, self.coeffs[(slice(None), *key)])

    # -- arithmetic -----------------------------------------------------------
    def _coerce(self, other: Any) -> Jet | FloatArray:
        if isinstance(other, Jet):
            if other.space != self.space:
                raise ValueError("jets live in different Taylor spaces")
            return other
        return np.asarray(other, dtype=np.float64)

    def __add__(self, other: Any) -> Jet:
        o = self._coerce(other)
        if isinstance(o, Jet):
            return Jet(self.space, self.coeffs + o.coeffs)
        c = np.array(
            np.broadcast_to(
                self.coeffs, (self.space.size, *np.broadcast_shapes(self.shape, o.shape))
            )
        )
        c[0] = c[0] + o
        return Jet(self.space, c)

    __radd__ = __add__

    def __neg__(self) -> Jet:
        return Jet(self.space, -self.coeffs)

    def __sub__(self, other: Any) -> Jet:
        return self + (-other if isinstance(other, Jet) else -np.asarray(other, dtype=np.float64))

    def __rsub__(self, other: Any) -> Jet:
        return (-self) + other

    def __mul__(self, other: Any) -> Jet:
        o = self._coerce(other)
        if isinstance(o, Jet):
            return Jet(self.space, _truncated_product(self.space, self.coeffs, o.coeffs))
        return Jet(self.space, self.coeffs * o)

    __rmul__ = __mul__

    def __truediv__(self, other: Any) -> Jet:
        if isinstance(other, Jet):
            raise TypeError("division by a jet is not supported")
        return Jet(self.space, self.coeffs / np.asarray(other, dtype=np.float64))

    # -- elementwise functions ------------------------------------------------
    def compose(self, derivatives: Callable[[FloatArray, int], list[FloatArray]]) -> Jet:
        """Compose an elementwise analytic function with this jet.

        Parameters
        ----------
        derivatives : callable
            ``derivatives(a0, K)`` returns ``[f(a0), f'(a0), ..., f^(K)(a0)]``.

        Returns
        -------
        Jet
            ``f(self)`` in the same Taylor space.

        Notes
        -----
        Uses ``f(a0 + h) = sum_{k<=K} f^(k)(a0) h^k / k!`` where ``h`` is the
        nilpotent part of the jet and ``K`` the space's maximal total order;
        ``h^{K+1} = 0`` in the truncated algebra, so the sum is exact [1]_.

        References
        ----------
        .. [1] A. Griewank and A. Walther, *Evaluating Derivatives*, 2nd ed.,
           SIAM, 2008, sec. 13.2, composition with univariate intrinsics.
        """
        return Jet(self.space, _compose(self.space, self.coeffs, derivatives))

    def tanh(self) -> Jet:
        """Elementwise ``tanh``."""
        return self.compose(_tanh_derivatives)

    def sin(self) -> Jet:
        """Elementwise ``sin``."""
        return self.compose(_sin_derivatives)

    def cos(self) -> Jet:
        """Elementwise ``cos``."""
        return self.compose(_cos_derivatives)

    def exp(self) -> Jet:
        """Elementwise ``exp``."""
        return self.compose(_exp_derivatives)

    def __repr__(self) -> str:
        return f"Jet(shape={self.shape}, indices={self.space.indices})"


def _truncated_product(space: TaylorSpace, a: FloatArray, b: FloatArray) -> FloatArray:
    """Truncated Cauchy product of two coefficient arrays over ``space``."""
    shape = np.broadcast_shapes(a.shape[1:], b.shape[1:])
    out = np.empty((space.size, *shape))
    for i, (left, right) in enumerate(space.pairs):
        if left.size == 1:
            np.multiply(a[left[0]], b[right[0]], out=out[i])
        else:
            out[i] = np.einsum("k...,k...->...", a[left], b[right])
    return out


def _compose(
    space: TaylorSpace,
    coeffs: FloatArray,
    derivatives: Callable[[FloatArray, int], list[FloatArray]],
) -> FloatArray:
    order = space.order
    derivs = derivatives(coeffs[0], order)
    out = np.empty_like(coeffs)
    out[0] = derivs[0]
    if space.size == 1:
        return out
    h = coeffs.copy()
    h[0] = 0.0
    out[1:] = derivs[1] * h[1:]
    power = h
    for k in range(2, order + 1):
        power = _truncated_product(space, power, h)
        out[1:] += (derivs[k] / math.factorial(k)) * power[1:]
    return out


@lru_cache(maxsize=16)
def _tanh_polynomials(order: int) -> tuple[npt.NDArray[np.float64], ...]:
    """Coefficients (lowest degree first) of ``P_k`` with ``tanh^(k) = P_k(tanh)``.

    ``P_0(s) = s`` and ``P_{k+1}(s) = P_k'(s) (1 - s^2)``.
    """
    polys = [np.array([0.0, 1.0])]
    for _ in range(order):
        polys.append(
            np.polynomial.polynomial.polymul(
                np.polynomial.polynomial.polyder(polys[-1]), [1.0, 0.0, -1.0]
            )
        )
    return tuple(polys)


def _horner(coef: FloatArray, s: FloatArray) -> FloatArray:
    acc = np.full_like(s, coef[-1])
    for c in coef[-2::-1]:
        acc = acc * s + c
    return acc


def _tanh_derivatives(a: FloatArray, order: int) -> list[FloatArray]:
    s = np.tanh(a)
    polys = _tanh_polynomials(order)
    return [s] + [_horner(polys[k], s) for k in range(1, order + 1)]


def _sin_derivatives(a: FloatArray, order: int) -> list[FloatArray]:
    s, c = np.sin(a), np.cos(a)
    cycle = (s, c, -s, -c)
    return [cycle[k % 4] for k in range(order + 1)]


def _cos_derivatives(a: FloatArray, order: int) -> list[FloatArray]:
    s, c = np.sin(a), np.cos(a)
    cycle = (c, -s, -c, s)
    return [cycle[k % 4] for k in range(order + 1)]


def _exp_derivatives(a: FloatArray, order: int) -> list[FloatArray]:
    e = np.exp(a)
    return [e] * (order + 1)


_ACTIVATION_DERIVATIVES: dict[str, Callable[[FloatArray, int], list[FloatArray]]] = {
    "tanh": _tanh_derivatives,
    "sin": _sin_derivatives,
}


# ---------------------------------------------------------------------------
# The network
# ---------------------------------------------------------------------------


def _as_float_array(value: npt.ArrayLike, name: str, ndim: int) -> FloatArray:
    arr = np.array(value, dtype=np.float64, copy=True)
    if arr.ndim != ndim:
        raise ValueError(f"{name} must be {ndim}-dimensional, got shape {arr.shape}")
    if not np.all(np.isfinite(arr)):
        raise ValueError(f"{name} has non-finite entries")
    arr.setflags(write=False)
    return arr


class MLP:
    """A fully connected network ``R^d -> R^m`` with exact input derivatives.

    Parameters
    ----------
    weights : sequence of numpy.ndarray
        ``weights[l]`` has shape ``(n_out_l, n_in_l)`` (PyTorch ``Linear``
        layout); consecutive shapes must chain.
    biases : sequence of numpy.ndarray
        ``biases[l]`` has shape ``(n_out_l,)``.
    activation : {"tanh", "sin"}
        Activation applied after every layer except the last.
    in_shift, in_scale : array_like, optional
        Input scaling ``z = (x - in_shift) / in_scale`` (defaults 0 and 1).
    out_shift, out_scale : array_like, optional
        Affine output map ``u = out_shift + out_scale * y`` (defaults 0 and 1).
    output_transform : callable, optional
        ``output_transform(x, u) -> Jet`` applied after the affine output map,
        where ``x`` is the jet of the raw inputs (shape ``(n, d)``) and ``u``
        the jet of the outputs (shape ``(n, m)``); the result must have shape
        ``(n, m')``.  Use it for hard-constrained outputs such as
        ``g(x) + x (1 - x) u``.  Not serializable.
    meta : mapping, optional
        JSON-serializable provenance stored with :meth:`save_npz`.

    References
    ----------
    .. [1] A. Griewank and A. Walther, *Evaluating Derivatives*, 2nd ed., SIAM,
       2008, ch. 13 (propagation of Taylor coefficients).
    """

    def __init__(
        self,
        weights: Sequence[npt.ArrayLike],
        biases: Sequence[npt.ArrayLike],
        activation: Activation = "tanh",
        *,
        in_shift: npt.ArrayLike | None = None,
        in_scale: npt.ArrayLike | None = None,
        out_shift: npt.ArrayLike | None = None,
        out_scale: npt.ArrayLike | None = None,
        output_transform: OutputTransform | None = None,
        meta: Mapping[str, Any] | None = None,
    ) -> None:
        if len(weights) == 0 or len(weights) != len(biases):
            raise ValueError("need as many bias vectors as weight matrices (at least one)")
        if activation not in _ACTIVATIONS:
            raise ValueError(f"activation must be one of {_ACTIVATIONS}, got {activation!r}")
        ws = [_as_float_array(w, f"W{i}", 2) for i, w in enumerate(weights)]
        bs = [_as_float_array(b, f"b{i}", 1) for i, b in enumerate(biases)]
        for i, (w, b) in enumerate(zip(ws, bs, strict=True)):
            if b.shape[0] != w.shape[0]:
                raise ValueError(f"b{i} has {b.shape[0]} entries, W{i} has {w.shape[0]} rows")
            if i > 0 and w.shape[1] != ws[i - 1].shape[0]:
                raise ValueError(
                    f"W{i} expects {w.shape[1]} inputs, layer {i - 1} gives {ws[i - 1].shape[0]}"
                )
        d, m = ws[0].shape[1], ws[-1].shape[0]
        self.weights: tuple[FloatArray, ...] = tuple(ws)
        self.biases: tuple[FloatArray, ...] = tuple(bs)
        self.activation: Activation = activation
        self.in_shift = _vector_or_default(in_shift, d, 0.0, "in_shift")
        self.in_scale = _vector_or_default(in_scale, d, 1.0, "in_scale")
        if np.any(self.in_scale == 0.0):
            raise ValueError("in_scale entries must be nonzero")
        if (out_shift is None) != (out_scale is None):
            raise ValueError("give both out_shift and out_scale, or neither")
        self.out_shift = _vector_or_default(out_shift, m, 0.0, "out_shift")
        self.out_scale = _vector_or_default(out_scale, m, 1.0, "out_scale")
        self._has_affine_output = out_shift is not None
        self.output_transform = output_transform
        self.meta: dict[str, Any] = dict(meta or {})
        json.dumps(self.meta)  # fail early on non-serializable provenance

    # -- construction and (de)serialization ---------------------------------
    @classmethod
    def from_arrays(
        cls,
        weights: Sequence[npt.ArrayLike],
        biases: Sequence[npt.ArrayLike],
        activation: Activation = "tanh",
        input_scaling: tuple[npt.ArrayLike, npt.ArrayLike] | None = None,
        output_transform: tuple[npt.ArrayLike, npt.ArrayLike] | OutputTransform | None = None,
        meta: Mapping[str, Any] | None = None,
    ) -> MLP:
        """Build a network from weight and bias arrays.

        Parameters
        ----------
        weights, biases : sequence of numpy.ndarray
            See :class:`MLP`.
        activation : {"tanh", "sin"}
            Hidden-layer activation.
        input_scaling : (shift, scale), optional
            Inputs are mapped to ``z = (x - shift) / scale`` before the first
            layer; e.g. ``shift`` the box centre and ``scale`` its half-widths
            maps the box onto ``[-1, 1]^d``.
        output_transform : (shift, scale) or callable, optional
            A pair gives the serializable affine map ``u = shift + scale * y``;
            a callable is used as ``output_transform`` of :class:`MLP`.
        meta : mapping, optional
            JSON-serializable provenance.

        Returns
        -------
        MLP
        """
        shift, scale = input_scaling if input_scaling is not None else (None, None)
        if output_transform is None or callable(output_transform):
            return cls(
                weights,
                biases,
                activation,
                in_shift=shift,
                in_scale=scale,
                output_transform=output_transform,
                meta=meta,
            )
        out_shift, out_scale = output_transform
        return cls(
            weights,
            biases,
            activation,
            in_shift=shift,
            in_scale=scale,
            out_shift=out_shift,
            out_scale=out_scale,
            meta=meta,
        )

    @classmethod
    def load_npz(cls, path: str | os.PathLike[str]) -> MLP:
        """Read a network written by :meth:`save_npz` (no pickles are loaded).

        Parameters
        ----------
        path : str or path-like
            The ``.npz`` file.

        Returns
        -------
        MLP
        """
        with np.load(path, allow_pickle=False) as data:
            keys = set(data.files)
            n_layers = 0
            while f"W{n_layers}" in keys:
                n_layers += 1
            if n_layers == 0:
                raise ValueError(f"{path}: no weight arrays W0, W1, ... found")
            weights = [data[f"W{i}"] for i in range(n_layers)]
            biases = []
            for i in range(n_layers):
                if f"b{i}" not in keys:
                    raise ValueError(f"{path}: bias b{i} is missing")
                biases.append(data[f"b{i}"])
            activation = str(data["activation"][()]) if "activation" in keys else "tanh"
            if activation not in _ACTIVATIONS:
                raise ValueError(f"{path}: unknown activation {activation!r}")
            in_shift = data["in_shift"] if "in_shift" in keys else None
            in_scale = data["in_scale"] if "in_scale" in keys else None
            out_shift = data["out_shift"] if "out_shift" in keys else None
            out_scale = data["out_scale"] if "out_scale" in keys else None
            meta = json.loads(str(data["meta"][()])) if "meta" in keys else None
        if meta is not None and not isinstance(meta, dict):
            raise ValueError(f"{path}: meta must be a JSON object")
        return cls(
            weights,
            biases,
            cast(Activation, activation),
            in_shift=in_shift,
            in_scale=in_scale,
            out_shift=out_shift,
            out_scale=out_scale,
            meta=meta,
        )

    def save_npz(self, path: str | os.PathLike[str]) -> None:
        """Write the network in the documented ``.npz`` layout (see module docs).

        Parameters
        ----------
        path : str or path-like
            Destination; written as given (no ``.npz`` suffix is appended).

        Raises
        ------
        ValueError
            If the network has a callable ``output_transform``.
        """
        if self.output_transform is not None:
            raise ValueError("a callable output_transform cannot be serialized")
        arrays: dict[str, npt.NDArray[Any]] = {}
        for i, (w, b) in enumerate(zip(self.weights, self.biases, strict=True)):
            arrays[f"W{i}"] = w
            arrays[f"b{i}"] = b
        arrays["activation"] = np.array(self.activation)
        arrays["in_shift"] = self.in_shift
        arrays["in_scale"] = self.in_scale
        if self._has_affine_output:
            arrays["out_shift"] = self.out_shift
            arrays["out_scale"] = self.out_scale
        if self.meta:
            arrays["meta"] = np.array(json.dumps(self.meta, sort_keys=True))
        with open(path, "wb") as fh:
            np.savez(fh, **arrays)  # type: ignore[arg-type]

    # -- shape information -----------------------------------------------------
    @property
    def input_dim(self) -> int:
        """Number of inputs ``d``."""
        return int(self.weights[0].shape[1])

    @property
    def output_dim(self) -> int:
        """Number of outputs ``m`` of the layers (before ``output_transform``)."""
        return int(self.weights[-1].shape[0])

    @property
    def widths(self) -> tuple[int, ...]:
        """Layer widths ``(d, n_1, ..., m)``."""
        return (self.input_dim, *(int(w.shape[0]) for w in self.weights))

    # -- evaluation --------------------------------------------------------
    def __call__(self, points: npt.ArrayLike) -> FloatArray:
        """Network values at ``points``; shape ``(n,)`` for one output, else ``(n, m)``."""
        x = self._check_points(points)
        return self.fields(x, [(0,) * self.input_dim])[(0,) * self.input_dim]

    def jet(self, points: npt.ArrayLike, space: TaylorSpace) -> Jet:
        """Propagate a Taylor jet through the network for one batch of points.

        Parameters
        ----------
        points : array_like, shape (n, d)
            Evaluation points (raw, unscaled inputs).
        space : TaylorSpace
            Multi-index set over the ``d`` input axes.

        Returns
        -------
        Jet
            Output jet of shape ``(n, m)``: normalized Taylor coefficients
            ``d^alpha u / alpha!`` for every ``alpha`` in ``space``.

        References
        ----------
        .. [1] A. Griewank and A. Walther, *Evaluating Derivatives*, 2nd ed.,
           SIAM, 2008, ch. 13.
        """
        x = self._check_points(points)
        if space.dim != self.input_dim:
            raise ValueError(f"Taylor space has {space.dim} variables, network {self.input_dim}")
        xj = Jet.variables(space, x)
        # Input scaling is affine: only the value and the first-order seeds change.
        z = (xj - self.in_shift) / self.in_scale
        act = _ACTIVATION_DERIVATIVES[self.activation]
        c = z.coeffs
        last = len(self.weights) - 1
        for i, (w, b) in enumerate(zip(self.weights, self.biases, strict=True)):
            c = c @ w.T
            c[0] += b
            if i < last:
                c = _compose(space, c, act)
        u = Jet(space, c)
        if self._has_affine_output:
            u = u * self.out_scale + self.out_shift
        if self.output_transform is not None:
            u = self.output_transform(xj, u)
            if not isinstance(u, Jet) or len(u.shape) != 2 or u.shape[0] != x.shape[0]:
                raise ValueError("output_transform must return a Jet of shape (n, m)")
        return u

    def fields(
        self,
        points: npt.ArrayLike,
        derivatives: Sequence[Sequence[int]],
        *,
        batch_size: int | None = None,
    ) -> dict[MultiIndex, FloatArray]:
        """Values and exact partial derivatives of the network at ``points``.

        Parameters
        ----------
        points : array_like, shape (n, d)
            Evaluation points, columns in the network's input order.
        derivatives : sequence of multi-indices
            Each a length-``d`` tuple of nonnegative ints: ``(0, 0)`` is the
            value, ``(1, 0)`` the first derivative along axis 0, ``(1, 1)`` the
            mixed second derivative, ... (total order at most ``MAX_ORDER``).
        batch_size : int, optional
            Rows per batch; by default the largest power of two up to
            ``DEFAULT_BATCH_SIZE`` whose Taylor coefficients fit a 256 MiB
            budget.

        Returns
        -------
        dict
            Maps each requested multi-index (as a tuple of ints) to an array of
            shape ``(n,)`` for a single output or ``(n, m)`` for ``m`` outputs.

        Notes
        -----
        The derivatives are those of the floating-point network evaluated in
        exact arithmetic, computed by truncated Taylor propagation [1]_; they
        agree with symbolic differentiation to rounding error.

        References
        ----------
        .. [1] A. Griewank and A. Walther, *Evaluating Derivatives*, 2nd ed.,
           SIAM, 2008, ch. 13.
        """
        x = self._check_points(points)
        d = self.input_dim
        wanted = [_normalize_index(a, d) for a in derivatives]
        if not wanted:
            return {}
        order = max(sum(a) for a in wanted)
        if order > MAX_ORDER:
            raise ValueError(f"total derivative order {order} exceeds MAX_ORDER={MAX_ORDER}")
        space = TaylorSpace.closure(d, wanted)
        rows = batch_size if batch_size is not None else self._default_batch(space)
        if rows < 1:
            raise ValueError("batch_size must be positive")
        n = x.shape[0]
        out_dim: int | None = None
        results: dict[MultiIndex, FloatArray] = {}
        factorials = {a: float(math.prod(math.factorial(k) for k in a)) for a in wanted}
        for start in range(0, max(n, 1), rows):
            u = self.jet(x[start : start + rows], space)
            if out_dim is None:
                out_dim = u.shape[1]
                for a in wanted:
                    results[a] = np.empty((n, out_dim))
            for a in wanted:
                results[a][start : start + rows] = u.coeffs[space.position[a]] * factorials[a]
        if out_dim == 1:
            return {a: v[:, 0] for a, v in results.items()}
        return results

    def _default_batch(self, space: TaylorSpace) -> int:
        width = max(self.widths)
        per_row = 8 * space.size * width * 6  # a handful of live coefficient arrays
        rows = DEFAULT_BATCH_SIZE
        while rows > 256 and rows * per_row > _BATCH_MEMORY_BUDGET:
            rows //= 2
        return rows

    def _check_points(self, points: npt.ArrayLike) -> FloatArray:
        x = np.asarray(points, dtype=np.float64)
        if x.ndim == 1 and self.input_dim == 1:
            x = x[:, None]
        if x.ndim != 2 or x.shape[1] != self.input_dim:
            raise ValueError(f"points must have shape (n, {self.input_dim}), got {x.shape}")
        if not np.all(np.isfinite(x)):
            raise ValueError("points have non-finite entries")
        return x

    def __repr__(self) -> str:
        return f"MLP(widths={self.widths}, activation={self.activation!r})"


def _vector_or_default(
    value: npt.ArrayLike | None, n: int, default: float, name: str
) -> FloatArray:
    if value is None:
        arr = np.full(n, default)
        arr.setflags(write=False)
        return arr
    arr = _as_float_array(np.broadcast_to(np.asarray(value, dtype=np.float64), (n,)), name, 1)
    return arr


# ---------------------------------------------------------------------------
# Named residual fields
# ---------------------------------------------------------------------------


def parse_derivative_name(
    name: str, axes: Sequence[str], outputs: Sequence[str] = ("u",)
) -> tuple[int, MultiIndex]:
    """Parse a derivative name such as ``"u_tx"`` into (output column, multi-index).

    Parameters
    ----------
    name : str
        ``"<field>"`` or ``"<field>_<axes>"`` where ``<axes>`` is a
        concatenation of axis names, one per differentiation (``"u_xx"``,
        ``"u_tx"`` = ``"u_xt"``).  Multi-character axis names are matched
        greedily, longest first.
    axes : sequence of str
        Input axis names in the network's input order, e.g. ``["t", "x"]``.
    outputs : sequence of str
        Output field names in column order (default ``("u",)``).

    Returns
    -------
    (int, tuple of int)
        Output column and multi-index over ``axes``.
    """
    if len(set(axes)) != len(axes) or any(not a for a in axes):
        raise ValueError(f"axis names must be distinct and nonempty: {list(axes)}")
    field_name, sep, suffix = name.partition("_")
    if field_name not in outputs:
        raise ValueError(f"unknown field {field_name!r} in {name!r}; outputs are {list(outputs)}")
    if sep and not suffix:
        raise ValueError(f"empty derivative suffix in {name!r}")
    counts = [0] * len(axes)
    ordered = sorted(range(len(axes)), key=lambda i: -len(axes[i]))
    rest = suffix
    while rest:
        for i in ordered:
            if rest.startswith(axes[i]):
                counts[i] += 1
                rest = rest[len(axes[i]) :]
                break
        else:
            raise ValueError(
                f"cannot parse {name!r}: {rest!r} is not a sequence of axes {list(axes)}"
            )
    return list(outputs).index(field_name), tuple(counts)


def residual_fields(
    model: MLP,
    points: npt.ArrayLike,
    axes: Sequence[str],
    names: Sequence[str],
    *,
    outputs: Sequence[str] = ("u",),
    batch_size: int | None = None,
) -> dict[str, FloatArray]:
    """Named values and derivatives of ``model`` at ``points``.

    Parameters
    ----------
    model : MLP
        The network; its inputs are the columns of ``points`` in ``axes`` order.
    points : array_like, shape (n, d)
        Evaluation points.
    axes : sequence of str
        Names of the input axes, e.g. ``["t", "x"]``.
    names : sequence of str
        Requested quantities, e.g. ``["u", "u_t", "u_x", "u_xx", "u_tx"]``.
    outputs : sequence of str
        Names of the output columns (default ``("u",)`` for a scalar model).
    batch_size : int, optional
        Passed to :meth:`MLP.fields`.

    Returns
    -------
    dict
        ``{name: array of shape (n,)}``.

    Examples
    --------
    >>> net = MLP.from_arrays([np.ones((3, 2)), np.ones((1, 3))], [np.zeros(3), np.zeros(1)])
    >>> f = residual_fields(net, np.zeros((4, 2)), ["t", "x"], ["u", "u_t", "u_xx"])
    >>> sorted(f), f["u_t"].shape
    (['u', 'u_t', 'u_xx'], (4,))
    """
    if len(axes) != model.input_dim:
        raise ValueError(f"{len(axes)} axis names for a model with {model.input_dim} inputs")
    parsed = {name: parse_derivative_name(name, axes, outputs) for name in names}
    indices = sorted({alpha for _, alpha in parsed.values()})
    values = model.fields(points, indices, batch_size=batch_size)
    out: dict[str, FloatArray] = {}
    for name, (col, alpha) in parsed.items():
        v = values[alpha]
        if v.ndim == 1:
            if col != 0:
                raise ValueError(f"{name!r}: the model has a single output")
            out[name] = v
        else:
            if col >= v.shape[1]:
                raise ValueError(f"{name!r}: the model has {v.shape[1]} outputs")
            out[name] = v[:, col]
    return out
