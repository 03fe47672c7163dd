"""Tests of the numpy MLP with exact Taylor-mode derivatives (boundsvc.client.mlp).

The derivatives are checked against four independent references:

1. symbolic differentiation (sympy, 30 significant digits) of small networks
   written out by hand in closed form;
2. complex-step first derivatives and Cauchy-integral (FFT on complex circles)
   higher and mixed derivatives of a plain complex forward pass;
3. eighth-order central finite differences;
4. hand-written reverse-mode back-propagation (gradients) and the complex step
   of that reverse gradient (Hessians).
"""

from __future__ import annotations

import itertools
import json
import math
from collections.abc import Callable
from pathlib import Path

import mpmath
import numpy as np
import pytest
import sympy as sp

from boundsvc.client.mlp import (
    DEFAULT_BATCH_SIZE,
    MAX_ORDER,
    MLP,
    Jet,
    TaylorSpace,
    parse_derivative_name,
    residual_fields,
)

ALL_ORDER4_2D = [(i, j) for i in range(5) for j in range(5) if i + j <= 4]


def random_net(
    rng: np.random.Generator,
    widths: tuple[int, ...],
    activation: str = "tanh",
    std: float = 0.8,
    scaling: bool = True,
) -> MLP:
    ws = [rng.normal(scale=std, size=(b, a)) for a, b in itertools.pairwise(widths)]
    bs = [rng.normal(scale=0.5, size=b) for b in widths[1:]]
    d = widths[0]
    scale = (rng.uniform(-0.2, 0.2, d), rng.uniform(0.5, 1.5, d)) if scaling else None
    return MLP.from_arrays(ws, bs, activation, input_scaling=scale)  # type: ignore[arg-type]


def forward(net: MLP, x: np.ndarray) -> np.ndarray:
    """Plain forward pass, written independently; works for complex ``x``."""
    act: Callable[[np.ndarray], np.ndarray] = np.tanh if net.activation == "tanh" else np.sin
    a = (x - net.in_shift) / net.in_scale
    for i, (w, b) in enumerate(zip(net.weights, net.biases, strict=True)):
        a = a @ w.T + b
        if i < len(net.weights) - 1:
            a = act(a)
    return net.out_shift + net.out_scale * a


def reverse_gradient(net: MLP, x: np.ndarray) -> np.ndarray:
    """Gradient of the (single) output w.r.t. the inputs by hand-coded back-propagation."""
    if net.activation == "tanh":
        dact: Callable[[np.ndarray], np.ndarray] = lambda a: 1.0 - np.tanh(a) ** 2  # noqa: E731
        act: Callable[[np.ndarray], np.ndarray] = np.tanh
    else:
        dact, act = np.cos, np.sin
    z = (x - net.in_shift) / net.in_scale
    pre = []
    a = z
    for w, b in zip(net.weights[:-1], net.biases[:-1], strict=True):
        p = a @ w.T + b
        pre.append(p)
        a = act(p)
    g = np.broadcast_to(net.weights[-1][0] * net.out_scale[0], a.shape)
    for w, p in zip(reversed(net.weights[:-1]), reversed(pre), strict=True):
        g = (g * dact(p)) @ w
    return g / net.in_scale


# ---------------------------------------------------------------------------
# 1. symbolic reference
# ---------------------------------------------------------------------------


def sympy_network(net: MLP, symbols: list[sp.Symbol]) -> sp.Expr:
    """The network in closed form with its float64 parameters converted exactly."""

    def exact(v: float) -> sp.Float:
        return sp.Float(float(v), 40)

    act = sp.tanh if net.activation == "tanh" else sp.sin
    layer = [
        (s - exact(sh)) / exact(sc)
        for s, sh, sc in zip(symbols, net.in_shift, net.in_scale, strict=True)
    ]
    for i, (w, b) in enumerate(zip(net.weights, net.biases, strict=True)):
        pre = [
            sum((exact(w[r, c]) * layer[c] for c in range(w.shape[1])), exact(b[r]))
            for r in range(w.shape[0])
        ]
        layer = [act(p) for p in pre] if i < len(net.weights) - 1 else pre
    return layer[0]


