"""Per-strand cost of 64 small strands: 64 runs of ``cable.simulate`` against one
``cable.kernels.batch.simulate_batch`` call.

The strands are Hodgkin & Huxley (1952) axons of 101 nodes (1 cm, dx 100 um), dt 10 us,
20 ms, output every 0.1 ms, the points of a sweep: over the stimulus amplitude (the
membrane at its defaults) and over the sodium conductance (every point's membrane
differs from the defaults, so ``prepare`` first settles each at its own rest), and
over the length (0.5 to 1.5 cm, 51 to 151 nodes: strands laid end to end instead of
interleaved, each solved on its own nodes). Three costs per strand, best of
``--repeat``:

* end to end: the wall time of all 64 results, divided by 64;
* time loop: the loop wall time of each result (``wall_time_s``: kernel calls and the
  per-output work), summed, divided by 64;
* kernel: the CPU time inside the compiled time loop only.

It also says whether every batched result equals its separate run bit for bit
(every data variable, ``np.array_equal``; the batch is meant to be exact).

Run::

    python tools/bench/batch.py
    python tools/bench/batch.py --strands 256 --repeat 5
"""

from __future__ import annotations

import argparse
import copy
import sys
import time

import numpy as np

import cable
from cable.kernels.batch import simulate_batch

BASE = {"membrane": {"model": "hodgkin-huxley-1952"},
        "fiber": {"length": 1.0, "dx": 0.01, "radius": "238 um", "axial_resistivity": "35.4 ohm*cm"},
        "stimulus": [{"amplitude": 500.0, "duration": 0.5, "width": 0.05}],
        "numerics": {"dt": 0.01}, "run": {"duration": 20.0}, "output": {"every": 0.1}}


def sweep(kind: str, count: int) -> list:
    cases = []
    for k in range(count):
        c = copy.deepcopy(BASE)
        if kind == "amplitude":
            c["stimulus"][0]["amplitude"] = 100.0 + 900.0 * k / max(1, count - 1)
        elif kind == "length":
            c["fiber"]["length"] = round(0.5 + k / max(1, count - 1), 2)
        else:
            c["membrane"]["scale"] = {"g_Na": 0.6 + 0.4 * k / max(1, count - 1)}
        cases.append(cable.load_case(c))
    return cases


class _KernelClock:
    """Wraps the compiled time loop and sums the CPU time spent inside it."""

    def __init__(self, fn):
        self.fn, self.total = fn, 0.0
        self.signatures = fn.signatures

    def __call__(self, *args):
        t = time.thread_time()
        out = self.fn(*args)
        self.total += time.thread_time() - t
        return out


def measure(cases, repeat: int) -> tuple:
    loops = sys.modules["cable.kernels.loops"]
    original = loops.loop
    fast = original(cases[0].membrane.model, fast=True)
    segments = original(cases[0].membrane.model, fast=True, layout="segments")
    best = {}
    last = {}
    for label, run in (("separate", lambda: [cable.simulate(c) for c in cases]),
                       ("batch", lambda: simulate_batch(cases))):
        run()                                   # warm
        for _ in range(repeat):
            clock, clock_segments = _KernelClock(fast), _KernelClock(segments)
            loops.loop = lambda _name, *_, layout="strands", c=clock, cs=clock_segments, **__: \
                cs if layout == "segments" else c
            try:
                t = time.perf_counter()
                results = run()
                wall = time.perf_counter() - t
            finally:
                loops.loop = original
            loop = sum(float(ds.attrs["wall_time_s"]) for ds in results)
            row = (wall, loop, clock.total + clock_segments.total)
            best[label] = tuple(min(a, b) for a, b in zip(best.get(label, row), row))
            last[label] = results
    exact = all(np.array_equal(a[name].values, b[name].values, equal_nan=True)
                for a, b in zip(last["separate"], last["batch"]) for name in a.data_vars)
    return best, exact


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--strands", type=int, default=64)
    ap.add_argument("--repeat", type=int, default=3)
    args = ap.parse_args(argv)
    n = args.strands
    print(f"{n} strands of 101 nodes (51 to 151 in the length sweep), 2000 steps each; per-strand cost [ms], "
          f"best of {args.repeat}")
    print(f"{'sweep over':>12} {'cost':>11} {'separate':>9} {'batch':>7} {'ratio':>6}  bitwise equal")
    for kind in ("amplitude", "g_Na", "length"):
        best, exact = measure(sweep(kind, n), args.repeat)
        for j, label in enumerate(("end to end", "time loop", "kernel")):
            sep, bat = best["separate"][j] / n * 1e3, best["batch"][j] / n * 1e3
            print(f"{kind:>12} {label:>11} {sep:9.3f} {bat:7.3f} {sep / bat:6.2f}  {'yes' if exact else 'NO'}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
