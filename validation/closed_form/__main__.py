"""``python -m validation.closed_form [--out PATH] [--only KEY ...]``: certify every closed-form
case and write docs/theory/validation.md; exit 1 if a bound is below the true error."""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

from validation.closed_form import all_cases
from validation.closed_form._checks import exact_residual_max, regularity_violations
from validation.closed_form._report import render
from validation.closed_form._runner import in_process_service, run_case

REPO = Path(__file__).resolve().parents[2]
DEFAULT_OUT = REPO / "docs" / "theory" / "validation.md"


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(prog="python -m validation.closed_form", description=__doc__)
    parser.add_argument("--out", type=Path, default=DEFAULT_OUT)
    parser.add_argument("--only", nargs="*", default=None, help="case keys or family ids")
    args = parser.parse_args(argv)
    from boundsvc import __version__

    cases = [c for c in all_cases() if not args.only or c.key in args.only or c.family in args.only]
    bad = False
    for case in cases:
        problems = regularity_violations(case)
        residual = exact_residual_max(case)
        if problems or residual > 1e-8:
            print(f"{case.key}: case data wrong: {problems} residual {residual:g}", file=sys.stderr)
            bad = True
    results = []
    with in_process_service() as api:
        for case in cases:
            for eps in case.epsilons:
                result = run_case(api, case, eps)
                results.append(result)
                flag = "; ".join(result.violations()) or "ok"
                print(f"{case.key} eps={eps:g}: {result.status}, {flag}", file=sys.stderr)
                bad = bad or bool(result.violations()) or result.status != case.expected_status
    args.out.write_text(render(results, __version__), encoding="utf-8")
    print(f"wrote {args.out}", file=sys.stderr)
    return 1 if bad else 0


if __name__ == "__main__":
    sys.exit(main())
