"""Run the validation suite against a running boundsvc and write ``docs/validation.md``.

    .venv/bin/python -m validation.run             # cached networks, fresh service, report
    .venv/bin/python -m validation.run --retrain   # retrain every network first (~25 min CPU)
    .venv/bin/python -m validation.run --url http://127.0.0.1:8000   # use a running service

Exit status 1 (and a loud message) if any bound is below the true error, a certificate has
``invalid-hypotheses`` or a suite problem is not certified ``valid``; 2 if weights are missing.
"""

from __future__ import annotations

import argparse
import math
import sys
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from scipy import stats

from validation import problems as vp
from validation.certify import Outcome, certify_network, exact_norm
from validation.models import load_model, weights_path
from validation.service import Api, ServiceError, connect, running_service


@dataclass
class Sweep:
    """Certificates along one parameter, and the bound-error correlation."""

    name: str
    parameter: str
    values: list[float]
    outcomes: list[Outcome]
    correlation: dict[str, Any] | None = None
    correlation_source: str = ""
    extra: list[Outcome] = field(default_factory=list)  # constant-sup variant (not correlated)
    beyond: list[tuple[float, Outcome | str]] = field(default_factory=list)
    norms: list[float | None] = field(default_factory=list)


@dataclass
class Results:
    suite: list[Outcome]
    variants: list[Outcome]
    hard: list[tuple[Outcome, Outcome]]
    sweeps: list[Sweep]
    service: str
    # (flux estimate, suite certificate) for the problems offered the boundary lifting
    lifting: list[tuple[Outcome, Outcome]] = field(default_factory=list)
    # steady problems (linear elliptic): only ``l2_space`` is bounded
    steady: list[Outcome] = field(default_factory=list)
    # (one Gauss-Legendre panel, suite certificate) for the problems whose plan has panels
    panels: list[tuple[Outcome, Outcome]] = field(default_factory=list)

    def all(self) -> list[Outcome]:
        out = [*self.suite, *self.steady, *self.variants, *(h for _, h in self.hard)]
        out += [before for before, _ in self.lifting]
        out += [before for before, _ in self.panels]
        for s in self.sweeps:
            out += [*s.outcomes, *s.extra]
            out += [o for _, o in s.beyond if isinstance(o, Outcome)]
        return out

    def failures(self) -> list[str]:
        return [f"{o.weights_key} [{o.variant}]: {f}" for o in self.all() for f in o.failures]


def _log(msg: str) -> None:
    print(msg, flush=True)


def _one(api: Api, problem: vp.Problem, **kw: Any) -> Outcome:
    o = certify_network(api, problem, load_model(problem, kw.get("weights_key")), **kw)
    eff = o.effectivity()
    steady = o.problem.is_steady
    true = o.true_space if steady else o.true_space_time
    _log(
        f"  {o.weights_key:<26} {o.variant:<16} {o.status:<8} "
        f"bound {o.bound('l2_space' if steady else 'l2_space_time') or float('nan'):.3e}  "
        f"true {true or float('nan'):.3e}  "
        f"eff {eff if eff is not None else float('nan'):8.2f}"
        + ("" if o.ok else "   <-- " + "; ".join(o.failures))
    )
    return o


def correlate(api: Api, sweep: Sweep) -> None:
    """Pearson and Spearman of bound vs true error, by ``POST /v1/studies`` (else scipy)."""
    rows = [o for o in sweep.outcomes if o.bound("l2_space_time") and o.true_space_time]
    ids = [o.certificate["id"] for o in rows]
    body = {
        "title": f"validation sweep: {sweep.name}",
        "certificate_ids": ids,
        "measured_errors": {o.certificate["id"]: o.true_space_time for o in rows},
        "swept_parameter": {
            "name": sweep.parameter,
            "values": {
                o.certificate["id"]: v
                for o, v in zip(sweep.outcomes, sweep.values, strict=True)
                if o in rows
            },
        },
        "bound": "l2_space_time",
    }
    study = None
    try:
        study = api.study(body)
    except ServiceError as exc:
        _log(f"  studies endpoint refused the study ({exc}); falling back to scipy")
    if study is not None:
        corr = study.get("correlation") or {}
        sweep.correlation = {
            "pearson_r": (corr.get("pearson") or {}).get("r"),
            "pearson_ci": (corr.get("pearson") or {}).get("ci"),
            "spearman_rho": (corr.get("spearman") or {}).get("rho"),
            "spearman_ci": (corr.get("spearman") or {}).get("ci"),
            "median_effectivity": (study.get("effectivity") or {}).get("median"),
            "trend": study.get("parameter_trend"),
            "study_id": study.get("id"),
            "n": len(ids),
        }
        sweep.correlation_source = "POST /v1/studies (Pearson on log10 values, Spearman on ranks)"
        return
    b = np.log10([o.bound("l2_space_time") or math.nan for o in rows])
    e = np.log10([o.true_space_time or math.nan for o in rows])
    sweep.correlation = {
        "pearson_r": float(stats.pearsonr(b, e).statistic) if len(rows) >= 3 else None,
        "spearman_rho": float(stats.spearmanr(b, e).statistic) if len(rows) >= 3 else None,
        "n": len(ids),
    }
    sweep.correlation_source = "scipy.stats (no studies endpoint): Pearson on log10, Spearman"


