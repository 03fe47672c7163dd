"""``make bench``: every benchmark in one run, printed as Markdown (see docs/benchmarks.md).

    python -m bench.run_all [--quick] [--out FILE]

``--quick`` drops the slowest case (1-D heat at 4e6 values: 1000 time nodes) and the
base64 memory run. The whole run takes a few minutes on an idle 2-core machine.
"""

from __future__ import annotations

import argparse
import datetime as dt
import sys
import time
from pathlib import Path

from bench import certificates, derivation, memory, stages
from bench._common import loadavg, machine


def _log(message: str) -> None:
    print(message, file=sys.stderr, flush=True)


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(prog="python -m bench.run_all", description=__doc__)
    parser.add_argument("--quick", action="store_true", help="skip the slowest cases")
    parser.add_argument("--out", type=Path, default=None, help="also write the report here")
    parser.add_argument(
        "--only",
        choices=["certificates", "memory", "derivation", "stages"],
        action="append",
        help="run only these parts (repeatable)",
    )
    args = parser.parse_args(argv)
    parts = args.only or ["certificates", "memory", "derivation", "stages"]
    started = time.perf_counter()
    info = machine()
    load_start = loadavg()
    sections: list[str] = []
    for name in parts:
        _log(f"[bench] {name} ...")
        t0 = time.perf_counter()
        if name == "certificates":
            body = certificates.render(certificates.run(args.quick, _log))
            title = "1. End-to-end certificate time vs the in-process core"
        elif name == "memory":
            body = memory.render(memory.run(args.quick, _log))
            title = "2. Peak memory of the server during the largest certificate"
        elif name == "derivation":
            body = derivation.render(derivation.run(args.quick, _log))
            title = "3. Problem derivation per family, cold and warm"
        else:
            body = stages.render(stages.run(args.quick, _log))
            title = "4. Where the time goes (in process)"
        sections.append(f"### {title}\n\n_{time.perf_counter() - t0:.0f} s_\n\n{body}\n")
    total = time.perf_counter() - started
    header = [
        f"Run of {dt.datetime.now(dt.UTC).isoformat(timespec='seconds')}: "
        f"`python -m bench.run_all{' --quick' if args.quick else ''}` took {total:.0f} s; "
        f"load average at start {load_start}, at end {loadavg()}.",
        "",
        "| machine | |",
        "|---|---|",
        *[f"| {k} | {v} |" for k, v in info.items()],
        "",
    ]
    report = "\n".join(header) + "\n" + "\n".join(sections)
    print(report)
    if args.out is not None:
        args.out.write_text(report)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
