"""A small subset of ``python -m validation.run`` for ``make test`` (no training, < 20 s).

The cached PINN of the heat problem with inhomogeneous Dirichlet data (exact solution by
separation of variables, Strauss, PDE: An Introduction, 2nd ed. 2008, ch. 4) is certified
through the in-process app (build_app, temporary SQLite store, httpx ASGI transport) with the
residuals of the network at the plan's Gauss-Legendre nodes; the bound must be above the true
error computed from the exact solution by an independent 200 x 200 Gauss-Legendre rule. The
same for one network of each further family, among them the 2-D Navier-Stokes network of the
Taylor-Green vortex (velocity error only).
"""

from __future__ import annotations

from collections.abc import Iterator
from pathlib import Path
from typing import Any

import pytest

from boundsvc.api import build_app
from boundsvc.settings import Settings
from boundsvc.store import open_store
from tests.inprocess import InProcessClient
from validation.certify import certify_flow, certify_network
from validation.models import load_model, weights_path
from validation.problems import FlowProblem, heat_dirichlet, taylor_green
from validation.problems.elliptic import poisson_square_mode, wall_profile
from validation.problems.wave import travelling_pulse
from validation.service import RawApi


@pytest.fixture
def api(tmp_path: Path) -> Iterator[RawApi]:
    store = open_store(f"sqlite:///{tmp_path}/validation.sqlite3")
    client = InProcessClient(build_app(Settings(database_url="unused", host="127.0.0.1"), store))
    yield RawApi(client)
    client.close()
    store.dispose()


def test_cached_heat_network_bound_above_true_error(api: RawApi) -> None:
    problem = heat_dirichlet()
    assert weights_path(problem).exists(), "cached weights are part of the repository"
    model = load_model(problem)
    outcome = certify_network(api, problem, model)
    assert outcome.failures == []
    assert outcome.status == "valid"
    assert outcome.certificate["family"] == "linear-advection-diffusion-reaction"
    assert outcome.true_space_time is not None and outcome.true_final_time is not None
    assert outcome.bound("l2_space_time") >= outcome.true_space_time  # type: ignore[operator]
    assert outcome.bound("l2_final_time") >= outcome.true_final_time  # type: ignore[operator]
    for b, e in zip(
        outcome.certificate["time_profile"]["l2_error_bound"], outcome.true_profile, strict=True
    ):
        assert b is not None and e is not None and b >= e
    # a trained network, not a perturbed exact solution: the error is small but not zero
    assert 0.0 < outcome.true_space_time < 1e-2


def test_hard_constrained_boundary_residual_is_exactly_zero(api: RawApi) -> None:
    problem = heat_dirichlet(hard=True)
    model = load_model(problem)
    outcome = certify_network(api, problem, model)
    assert outcome.failures == []
    assert not any("boundary" in t["name"] and t["value"] for t in outcome.certificate["terms"])


def test_cached_wave_network_bound_above_true_error(api: RawApi) -> None:
    # d'Alembert's travelling wave u = F(x - c t) (Strauss, PDE: An Introduction, 2nd ed. 2008,
    # sec. 2.1, eq. (8), from memory), energy estimate of docs/theory/wave.md
    problem = travelling_pulse()
    assert weights_path(problem).exists(), "cached weights are part of the repository"
    outcome = certify_network(api, problem, load_model(problem))
    assert outcome.failures == []
    assert outcome.status == "valid"
    assert outcome.certificate["family"] == "wave"
    assert outcome.true_space_time is not None and outcome.true_final_time is not None
    assert outcome.bound("l2_space_time") >= outcome.true_space_time  # type: ignore[operator]
    assert outcome.bound("l2_final_time") >= outcome.true_final_time  # type: ignore[operator]
    assert 0.0 < outcome.true_space_time < 1e-2


@pytest.mark.parametrize("make", [poisson_square_mode, wall_profile], ids=lambda f: f.__name__)
def test_cached_elliptic_network_bound_above_true_error(api: RawApi, make: Any) -> None:
    # poisson_square_mode: u = sin(pi x) sin(pi y), the first Dirichlet mode of the unit square
    # by separation of variables (Evans, PDE, 2nd ed. 2010, sec. 4.1, from memory);
    # wall_profile: manufactured u = exp(x) (Roache, J. Fluids Eng. 124 (2002) 4-10); steady
    # duality bound of docs/theory/elliptic.md, only l2_space is bounded
    problem = make()
    assert weights_path(problem).exists(), "cached weights are part of the repository"
    outcome = certify_network(api, problem, load_model(problem))
    assert outcome.failures == []
    assert outcome.status == "valid"
    assert outcome.certificate["family"] == "linear-elliptic"
    assert outcome.bound("l2_space_time") is None and outcome.bound("l2_final_time") is None
    assert outcome.true_space is not None
    assert outcome.bound("l2_space") >= outcome.true_space  # type: ignore[operator]
    assert 0.0 < outcome.true_space < 1e-2


def test_cached_navier_stokes_network_bound_above_true_error(api: RawApi) -> None:
    # the 2-D Taylor-Green vortex (Taylor & Green, Proc. R. Soc. Lond. A 158 (1937) 499-521,
    # the form of validation/closed_form/navier_stokes.py, from memory), periodic box; the
    # velocity energy estimate of docs/theory/navier-stokes.md bounds the velocity error only.
    # Coarser sup grid and true-error rules than the suite's, to stay fast (the velocity error
    # is smooth: 20 x 48 x 48 and 100 x 100 Gauss-Legendre nodes integrate it to ~1e-10).
    problem = taylor_green()
    assert isinstance(problem, FlowProblem)
    assert weights_path(problem).exists(), "cached weights are part of the repository"
    outcome = certify_flow(
        api, problem, load_model(problem), grid=(21, 51), n_st=(20, 48, 48), n_s=100
    )
    assert outcome.failures == []
    assert outcome.status == "valid"
    assert outcome.certificate["family"] == "incompressible-navier-stokes"
    assert outcome.true_space_time is not None and outcome.true_final_time is not None
    assert outcome.bound("l2_space_time") >= outcome.true_space_time  # type: ignore[operator]
    assert outcome.bound("l2_final_time") >= outcome.true_final_time  # type: ignore[operator]
    for b, e in zip(
        outcome.certificate["time_profile"]["l2_error_bound"], outcome.true_profile, strict=True
    ):
        assert b is not None and e is not None and b >= e
    # periodic faces: the mismatch terms of both axes are in the certificate
    names = {t["name"] for t in outcome.certificate["terms"]}
    assert {"periodicity mismatch along x", "periodicity mismatch along y"} <= names
    assert 0.0 < outcome.true_space_time < 0.5