def run_sweep(
    api: Api,
    name: str,
    parameter: str,
    values: Sequence[float],
    problems: Sequence[vp.Problem],
    *,
    constant_variant: bool = False,
    t_limit: float = math.inf,
) -> Sweep:
    _log(f"sweep: {name}")
    outs = [_one(api, p, t_limit=t_limit) for p in problems]
    sweep = Sweep(name, parameter, list(values), outs)
    sweep.norms = [exact_norm(p, t_limit) for p in problems]
    if constant_variant:
        sweep.extra = [_one(api, p, variant="constant sups", t_limit=t_limit) for p in problems]
    correlate(api, sweep)
    return sweep


def beyond(api: Api, sweep: Sweep, problem: vp.Problem, weights_key: str, t_limit: float) -> None:
    """Certify past the blow-up with the last network: the service must report vacuity."""
    _log(f"  beyond the blow-up: T = {problem.time[1]:g} (network {weights_key})")
    try:
        o = _one(api, problem, weights_key=weights_key, t_limit=t_limit, expect_valid=False)
        o.variant = f"beyond the blow-up, T = {problem.time[1]:g}"
        if o.status == "valid":
            o.failures.append("a certificate past the blow-up time should not be valid")
        sweep.beyond.append((problem.time[1], o))
    except ServiceError as exc:
        sweep.beyond.append((problem.time[1], f"refused by the service: {exc}"))
        _log(f"    refused: {exc}")


def run_all(api: Api, service: str) -> Results:
    _log("suite:")
    suite = [_one(api, p) for p in vp.suite()]
    _log("steady problems (l2_space only):")
    steady = [_one(api, p) for p in vp.steady()]
    _log("tightening variants (same networks, other regularity):")
    variants = [_one(api, p, variant=v) for p in vp.suite() for v in p.variants]
    _log("boundary lifting off (the flux estimate alone), for the before/after comparison:")
    lifting = []
    for o in suite:
        if o.lifted:
            before = _one(api, o.problem, lifting=False)
            before.variant = "no lifting"
            lifting.append((before, o))
    _log("one Gauss-Legendre panel instead of the problem's panels (ODE smoothing width):")
    panels = []
    for o in suite:
        if o.problem.panels:
            before = _one(api, o.problem, panels={})
            before.variant = "one panel"
            panels.append((before, o))
    _log("hard-constrained boundary conditions:")
    soft = {o.problem.key: o for o in suite}
    hard = [(soft[k], _one(api, hp)) for k, hp in vp.hard_constrained().items()]
    sweeps = [
        run_sweep(
            api,
            "network width (heat, Adam 2000 steps)",
            "width",
            [float(w) for w in vp.WIDTHS],
            vp.width_sweep(),
        ),
        run_sweep(
            api,
            "training length (heat, width 16, Adam only)",
            "adam_steps",
            [float(s) for s in vp.STEPS],
            vp.steps_sweep(),
        ),
    ]
    bsweep = run_sweep(
        api,
        f"final time towards the Burgers blow-up t* = {vp.T_STAR:g}",
        "T",
        list(vp.BURGERS_T),
        vp.burgers_sweep(),
        constant_variant=True,
        t_limit=vp.T_STAR,
    )
    beyond(
        api,
        bsweep,
        vp.burgers_compressive(
            vp.BURGERS_BEYOND, t_star=vp.T_STAR, key=f"burgers-compressive-T{vp.BURGERS_BEYOND:g}"
        ),
        vp.burgers_sweep()[-1].key,
        vp.T_STAR,
    )
    tsweep = run_sweep(
        api,
        "final time towards the Riccati blow-up pi/2",
        "T",
        list(vp.TAN_T),
        vp.tan_sweep(),
        constant_variant=True,
        t_limit=math.pi / 2,
    )
    beyond(
        api,
        tsweep,
        vp.riccati_tan(vp.TAN_BEYOND, key=f"riccati-tan-T{vp.TAN_BEYOND:g}"),
        vp.tan_sweep()[-1].key,
        math.pi / 2,
    )
    sweeps += [bsweep, tsweep]
    return Results(suite, variants, hard, sweeps, service, lifting, steady, panels)


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description="validate boundsvc on trained PINNs")
    parser.add_argument("--retrain", action="store_true", help="retrain every network first")
    parser.add_argument("--url", help="use this running service instead of starting one")
    parser.add_argument("--no-docs", action="store_true", help="do not write docs/validation*")
    args = parser.parse_args(argv)
    if args.retrain:
        from validation.train import train_missing

        train_missing(force=True)
    missing = [p.key for p in vp.all_trainable() if not weights_path(p).exists()]
    if missing:
        print(
            f"missing weights: {', '.join(missing)}; run with --retrain "
            "(or python -m validation.train)",
            file=sys.stderr,
        )
        return 2
    if args.url:
        results = run_all(connect(args.url), args.url)
    else:
        with running_service() as url:
            _log(f"service: boundsvc serve on {url} (temporary SQLite database)")
            results = run_all(connect(url), "boundsvc serve (subprocess, temporary SQLite)")
    if not args.no_docs:
        from validation.report import write_report

        path = write_report(results)
        _log(f"wrote {path}")
    failures = results.failures()
    if failures:
        print("\n" + "!" * 78, file=sys.stderr)
        print("VALIDATION FAILED:", file=sys.stderr)
        for f in failures:
            print("  " + f, file=sys.stderr)
        print("!" * 78, file=sys.stderr)
        return 1
    _log(f"validation passed: {len(results.all())} certificates, every bound >= true error")
    return 0


if __name__ == "__main__":
    sys.exit(main())