@pytest.mark.parametrize(
    ("widths", "activation", "indices"),
    [
        ((2, 3, 2, 1), "tanh", ALL_ORDER4_2D),
        ((2, 3, 2, 1), "sin", ALL_ORDER4_2D),
        ((3, 2, 1), "tanh", [(0, 0, 0), (1, 1, 1), (2, 0, 1), (1, 2, 1), (0, 0, 4), (0, 3, 0)]),
    ],
)
def test_matches_sympy_closed_form(
    widths: tuple[int, ...], activation: str, indices: list[tuple[int, ...]]
) -> None:
    rng = np.random.default_rng(11)
    net = random_net(rng, widths, activation)
    syms = list(sp.symbols(f"y0:{widths[0]}"))
    expr = sympy_network(net, syms)
    points = rng.uniform(-1.0, 1.0, size=(3, widths[0]))
    fields = net.fields(points, indices)
    cache: dict[tuple[int, ...], sp.Expr] = {(0,) * len(syms): expr}

    def derivative(alpha: tuple[int, ...]) -> sp.Expr:
        if alpha not in cache:  # differentiate the cached lower derivative once more
            j = max(i for i, k in enumerate(alpha) if k)
            lower = (*alpha[:j], alpha[j] - 1, *alpha[j + 1 :])
            cache[alpha] = sp.diff(derivative(lower), syms[j])
        return cache[alpha]

    for alpha in indices:
        fn = sp.lambdify(syms, derivative(alpha), modules="mpmath")
        with mpmath.workdps(30):
            ref = np.array([float(fn(*(mpmath.mpf(float(v)) for v in p))) for p in points])
        scale = max(1.0, float(np.max(np.abs(ref))))
        err = float(np.max(np.abs(fields[alpha] - ref)))
        assert err <= 2e-14 * scale, (alpha, err, scale)


# ---------------------------------------------------------------------------
# 2. complex step and Cauchy integrals
# ---------------------------------------------------------------------------


@pytest.mark.parametrize("activation", ["tanh", "sin"])
def test_first_derivatives_match_complex_step(activation: str) -> None:
    rng = np.random.default_rng(3)
    net = random_net(rng, (3, 16, 16, 1), activation)
    x = rng.uniform(-1, 1, size=(50, 3))
    units = [tuple(int(i == j) for i in range(3)) for j in range(3)]
    fields = net.fields(x, units)
    h = 1e-30
    for j, alpha in enumerate(units):
        xc = x.astype(complex)
        xc[:, j] += 1j * h
        ref = np.imag(forward(net, xc)[:, 0]) / h
        np.testing.assert_allclose(fields[alpha], ref, rtol=1e-13, atol=1e-14)


def cauchy_derivatives(
    net: MLP, point: np.ndarray, radius: float, n: int = 32
) -> dict[tuple[int, int], float]:
    """All partial derivatives up to order 4 of a 2-input net via the 2-D Cauchy formula."""
    theta = 2 * np.pi * np.arange(n) / n
    zt = point[0] + radius * np.exp(1j * theta)
    zx = point[1] + radius * np.exp(1j * theta)
    tt, xx = np.meshgrid(zt, zx, indexing="ij")
    vals = forward(net, np.column_stack([tt.ravel(), xx.ravel()]))[:, 0].reshape(n, n)
    coef = np.fft.fft2(vals) / n**2  # coef[p, q] = c_pq * radius**(p+q)
    return {
        (p, q): float(np.real(coef[p, q]))
        * math.factorial(p)
        * math.factorial(q)
        / radius ** (p + q)
        for p, q in ALL_ORDER4_2D
    }


@pytest.mark.parametrize("activation", ["tanh", "sin"])
def test_all_derivatives_to_order_4_match_cauchy_integrals(activation: str) -> None:
    rng = np.random.default_rng(5)
    net = random_net(rng, (2, 12, 12, 1), activation, std=0.4, scaling=False)
    points = rng.uniform(-1, 1, size=(6, 2))
    fields = net.fields(points, ALL_ORDER4_2D)
    for i, p in enumerate(points):
        ref = cauchy_derivatives(net, p, radius=0.25)
        for alpha in ALL_ORDER4_2D:
            tol = 1e-14 * 10 ** sum(alpha)  # rounding of the contour sums grows like r^-order
            assert abs(fields[alpha][i] - ref[alpha]) <= tol * max(1.0, abs(ref[alpha])), alpha


