"""Write ``docs/validation.md`` and its plots (``docs/validation/*.png``) from the results."""

from __future__ import annotations

import math
import re
import statistics
from collections import defaultdict
from collections.abc import Iterable, Sequence
from pathlib import Path
from typing import TYPE_CHECKING, Any

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt

from validation.certify import Outcome

if TYPE_CHECKING:
    from validation.run import Results, Sweep

DOCS = Path(__file__).resolve().parent.parent / "docs"
PLOTS = DOCS / "validation"
TARGETS = {
    "linear-advection-diffusion-reaction": (10.0, "linear parabolic"),
    "semilinear-parabolic": (100.0, "nonlinear"),
    "scalar-conservation-law": (100.0, "nonlinear"),
    "ode-system": (100.0, "nonlinear ODE systems (the oscillator is linear)"),
    # the issue sets no target for hyperbolic families; the nonlinear one is shown
    "wave": (100.0, "linear hyperbolic: no target set, the nonlinear one shown"),
    # steady, only l2_space: the median is of that effectivity (no final time)
    "linear-elliptic": (10.0, "linear elliptic"),
    # velocity error only (the pressure error is not bounded)
    "incompressible-navier-stokes": (100.0, "nonlinear"),
}
NS_FAMILY = "incompressible-navier-stokes"


def _f(v: float | None, spec: str = ".3g") -> str:
    if v is None or (isinstance(v, float) and not math.isfinite(v)):
        return "n/a"
    return format(v, spec)


def _terms(o: Outcome) -> list[dict[str, Any]]:
    return list(o.certificate.get("terms") or [])


def dominant(o: Outcome) -> str:
    """The term with the largest share of the squared final-time bound."""
    terms = [t for t in _terms(o) if t.get("share_final_time") is not None]
    if not terms:
        return "n/a"
    t = max(terms, key=lambda t: t["share_final_time"])
    return f"{t['name']} ({100 * t['share_final_time']:.0f} %)"


def _share(o: Outcome, word: str) -> float:
    return sum(t.get("share_final_time") or 0.0 for t in _terms(o) if word in t["name"])


# -- plots ---------------------------------------------------------------------------
def _floats(values: Iterable[float | None]) -> list[float]:
    """Plot values with the missing ones as NaN (matplotlib leaves a gap)."""
    return [math.nan if v is None else float(v) for v in values]


def sweep_plot(sweep: Sweep, path: Path) -> None:
    fig, ax = plt.subplots(figsize=(6.4, 4.2), dpi=110)
    x = sweep.values
    for which, true_attr, style, label in (
        ("l2_space_time", "true_space_time", "o-", "space-time"),
        ("l2_final_time", "true_final_time", "s-", "final time"),
    ):
        ax.plot(x, _floats(o.bound(which) for o in sweep.outcomes), style, label=f"bound, {label}")
        ax.plot(
            x,
            _floats(getattr(o, true_attr) for o in sweep.outcomes),
            style.replace("-", "--"),
            mfc="none",
            label=f"true error, {label}",
        )
    if sweep.extra:
        ax.plot(
            x,
            _floats(o.bound("l2_space_time") for o in sweep.extra),
            "^:",
            label="bound, space-time, constant sups",
        )
    ax.set_yscale("log")
    if sweep.parameter in ("width", "adam_steps"):
        ax.set_xscale("log")
    ax.set_xlabel(sweep.parameter)
    ax.set_ylabel("L2 error")
    ax.set_title(sweep.name, fontsize=9)
    ax.grid(True, which="both", alpha=0.3)
    ax.legend(fontsize=7)
    fig.tight_layout()
    fig.savefig(path)
    plt.close(fig)


def effectivity_plot(results: Results, path: Path) -> None:
    rows = [(o.problem.key, o.effectivity(), o.effectivity("l2_final_time")) for o in results.suite]
    rows += [
        (h.problem.key, h.effectivity(), h.effectivity("l2_final_time")) for _, h in results.hard
    ]
    fig, ax = plt.subplots(figsize=(7.5, 4.2), dpi=110)
    idx = range(len(rows))
    ax.bar([i - 0.2 for i in idx], [r[1] or 0 for r in rows], 0.4, label="space-time")
    ax.bar([i + 0.2 for i in idx], [r[2] or 0 for r in rows], 0.4, label="final time")
    ax.axhline(10, color="g", ls="--", lw=0.8, label="target 10 (linear parabolic)")
    ax.axhline(100, color="r", ls="--", lw=0.8, label="target 100 (nonlinear)")
    ax.axhline(1, color="k", lw=0.8)
    ax.set_yscale("log")
    ax.set_xticks(list(idx), [r[0] for r in rows], rotation=60, ha="right", fontsize=7)
    ax.set_ylabel("effectivity = bound / true error")
    ax.legend(fontsize=7)
    ax.grid(True, axis="y", which="both", alpha=0.3)
    fig.tight_layout()
    fig.savefig(path)
    plt.close(fig)


