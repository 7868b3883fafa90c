"""Progress lines on stderr.

One small reporter used by every long stage. It writes at most a few lines per
second, to stderr only, and nothing at all when quiet. It never touches stdout,
so command output stays clean for pipes.

A total is often an estimate (bytes on disk for text that decodes to more or
fewer bytes). The figures shown stay true: a count that passes its total
raises the total with it, and a stage that ends normally ends on its done
figure, so a line never reads "(1.32M/1.31M ...)".
"""

from __future__ import annotations

import sys
import time


class Progress:
    """Report progress of one stage: ``with Progress("count", total=n) as p: p.advance(k)``."""

    def __init__(self, label: str, *, total: float | None = None, unit: str = "",
                 quiet: bool = False, interval: float = 0.5) -> None:
        self.label = label
        self.total = total
        self.unit = unit
        self.quiet = quiet
        # On a terminal the line is redrawn in place; in a log file, write rarely.
        self.interval = interval if sys.stderr.isatty() else max(interval, 10.0)
        self.done = 0.0
        self._start = time.monotonic()
        self._last = self._start

    def __enter__(self) -> "Progress":
        return self

    def __exit__(self, exc_type: object, *exc: object) -> None:
        self.finish(complete=exc_type is None)

    def advance(self, amount: float = 1.0) -> None:
        self.done += amount
        now = time.monotonic()
        if not self.quiet and now - self._last >= self.interval:
            self._last = now
            self._write(final=False)

    def finish(self, *, complete: bool = True) -> None:
        """Write the last line; a complete stage ends at 100% of what it did (total := done)."""
        if self.total is not None and complete and self.done > 0:
            self.total = self.done
        if not self.quiet:
            self._write(final=True)
            self.quiet = True  # finish once

    def _write(self, *, final: bool) -> None:
        elapsed = time.monotonic() - self._start
        if self.total:
            # an estimate that fell short grows with the count
            self.total = max(self.total, self.done)
            share = self.done / self.total
            msg = f"{self.label}: {share:6.1%} ({_fmt(self.done)}/{_fmt(self.total)} {self.unit})"
        else:
            msg = f"{self.label}: {_fmt(self.done)} {self.unit}"
        msg += f" {elapsed:6.1f}s"
        end = "\n" if final else "\r"
        if not sys.stderr.isatty() and not final:
            end = "\n"
        sys.stderr.write(msg + end)
        sys.stderr.flush()


def _fmt(x: float) -> str:
    if x >= 1e9:
        return f"{x / 1e9:.2f}G"
    if x >= 1e6:
        return f"{x / 1e6:.2f}M"
    if x >= 1e4:
        return f"{x / 1e3:.1f}k"
    if x == int(x):
        return f"{int(x)}"
    return f"{x:.3g}"  # 1.31123 MB shows as 1.31
