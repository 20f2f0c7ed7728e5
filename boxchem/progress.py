"""A small terminal progress bar counting simulated days.

Drawn on stderr with a carriage return; silent when stderr is not a terminal
or when the caller asks for quiet.  Callable as ``bar(t_seconds)`` so it can
be handed to the time loop as its ``progress`` callback.
"""
from __future__ import annotations

import sys
import time
from typing import TextIO

__all__ = ["ProgressBar"]

_SECONDS_PER_DAY = 86400.0


class ProgressBar:
    """``ProgressBar(total_s)``; call with the simulated time [s since start]."""

    def __init__(self, total_s: float, *, stream: TextIO | None = None, quiet: bool = False,
                 width: int = 30, min_interval_s: float = 0.1, force: bool = False):
        self.total_s = float(total_s)
        self.stream = stream if stream is not None else sys.stderr
        is_tty = bool(getattr(self.stream, "isatty", lambda: False)())
        self.enabled = (not quiet) and (is_tty or force)
        self.width = width
        self.min_interval_s = min_interval_s
        self._last_draw = -float("inf")
        self._started = time.perf_counter()
        self._drawn = False

    def __call__(self, t_s: float) -> None:
        if not self.enabled:
            return
        now = time.perf_counter()
        if now - self._last_draw < self.min_interval_s and t_s < self.total_s:
            return
        self._last_draw = now
        self.stream.write("\r" + self.render(t_s, now - self._started))
        self.stream.flush()
        self._drawn = True

    def render(self, t_s: float, elapsed_s: float) -> str:
        """One line: bar, simulated days done / total, wall seconds."""
        frac = 0.0 if self.total_s <= 0 else min(max(t_s / self.total_s, 0.0), 1.0)
        filled = int(round(frac * self.width))
        bar = "#" * filled + "-" * (self.width - filled)
        return (f"[{bar}] day {t_s / _SECONDS_PER_DAY:7.2f} / {self.total_s / _SECONDS_PER_DAY:.2f}"
                f"  {elapsed_s:6.1f} s")

    def close(self) -> None:
        """End the bar's line (only if something was drawn)."""
        if self.enabled and self._drawn:
            self.stream.write("\n")
            self.stream.flush()