# -- markdown ---------------------------------------------------------------------------


def _table(header: Sequence[str], rows: Sequence[Sequence[str]]) -> list[str]:
    out = ["| " + " | ".join(header) + " |", "|" + "---|" * len(header)]
    out += ["| " + " | ".join(r) + " |" for r in rows]
    return out


def _row(o: Outcome) -> list[str]:
    return [
        f"`{o.weights_key}`",
        _f(o.true_space_time),
        _f(o.bound("l2_space_time")),
        _f(o.effectivity(), ".1f"),
        _f(o.true_final_time),
        _f(o.bound("l2_final_time")),
        _f(o.effectivity("l2_final_time"), ".1f"),
        o.status,
        dominant(o),
    ]


MAIN_HEADER = [
    "network",
    "true ST",
    "bound ST",
    "eff ST",
    "true T",
    "bound T",
    "eff T",
    "status",
    "dominant term (share of bound^2 at T)",
]


def _detail(o: Outcome) -> list[str]:
    p, c, m = o.problem, o.certificate, o.meta
    lines = [f"### `{p.key}`: {p.title}", ""]
    lines.append(f"- family `{c['family']}`; closed form: {p.source}")
    where = (
        ", ".join(f"{a} in {v}" for a, v in p.problem["space"].items())
        if p.is_steady
        else f"time {p.problem['time']}"
        + "".join(f", {a} in {v}" for a, v in (p.problem.get("space") or {}).items())
    )
    lines.append(
        f"- problem: `{p.problem['equation']}`, {where}"
        + (f", parameters {p.problem.get('parameters')}" if p.problem.get("parameters") else "")
    )
    arch = "-".join(str(v) for v in m.get("architecture", []))
    lines.append(
        f"- network {arch} tanh, float64, seed {m.get('seed')}, Adam {m.get('adam_steps')} + "
        f"L-BFGS {m.get('lbfgs_max_iter')} (max iter), {m.get('train_seconds')} s; final "
        "losses "
        + ", ".join(f"{k} {v:.2e}" for k, v in (m.get("final_losses") or {}).items())
        + ("; hard BC: " + str(m.get("hard_bc_lift")) if m.get("hard_bc") else "")
    )
    plan = ", ".join(f"{k} {v}" for k, v in p.points.items())
    if p.panels:
        plan += " (panels " + ", ".join(f"{k} {v}" for k, v in p.panels.items()) + ")"
    lines.append(
        f"- plan: Gauss-Legendre, {plan} nodes; certificate `{c['id']}`, "
        f"overall rigor `{c.get('rigor')}`"
    )
    if p.notes:
        lines.append(f"- note: {p.notes}")
    lines.append("- regularity sent:")
    for k, v in o.regularity.items():
        lines.append(f"  - `{k}` = `{v}`: {o.notes.get(k, '')}")
    lines.append("- terms (contribution to the squared final-time bound):")
    for t in _terms(o):
        lines.append(
            f"  - {t['name']}: {_f(t['value'])} (share "
            f"{_f(100 * (t.get('share_final_time') or 0), '.1f')} % at T, "
            f"{_f(100 * (t.get('share_space_time') or 0), '.1f')} % space-time), "
            f"rigor `{t['rigor']}`"
        )
    consts = [f"`{k['symbol']}` [{k.get('rigor')}]" for k in c.get("constants") or []]
    if consts:
        lines.append("- constants: " + ", ".join(consts))
    for w in c.get("warnings") or []:
        lines.append(f"- warning: {w}")
    lines.append("")
    return lines


