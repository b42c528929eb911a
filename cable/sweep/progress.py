"""The one-line progress bar of a sweep (:func:`cable.sweep.run.sweep` with ``progress=True``)."""

from __future__ import annotations

import sys
import time


class ProgressBar:
    """A one-line progress bar: points done, failures, time left (on a terminal, redrawn).

    Parameters
    ----------
    total : int
        Points of the sweep.
    done, failed : int
        Points stored already (and how many of them failed).
    stream : file
        Where to draw (stderr by default). Not a terminal: one line per tenth done.
    """

    def __init__(self, total: int, done: int = 0, failed: int = 0, stream=None, width: int = 28):
        self.total, self.done, self.failed = total, done, failed
        self.stream = stream or sys.stderr
        self.width = width
        self.start_done = done
        self.t0 = time.perf_counter()
        self.tty = getattr(self.stream, "isatty", lambda: False)()
        self.last_draw = 0.0
        self.last_tenth = -1
        self.width_drawn = 0
        self.draw(force=True)

    def update(self, failed: bool) -> None:
        self.done += 1
        self.failed += int(failed)
        self.draw()

    def line(self) -> str:
        frac = self.done / self.total if self.total else 1.0
        fill = int(round(frac * self.width))
        ran = self.done - self.start_done
        left = self.total - self.done
        if ran and left:
            rest = (time.perf_counter() - self.t0) / ran * left
            eta = f"{int(rest // 3600)}:{int(rest % 3600 // 60):02d}:{int(rest % 60):02d} left"
        else:
            eta = "done" if not left else "time left: --"
        return (f"[{'#' * fill}{'.' * (self.width - fill)}] {self.done}/{self.total} points, "
                f"{self.failed} failed, {eta}")

    def draw(self, force: bool = False) -> None:
        now = time.perf_counter()
        if self.tty:
            if force or now - self.last_draw > 0.1 or self.done == self.total:
                self._redraw()
                self.last_draw = now
            return
        tenth = int(10 * self.done / self.total) if self.total else 10
        if force or tenth > self.last_tenth:
            self.stream.write(self.line() + "\n")
            self.stream.flush()
            self.last_tenth = tenth

    def _redraw(self, end: str = "") -> None:
        text = self.line()
        self.stream.write("\r" + text.ljust(self.width_drawn) + end)  # blank what a longer line left
        self.stream.flush()
        self.width_drawn = len(text)

    def close(self) -> None:
        if self.tty:
            self._redraw("\n")
