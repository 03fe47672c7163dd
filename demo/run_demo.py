"""`make demo`: a real certificate for a real trained network, from a running service.

Scenario (invented): a steel strip cooling between two rollers (see demo/scenario.py). The shipped
tanh network (demo/heated_strip_weights.npz, trained by demo/train_heated_strip.py) is the
surrogate. This script

1. starts ``boundsvc serve`` on a free loopback port with an embedded SQLite database,
2. asks the service to classify the problem and for a Gauss-Legendre plan (with the optional
   ``boundary_t`` component, so the service can use its boundary lifting),
3. evaluates the network and its exact derivatives (forward mode, numpy) at the plan's nodes and
   forms the residuals (and ``d/dt (u_model - g)`` at the boundary points),
4. posts them with the regularity bounds, prints the certificate, and
5. stops the service.

Because the scenario has a closed-form solution, the demo also prints the true error, which the
bound must exceed.
"""

from __future__ import annotations

import contextlib
import os
import socket
import subprocess
import sys
import tempfile
import time
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import httpx
import numpy as np

from boundsvc.client.mlp import residual_fields
from demo import scenario
from demo.model import load_demo_model

REPO = Path(__file__).resolve().parent.parent


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return int(s.getsockname()[1])


@contextlib.contextmanager
def running_service(database: Path) -> Iterator[str]:
    """Start ``boundsvc serve`` and stop it cleanly afterwards."""
    port = _free_port()
    env = dict(os.environ, OPENBLAS_NUM_THREADS="1", BOUNDSVC_LOG_LEVEL="warning")
    proc = subprocess.Popen(
        [
            sys.executable,
            "-m",
            "boundsvc.cli",
            "serve",
            "--host",
            "127.0.0.1",
            "--port",
            str(port),
            "--database-url",
            f"sqlite:///{database}",
        ],
        env=env,
        cwd=REPO,
    )
    url = f"http://127.0.0.1:{port}"
    try:
        deadline = time.monotonic() + 60
        while True:
            try:
                if httpx.get(f"{url}/v1/health", timeout=1.0).status_code == 200:
                    break
            except httpx.TransportError:
                pass
            if proc.poll() is not None or time.monotonic() > deadline:
                raise RuntimeError("the service did not start")
            time.sleep(0.2)
        yield url
    finally:
        proc.terminate()
        try:
            proc.wait(timeout=15)
        except subprocess.TimeoutExpired:  # pragma: no cover
            proc.kill()


def residuals_of_network(plan: dict[str, Any]) -> tuple[dict[str, list[float]], float]:
    """Residuals of the demo network at the plan's points, and its boundary sup |u_x|."""
    model = load_demo_model()
    comps = {c["name"]: c for c in plan["components"]}
    k = scenario.K
    interior = np.asarray(comps["interior"]["points"])
    f = residual_fields(model, interior, axes=("t", "x"), names=("u_t", "u_xx"))
    r_int = f["u_t"] - k * f["u_xx"]
    initial_x = np.asarray(comps["initial"]["points"])[:, 0]
    pts0 = np.stack([np.zeros_like(initial_x), initial_x], axis=1)
    u0 = residual_fields(model, pts0, axes=("t", "x"), names=("u",))["u"]
    r_init = u0 - scenario.initial_value(initial_x)
    boundary = np.asarray(comps["boundary"]["points"])
    fb = residual_fields(model, boundary, axes=("t", "x"), names=("u", "u_x"))
    r_bnd = fb["u"] - scenario.boundary_value(boundary[:, 0], boundary[:, 1])
    # sup |u_model_x| on the boundary: sampled densely, with a 10 % margin (an assumption the
    # certificate records as such: this value is asserted by the client)
    tt = np.linspace(0.0, scenario.T_END, 401)
    edge = np.concatenate(
        [np.stack([tt, np.zeros_like(tt)], 1), np.stack([tt, np.ones_like(tt)], 1)]
    )
    g_model = float(np.max(np.abs(residual_fields(model, edge, ("t", "x"), ("u_x",))["u_x"])))
    out = {"interior": r_int.tolist(), "initial": r_init.tolist(), "boundary": r_bnd.tolist()}
    if "boundary_t" in comps:
        # the roller temperatures g do not change in time, so d/dt (u_model - g) = u_model_t:
        # the component of the boundary lifting (docs/theory/advection-diffusion.md)
        pts_t = np.asarray(comps["boundary_t"]["points"])
        out["boundary_t"] = residual_fields(model, pts_t, ("t", "x"), ("u_t",))["u_t"].tolist()
    return out, 1.1 * g_model


