"""Adaptive time steps (``numerics.dt_max``) against the fixed step: wall time and error.

The strand of issue 15: TP06 epicardial, 2 cm, dx 100 um, tissue D 0.00154 cm^2/ms
(sigma 1000/162 mS/cm, chi 2000 /cm, C_m 2 uF/cm^2), paced at 1 Hz from its left end
(200 uA/cm^2 for 1 ms over 1 mm), output every 1 ms. Runs, in the same process:

* fixed dt 20 us (the step users take), the yardstick of the speed ratio;
* adaptive, fine step 5 us, longest 0.5 ms (levels 5 us x 2^k up to 0.32 ms);
* adaptive, fine step 20 us, longest 0.5 ms (levels up to 0.32 ms);
* with ``--reference``: fixed dt 5 us, for the errors of each run (slow: ~4x the first).

Each run's wall time is that of the whole ``cable.simulate`` call, best of
``--rounds`` (after one warm-up run that loads the compiled kernels). The errors are the
largest differences over beats and nodes: activation time, CV, APD90, rest, upstroke
velocity (nodes 5 from each end excluded).

With ``--cell-beats N`` (the issue's N = 1000): a TP06 epicardial cell paced at 1 Hz
(52 uA/uF for 1 ms), warm: ``cable.simulate`` of N beats with adaptive steps 5 us
- 0.5 ms (output every 1 ms; the compiled single-cell loop, ``cable/kernels/adaptive_cell.py``)
and pre-pacing of N beats (``[membrane.prepace]``, same steps); in the same run the fixed
20 us step over ``--cell-fixed-beats`` beats (default 20; both ways), and its time
scaled to N beats (the fixed loops cost the same every beat, except that
``cable.simulate``'s scans every pulse of the train at every step, so its scaled
figure is a lower bound).

Run::

    python tools/bench/adaptive.py                       # the issue's 5 beats
    python tools/bench/adaptive.py --beats 2 --reference # shorter, with errors
    python tools/bench/adaptive.py --cell-beats 1000     # the single cell
"""

from __future__ import annotations

import argparse
import time

import numpy as np

import cable
from cable.kernels import adaptive


def case(beats: int, length: float, dt: float, dt_max: float | None = None) -> dict:
    c = {"membrane": {"model": "ten-tusscher-panfilov-2006"},
         "fiber": {"length": length, "dx": 0.01, "conductivity": 1000.0 / 162.0, "surface_to_volume": 2000.0,
                   "capacitance": 2.0},
         "stimulus": [{"amplitude": 200.0, "duration": 1.0, "width": 0.1, "count": beats, "cycle_length": 1000.0}],
         "numerics": {"dt": dt}, "run": {"duration": 1000.0 * beats}, "output": {"every": 1.0}}
    if dt_max is not None:
        c["numerics"]["dt_max"] = dt_max
    return c


def errors(ds, ref) -> dict:
    inner = slice(5, -5)
    return {"activation_ms": float(np.nanmax(np.abs(ds.activation_time - ref.activation_time))),
            "cv_%": 100 * float(np.max(np.abs(ds.conduction_velocity / ref.conduction_velocity - 1.0))),
            "apd90_ms": float(np.nanmax(np.abs(ds.apd.sel(level=90.0) - ref.apd.sel(level=90.0)))),
            "rest_mV": float(np.nanmax(np.abs(ds.resting_potential - ref.resting_potential))),
            "upstroke_%": 100 * float(np.nanmax(np.abs(ds.upstroke_velocity.isel(x=inner)
                                                        / ref.upstroke_velocity.isel(x=inner) - 1.0)))}


def timed(c: dict, rounds: int):
    """(best wall time, best CPU time of this process, result) over ``rounds`` runs [s]: on a
    shared machine the CPU time is the steadier figure (it leaves out the time the
    process waited for a core)."""
    best, cpu, ds = np.inf, np.inf, None
    for _ in range(rounds):
        t, c0 = time.perf_counter(), time.process_time()
        ds = cable.simulate(c)
        best = min(best, time.perf_counter() - t)
        cpu = min(cpu, time.process_time() - c0)
    return best, cpu, ds


