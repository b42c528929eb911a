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

Run::

    python tools/bench/cellml.py                                  # ORd, 2 rounds
    python tools/bench/cellml.py --model ../shared/cellml/noble_1962.cellml --rounds 3
"""

from __future__ import annotations

import argparse
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


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--model", default=str(SHARED / "cellml" / "ohara_rudy_2011.cellml"))
    ap.add_argument("--rounds", type=int, default=2)
    args = ap.parse_args()

    import cable
    from cable.membrane.equations.registry import cellml_model_name

    name = cellml_model_name(args.model)
    for run in RUNS:  # compile (cached after the first run)
        cable.simulate(dict(case(name, *run), run={"duration": 0.5}))
    best = {"yardstick": None, **{run: None for run in RUNS}}
    cvs = {}
    for _ in range(args.rounds):
        y = yardstick(args.model)
        cvs["yardstick"] = y["cv"]
        best["yardstick"] = min(best["yardstick"] or 1e300, y["ns"])
        for run in RUNS:
            t0 = time.perf_counter()
            ds = cable.simulate(case(name, *run))
            ns = (time.perf_counter() - t0) * 1e9 / (NODES * STEPS)
            best[run] = min(best[run] or 1e300, ns)
            cvs[run] = float(ds.conduction_velocity[0])
    print(f"model {Path(args.model).name}: {NODES} nodes x {STEPS} steps, best of {args.rounds}")
    print(f"{'run':36s} {'ns/node-step':>12s} {'CV m/s':>8s} {'yardstick/cable':>16s}")
    for k, ns in best.items():
        label = k if isinstance(k, str) else f"cable {k[0]}, {k[1]}"
        print(f"{label:36s} {ns:12.1f} {cvs[k]:8.4f} {best['yardstick'] / ns:16.2f}")


if __name__ == "__main__":
    main()