def true_error(profile_t: list[float]) -> tuple[float, float, list[float]]:
    """The network's true error from the exact solution (fine 200 x 200 Gauss rule)."""
    model = load_demo_model()
    z, w = np.polynomial.legendre.leggauss(200)
    xs, wx = 0.5 * (z + 1), 0.5 * w
    ts, wt = 0.25 * (z + 1), 0.25 * w

    def at(tk: float) -> float:
        pts = np.stack([np.full_like(xs, tk), xs], 1)
        e = residual_fields(model, pts, ("t", "x"), ("u",))["u"] - scenario.exact_solution(
            pts[:, 0], xs
        )
        return float(np.sqrt(np.dot(wx, e * e)))

    tt, xx = np.meshgrid(ts, xs, indexing="ij")
    pts = np.stack([tt.ravel(), xx.ravel()], 1)
    e = residual_fields(model, pts, ("t", "x"), ("u",))["u"] - scenario.exact_solution(
        pts[:, 0], pts[:, 1]
    )
    st = float(np.sqrt(np.einsum("i,j,ij->", wt, wx, (e * e).reshape(200, 200))))
    return st, at(scenario.T_END), [at(tk) for tk in profile_t]


def _fmt(v: float | None) -> str:
    return "n/a" if v is None else f"{v:.4g}"


def main() -> int:
    print("boundsvc demo: a steel strip cooling between two rollers (invented scenario)")
    with (
        tempfile.TemporaryDirectory() as tmp,
        running_service(Path(tmp) / "demo.sqlite3") as url,
        httpx.Client(base_url=url, timeout=60.0) as http,
    ):
        prob = http.post("/v1/problems", json={"problem": scenario.PROBLEM})
        prob.raise_for_status()
        pinfo = prob.json()
        print(f"\nproblem {pinfo['problem_id']}: family {pinfo['family']}")
        print(f"  needs regularity: {', '.join(pinfo['required_regularity'])}")
        plan = http.post(
            "/v1/plans",
            json={
                "problem_id": pinfo["problem_id"],
                "points": {"t": 32, "x": 32},
                "optional_components": ["boundary_t"],
            },
        )
        plan.raise_for_status()
        plan_body = plan.json()
        sizes = ", ".join(f"{c['name']} {c['size']}" for c in plan_body["components"])
        print(f"plan {plan_body['plan_id']} (gauss-legendre): {sizes}")
        residuals, g_model = residuals_of_network(plan_body)
        # |u_x| of the exact solution (from its sine series): time-varying bound
        regularity = {
            "sup_abs_u_x": "0.8 + 0.6*pi*exp(-0.4*pi^2*t) + 0.45*pi*exp(-3.6*pi^2*t)",
            "sup_abs_model_u_x": g_model,
        }
        cert = http.post(
            "/v1/certificates",
            json={
                "problem_id": pinfo["problem_id"],
                "plan_id": plan_body["plan_id"],
                "regularity": regularity,
                "residuals": residuals,
                "model": {"name": "steel-strip-cooling", "version": "demo-1"},
            },
        )
        if cert.status_code != 201:
            print(cert.text)
            return 1
        c = cert.json()
        again = http.get(f"/v1/certificates/{c['id']}")
        again.raise_for_status()
    print_certificate(c)
    st, fin, prof = true_error(c["time_profile"]["t"])
    print("\ntrue error (the scenario has a closed form, so we can check):")
    print(
        f"  space-time {st:.4g}  <= bound {_fmt(c['bound']['l2_space_time'])}"
        f"   (effectivity {c['bound']['l2_space_time'] / st:.3g})"
    )
    print(f"  final time {fin:.4g}  <= bound {_fmt(c['bound']['l2_final_time'])}")
    ok = all(
        b is not None and b >= e
        for b, e in zip(c["time_profile"]["l2_error_bound"], prof, strict=True)
    )
    print(f"  bound above the true error at every time of the profile: {'yes' if ok else 'NO'}")
    print(
        "\nCaution: a bound holds only under its stated hypotheses; safety-relevant use needs "
        "independent verification and your organisation's own V&V practice."
    )
    return 0 if ok and c["status"] == "valid" else 1


def print_certificate(c: dict[str, Any]) -> None:
    b = c["bound"]
    print(f"\ncertificate {c['id']}  status: {c['status']}  rigor: {c['rigor']}")
    print(f"  L2 error bound over space-time: {_fmt(b['l2_space_time'])}")
    print(f"  L2 error bound at final time:   {_fmt(b['l2_final_time'])}")
    prof = c["time_profile"]
    picks = np.linspace(0, len(prof["t"]) - 1, 6).astype(int)
    print(
        "  time profile: "
        + "  ".join(f"t={prof['t'][i]:.3g}: {_fmt(prof['l2_error_bound'][i])}" for i in picks)
    )
    print("  terms (contribution to the squared final-time bound):")
    for term in c["terms"]:
        share = term.get("share_final_time")
        print(
            f"    {term['name']:<38} {_fmt(term['value']):>10}  "
            + (f"share {100 * share:5.1f}%" if share is not None else "(a norm added to the bound)")
            + f"  rigor {term['rigor']}"
        )
    print("  constants:")
    for const in c["constants"]:
        print(f"    {const['symbol']:<10} = {const['expression']}   [{const['rigor']}]")
    if c["warnings"]:
        print("  warnings:")
        for w in c["warnings"]:
            print(f"    - {w}")


if __name__ == "__main__":
    sys.exit(main())