# ---------------------------------------------------------------------------
# 3. high-order finite differences
# ---------------------------------------------------------------------------

# Eighth-order central stencils (Fornberg) on offsets -4..4.
D1 = np.array([1 / 280, -4 / 105, 1 / 5, -4 / 5, 0, 4 / 5, -1 / 5, 4 / 105, -1 / 280])
D2 = np.array([-1 / 560, 8 / 315, -1 / 5, 8 / 5, -205 / 72, 8 / 5, -1 / 5, 8 / 315, -1 / 560])


def test_second_derivatives_match_eighth_order_finite_differences() -> None:
    rng = np.random.default_rng(7)
    net = random_net(rng, (2, 20, 20, 1))
    x = rng.uniform(-1, 1, size=(40, 2))
    fields = net.fields(x, [(1, 0), (0, 1), (2, 0), (0, 2), (1, 1)])
    h = 0.01
    offs = np.arange(-4, 5) * h

    def f(dt: float, dx: float) -> np.ndarray:
        return net(x + np.array([dt, dx]))

    ft = sum(c * f(o, 0.0) for c, o in zip(D1, offs, strict=True)) / h
    fxx = sum(c * f(0.0, o) for c, o in zip(D2, offs, strict=True)) / h**2
    ftx = (
        sum(
            ci * cj * f(oi, oj)
            for ci, oi in zip(D1, offs, strict=True)
            for cj, oj in zip(D1, offs, strict=True)
        )
        / h**2
    )
    np.testing.assert_allclose(fields[(1, 0)], ft, atol=1e-10)
    np.testing.assert_allclose(fields[(0, 2)], fxx, atol=1e-8)
    np.testing.assert_allclose(fields[(1, 1)], ftx, atol=1e-8)


# ---------------------------------------------------------------------------
# 4. reverse mode
# ---------------------------------------------------------------------------


@pytest.mark.parametrize("activation", ["tanh", "sin"])
def test_gradient_and_hessian_match_reverse_mode(activation: str) -> None:
    rng = np.random.default_rng(9)
    net = random_net(rng, (3, 10, 8, 1), activation)
    x = rng.uniform(-1, 1, size=(30, 3))
    d = 3
    firsts = [tuple(int(i == j) for i in range(d)) for j in range(d)]
    seconds = [
        tuple(int(i == j) + int(i == k) for i in range(d)) for j in range(d) for k in range(j, d)
    ]
    fields = net.fields(x, firsts + seconds)
    grad = reverse_gradient(net, x)
    for j, alpha in enumerate(firsts):
        np.testing.assert_allclose(fields[alpha], grad[:, j], rtol=1e-13, atol=1e-14)
    # Forward-over-reverse: complex step of the back-propagated gradient gives the Hessian.
    h = 1e-30
    for j in range(d):
        xc = x.astype(complex)
        xc[:, j] += 1j * h
        hess_col = np.imag(reverse_gradient(net, xc)) / h
        for k in range(d):
            alpha = tuple(int(i == j) + int(i == k) for i in range(d))
            np.testing.assert_allclose(fields[alpha], hess_col[:, k], rtol=1e-12, atol=1e-13)


# ---------------------------------------------------------------------------
# Structure, batching, transforms
# ---------------------------------------------------------------------------


def test_values_match_plain_forward_and_call() -> None:
    rng = np.random.default_rng(1)
    net = random_net(rng, (2, 7, 1))
    x = rng.uniform(-1, 1, size=(25, 2))
    ref = forward(net, x)[:, 0]
    np.testing.assert_allclose(net(x), ref, rtol=1e-15, atol=1e-15)
    np.testing.assert_allclose(net.fields(x, [(0, 0)])[(0, 0)], ref, rtol=1e-15, atol=1e-15)


def test_batching_does_not_change_results() -> None:
    rng = np.random.default_rng(2)
    net = random_net(rng, (2, 9, 9, 1))
    x = rng.uniform(-1, 1, size=(101, 2))
    idx = [(0, 0), (1, 0), (0, 2), (1, 1)]
    full = net.fields(x, idx)
    for bs in (1, 7, 100, 101, 1000):
        part = net.fields(x, idx, batch_size=bs)
        for a in idx:  # BLAS blocking may differ with the batch shape: rounding only
            np.testing.assert_allclose(part[a], full[a], rtol=1e-13, atol=1e-14)


