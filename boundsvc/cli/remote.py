"""Commands that call a running service: ``problem``, ``plan``, ``certify``, ``show``,
``list`` and ``report``. Exit codes are those of :mod:`boundsvc.cli._common`."""

from __future__ import annotations

import argparse
import sys
from pathlib import Path
from typing import TYPE_CHECKING, Any

from boundsvc.cli._common import (
    EXIT_FAIL,
    EXIT_OK,
    UsageError,
    certificate_details,
    certificate_summary,
    connection_options,
    dump_model,
    emit_json,
    fmt,
    parse_counts,
    read_problem,
    read_regularity,
    read_residuals,
    run_remote,
)
from boundsvc.cli._progress import ProgressBar

if TYPE_CHECKING:  # imported on use: `boundsvc serve` must not need httpx
    from boundsvc.client import BoundsvcClient


def _problem(args: argparse.Namespace, client: BoundsvcClient) -> int:
    """Classify a problem and print the stability constants' formulas."""
    problem = read_problem(args.file)
    regularity = read_regularity(args.regularity) if args.regularity else None
    info = client.problem(problem, regularity=regularity)
    if args.json:
        emit_json(dump_model(info))
        return EXIT_OK
    print(f"problem {info.problem_id}: family {info.family}")
    print(f"  theorem: {info.theorem}")
    print("  needs regularity:")
    for req in info.regularity_requirements:
        print(f"    {' or '.join(req.any_of):<32} {req.purpose}")
    if info.optional_regularity:
        print(f"  optional (tighten the bound): {', '.join(info.optional_regularity)}")
    print(f"  residual components: {', '.join(info.components)}")
    print(f"  bounds: {', '.join(info.bounded_quantities)}")
    if info.hypotheses:
        print("  hypotheses:")
        for h in info.hypotheses:
            print(f"    - {h}")
    print("  constants:")
    for const in info.constants:
        name = const.get("name", "")
        value = const.get("value")
        shown = "" if not isinstance(value, int | float) else f"   = {fmt(float(value))}"
        print(f"    {const.get('symbol', '?')} = {const.get('expression', '?')}{shown}   ({name})")
        latex = const.get("latex")
        if latex:
            print(f"      LaTeX: {latex}")
        derivation = const.get("derivation")
        if isinstance(derivation, list):
            for step in derivation:
                print(f"      | {step}")
    for w in info.warnings:
        print(f"  warning: {w}")
    print(f"  reference: {info.reference}")
    return EXIT_OK


def _plan(args: argparse.Namespace, client: BoundsvcClient) -> int:
    """Request a quadrature plan and save its points and weights."""
    if (args.file is None) == (args.problem_id is None):
        raise UsageError("give exactly one of FILE and --problem-id")
    points = parse_counts(args.points, "--points")
    panels = parse_counts(args.panels, "--panels") if args.panels else None
    if args.output and Path(args.output).suffix.lower() not in (".npz", ".json"):
        raise UsageError(f"-o {args.output}: a plan file must end in .npz or .json")
    problem: Any = args.problem_id if args.problem_id else read_problem(args.file)
    plan = client.plan(problem, points=points, panels=panels)
    if args.output:
        plan.save(args.output)
    if args.json:
        emit_json(
            {
                "plan_id": plan.plan_id,
                "problem_id": plan.problem_id,
                "rule": plan.rule,
                "components": {
                    n: {"size": c.size, "axes": list(c.axes)} for n, c in plan.components.items()
                },
                "output": args.output,
                "warnings": list(plan.warnings),
            }
        )
        return EXIT_OK
    sizes = ", ".join(f"{name} {size}" for name, size in plan.sizes.items())
    print(f"plan {plan.plan_id} ({plan.rule}) for problem {plan.problem_id}: {sizes} points")
    for name, comp in plan.components.items():
        print(f"  {name:<10} axes {','.join(comp.axes):<8} {comp.size:>7} points")
    if args.output:
        print(f"saved to {args.output}")
    for w in plan.warnings:
        print(f"  warning: {w}")
    return EXIT_OK


def _certify(args: argparse.Namespace, client: BoundsvcClient) -> int:
    """Upload residuals and print the certificate."""
    if (args.problem is None) == (args.problem_id is None):
        raise UsageError("give exactly one of --problem FILE and --problem-id ID")
    if (args.plan is None) == (args.plan_id is None):
        raise UsageError("give exactly one of --plan-id ID and --plan FILE")
    problem: Any = args.problem_id if args.problem_id else read_problem(args.problem)
    from boundsvc.client import Plan

    plan_id = args.plan_id
    if args.plan:
        try:
            plan_id = Plan.load(args.plan).plan_id
        except (OSError, ValueError, KeyError) as exc:
            raise UsageError(f"cannot read the plan file {args.plan}: {exc}") from exc
    regularity = read_regularity(args.regularity)
    residuals = read_residuals(args.residuals)
    model = {
        k: v
        for k, v in (
            ("name", args.model_name),
            ("version", args.model_version),
            ("epoch", args.epoch),
        )
        if v is not None
    }
    bar = ProgressBar("uploading residuals", enabled=False if args.json else None)
    try:
        cert = client.certify(
            problem,
            plan_id,
            regularity,
            residuals,
            model=model or None,
            encoding=args.encoding,
            progress=bar,
        )
    except ValueError as exc:
        raise UsageError(str(exc)) from exc
    if args.json:
        emit_json(dump_model(cert))
    else:
        print("\n".join(certificate_summary(cert)))
        for w in cert.warnings:
            print(f"  warning: {w}")
    return EXIT_OK


