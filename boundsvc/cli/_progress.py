"""A small progress bar on stderr (uploads, batches), drawn only on a terminal."""

from __future__ import annotations

import sys
import time
from typing import TextIO

__all__ = ["ProgressBar"]


def _human_bytes(n: float) -> str:
    for unit in ("B", "kB", "MB", "GB"):
        if n < 1000 or unit == "GB":
            return f"{n:.0f} {unit}" if unit == "B" else f"{n:.1f} {unit}"
        n /= 1000
    return f"{n:.1f} GB"  # pragma: no cover - the loop always returns


class ProgressBar:
    """``bar(done, total)`` redraws ``label [#####.....]  45%  1.2/2.6 MB``.

    Parameters
    ----------
    label : str
        Shown before the bar.
    unit : {"bytes", "items"}
        How ``done`` and ``total`` are printed.
    stream : text stream
        Default ``sys.stderr``, so that stdout stays clean for ``--json``.
    enabled : bool, optional
        Default: only when ``stream`` is a terminal (logs of CI jobs stay readable).
    """

    def __init__(
        self,
        label: str,
        *,
        unit: str = "bytes",
        stream: TextIO | None = None,
        enabled: bool | None = None,
        width: int = 28,
        min_interval: float = 0.05,
    ) -> None:
        self.label = label
        self.unit = unit
        self.stream = stream if stream is not None else sys.stderr
        self.enabled = self.stream.isatty() if enabled is None else enabled
        self.width = width
        self.min_interval = min_interval
        self._last = 0.0
        self._drawn = False

    def _amount(self, done: int, total: int) -> str:
        if self.unit == "bytes":
            return f"{_human_bytes(done)}/{_human_bytes(total)}"
        return f"{done}/{total}"

    def __call__(self, done: int, total: int) -> None:
        if not self.enabled:
            return
        now = time.monotonic()
        finished = total > 0 and done >= total
        if not finished and self._drawn and now - self._last < self.min_interval:
            return
        self._last = now
        frac = 1.0 if total <= 0 else min(1.0, max(0.0, done / total))
        filled = round(frac * self.width)
        bar = "#" * filled + "." * (self.width - filled)
        self.stream.write(f"\r{self.label} [{bar}] {100 * frac:3.0f}%  {self._amount(done, total)}")
        if finished:
            self.stream.write("\n")
        self.stream.flush()
        self._drawn = True