def test_default_batch_is_bounded() -> None:
    rng = np.random.default_rng(2)
    wide = random_net(rng, (2, 512, 1))
    space = TaylorSpace.closure(2, ALL_ORDER4_2D)
    rows = wide._default_batch(space)
    assert 256 <= rows < DEFAULT_BATCH_SIZE
    small = random_net(rng, (2, 4, 1))
    assert small._default_batch(TaylorSpace.closure(2, [(0, 0)])) == DEFAULT_BATCH_SIZE


def test_empty_point_set() -> None:
    net = random_net(np.random.default_rng(0), (2, 3, 1))
    out = net.fields(np.zeros((0, 2)), [(0, 0), (1, 1)])
    assert out[(0, 0)].shape == (0,)
    assert out[(1, 1)].shape == (0,)


def test_multiple_outputs_have_shape_n_m_and_match_single_output_nets() -> None:
    rng = np.random.default_rng(4)
    net = random_net(rng, (2, 6, 6, 3))
    x = rng.uniform(-1, 1, size=(20, 2))
    idx = [(0, 0), (1, 0), (0, 2), (2, 2)]
    fields = net.fields(x, idx)
    for col in range(3):
        single = MLP.from_arrays(
            [*net.weights[:-1], net.weights[-1][col : col + 1]],
            [*net.biases[:-1], net.biases[-1][col : col + 1]],
            input_scaling=(net.in_shift, net.in_scale),
        )
        ref = single.fields(x, idx)
        for a in idx:
            assert fields[a].shape == (20, 3)
            np.testing.assert_allclose(fields[a][:, col], ref[a], rtol=1e-15, atol=1e-15)


def test_input_scaling_follows_the_chain_rule() -> None:
    rng = np.random.default_rng(6)
    base = random_net(rng, (2, 8, 1), scaling=False)
    shift, scale = np.array([0.25, 0.5]), np.array([0.25, 0.5])
    scaled = MLP.from_arrays(list(base.weights), list(base.biases), input_scaling=(shift, scale))
    x = rng.uniform(0, 1, size=(15, 2)) * [0.5, 1.0]
    z = (x - shift) / scale
    idx = [(0, 0), (1, 0), (0, 2), (1, 3)]
    fs, fb = scaled.fields(x, idx), base.fields(z, idx)
    for a in idx:
        factor = float(np.prod(scale ** -np.array(a)))
        np.testing.assert_allclose(fs[a], factor * fb[a], rtol=1e-13, atol=1e-13)


def test_affine_output_transform() -> None:
    rng = np.random.default_rng(8)
    base = random_net(rng, (2, 5, 2))
    net = MLP.from_arrays(
        list(base.weights),
        list(base.biases),
        input_scaling=(base.in_shift, base.in_scale),
        output_transform=([1.0, -2.0], [3.0, 0.5]),
    )
    x = rng.uniform(-1, 1, size=(10, 2))
    fb, fn = base.fields(x, [(0, 0), (0, 1)]), net.fields(x, [(0, 0), (0, 1)])
    np.testing.assert_allclose(fn[(0, 0)], [1.0, -2.0] + np.array([3.0, 0.5]) * fb[(0, 0)])
    np.testing.assert_allclose(fn[(0, 1)], np.array([3.0, 0.5]) * fb[(0, 1)])