def _steady_dominant(o: Outcome) -> str:
    """The term with the largest contribution to the steady bound (terms add linearly)."""
    terms = [t for t in _terms(o) if isinstance(t.get("value"), int | float)]
    total = sum(float(t["value"]) for t in terms)
    if not terms or total <= 0:
        return "n/a"
    t = max(terms, key=lambda t: float(t["value"]))
    return f"{t['name']} ({100 * float(t['value']) / total:.0f} %)"


def _steady_section(results: Results) -> list[str]:
    """The steady table: ``l2_space`` only (no time, no profile)."""
    rows = [
        [
            f"`{o.weights_key}`",
            f"`{o.problem.problem['equation']}`",
            _f(o.true_space),
            _f(o.bound("l2_space")),
            _f(o.effectivity("l2_space"), ".1f"),
            o.status,
            _steady_dominant(o),
        ]
        for o in results.steady
    ]
    return [
        "### Steady problems (linear elliptic): `l2_space` only",
        "",
        "No time axis: the certificate bounds the L2 error in space only (interior and "
        "boundary residuals, docs/theory/elliptic.md); the true error is by an independent "
        "tensor Gauss-Legendre rule in space (400 nodes in 1-D, 200 x 200 in 2-D). These rows "
        "are not in the plot above (it shows space-time and final-time effectivities).",
        "",
        *_table(
            ["network", "equation", "true L2", "bound L2", "eff L2", "status", "largest term"],
            rows,
        ),
    ]


def family_medians(results: Results) -> list[list[str]]:
    by: dict[str, list[Outcome]] = defaultdict(list)
    for o in [*results.suite, *results.steady]:
        by[o.problem.family].append(o)
    rows = []
    for fam, outs in by.items():
        st = [e for e in (o.effectivity() for o in outs) if e is not None]
        ft = [e for e in (o.effectivity("l2_final_time") for o in outs) if e is not None]
        target, kind = TARGETS.get(fam, (100.0, "nonlinear"))
        med = statistics.median(st) if st else math.nan
        rows.append(
            [
                f"`{fam}`",
                str(len(outs)),
                _f(med, ".1f"),
                _f(statistics.median(ft) if ft else None, ".1f"),
                f"{target:g} ({kind})",
                "met" if med <= target else "**missed**",
            ]
        )
    return rows


def _sweep_section(s: Sweep, png: str) -> list[str]:
    lines = [f"### {s.name}", "", f"![{s.name}](validation/{png})", ""]
    header = [
        s.parameter,
        "true ST",
        "bound ST",
        "eff ST",
        "true T",
        "bound T",
        "status",
        "bound ST / norm(u)",
    ]
    if s.extra:
        header += ["bound ST, constant sups", "eff, constant sups"]
    rows = []
    for i, (v, o) in enumerate(zip(s.values, s.outcomes, strict=True)):
        norm = s.norms[i] if i < len(s.norms) else None
        b = o.bound("l2_space_time")
        row = [
            f"{v:g}",
            _f(o.true_space_time),
            _f(b),
            _f(o.effectivity(), ".1f"),
            _f(o.true_final_time),
            _f(o.bound("l2_final_time")),
            o.status,
            _f(b / norm if b and norm else None),
        ]
        if s.extra:
            e = s.extra[i]
            flag = "" if e.status == "valid" else f" ({e.status})"
            row += [_f(e.bound("l2_space_time")) + flag, _f(e.effectivity(), ".3g")]
        rows.append(row)
    lines += _table(header, rows)
    lines.append("")
    c = s.correlation or {}
    lines.append(
        f"Correlation of bound and true error (space-time, n = {c.get('n')}): Pearson r = "
        f"{_f(c.get('pearson_r'))} (95 % CI {_ci(c.get('pearson_ci'))}), Spearman rho = "
        f"{_f(c.get('spearman_rho'))} (CI {_ci(c.get('spearman_ci'))}); computed by "
        f"{s.correlation_source}"
        + (f", study `{c['study_id']}`" if c.get("study_id") else "")
        + (
            f"; median effectivity {_f(c.get('median_effectivity'), '.1f')}"
            if c.get("median_effectivity")
            else ""
        )
        + "."
    )
    trend = c.get("trend") or {}
    if trend:
        lines.append(
            f"Trend along `{s.parameter}`: bound {trend.get('bound')}, true error "
            f"{trend.get('measured_error')}."
        )
    for t_end, past in s.beyond:
        if isinstance(past, Outcome):
            c2 = past.certificate
            last = [b for b in c2["time_profile"]["l2_error_bound"] if b is not None]
            lines.append(
                f"- Beyond the blow-up, T = {t_end:g} (network of the last sweep point): status "
                f"`{c2['status']}`, `vacuous_from` = {_f(c2.get('vacuous_from'), '.6g')}, last "
                f"finite profile bound {_f(last[-1] if last else None)}; warnings: "
                + "; ".join(c2.get("warnings") or [])
                + (
                    "; **profile check FAILED**: " + "; ".join(past.failures)
                    if past.failures
                    else "; every finite profile bound is above the true error"
                )
            )
        else:
            lines.append(f"- Beyond the blow-up, T = {t_end:g}: {past[:400]}")
    lines.append("")
    return lines


