"""The progress line of ``cable run`` on a terminal: simulated time, rate, time left.

Drawn on stderr, redrawn in place, only when that stream is a terminal (never in a pipe,
a log file or with ``-q``), and cleared before anything else is printed, so that what a
run prints is the same with and without it. The rate is measured from the first output
interval on, so that compiling the kernels (during the first interval) does not skew it.
"""

from __future__ import annotations

import sys
import time

#: seconds between redraws, and before the first (a short run draws nothing)
REDRAW_S = 0.2
FIRST_S = 0.5


class RunProgress:
    """``progress(t_done, t_total)`` for :func:`cable.simulate`.

    Parameters
    ----------
    stream : file, optional
        Where to draw (stderr by default).
    tty : bool, optional
        Draw as on a terminal; by default, whether ``stream`` is one.
    clock : callable, optional
        Seconds (``time.perf_counter``); a test gives its own.
    """

    def __init__(self, stream=None, *, tty: bool | None = None, clock=time.perf_counter):
        self.stream = stream or sys.stderr
        self.tty = bool(getattr(self.stream, "isatty", lambda: False)()) if tty is None else bool(tty)
        self.clock = clock
        self.started = clock()
        self.first = None          # (wall, simulated) at the first interval done
        self.last_draw = None
        self.width = 0

    def __call__(self, t_done: float, t_total: float) -> None:
        if not self.tty:
            return
        now = self.clock()
        if self.first is None:
            self.first = (now, t_done)
        if now - self.started < FIRST_S or (self.last_draw is not None and now - self.last_draw < REDRAW_S):
            return
        self._draw(self.line(t_done, t_total, now))
        self.last_draw = now

    def line(self, t_done: float, t_total: float, now: float) -> str:
        """The text drawn: simulated time of the total, rate [ms simulated per s], time left."""
        pct = 100.0 * t_done / t_total if t_total > 0 else 100.0
        text = f"simulated {t_done:.6g} of {t_total:.6g} ms ({pct:.0f}%)"
        wall0, sim0 = self.first
        if now > wall0 and t_done > sim0:
            rate = (t_done - sim0) / (now - wall0)
            text += f", {rate:,.0f} ms/s," if rate >= 100 else f", {rate:.3g} ms/s,"
            text += f" {_clock(max(0.0, (t_total - t_done) / rate))} left"
        return text

    def _draw(self, text: str) -> None:
        self.stream.write("\r" + text.ljust(self.width))
        self.stream.flush()
        self.width = len(text)

    def clear(self) -> None:
        """Blank the line (before other output, and at the end)."""
        if self.width:
            self.stream.write("\r" + " " * self.width + "\r")
            self.stream.flush()
            self.width = 0
            self.last_draw = None


def _clock(seconds: float) -> str:
    return f"{int(seconds // 3600)}:{int(seconds % 3600 // 60):02d}:{int(seconds % 60):02d}"
