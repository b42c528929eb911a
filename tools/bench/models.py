"""Cost per node and step of every registered membrane model, on a 1000-node strand.

Each model runs a strand of 1000 nodes with one propagated wave (a nerve axon for the
models whose currents are per area, a cardiac tissue strand otherwise), in every
``numerics.rates`` mode it has, warm (compiled or loaded first). Printed: the loop
time per node and step [ns] (best of ``--repeat``) and the conduction velocity, so a
wave that did not travel shows.

Run::

    python tools/bench/models.py
    python tools/bench/models.py --models hodgkin-huxley-1952 ten-tusscher-panfilov-2006 --repeat 5
    python tools/bench/models.py --models ten-tusscher-panfilov-2006 --transmural

``--transmural``: the TP06 strand in endocardial, M and epicardial thirds instead (the cell
type, and the defaults of G_to and G_Ks that follow it, differ between nodes).
"""

from __future__ import annotations

import argparse
import copy
import time

import cable

NODES = 1000

#: axon form (Hodgkin & Huxley 1952 squid axon geometry) and tissue form (ten Tusscher
#: et al. 2004: rho 162 ohm*cm, S 0.2 /um, C_m 2 uF/cm^2)
AXON = {"fiber": {"length": (NODES - 1) * 0.005, "dx": 0.005, "radius": "238 um", "axial_resistivity": "35.4 ohm*cm"},
        "stimulus": [{"amplitude": 2000.0, "duration": 0.2, "width": 0.1}],
        "numerics": {"dt": 0.0025}, "run": {"duration": 20.0}, "output": {"every": 0.1}}
TISSUE = {"fiber": {"length": (NODES - 1) * 0.005, "dx": 0.005, "conductivity": 1000.0 / 162.0,
                    "surface_to_volume": 2000.0, "capacitance": 2.0},
          "stimulus": [{"amplitude": 200.0, "duration": 1.0, "width": 0.1}],
          "numerics": {"dt": 0.01}, "run": {"duration": 100.0}, "output": {"every": 1.0}}


def strand_case(name: str, transmural: bool = False) -> dict:
    model = cable.get_model(name)
    case = copy.deepcopy(AXON if model.current_basis == "area" else TISSUE)
    case["membrane"] = {"model": name}
    if model.temperature_parameter:
        case["membrane"]["temperature"] = 18.5
    if transmural:  # (a model with a cell_type: TP06)
        length = case["fiber"]["length"]
        case["membrane"]["parameters"] = {"cell_type": "endo"}
        case["region"] = {"mid": {"start": length / 3, "end": 2 * length / 3, "parameters": {"cell_type": "mid"}},
                          "epi": {"start": 2 * length / 3, "end": length, "parameters": {"cell_type": "epi"}}}
    return case


def modes(model) -> list[str]:
    if model.fast is None:
        return ["reference"]
    return (["tabulated"] if model.fast.build_table is not None else []) + ["exact", "reference"]


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--models", nargs="*", default=None, help="model names (default: all registered)")
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--transmural", action="store_true", help="TP06 in endo, M and epi thirds (see above)")
    args = ap.parse_args(argv)
    names = args.models or cable.model_names()
    print(f"{'model':>28} {'rates':>10} {'nodes':>6} {'steps':>6} {'ns/node-step':>13} {'simulate_s':>11} "
          f"{'CV_m/s':>8}")
    for name in names:
        model = cable.get_model(name)
        for mode in modes(model):
            case = strand_case(name, args.transmural)
            case["numerics"]["rates"] = mode
            try:
                ds = cable.simulate(case)
            except cable.SimulationError as exc:
                print(f"{name:>28} {mode:>10}  failed: {exc}")
                continue
            loops, walls = [], []
            for _ in range(args.repeat):
                t = time.perf_counter()
                ds = cable.simulate(case)
                walls.append(time.perf_counter() - t)
                loops.append(float(ds.attrs["wall_time_s"]))
            steps = int(round(case["run"]["duration"] / case["numerics"]["dt"]))
            n = ds.sizes["x"]
            cv = float(ds.conduction_velocity[0])
            print(f"{name:>28} {mode:>10} {n:6d} {steps:6d} {min(loops) / (n * steps) * 1e9:13.2f} "
                  f"{min(walls):11.3f} {cv:8.3f}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