def cell_case(beats: int, dt: float, dt_max: float | None = None, prepace: bool = False) -> dict:
    c = {"membrane": {"model": "ten-tusscher-panfilov-2006"},
         "stimulus": [{"amplitude": 52.0, "duration": 1.0, "count": beats, "cycle_length": 1000.0}],
         "numerics": {"dt": dt}, "run": {"duration": 1000.0 * beats}, "output": {"every": 1.0}}
    if prepace:   # pre-pacing only: the run itself is 2 ms
        c["membrane"]["prepace"] = {"beats": beats, "cycle_length": 1000.0}
        c["stimulus"][0]["count"] = 1
        c["run"]["duration"] = 2.0
    if dt_max is not None:
        c["numerics"]["dt_max"] = dt_max
    return c


def timed_cell(c: dict):
    t = time.perf_counter()
    if "prepace" in c["membrane"]:
        res = cable.prepare(c).prepace
    else:
        res = cable.simulate(c)
    return time.perf_counter() - t, res


def cell_bench(beats: int, fixed_beats: int) -> None:
    import os

    for pre in (False, True):          # warm-up: the compiled loops loaded once
        timed_cell(cell_case(1, 0.005, 0.5, pre))
        timed_cell(cell_case(1, 0.02, None, pre))
    print(f"TP06 epi cell, 1 Hz, warm; load average {os.getloadavg()[0]:.2f} at the start")
    for pre, what in ((False, "cable.simulate"), (True, "pre-pacing")):
        wall, res = timed_cell(cell_case(beats, 0.005, 0.5, pre))
        steps = res["steps_taken"] if pre else res.steps_taken.values
        apd = "" if pre else f"  APD90 of the last beat {float(res.apd.sel(level=90.0).isel(beat=-1)):.3f} ms"
        print(f"{what:15s} adaptive 5 us - 0.5 ms, {beats} beats: wall {wall:7.2f} s  "
              f"({int(np.sum(steps))} steps){apd}")
        wall_f, _ = timed_cell(cell_case(fixed_beats, 0.02, None, pre))
        print(f"{what:15s} fixed 20 us, {fixed_beats} beats: wall {wall_f:7.2f} s, scaled to {beats} beats "
              f"{wall_f * beats / fixed_beats:8.1f} s  fixed/adaptive {wall_f * beats / fixed_beats / wall:5.1f}")
    print(f"load average {os.getloadavg()[0]:.2f} at the end")


def main(argv=None) -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--beats", type=int, default=5)
    ap.add_argument("--length", type=float, default=2.0, help="strand length [cm]")
    ap.add_argument("--rounds", type=int, default=1)
    ap.add_argument("--reference", action="store_true", help="also run the fixed 5 us step, for the errors")
    ap.add_argument("--cell-beats", type=int, default=None, help="time a TP06 cell over this many beats instead")
    ap.add_argument("--cell-fixed-beats", type=int, default=20, help="beats of the fixed-step cell runs")
    args = ap.parse_args(argv)
    if args.cell_beats is not None:
        cell_bench(args.cell_beats, args.cell_fixed_beats)
        return
    runs = [("fixed 20 us", case(args.beats, args.length, 0.02)),
            ("adaptive 5 us - 0.5 ms", case(args.beats, args.length, 0.005, 0.5)),
            ("  without the window", case(args.beats, args.length, 0.005, 0.5)),
            ("adaptive 20 us - 0.5 ms", case(args.beats, args.length, 0.02, 0.5))]
    for _, c in runs:                  # warm-up: the compiled kernels loaded once
        warm = dict(c, run={"duration": 20.0}, stimulus=[dict(c["stimulus"][0], count=1)])
        cable.simulate(warm)
    ref = timed(case(args.beats, args.length, 0.005), 1)[2] if args.reference else None
    base = None
    most = adaptive.WINDOW_MOST
    import os

    print(f"TP06 strand {args.length:g} cm, dx 100 um, {args.beats} beats at 1 Hz, output every 1 ms; "
          f"load average {os.getloadavg()[0]:.2f}")
    for name, c in runs:
        adaptive.WINDOW_MOST = 0.0 if "without" in name else most   # no node-window: every node at the block's level
        wall, cpu, ds = timed(c, args.rounds)
        base = (wall, cpu) if base is None else base
        steps = "" if "steps_taken" not in ds else \
            "  steps " + " ".join(f"{h:g}:{int(n)}" for h, n in zip(ds.step_dt.values, ds.steps_taken.values))
        print(f"{name:24s} wall {wall:7.2f} s  fixed/this {base[0] / wall:5.2f}  cpu {cpu:7.2f} s  "
              f"fixed/this {base[1] / cpu:5.2f}{steps}")
        if ref is not None:
            print(" " * 26 + "  ".join(f"{k} {v:.3g}" for k, v in errors(ds, ref).items()))


if __name__ == "__main__":
    main()