def test_callable_output_transform_hard_constraint() -> None:
    # v(t, x) = g(x) + t * x * (1 - x) * u(t, x) with g(x) = 1 - 0.8 x.
    rng = np.random.default_rng(10)
    base = random_net(rng, (2, 6, 1))

    def transform(xj: Jet, u: Jet) -> Jet:
        t, x = xj[:, 0:1], xj[:, 1:2]
        return 1.0 - 0.8 * x + t * x * (1.0 - x) * u

    net = MLP.from_arrays(
        list(base.weights),
        list(base.biases),
        input_scaling=(base.in_shift, base.in_scale),
        output_transform=transform,
    )
    p = rng.uniform(0, 1, size=(12, 2))
    t, x = p[:, 0], p[:, 1]
    idx = [(0, 0), (1, 0), (0, 1), (0, 2), (1, 1)]
    fu, fv = base.fields(p, idx), net.fields(p, idx)
    u, u_t, u_x, u_xx, u_tx = (fu[a] for a in idx)
    q, q_x, q_xx = x * (1 - x), 1 - 2 * x, -2.0
    ref = {
        (0, 0): 1 - 0.8 * x + t * q * u,
        (1, 0): q * u + t * q * u_t,
        (0, 1): -0.8 + t * (q_x * u + q * u_x),
        (0, 2): t * (q_xx * u + 2 * q_x * u_x + q * u_xx),
        (1, 1): q_x * u + q * u_x + t * (q_x * u_t + q * u_tx),
    }
    for a in idx:
        np.testing.assert_allclose(fv[a], ref[a], rtol=1e-13, atol=1e-14)
    with pytest.raises(ValueError, match="cannot be serialized"):
        net.save_npz(Path("unused.npz"))


def test_mixed_derivatives_are_symmetric_in_request_order() -> None:
    rng = np.random.default_rng(12)
    net = random_net(rng, (2, 5, 1))
    x = rng.uniform(-1, 1, size=(5, 2))
    only_mixed = net.fields(x, [(1, 1)])[(1, 1)]
    with_others = net.fields(x, ALL_ORDER4_2D)[(1, 1)]
    np.testing.assert_allclose(only_mixed, with_others, rtol=1e-14, atol=1e-15)


# ---------------------------------------------------------------------------
# Jet arithmetic
# ---------------------------------------------------------------------------


def test_jet_elementary_functions_and_identities() -> None:
    space = TaylorSpace.closure(2, ALL_ORDER4_2D)
    pts = np.array([[0.3, -0.7], [1.1, 0.2]])
    v = Jet.variables(space, pts)
    t, x = v[:, 0], v[:, 1]
    one = (t * x).sin() * (t * x).sin() + (t * x).cos() * (t * x).cos()
    np.testing.assert_allclose(one.coeffs[0], 1.0, rtol=1e-15)
    np.testing.assert_allclose(one.coeffs[1:], 0.0, atol=1e-14)
    # exp(t + 2x): d^(p,q) = 2^q exp(t + 2x)
    e = (t + 2.0 * x).exp()
    for p, q in ALL_ORDER4_2D:
        ref = 2.0**q * np.exp(pts[:, 0] + 2 * pts[:, 1])
        np.testing.assert_allclose(e.derivative((p, q)), ref, rtol=1e-14)
    # tanh(x)'' = -2 tanh sech^2
    th = x.tanh()
    s = np.tanh(pts[:, 1])
    np.testing.assert_allclose(th.derivative((0, 2)), -2 * s * (1 - s**2), rtol=1e-14)
    np.testing.assert_allclose(th.derivative((1, 0)), 0.0, atol=0)
    # arithmetic with scalars, arrays and subtraction from the left
    w = 2.0 - (t / 4.0) * np.array([1.0, 2.0]) + 1.0
    np.testing.assert_allclose(w.derivative((1, 0)), [-0.25, -0.5])
    assert "Jet" in repr(w)
    small = Jet.variables(TaylorSpace.closure(2, [(1, 0)]), pts)
    with pytest.raises(KeyError):
        small.derivative((0, 1))
    with pytest.raises(ValueError, match="different Taylor spaces"):
        _ = t + small[:, 0]
    with pytest.raises(TypeError):
        _ = t / x


def test_taylor_space_closure() -> None:
    space = TaylorSpace.closure(2, [(2, 1)])
    assert set(space.indices) == {(0, 0), (1, 0), (2, 0), (0, 1), (1, 1), (2, 1)}
    assert space.indices[0] == (0, 0)
    assert space.order == 3
    assert space.size == 6
    assert space.unit(0) is not None
    assert TaylorSpace.closure(2, [(2, 0)]).unit(1) is None
    with pytest.raises(ValueError, match="downward closed"):
        TaylorSpace(2, ((0, 0), (1, 1)))


# ---------------------------------------------------------------------------
# Serialization
# ---------------------------------------------------------------------------