def _ci(ci: Any) -> str:
    if not ci:
        return "n/a"
    return f"[{ci[0]:.2f}, {ci[1]:.2f}]"


def _version(results: Results) -> str:
    for o in results.suite:
        return str(o.certificate["provenance"].get("service_version"))
    return "?"


def write_report(results: Results) -> Path:
    PLOTS.mkdir(parents=True, exist_ok=True)
    effectivity_plot(results, PLOTS / "effectivity.png")
    pngs = []
    for i, s in enumerate(results.sweeps):
        name = (
            [
                "sweep_width.png",
                "sweep_steps.png",
                "sweep_burgers_blowup.png",
                "sweep_riccati_blowup.png",
            ][i]
            if i < 4
            else f"sweep_{i}.png"
        )
        sweep_plot(s, PLOTS / name)
        pngs.append(name)
    failures = results.failures()
    L: list[str] = [
        "# Validation on trained networks",
        "",
        "<!-- generated by `python -m validation.run`; do not edit by hand -->",
        "",
        f"Generated by `python -m validation.run` against {results.service}, service version "
        f"`{_version(results)}`. {len(results.all())} certificates. "
        + (
            "**Every bound is above the true error.**"
            if not failures
            else "**FAILED: some bounds are below the true error or hypotheses were violated (see "
            "the end of this page).**"
        ),
        "",
        "## Method",
        "",
        "- Each problem has a closed-form solution from the literature (named per problem). A "
        "small tanh PINN (float64, seeded) is trained on the CPU with PyTorch (Adam, then "
        "L-BFGS; `validation/train.py`) on uniformly random collocation points and cached in "
        "`validation/weights/*.npz` (the `boundsvc.client.mlp.MLP` format).",
        "- The network is certified by a running service (`python -m boundsvc.cli serve`, "
        "loopback, temporary SQLite): `POST /v1/problems`, a Gauss-Legendre `POST /v1/plans`, "
        "`POST /v1/certificates`. The residuals are the network's, with exact derivatives "
        "(`boundsvc.client.mlp.residual_fields`), at the plan's nodes, not at the training "
        "points.",
        "- Regularity of the exact solution: derived from the closed form, documented per "
        "value below (a number, or an expression in `t` where the solution allows it).",
        "- **Assumption:** `sup_abs_model_*` are the network's maxima on a dense grid "
        "(201 x 201 in space-time, 2001 points in t for ODEs) times 1.1. Where the exact "
        "solution's bound of the same quantity is an expression `E(t)`, the value sent is "
        "`E(t) + c` with the smallest `c` making it dominate 1.1 x the sampled model maximum "
        "at every grid time. A grid maximum is not a certified supremum.",
        "- True error: `u_model - u` from the exact solution with an independent "
        "Gauss-Legendre rule (`scipy.special.roots_legendre`): 200 x 200 nodes over "
        "space-time, 400 nodes in x at the final time and at every time of the certificate's "
        "profile (ODEs: 400 nodes in t). The suite fails (non-zero exit) if any bound "
        "(space-time, final time, or any profile time) is below the true error, if a "
        "certificate is `invalid-hypotheses`, or if a suite problem is not `valid`.",
        "- Navier-Stokes (inputs `t, x, y`, outputs `u, v, p`): the wire problems and the "
        "exact-solution regularity are those of the closed-form registry "
        "(`validation/closed_form/navier_stokes.py`); the model sups are taken on a 41 x 101 x "
        "101 grid (the pressure's as half its range at each time, i.e. for the normalisation "
        '`p - midrange(t)`); the residual rows follow docs/api.md ("Navier-Stokes layout"), '
        "periodic faces included. The family bounds the velocity error only, so the true error "
        "is `||(u_model - u, v_model - v)||` by a 40 x 80 x 80 Gauss-Legendre rule over "
        "space-time and 200 x 200 in space at the final time and at every profile time; the "
        "pressure error is not compared.",
        "- Effectivity = bound / true error (ST = space-time L2, T = L2 at the final time).",
        "",
        "## Results per problem",
        "",
        "![effectivities](validation/effectivity.png)",
        "",
    ]
    L += _table(MAIN_HEADER, [_row(o) for o in results.suite])
    if results.steady:
        L += ["", *_steady_section(results)]
    L += [
        "",
        "### Median effectivity per family (space-time, steady: L2 in space; final time alongside)",
        "",
    ]
    L += _table(
        ["family", "problems", "median eff ST", "median eff T", "target", ""],
        family_medians(results),
    )
    L += ["", _findings(results), ""]
    L += [
        "## Tightening analysis",
        "",
        "Same networks, looser regularity (what the service offers beyond the minimum):",
        "",
    ]
    base = {o.problem.key: o for o in results.suite}
    rows = []
    for v in results.variants:
        b = base[v.problem.key]
        rows.append(
            [
                f"`{v.problem.key}`",
                v.variant,
                _f(v.effectivity(), ".3g"),
                _f(b.effectivity(), ".3g"),
                _f(v.effectivity("l2_final_time"), ".3g"),
                _f(b.effectivity("l2_final_time"), ".3g"),
                _gain(v, b),
            ]
        )
    for s in results.sweeps:
        for v, b in zip(s.extra, s.outcomes if s.extra else [], strict=True):
            rows.append(
                [
                    f"`{v.weights_key}`",
                    v.variant,
                    _f(v.effectivity(), ".3g"),
                    _f(b.effectivity(), ".3g"),
                    _f(v.effectivity("l2_final_time"), ".3g"),
                    _f(b.effectivity("l2_final_time"), ".3g"),
                    _gain(v, b),
                ]
            )
    L += _table(
        [
            "network",
            "looser variant",
            "eff ST looser",
            "eff ST default",
            "eff T looser",
            "eff T default",
            "gain ST",
        ],
        rows,
    )
    L += [
        "",
        "The default of each problem uses the tightest values the service accepts: "
        "time-varying expressions where the exact solution allows, and for Burgers the "
        "one-sided `sup_neg_u_x` next to `sup_abs_u_x`.",
        "",
    ]
    L += [
        "Hard-constrained boundary conditions (a separately trained network with the output "
        "transform `u = g(t, x) + (x - xL)(xR - x)/L^2 N(t, x)`, `g` interpolating the "
        "Dirichlet data, so the boundary residual is exactly 0.0; the service then drops the "
        "boundary term and adds the Friedrichs decay, see the certificate warnings):",
        "",
    ]
    rows = []
    for s_, h in results.hard:
        rows.append(
            [
                f"`{s_.problem.key}` -> `{h.problem.key}`",
                _f(s_.true_space_time),
                _f(h.true_space_time),
                _f(s_.effectivity(), ".3g"),
                _f(h.effectivity(), ".3g"),
                _f(s_.effectivity("l2_final_time"), ".3g"),
                _f(h.effectivity("l2_final_time"), ".3g"),
                f"{100 * _share(s_, 'boundary'):.0f} % -> {100 * _share(h, 'boundary'):.0f} %",
            ]
        )
    L += _table(
        [
            "soft -> hard",
            "true ST soft",
            "true ST hard",
            "eff ST soft",
            "eff ST hard",
            "eff T soft",
            "eff T hard",
            "boundary share of bound^2",
        ],
        rows,
    )
    L += ["", *_lifting_section(results), ""]
    L += ["", *_estimates_section(results), ""]
    L += ["## Sweeps", ""]
    for s, png in zip(results.sweeps, pngs, strict=True):
        L += _sweep_section(s, png)
    L += ["## Per-problem details (regularity, terms and their rigor)", ""]
    for o in [*results.suite, *results.steady, *(h for _, h in results.hard)]:
        L += _detail(o)
    if failures:
        L += ["## FAILURES", ""] + [f"- {f}" for f in failures] + [""]
    path = DOCS / "validation.md"
    path.write_text("\n".join(L) + "\n", encoding="utf-8")
    return path


