"""The CellML speed figure: an imported model through ``cable.simulate`` against the C yardstick.

``../shared/bench/cellml_yardstick MODEL.cellml NX NSTEPS`` compiles libcellml's C code
for the model into a strand driver (forward Euler for every state, Crank-Nicolson,
Strang splitting, dx 100 um, dt 5 us, D 0.00154 cm^2/ms from rho 162 ohm*cm,
S 0.2 /um, C_m 2 uF/cm^2, the model's own stimulus on the first 1 mm) and prints ns per
node-step and the CV between 30% and 70% of the strand. The same case goes through
``cable.simulate`` with the imported model (the file's stimulus removed, the case's
``[[stimulus]]`` of the same size instead), with Rush-Larsen (the default) and forward
Euler gates, in the same process, alternating; the best time of each is kept.

    ratio = yardstick ns per node-step / cable ns per node-step  (above 1: cable faster)

Times: the solver's time loop (``wall_time_s`` of the result, what the driver's figure
covers too) and, beside it, the whole ``cable.simulate`` call. CVs: the driver's and each
run's, and the tabulated run's CV relative to the driver and to the exact rates.

``--lr1`` adds Luo-Rudy 1991 through its description (``equations:luo_rudy_1991``,
tabulated and exact) against the hand-written ``luo-rudy-1991`` reference kernel, on the
tissue strand of ``tools/bench/models.py`` (1000 nodes), alternating in the same rounds.

Run::

    python tools/bench/cellml.py                                  # ORd, 2 rounds
    python tools/bench/cellml.py --rounds 3 --lr1
    python tools/bench/cellml.py --model ../shared/cellml/noble_1962.cellml --rounds 3
"""

from __future__ import annotations

import argparse
import os
import re
import subprocess
import sys
import time
from pathlib import Path

HERE = Path(__file__).resolve().parents[2]
SHARED = HERE.parent / "shared"
NODES, STEPS, DX, DT = 200, 10000, 0.01, 0.005


RUNS = (("tabulated", "rush-larsen"), ("exact", "rush-larsen"), ("tabulated", "forward-euler"))


def case(model: str, rates: str, gating: str) -> dict:
    return {
        "membrane": {"model": model},
        "fiber": {"length": (NODES - 1) * DX, "dx": DX, "conductivity": 1000.0 / 162.0,
                  "surface_to_volume": 2000.0, "capacitance": 2.0},
        # ORd's own stimulus, -80 uA/uF for 0.5 ms, as a case stimulus per area (C_m 2 uF/cm^2)
        "stimulus": [{"amplitude": 160.0, "duration": 0.5, "width": 0.1 - 0.5 * DX}],
        "numerics": {"dt": DT, "gating": gating, "rates": rates},
        "run": {"duration": STEPS * DT},
        "output": {"every": 0.1},
        # the driver's CV: -20 mV crossings at nodes int(0.3 (n-1)) and int(0.7 (n-1))
        "measure": {"threshold": -20.0, "cv_window": [int(0.3 * (NODES - 1)) * DX, int(0.7 * (NODES - 1)) * DX]},
    }


def yardstick(model: str) -> dict:
    out = subprocess.run([sys.executable, str(SHARED / "bench" / "cellml_yardstick"), model, str(NODES), str(STEPS)],
                         check=True, capture_output=True, text=True).stdout
    ns = float(re.search(r"ns_per_node_step\s+(\S+)", out).group(1))
    cv = float(re.search(r"cv_m_per_s\s+(\S+)", out).group(1))
    return {"ns": ns, "cv": cv}


LR1 = (("equations:luo_rudy_1991", "tabulated"), ("equations:luo_rudy_1991", "exact"),
       ("luo-rudy-1991", "reference"))


def timed(case_dict: dict) -> tuple:
    """(loop ns per node-step, whole-call ns per node-step, CV) of one run."""
    import cable

    t0 = time.perf_counter()
    ds = cable.simulate(case_dict)
    whole = time.perf_counter() - t0
    steps = int(round(case_dict["run"]["duration"] / case_dict["numerics"]["dt"]))
    n = ds.sizes["x"]
    return (float(ds.attrs["wall_time_s"]) * 1e9 / (n * steps), whole * 1e9 / (n * steps),
            float(ds.conduction_velocity[0]))


def lr1_case(name: str, rates: str) -> dict:
    sys.path.insert(0, str(Path(__file__).resolve().parent))
    from models import strand_case  # tools/bench/models.py: the same strand as its table

    c = strand_case(name)
    c["numerics"]["rates"] = rates
    return c


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--model", default=str(SHARED / "cellml" / "ohara_rudy_2011.cellml"))
    ap.add_argument("--rounds", type=int, default=2)
    ap.add_argument("--lr1", action="store_true", help="also Luo-Rudy 1991, generated against hand-written")
    args = ap.parse_args()

    import cable
    from cable.membrane.equations.registry import cellml_model_name

    print(f"load average before: {' '.join(f'{x:.2f}' for x in os.getloadavg())}")
    name = cellml_model_name(args.model)
    for run in RUNS:  # compile (cached after the first run)
        cable.simulate(dict(case(name, *run), run={"duration": 0.5}))
    lr1 = LR1 if args.lr1 else ()
    for run in lr1:
        cable.simulate(dict(lr1_case(*run), run={"duration": 1.0}))
    best = {"yardstick": None, **{run: None for run in RUNS + lr1}}
    cvs = {}
    for _ in range(args.rounds):
        y = yardstick(args.model)
        cvs["yardstick"] = y["cv"]
        best["yardstick"] = min(best["yardstick"] or (1e300,), (y["ns"], y["ns"]))
        for run in RUNS:
            loop, whole, cv = timed(case(name, *run))
            best[run] = min(best[run] or (1e300,), (loop, whole))
            cvs[run] = cv
        for run in lr1:
            loop, whole, cv = timed(lr1_case(*run))
            best[run] = min(best[run] or (1e300,), (loop, whole))
            cvs[run] = cv
    print(f"load average after: {' '.join(f'{x:.2f}' for x in os.getloadavg())}")
    print(f"model {Path(args.model).name}: {NODES} nodes x {STEPS} steps, best of {args.rounds}")
    print(f"{'run':36s} {'loop ns':>9s} {'whole ns':>9s} {'CV m/s':>8s} {'yardstick/cable (loop)':>23s}")
    yard = best["yardstick"][0]
    for k in ("yardstick",) + RUNS:
        label = k if isinstance(k, str) else f"cable {k[0]}, {k[1]}"
        loop, whole = best[k]
        print(f"{label:36s} {loop:9.1f} {whole:9.1f} {cvs[k]:8.4f} {yard / loop:23.2f}")
    tab, exact = cvs[RUNS[0]], cvs[RUNS[1]]
    print(f"tabulated CV against the driver: {100 * (tab / cvs['yardstick'] - 1):+.2f}%, "
          f"against exact rates: {100 * (tab / exact - 1):+.3f}%")
    if lr1:
        ref = best[LR1[-1]][0]
        print(f"Luo-Rudy 1991, {lr1_case(*LR1[0])['fiber']['length']:.3f} cm strand (tools/bench/models.py)")
        print(f"{'run':44s} {'loop ns':>9s} {'CV m/s':>8s} {'reference/run':>14s}")
        for k in lr1:
            print(f"{k[0] + ', ' + k[1]:44s} {best[k][0]:9.1f} {cvs[k]:8.4f} {ref / best[k][0]:14.2f}")


if __name__ == "__main__":
    main()
