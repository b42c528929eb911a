"""Reaction schemes (``numerics.reaction``): stability limits and accuracy per cost.

Two measurements (see DEVELOPERS.md, "Reaction schemes (issue 18)"):

``--stability``: the largest dt at which each scheme still gives a regular action
potential, by bisection on dt (2% resolution) for a single cell paced once: no NaN or
runaway, the cell excited, and APD90 within 5% of the scheme's own value at a fine dt.
HH at 6.3 and 18.5 degC (the rates scale with Q10 = 3), LR1 and TP06 (epi) at their
defaults, and an HH strand (the yardstick's grid) for the strand's own limit.

``--accuracy``: the HH strand of the yardstick (1000 nodes, dx 50 um, 18.5 degC), CV of
the first beat against the dt -> 0 value at that grid (``rk4`` at dt 0.3125 us, half
steps not merged); for each scheme, the largest dt on a halving ladder from 40 us at
which this and every smaller rung stay within 0.1% of 18.73 m/s (the grid-converged CV,
DEVELOPERS.md), and the wall time of ``cable.simulate`` there (best of 3).

Run::

    python tools/bench/reaction_schemes.py --stability
    python tools/bench/reaction_schemes.py --accuracy [--merge both]
"""

from __future__ import annotations

import argparse
import time

import numpy as np

SCHEMES = ("rush-larsen", "rush-larsen-2", "heun", "rk4")

CELLS = {
    "hodgkin-huxley-1952 (6.3 degC)": ({"model": "hodgkin-huxley-1952"}, 20.0, 0.5, 15.0, 1e-4),
    "hodgkin-huxley-1952 (18.5 degC)": ({"model": "hodgkin-huxley-1952", "temperature": 18.5}, 20.0, 0.5, 15.0,
                                        1e-4),
    "luo-rudy-1991": ({"model": "luo-rudy-1991"}, 52.0, 1.0, 450.0, 1e-3),
    "ten-tusscher-panfilov-2006": ({"model": "ten-tusscher-panfilov-2006"}, 52.0, 1.0, 450.0, 1e-3),
}

#: the yardstick's strand (tools/bench/yardstick_ratio.py)
NODES, DX = 1000, 0.005
STRAND = {
    "membrane": {"model": "hodgkin-huxley-1952", "temperature": 18.5},
    "fiber": {"length": (NODES - 1) * DX, "dx": DX, "radius": "238 um", "axial_resistivity": "35.4 ohm*cm"},
    "stimulus": [{"amplitude": 2000.0, "duration": 0.2, "width": 0.1 - 0.5 * DX}],
    "run": {"duration": 20.0},
    "output": {"every": 0.1},
}
CV_CONVERGED = 18.73   # m/s, DEVELOPERS.md (cable converge cases/squid_axon.toml)
TOLERANCE = 1e-3       # relative, of CV_CONVERGED


def _cell_apd(membrane, amp, dur, T, scheme, dt):
    import cable

    case = {"membrane": membrane, "stimulus": [{"amplitude": amp, "duration": dur, "start": 1.0}],
            "numerics": {"dt": dt, "reaction": scheme}, "run": {"duration": T},
            "output": {"every": dt if T < 100.0 else 0.5}}  # HH's short AP: sampled every step
    try:
        ds = cable.simulate(case)
    except cable.SimulationError:
        return np.nan
    if not int(ds.captured.values[0]):
        return np.nan
    return float(ds.apd.sel(level=90.0).values.ravel()[0])


def largest_stable(membrane, amp, dur, T, scheme, fine) -> float:
    """Bisection (in log dt, to 2%) for the largest dt with a regular action potential."""
    ref = _cell_apd(membrane, amp, dur, T, scheme, fine)

    def ok(dt):
        apd = _cell_apd(membrane, amp, dur, T, scheme, dt)
        return bool(np.isfinite(apd) and abs(apd - ref) < 0.05 * ref)

    lo, hi = fine, fine
    while ok(hi) and hi < 1.0:
        lo, hi = hi, 2.0 * hi
    while hi / lo > 1.02:
        mid = np.sqrt(lo * hi)
        lo, hi = (mid, hi) if ok(mid) else (lo, mid)
    return lo


def stability(only=None) -> None:
    print(f"{'model':34s}" + "".join(f"{s:>15s}" for s in SCHEMES) + "   (largest stable dt [ms])")
    for label, (membrane, amp, dur, T, fine) in CELLS.items():
        if only and only not in label:
            continue
        row = [largest_stable(membrane, amp, dur, T, s, fine) for s in SCHEMES]
        print(f"{label:34s}" + "".join(f"{v:15.4g}" for v in row), flush=True)


def _strand_cv(scheme, dt, merge=True):
    import cable

    case = dict(STRAND, numerics={"dt": dt, "reaction": scheme, "merge_half_steps": merge})
    best, cv = np.inf, np.nan
    for _ in range(3 if np.isfinite(dt) else 1):
        t = time.perf_counter()
        try:
            ds = cable.simulate(case)
        except cable.SimulationError:
            return np.nan, np.nan
        best = min(best, time.perf_counter() - t)
        cv = float(ds.conduction_velocity.values[0])
    return cv, best


def accuracy(merges) -> None:
    ref, _ = _strand_cv("rk4", 0.0003125, merge=False)
    print(f"reference CV (rk4, dt 0.3125 us, half steps not merged): {ref:.6f} m/s; "
          f"tolerance {TOLERANCE * CV_CONVERGED:.4f} m/s")
    print("scheme          merge  largest_dt_us  CV_m/s     error_m/s  wall_s")
    for merge in merges:
        for scheme in SCHEMES:
            dt = 0.04
            rungs = []
            while dt > 0.0001:
                cv, wall = _strand_cv(scheme, dt, merge)
                rungs.append((dt, cv, wall))
                if np.isfinite(cv) and abs(cv - ref) <= TOLERANCE * CV_CONVERGED and len(rungs) > 1 \
                        and abs(rungs[-2][1] - ref) <= TOLERANCE * CV_CONVERGED:
                    break      # this rung and the one above pass: the one above is the answer ...
                dt /= 2.0
            # ... unless only the last passes: the largest rung from which every finer one passes
            good = [r for r in rungs if np.isfinite(r[1]) and abs(r[1] - ref) <= TOLERANCE * CV_CONVERGED]
            pick = None
            for k in range(len(rungs) - 1, -1, -1):
                if rungs[k] in good:
                    pick = rungs[k]
                else:
                    break
            if pick is None:
                print(f"{scheme:15s} {str(merge):6s} none within tolerance down to {rungs[-1][0] * 1e3:g} us")
                continue
            dt, cv, wall = pick
            print(f"{scheme:15s} {str(merge):6s} {dt * 1e3:13.4g}  {cv:9.6f}  {cv - ref:+9.5f}  {wall:7.3f}",
                  flush=True)


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--stability", action="store_true", help="largest stable dt per scheme and model")
    ap.add_argument("--model", default=None, help="--stability: only the cells whose label contains this")
    ap.add_argument("--accuracy", action="store_true", help="largest dt and wall time at 0.1%% CV error (HH)")
    ap.add_argument("--merge", choices=("on", "off", "both"), default="both",
                    help="numerics.merge_half_steps in --accuracy")
    args = ap.parse_args(argv)
    if args.stability:
        stability(args.model)
    if args.accuracy:
        accuracy({"on": (True,), "off": (False,), "both": (True, False)}[args.merge])
    if not (args.stability or args.accuracy):
        ap.print_help()
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
