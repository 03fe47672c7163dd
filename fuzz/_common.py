"""Shared pieces of the fuzz harnesses: the per-input wall-clock budget and the fallback.

Each harness exposes ``check(data: bytes)``: it must return normally for every input (our
own refusal exceptions are caught inside); anything else -- another exception, or an input
that takes longer than ``BUDGET_SECONDS`` -- is a finding.  ``run(check)`` drives it with
atheris (coverage-guided) when atheris is importable, else with Hypothesis (random bytes and
the seed corpus, clearly labelled as the fallback) for ``FUZZ_SECONDS``.
"""

from __future__ import annotations

import os
import sys
import time
from collections.abc import Callable
from pathlib import Path

BUDGET_SECONDS = float(os.environ.get("FUZZ_INPUT_BUDGET", "2.0"))
CORPUS = Path(__file__).resolve().parent / "corpus"


class SlowInput(AssertionError):
    """An input took longer than the budget (a denial of service in a request handler)."""


def timed(check: Callable[[bytes], None]) -> Callable[[bytes], None]:
    def wrapped(data: bytes) -> None:
        start = time.perf_counter()
        check(data)
        elapsed = time.perf_counter() - start
        if elapsed > BUDGET_SECONDS:
            raise SlowInput(f"{elapsed:.2f}s > {BUDGET_SECONDS}s for {data[:200]!r}")

    return wrapped


def seeds(name: str) -> list[bytes]:
    folder = CORPUS / name
    return [p.read_bytes() for p in sorted(folder.iterdir()) if p.is_file()]


def run(name: str, check: Callable[[bytes], None], setup: Callable[[], None]) -> None:
    """Fuzz ``check`` for ``FUZZ_SECONDS`` (default 60): atheris if present, else Hypothesis."""
    seconds = int(os.environ.get("FUZZ_SECONDS", "60"))
    guarded = timed(check)
    try:
        import atheris  # type: ignore[import-not-found]
    except ImportError:
        print(f"[{name}] atheris not importable: FALLBACK Hypothesis run for {seconds}s")
        _hypothesis_run(name, guarded, setup, seconds)
        return
    with atheris.instrument_imports(include=["boundsvc", "api_schemas"]):
        setup()
    for seed in seeds(name):  # the corpus must pass before mutation starts
        guarded(seed)
    # new inputs and crash artifacts go to a work folder; the seed corpus stays as committed
    scratch = os.environ.get("FUZZ_WORK", "/tmp/boundsvc-fuzz")  # noqa: S108 - scratch, overridable
    work = Path(scratch) / name
    work.mkdir(parents=True, exist_ok=True)
    argv = [
        sys.argv[0],
        f"-max_total_time={seconds}",
        "-timeout=30",
        "-rss_limit_mb=4096",
        f"-artifact_prefix={work}/",
        "-print_final_stats=1",
        str(work),
        str(CORPUS / name),
        *sys.argv[1:],
    ]
    print(f"[{name}] atheris for {seconds}s; seeds {CORPUS / name}, work folder {work}")
    atheris.Setup(argv, guarded)
    atheris.Fuzz()


def _hypothesis_run(
    name: str, check: Callable[[bytes], None], setup: Callable[[], None], seconds: int
) -> None:
    from hypothesis import HealthCheck, given, settings
    from hypothesis import strategies as st

    setup()
    corpus = seeds(name)
    for seed in corpus:
        check(seed)
    deadline = time.monotonic() + seconds
    examples = 0
    data = st.one_of(
        st.binary(max_size=512),
        st.text(max_size=256).map(str.encode),
        st.sampled_from(corpus).flatmap(
            lambda s: st.binary(max_size=16).map(lambda b, s=s: s[: len(s) // 2] + b + s)
        ),
    )
    while time.monotonic() < deadline:

        @settings(
            max_examples=500, deadline=None, database=None, suppress_health_check=list(HealthCheck)
        )
        @given(data)
        def one(sample: bytes) -> None:
            check(sample)

        one()
        examples += 500
    print(f"[{name}] FALLBACK Hypothesis: {examples} inputs in {seconds}s, no finding")
