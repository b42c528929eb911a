"""How the cost grows with nodes (100 to 100,000) and with steps: it should be linear.

Every step is linear in the node count: the reaction and the probes touch each node
once, the diffusion solve is a tridiagonal elimination (one sweep down, one up), the
stimulus visits only its nodes. This measures it: the Hodgkin & Huxley (1952) strand
at dx 50 um, dt 2.5 us, with lengths from 100 to 100,000 nodes for a fixed duration,
and 1000 nodes for durations from 1,000 to 16,000 steps. Printed: the whole
``cable.simulate`` time and the loop time per node and step, and the slope of
log(time) against log(size) (1 = linear, 2 = quadratic).

Run::

    python tools/bench/scaling.py                 # default rates (tabulated)
    python tools/bench/scaling.py --rates exact
"""

from __future__ import annotations

import argparse
import copy
import time

import numpy as np

import cable

DX, DT = 0.005, 0.0025
BASE = {"membrane": {"model": "hodgkin-huxley-1952", "temperature": 18.5},
        "fiber": {"dx": DX, "radius": "238 um", "axial_resistivity": "35.4 ohm*cm"},
        "stimulus": [{"amplitude": 2000.0, "duration": 0.2, "width": 0.1}],
        "numerics": {"dt": DT}, "output": {"every": 0.1}}


def case(nodes: int, steps: int, rates: str) -> dict:
    c = copy.deepcopy(BASE)
    c["fiber"]["length"] = (nodes - 1) * DX
    c["run"] = {"duration": steps * DT}
    c["numerics"]["rates"] = rates
    if nodes < 200:        # the default CV window needs a few nodes; keep it inside the strand
        c["measure"] = {"cv_window": [0.25 * (nodes - 1) * DX, 0.75 * (nodes - 1) * DX]}
    return c


def best(c: dict, repeat: int) -> tuple[float, float]:
    """(whole simulate [s], loop [s]), best of ``repeat`` after one warm-up."""
    cable.simulate(c)
    walls, loops = [], []
    for _ in range(repeat):
        t = time.perf_counter()
        ds = cable.simulate(c)
        walls.append(time.perf_counter() - t)
        loops.append(float(ds.attrs["wall_time_s"]))
    return min(walls), min(loops)


def slope(sizes, times) -> float:
    return float(np.polyfit(np.log(sizes), np.log(times), 1)[0])


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--rates", default="tabulated", choices=("tabulated", "exact", "reference"))
    ap.add_argument("--repeat", type=int, default=3)
    args = ap.parse_args(argv)
    steps = 800
    print(f"numerics.rates = {args.rates}; {steps} steps ({steps * DT:g} ms), output every 0.1 ms")
    print(f"{'nodes':>8} {'simulate_s':>11} {'loop_s':>8} {'ns/node-step':>13}")
    sizes, loops = [100, 1000, 10_000, 100_000], []
    for n in sizes:
        wall, loop = best(case(n, steps, args.rates), args.repeat)
        loops.append(loop)
        print(f"{n:8d} {wall:11.4f} {loop:8.4f} {loop / (n * steps) * 1e9:13.2f}")
    print(f"slope of log(loop time) on log(nodes), 1000..100000 nodes: {slope(sizes[1:], loops[1:]):.3f}")
    print(f"{'steps':>8} {'simulate_s':>11} {'loop_s':>8} {'ns/node-step':>13}   (1000 nodes)")
    counts, loops = [1000, 2000, 4000, 8000, 16000], []
    for k in counts:
        wall, loop = best(case(1000, k, args.rates), args.repeat)
        loops.append(loop)
        print(f"{k:8d} {wall:11.4f} {loop:8.4f} {loop / (1000 * k) * 1e9:13.2f}")
    print(f"slope of log(loop time) on log(steps): {slope(counts, loops):.3f}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