def _lifting_share(o: Outcome) -> float | None:
    """The lifting norm ||B r(T)|| as a share of the final-time bound (None if not lifted)."""
    term = next((t for t in _terms(o) if t.get("name") == "boundary lifting"), None)
    bound = o.bound("l2_final_time")
    if term is None or not bound or term.get("value") is None:
        return None
    return float(term["value"]) / bound


def _lifting_section(results: Results) -> list[str]:
    lines = [
        "### Boundary lifting: before and after",
        "",
        "Same networks and regularity; *before* = the boundary flux estimate alone (no "
        "`boundary_t` sent), *after* = the suite certificate (lifting offered; the service "
        "reports the smaller of the two estimates).",
        "",
    ]
    rows = []
    for before, after in results.lifting:
        share = _lifting_share(after)
        rows.append(
            [
                f"`{after.problem.key}`",
                _f(before.effectivity(), ".3g"),
                _f(after.effectivity(), ".3g"),
                _f(before.effectivity("l2_final_time"), ".3g"),
                _f(after.effectivity("l2_final_time"), ".3g"),
                _gain(before, after),
                "lifting" if after.lifted else "flux",
                dominant(after),
                _f(100 * share, ".0f") + " %" if share is not None else "n/a",
            ]
        )
    lines += _table(
        [
            "network",
            "eff ST before",
            "eff ST after",
            "eff T before",
            "eff T after",
            "gain ST",
            "reported",
            "dominant term of ||v||^2 (after)",
            "||B r(T)|| / bound T",
        ],
        rows,
    )
    sweeps = [
        (s.name, o)
        for s in results.sweeps
        for o in s.outcomes
        if o.problem.family == "linear-advection-diffusion-reaction"
    ]
    lifted = sum(o.lifted for _, o in sweeps)
    lines += [
        "",
        f"In the heat sweeps below {lifted} of {len(sweeps)} certificates report the lifting.",
        "",
        LIFTING,
    ]
    return lines


