"""The speed figure: the C yardstick's loop time divided by the whole ``cable.simulate`` time.

The yardstick (``../shared/bench/hh_strand.c``, compiled here with ``gcc -O3
-march=native -ffast-math``) solves the Hodgkin & Huxley (1952) strand of 1000 nodes,
dx 50 um, dt 2.5 us, 8000 steps (20 ms) with Strang splitting, Rush-Larsen gates and
Crank-Nicolson diffusion. The same case goes through ``cable.simulate`` (output every
0.1 ms), in each ``numerics.rates`` mode. Both run in this one process, alternating,
several times; the best time of each is kept (machines here are shared and noisy).

    ratio = yardstick loop time / cable.simulate wall time      (higher is faster)

Run::

    python tools/bench/yardstick_ratio.py             # 5 rounds
    python tools/bench/yardstick_ratio.py --rounds 9 --yardstick-dir ../shared/bench
"""

from __future__ import annotations

import argparse
import copy
import subprocess
import tempfile
import time
from pathlib import Path

NODES = 1000
STEPS = 8000
DX = 0.005          # cm
DT = 0.0025         # ms

#: the yardstick's case as a cable case (stimulus 2000 uA/cm^2 for 0.2 ms on x < 0.1 cm:
#: the 20 nodes 0..19 the C code stimulates)
CASE = {
    "membrane": {"model": "hodgkin-huxley-1952", "temperature": 18.5},
    "fiber": {"length": (NODES - 1) * DX, "dx": DX, "radius": "238 um", "axial_resistivity": "35.4 ohm*cm"},
    "stimulus": [{"amplitude": 2000.0, "duration": 0.2, "width": 0.1 - 0.5 * DX}],
    "numerics": {"dt": DT},
    "run": {"duration": STEPS * DT},
    "output": {"every": 0.1},
}

DEFAULT_DIR = Path(__file__).resolve().parents[3] / "shared" / "bench"


def build_yardstick(folder: Path, out: Path) -> Path:
    """Compile ``hh_strand.c`` exactly as the ``yardstick`` script does."""
    binary = out / "hh_strand"
    subprocess.run(["gcc", "-O3", "-march=native", "-ffast-math", "-o", str(binary),
                    str(folder / "hh_strand.c"), "-lm"], check=True)
    return binary


def run_yardstick(binary: Path, nodes: int = NODES, steps: int = STEPS) -> dict:
    """Run the compiled yardstick; its printed figures, and the loop time [s]."""
    text = subprocess.run([str(binary), str(nodes), str(steps)], check=True, capture_output=True,
                          text=True).stdout
    out = {}
    for line in text.splitlines():
        key, *values = line.split()
        out[key] = [float(v) for v in values]
    out["loop_s"] = out["ns_per_node_step"][0] * 1e-9 * nodes * steps
    return out


def time_simulate(case: dict) -> tuple[float, object]:
    """Wall time [s] of one ``cable.simulate(case)`` and its result."""
    import cable

    t = time.perf_counter()
    ds = cable.simulate(case)
    return time.perf_counter() - t, ds


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--rounds", type=int, default=5, help="alternating repetitions (best kept)")
    ap.add_argument("--yardstick-dir", type=Path, default=DEFAULT_DIR, help="folder of hh_strand.c")
    args = ap.parse_args(argv)

    modes = ("tabulated", "exact", "reference")
    cases = {}
    for mode in modes:
        c = copy.deepcopy(CASE)
        c["numerics"]["rates"] = mode
        cases[mode] = c
    with tempfile.TemporaryDirectory() as tmp:
        binary = build_yardstick(args.yardstick_dir, Path(tmp))
        for c in cases.values():      # compile (or load from the cache) before timing
            time_simulate(c)
        best = {"yardstick": float("inf"), **{m: float("inf") for m in modes}}
        loop = {m: float("inf") for m in modes}
        results = {}
        for _ in range(args.rounds):
            ys = run_yardstick(binary)
            best["yardstick"] = min(best["yardstick"], ys["loop_s"])
            for mode in modes:
                wall, ds = time_simulate(cases[mode])
                best[mode] = min(best[mode], wall)
                loop[mode] = min(loop[mode], float(ds.attrs["wall_time_s"]))
                results[mode] = ds
    ns = 1e9 / (NODES * STEPS)
    print(f"case: Hodgkin-Huxley strand, {NODES} nodes, dx {DX * 1e4:g} um, dt {DT * 1e3:g} us, {STEPS} steps; "
          f"best of {args.rounds} alternating rounds")
    print(f"yardstick (gcc -O3 -march=native -ffast-math): loop {best['yardstick'] * 1e3:8.1f} ms "
          f"({best['yardstick'] * ns:5.2f} ns/node-step)  CV {ys['cv_m_per_s'][0]:.4f} m/s")
    print(f"{'numerics.rates':>16} {'simulate_ms':>12} {'loop_ms':>8} {'ns/node-step':>13} {'ratio':>6} {'CV_m/s':>9}")
    for mode in modes:
        cv = float(results[mode].conduction_velocity[0])
        print(f"{mode:>16} {best[mode] * 1e3:12.1f} {loop[mode] * 1e3:8.1f} {best[mode] * ns:13.2f} "
              f"{best['yardstick'] / best[mode]:6.2f} {cv:9.4f}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
