"""Progress of a batch on stderr: lines done, failures so far and the time left.

On a terminal one status line is redrawn in place; in a log (not a terminal) one plain line is
printed per finished line. Errors always get a line of their own.
"""

from __future__ import annotations

import sys
import time
from collections.abc import Callable
from typing import TextIO

BAR_WIDTH = 24


def fmt_duration(seconds: float) -> str:
    """A duration as ``1 h 02 min``, ``3 min 05 s`` or ``41 s`` [s]."""
    s = max(0, round(seconds))
    if s >= 3600:
        return f"{s // 3600} h {s % 3600 // 60:02d} min"
    if s >= 60:
        return f"{s // 60} min {s % 60:02d} s"
    return f"{s} s"


class Progress:
    """A progress display for ``total`` lines.

    The time left is the elapsed time per finished line times the lines left (lines skipped
    as up to date count as finished at no cost, so they are excluded from the rate).
    """

    def __init__(self, total: int, *, stream: TextIO | None = None, tty: bool | None = None,
                 clock: Callable[[], float] = time.monotonic):
        self.total = total
        self.stream = stream if stream is not None else sys.stderr
        self.tty = self.stream.isatty() if tty is None else tty
        self.clock = clock
        self.t0 = clock()
        self.done = 0
        self.failed = 0
        self.skipped = 0
        self._drawn = False

    def time_left_s(self) -> float | None:
        """Estimated time left [s], or None before the first computed line."""
        computed = self.done - self.skipped
        if computed <= 0:
            return None
        rate = (self.clock() - self.t0) / computed
        return rate * (self.total - self.done)

    def status(self) -> str:
        left = self.time_left_s()
        when = "time left unknown" if left is None else f"about {fmt_duration(left)} left"
        if self.done == self.total:
            when = f"took {fmt_duration(self.clock() - self.t0)}"
        return f"{self.done}/{self.total} lines, {self.failed} failed, {when}"

    def _bar(self) -> str:
        filled = BAR_WIDTH * self.done // max(self.total, 1)
        return "[" + "=" * filled + " " * (BAR_WIDTH - filled) + "]"

    def _clear(self) -> None:
        if self.tty and self._drawn:
            self.stream.write("\r\x1b[K")
            self._drawn = False

    def skip(self, n: int) -> None:
        """Count ``n`` lines skipped as up to date."""
        self.done += n
        self.skipped += n

    def finished(self, name: str, error: str | None = None) -> None:
        """One line finished (``error`` set when it failed)."""
        from relayset.io import visible_text  # a file name may hold controls or odd bytes

        name, error = visible_text(name), None if error is None else visible_text(error)
        self.done += 1
        self._clear()
        if error is not None:
            self.failed += 1
            self.stream.write(f"relayset: error: {error}\n")
        if self.tty:
            self.stream.write(f"{self._bar()} {self.status()}")
            self._drawn = True
        else:
            self.stream.write(f"relayset: {name} {'failed' if error else 'done'} "
                              f"({self.status()})\n")
        self.stream.flush()

    def message(self, text: str) -> None:
        """A line of text that does not disturb the status line."""
        from relayset.io import visible_text

        text = visible_text(text)
        self._clear()
        self.stream.write(text + "\n")
        self.stream.flush()

    def close(self) -> None:
        if self.tty and self._drawn:
            self.stream.write("\n")
            self._drawn = False
        self.stream.flush()