_ASSEMBLED = re.compile(
    r"valid estimates were assembled .*? reported \((?P<chosen>[^)]*)\): (?P<rest>.*)"
)
_ESTIMATE = re.compile(
    r"(?P<label>[^:;]+): l2_space_time (?P<st>[^,]+), l2_final_time (?P<ft>[^;]+)"
)


def estimates(o: Outcome) -> list[tuple[str, float | None, float | None, bool]]:
    """Every estimate the service assembled for ``o`` (label, bound ST, bound T, reported),
    read from its certificate: the warning that lists the time-dependent alternatives, or the
    steady interior term's detail that names the L2 value it replaced."""

    def num(text: str) -> float | None:
        try:
            return float(text)
        except ValueError:
            return None

    out: list[tuple[str, float | None, float | None, bool]] = []
    for w in o.certificate.get("warnings", []):
        m = _ASSEMBLED.search(w)
        if m is None:
            continue
        for e in _ESTIMATE.finditer(m.group("rest")):
            label = e.group("label").strip()
            st, ft = num(e.group("st")), num(e.group("ft").strip())
            out.append((label, st, ft, label == m.group("chosen")))
    if o.problem.is_steady:
        term = next((t for t in _terms(o) if t.get("name") == "interior residual"), None)
        rest = sum(float(t["value"]) for t in _terms(o) if t.get("name") == "boundary residual")
        detail = str((term or {}).get("detail", ""))
        m = re.search(r"\|\|R\|\|/\(k lambda_1 \+ c\) = (\S+)$", detail)
        if term is not None and m is not None:
            out.append(("L2 interior term", float(m.group(1)) + rest, None, False))
            out.append(("H^-1 interior term", o.bound("l2_space"), None, True))
    return out