def test_npz_roundtrip_and_layout(tmp_path: Path) -> None:
    rng = np.random.default_rng(13)
    base = random_net(rng, (2, 4, 4, 1), "sin")
    net = MLP.from_arrays(
        list(base.weights),
        list(base.biases),
        "sin",
        input_scaling=(base.in_shift, base.in_scale),
        output_transform=([0.5], [2.0]),
        meta={"seed": 13, "note": "roundtrip"},
    )
    path = tmp_path / "net.weights"  # no .npz suffix: written exactly where asked
    net.save_npz(path)
    assert path.exists()
    with np.load(path, allow_pickle=False) as data:
        assert set(data.files) == {
            "W0",
            "b0",
            "W1",
            "b1",
            "W2",
            "b2",
            "activation",
            "in_shift",
            "in_scale",
            "out_shift",
            "out_scale",
            "meta",
        }
        assert data["activation"].shape == ()
        assert data["activation"].dtype.kind == "U"
        assert str(data["activation"][()]) == "sin"
        assert json.loads(str(data["meta"][()])) == {"note": "roundtrip", "seed": 13}
        assert all(data[k].dtype != object for k in data.files)
    loaded = MLP.load_npz(path)
    assert loaded.activation == "sin"
    assert loaded.meta == {"note": "roundtrip", "seed": 13}
    assert loaded.widths == (2, 4, 4, 1)
    x = rng.uniform(-1, 1, size=(9, 2))
    idx = [(0, 0), (1, 1), (0, 3)]
    a, b = net.fields(x, idx), loaded.fields(x, idx)
    for k in idx:
        np.testing.assert_array_equal(a[k], b[k])


def test_load_rejects_incomplete_files(tmp_path: Path) -> None:
    p = tmp_path / "bad.npz"
    np.savez(p, W0=np.ones((2, 2)))
    with pytest.raises(ValueError, match="bias b0"):
        MLP.load_npz(p)
    np.savez(p, b0=np.ones(2))
    with pytest.raises(ValueError, match="no weight arrays"):
        MLP.load_npz(p)
    np.savez(p, W0=np.ones((1, 2)), b0=np.ones(1), activation=np.array("relu"))
    with pytest.raises(ValueError, match="unknown activation"):
        MLP.load_npz(p)


# ---------------------------------------------------------------------------
# Validation
# ---------------------------------------------------------------------------


def test_constructor_validation() -> None:
    w0, w1 = np.ones((3, 2)), np.ones((1, 3))
    with pytest.raises(ValueError, match="as many bias"):
        MLP.from_arrays([w0, w1], [np.zeros(3)])
    with pytest.raises(ValueError, match="entries"):
        MLP.from_arrays([w0, w1], [np.zeros(2), np.zeros(1)])
    with pytest.raises(ValueError, match="expects"):
        MLP.from_arrays([w0, np.ones((1, 4))], [np.zeros(3), np.zeros(1)])
    with pytest.raises(ValueError, match="activation"):
        MLP.from_arrays([w0, w1], [np.zeros(3), np.zeros(1)], "relu")  # type: ignore[arg-type]
    with pytest.raises(ValueError, match="non-finite"):
        MLP.from_arrays([w0 * np.nan, w1], [np.zeros(3), np.zeros(1)])
    with pytest.raises(ValueError, match="nonzero"):
        MLP.from_arrays([w0, w1], [np.zeros(3), np.zeros(1)], input_scaling=(0.0, [1.0, 0.0]))
    with pytest.raises(ValueError, match="both"):
        MLP([w0, w1], [np.zeros(3), np.zeros(1)], out_shift=[0.0])


def test_fields_validation() -> None:
    net = random_net(np.random.default_rng(0), (2, 3, 1))
    x = np.zeros((4, 2))
    with pytest.raises(ValueError, match="2 entries"):
        net.fields(x, [(1,)])
    with pytest.raises(ValueError, match="negative"):
        net.fields(x, [(-1, 1)])
    with pytest.raises(ValueError, match="integers"):
        net.fields(x, [(0.5, 1)])  # type: ignore[list-item]
    with pytest.raises(ValueError, match="MAX_ORDER"):
        net.fields(x, [(MAX_ORDER, 1)])
    with pytest.raises(ValueError, match="shape"):
        net.fields(np.zeros((4, 3)), [(0, 0)])
    with pytest.raises(ValueError, match="non-finite"):
        net.fields(np.full((1, 2), np.inf), [(0, 0)])
    with pytest.raises(ValueError, match="batch_size"):
        net.fields(x, [(0, 0)], batch_size=0)
    assert net.fields(x, []) == {}


