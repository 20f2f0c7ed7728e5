"""A small terminal progress bar counting simulated days.

Drawn on stderr with a carriage return when stderr is a terminal.  When it
is not (a batch job, a pipe, a log file), a heartbeat line is written every
``heartbeat_s`` seconds of wall time instead, from a daemon thread, so that a
run that crawls (tiny steps between output times) still shows it is alive;
runs shorter than that write nothing.  ``quiet`` silences both.  Callable as
``bar(t_seconds)`` so it can be handed to the time loop as its ``progress``
callback.
"""
from __future__ import annotations

import sys
import threading
import time
from typing import TextIO

__all__ = ["ProgressBar"]

_SECONDS_PER_DAY = 86400.0


class ProgressBar:
    """``ProgressBar(total_s)``; call with the simulated time [s since start]."""

    def __init__(self, total_s: float, *, stream: TextIO | None = None, quiet: bool = False,
                 width: int = 30, min_interval_s: float = 0.1, force: bool = False,
                 heartbeat_s: float | None = 30.0):
        self.total_s = float(total_s)
        self.stream = stream if stream is not None else sys.stderr
        is_tty = bool(getattr(self.stream, "isatty", lambda: False)())
        self.enabled = (not quiet) and (is_tty or force)
        self.width = width
        self.min_interval_s = min_interval_s
        self._last_draw = -float("inf")
        self._started = time.perf_counter()
        self._drawn = False
        self._latest_s = 0.0
        self._stop = threading.Event()
        self._heartbeat = None
        if not quiet and not self.enabled and heartbeat_s:
            self._heartbeat = threading.Thread(target=self._beat, args=(float(heartbeat_s),),
                                               name="boxchem-heartbeat", daemon=True)
            self._heartbeat.start()

    def _beat(self, interval_s: float) -> None:
        while not self._stop.wait(interval_s):
            elapsed = time.perf_counter() - self._started
            self.stream.write(f"boxchem: still running: day {self._latest_s / _SECONDS_PER_DAY:.2f} of "
                              f"{self.total_s / _SECONDS_PER_DAY:.2f} after {elapsed:.0f} s\n")
            self.stream.flush()

    def __call__(self, t_s: float) -> None:
        self._latest_s = float(t_s)
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
        """End the bar's line (only if something was drawn); stop the heartbeat."""
        self._stop.set()
        if self.enabled and self._drawn:
            self.stream.write("\n")
            self.stream.flush()