def _show(args: argparse.Namespace, client: BoundsvcClient) -> int:
    """Print a stored certificate."""
    cert = client.certificate(args.id)
    if args.json:
        emit_json(dump_model(cert))
    else:
        print("\n".join(certificate_details(cert)))
    return EXIT_OK


def _list(args: argparse.Namespace, client: BoundsvcClient) -> int:
    """List certificates, newest first."""
    if args.limit < 1:
        raise UsageError("--limit must be positive")
    if args.version and not args.model:
        raise UsageError("--version needs --model")
    page = client.certificates_page(
        model=args.model,
        version=args.version,
        family=args.family,
        status=args.status,
        limit=args.limit,
        cursor=args.cursor,
    )
    if args.json:
        emit_json(dump_model(page))
        return EXIT_OK
    if not page.items:
        print("no certificates")
        return EXIT_OK
    print(f"{'id':<36} {'created':<24} {'status':<19} {'family':<36} model")
    for s in page.items:
        model = " ".join(p for p in (s.model_name, s.model_version) if p) or "-"
        print(f"{s.id:<36} {s.created_at[:23]:<24} {s.status:<19} {s.family:<36} {model}")
    if page.next_cursor:
        print(f"(more: --cursor {page.next_cursor})")
    return EXIT_OK


def _report(args: argparse.Namespace, client: BoundsvcClient) -> int:
    """Fetch a certificate's rendered report."""
    from boundsvc.client import BoundsvcClientError

    try:
        report = client.report(args.id)
    except BoundsvcClientError as exc:
        if exc.status == 404 and exc.code == "not_found":
            message = (
                "reports are not available on this service: GET "
                f"/v1/certificates/{args.id}/report answered 404 not_found (the route "
                "does not exist there yet); `boundsvc show` prints the certificate"
            )
            if args.json:
                emit_json({"available": False, "certificate_id": args.id, "detail": message})
            print(message, file=sys.stderr)
            return EXIT_FAIL
        raise
    if args.output:
        Path(args.output).write_bytes(report.content)
        if args.json:
            emit_json(
                {
                    "available": True,
                    "certificate_id": args.id,
                    "media_type": report.media_type,
                    "output": args.output,
                }
            )
        else:
            print(f"report ({report.media_type}) saved to {args.output}")
    elif args.json:
        emit_json(
            {
                "available": True,
                "certificate_id": args.id,
                "media_type": report.media_type,
                "content": report.text,
            }
        )
    else:
        sys.stdout.write(report.text)
    return EXIT_OK


def register(sub: Any) -> None:
    parent = connection_options()

    p = sub.add_parser(
        "problem",
        parents=[parent],
        help="classify a problem, print its constants",
        description="Classify a problem (JSON file) and derive its stability "
        "constants; prints the formulas.",
    )
    p.add_argument("file", help="problem JSON file (the problem object or {'problem': ...})")
    p.add_argument("--regularity", help="regularity JSON file: also evaluate the constants")
    p.set_defaults(func=run_remote(_problem))

    p = sub.add_parser(
        "plan",
        parents=[parent],
        help="request a quadrature plan",
        description="Request a Gauss-Legendre plan and save its points.",
    )
    p.add_argument("file", nargs="?", help="problem JSON file")
    p.add_argument("--problem-id", help="a stored problem instead of FILE")
    p.add_argument("--points", required=True, help="nodes per axis, e.g. t=32,x=32")
    p.add_argument("--panels", help="composite panels per axis, e.g. t=4")
    p.add_argument("-o", "--output", help="write plan.npz or plan.json")
    p.set_defaults(func=run_remote(_plan))

    p = sub.add_parser(
        "certify",
        parents=[parent],
        help="upload residuals, get a certificate",
        description="Certify residuals evaluated at a plan's points.",
    )
    p.add_argument("--problem", help="problem JSON file")
    p.add_argument("--problem-id", help="a stored problem instead of --problem")
    p.add_argument("--regularity", required=True, help="regularity JSON file")
    p.add_argument("--plan-id", help="the plan the residuals were evaluated on")
    p.add_argument("--plan", help="a plan file from `boundsvc plan -o` instead of --plan-id")
    p.add_argument(
        "--residuals", required=True, help="residuals.npz (one array per component) or .json"
    )
    p.add_argument("--model-name")
    p.add_argument("--model-version")
    p.add_argument("--epoch", type=int)
    p.add_argument("--encoding", choices=("base64", "json"), default="base64")
    p.set_defaults(func=run_remote(_certify))

    p = sub.add_parser("show", parents=[parent], help="print a stored certificate")
    p.add_argument("id")
    p.set_defaults(func=run_remote(_show))

    p = sub.add_parser("list", parents=[parent], help="list certificates, newest first")
    p.add_argument("--model", help="model name")
    p.add_argument("--version", help="model version (with --model)")
    p.add_argument("--family")
    p.add_argument("--status", choices=("valid", "vacuous", "invalid-hypotheses"))
    p.add_argument("--limit", type=int, default=20)
    p.add_argument("--cursor", help="continue from a previous page")
    p.set_defaults(func=run_remote(_list))

    p = sub.add_parser("report", parents=[parent], help="fetch a certificate's report")
    p.add_argument("id")
    p.add_argument("-o", "--output", help="write the report to this file")
    p.set_defaults(func=run_remote(_report))