def _estimates_section(results: Results) -> list[str]:
    """Tightening of this version, measured: each estimate the service assembled, side by
    side, and the ODE plans with one panel against several."""
    lines = [
        "### Estimates side by side (tightening: before and after)",
        "",
        "Every estimate listed is valid for the same certificate; the service reports the one "
        "with the smallest space-time bound. New in this version: the **boundary lifting of "
        "the semilinear family** (1-D Dirichlet, the reaction's cross term through "
        "`G = sup |g'|`; docs/theory/semilinear-parabolic.md S1-S8), the **H^-1 residual** "
        "estimate of the advection-diffusion family (1-D, zero-trace error: lifted or exact "
        "Dirichlet data; docs/theory/advection-diffusion.md H1-H6), the **boundary lifting of "
        "the wave family** (1-D Dirichlet; docs/theory/wave.md W1-W7), the **H^-1 interior "
        "term** of the elliptic family (1-D; docs/theory/elliptic.md step 7) and the "
        "**per-panel smoothing width** of the ODE family (docs/theory/ode-system.md step 14). "
        "*Before* for the first four = the smallest of the other estimates (what the previous "
        "version reported).",
        "",
    ]
    rows = []
    for o in [*results.suite, *results.steady, *(h for _, h in results.hard)]:
        steady = o.problem.is_steady
        truth_st = o.true_space if steady else o.true_space_time
        for label, st, ft, chosen in estimates(o):
            rows.append(
                [
                    f"`{o.weights_key}`",
                    label,
                    _f(st / truth_st if st is not None and truth_st else None, ".3g"),
                    _f(ft / o.true_final_time if ft is not None and o.true_final_time else None),
                    "**reported**" if chosen else "",
                ]
            )
    lines += _table(["network", "estimate", "eff ST (steady: L2)", "eff T", ""], rows)
    if results.panels:
        lines += [
            "",
            "ODE plans: the smoothing width of `|r|` is one per interpolation panel, so a plan "
            "of several panels keeps it local (*before* = the same network with one panel of "
            "the same 64 nodes).",
            "",
        ]
        prow = [
            [
                f"`{after.problem.key}`",
                str(after.problem.panels.get("t", 1)),
                _f(before.effectivity(), ".3g"),
                _f(after.effectivity(), ".3g"),
                _f(before.effectivity("l2_final_time"), ".3g"),
                _f(after.effectivity("l2_final_time"), ".3g"),
                _gain(before, after),
            ]
            for before, after in results.panels
        ]
        lines += _table(
            [
                "network",
                "panels",
                "eff ST one panel",
                "eff ST panels",
                "eff T one panel",
                "eff T panels",
                "gain ST",
            ],
            prow,
        )
    return lines


def _gain(v: Outcome, b: Outcome) -> str:
    bv, bb = v.bound("l2_space_time"), b.bound("l2_space_time")
    if bv is None or bb is None:
        return f"{v.status} -> {b.status}"
    return f"x {bv / bb:.3g}"


def _findings(results: Results) -> str:
    """Generated statements about what dominates the bounds."""
    lines = ["**What dominates.**"]
    for o in results.suite:
        if o.problem.family == NS_FAMILY:  # walls and periodic faces (no term says "boundary")
            faces = _share(o, "wall flux") + _share(o, "periodicity mismatch")
            lines.append(
                f"`{o.problem.key}`: {dominant(o)}; wall and periodic-face terms "
                f"{100 * faces:.0f} % of the squared final-time bound."
            )
            continue
        lines.append(
            f"`{o.problem.key}`: {dominant(o)}; boundary terms {100 * _share(o, 'boundary'):.0f} "
            f"% of the squared final-time bound."
        )
    lines.append(
        "Where a Dirichlet boundary term dominates, it enters the squared bound linearly in the "
        "boundary residual (`2 k int |R_b| (G_u + G_model)`), so the bound scales like the "
        "square root of the boundary residual while the true error scales like the residual "
        "itself: the effectivity grows as training improves the boundary fit. The "
        "hard-constrained twins remove this term."
    )
    flows = [o for o in results.suite if o.problem.family == NS_FAMILY]
    if flows:
        lines.append(_ns_findings(flows))
    return " ".join(lines)