# ---------------------------------------------------------------------------
# Named residual fields
# ---------------------------------------------------------------------------


def test_residual_fields_names() -> None:
    rng = np.random.default_rng(14)
    net = random_net(rng, (2, 6, 1))
    x = rng.uniform(-1, 1, size=(8, 2))
    names = ["u", "u_t", "u_x", "u_xx", "u_tx", "u_xt", "u_ttxx"]
    out = residual_fields(net, x, ["t", "x"], names)
    ref = net.fields(x, [(0, 0), (1, 0), (0, 1), (0, 2), (1, 1), (2, 2)])
    assert list(out) == names
    np.testing.assert_array_equal(out["u"], ref[(0, 0)])
    np.testing.assert_array_equal(out["u_t"], ref[(1, 0)])
    np.testing.assert_array_equal(out["u_x"], ref[(0, 1)])
    np.testing.assert_array_equal(out["u_xx"], ref[(0, 2)])
    np.testing.assert_array_equal(out["u_tx"], ref[(1, 1)])
    np.testing.assert_array_equal(out["u_xt"], ref[(1, 1)])
    np.testing.assert_array_equal(out["u_ttxx"], ref[(2, 2)])


def test_residual_fields_multi_output_and_long_axis_names() -> None:
    rng = np.random.default_rng(15)
    net = random_net(rng, (2, 6, 2))
    x = rng.uniform(-1, 1, size=(8, 2))
    out = residual_fields(net, x, ["x1", "x10"], ["v_x10x1", "u_x1x1"], outputs=("u", "v"))
    ref = net.fields(x, [(1, 1), (2, 0)])
    np.testing.assert_array_equal(out["v_x10x1"], ref[(1, 1)][:, 1])
    np.testing.assert_array_equal(out["u_x1x1"], ref[(2, 0)][:, 0])
    assert parse_derivative_name("w_ab", ["a", "b"], ("u", "w")) == (1, (1, 1))


def test_residual_fields_errors() -> None:
    net = random_net(np.random.default_rng(0), (2, 3, 1))
    x = np.zeros((2, 2))
    with pytest.raises(ValueError, match="axis names for a model"):
        residual_fields(net, x, ["t"], ["u"])
    with pytest.raises(ValueError, match="cannot parse"):
        residual_fields(net, x, ["t", "x"], ["u_y"])
    with pytest.raises(ValueError, match="unknown field"):
        residual_fields(net, x, ["t", "x"], ["w_x"])
    with pytest.raises(ValueError, match="empty derivative"):
        residual_fields(net, x, ["t", "x"], ["u_"])
    with pytest.raises(ValueError, match="distinct"):
        residual_fields(net, x, ["t", "t"], ["u"])
    with pytest.raises(ValueError, match="single output"):
        residual_fields(net, x, ["t", "x"], ["v"], outputs=("u", "v"))


# ---------------------------------------------------------------------------
# The shipped demo weights (smoke test of the committed file)
# ---------------------------------------------------------------------------


def test_shipped_demo_weights_load_and_fit_the_data() -> None:
    from demo import scenario
    from demo.model import WEIGHTS_PATH, load_demo_model

    assert WEIGHTS_PATH.is_file()
    net = load_demo_model()
    assert net.widths == (2, 20, 20, 1)
    assert net.activation == "tanh"
    assert {"seed", "adam_steps", "final_losses", "torch_version"} <= set(net.meta)
    x = np.linspace(0.0, 1.0, 201)
    t = np.linspace(0.0, scenario.T_END, 201)
    u0 = net(np.column_stack([np.zeros_like(x), x]))
    assert np.max(np.abs(u0 - scenario.initial_value(x))) < 1e-2
    left = net(np.column_stack([t, np.zeros_like(t)]))
    right = net(np.column_stack([t, np.ones_like(t)]))
    assert np.max(np.abs(left - scenario.LEFT_VALUE)) < 1e-2
    assert np.max(np.abs(right - scenario.RIGHT_VALUE)) < 1e-2