def _ns_findings(flows: Sequence[Outcome]) -> str:
    """Navier-Stokes: how much of the squared bound the first-power terms carry."""
    parts = []
    for o in flows:
        lin = sum(
            _share(o, w) for w in ("divergence residual", "wall flux", "periodicity mismatch")
        )
        kappa = next(
            (
                c.get("value")
                for c in o.certificate.get("constants") or []
                if str(c.get("name", "")).startswith("compressive strain rate")
            ),
            None,
        )
        t0, t1 = o.problem.time
        growth = math.exp(kappa * (t1 - t0)) if isinstance(kappa, int | float) else None
        parts.append(
            f"`{o.problem.key}` {100 * lin:.0f} % (divergence {100 * _share(o, 'divergence'):.0f}"
            f" %, walls {100 * _share(o, 'wall flux'):.0f} %, periodicity "
            f"{100 * _share(o, 'periodicity'):.0f} %; strain rate kappa = {_f(kappa)}, "
            f"Gronwall factor e^(kappa T) = {_f(growth)} on the bound)"
        )
    return (
        "Navier-Stokes (velocity error only): the divergence residual, the wall flux and the "
        "periodicity mismatch enter the squared bound to the first power (docs/theory/"
        "navier-stokes.md, steps 9-11: `D(t) int |div u_model|`, `int |R_b| (...)`, "
        "`int |P0| W^2 + ...`), so the bound scales like the square root of these residuals "
        "while the true error scales like the residuals themselves; their share of the squared "
        "final-time bound: " + "; ".join(parts) + ". The growth rate `lambda + 2 kappa(t)` "
        "(kappa from the exact gradient sups of the registry) amplifies every term by "
        "Gronwall's factor; the true error grows far less: the estimate drops the dissipation "
        "`-2 nu ||grad w||^2` and bounds `-(w.grad) u . w` by the largest compressive strain "
        "over the whole box, wherever the error actually sits. "
        "**Why the target of 100 is missed for Navier-Stokes in this version:** the quadrature "
        "allowance (docs/api.md, the Legendre-tail estimate) is now taken on every line of "
        "nodes instead of on the mean over the other axes (a randomized probe found a bound "
        "below the true error with the mean, docs/reliability.md); its share of the squared "
        "final-time bound: "
        + "; ".join(
            f"`{o.problem.key}` {100 * _share(o, 'quadrature allowance'):.0f} %" for o in flows
        )
        + ". It is large for `int |div u_model|`, whose integrand has kinks where the "
        "divergence changes sign. Measured once when the change was made (not re-run by this "
        "report): with the mean-over-lines allowance the family median was 98.6; with the "
        "per-line allowance and 32 instead of 24 nodes per space axis it was 110 (finer plans "
        "do not help a kinked integrand much)."
    )


LIFTING = """**How the lifting works** (docs/theory/advection-diffusion.md, "Boundary lifting").
With `e = u_model - u` and the boundary residual `r` at the ends `a, b`, the service subtracts
the linear interpolant `B r = r_a(t) (b - x)/L + r_b(t) (x - a)/L`; `v = e - B r` has zero trace,
solves the error equation with forcing `R - L B r` and initial value `R_0 - B r(t0)`, and its
energy estimate has no boundary term and keeps the Friedrichs decay `2 k (pi/L)^2`. Then
`||e|| <= ||v|| + ||B r||`. `||B r||`, `||d_t B r||` and `||L B r||` are closed forms in
`r_a, r_b` and their time derivatives (`d_xx B r = 0`), so the boundary residual enters the
bound linearly instead of through its square root, and the gradient bounds `sup_abs_u_x`,
`sup_abs_model_u_x` no longer enter. The client asks the plan for the optional component
`boundary_t` and sends `d/dt (u_model - g)` there (here: the network's exact `u_t` minus the
complex-step derivative of the data); the service assembles both estimates and reports the
smaller.

**Why the target of 10 is still missed for the linear family.** After the lifting the boundary
is no longer the issue: the interior residual of the lifted error is 98-99 % of `||v||^2`, and
`||B r||` adds 10-20 % of the final-time bound. The service now also measures that residual in
`H^-1` (docs/theory/advection-diffusion.md H1-H6), which credits the heat operator's damping of
oscillating residuals: the heat network goes from 21.1 to 16.2 and its hard-constrained twin
to 4.9 (table "Estimates side by side"). For the advection-dominated `advdiff-mode`
(`k = 0.02`, Peclet number 50) the `H^-1` estimate has to take its Young weight out of the
small Friedrichs decay `2 k (pi/L)^2 = 0.39`, and the L2 estimate stays the smaller. What
remains is the energy estimate's treatment of time: it propagates the residual's norm at each
time, `int e^{-mu (t - s)} ||F(s)|| ds`, while the true error `int S(t - s) F(s) ds` also
cancels between times where the residual changes sign.
The lifting never loosens a bound: the flux estimate is assembled too and the
smaller is reported."""
