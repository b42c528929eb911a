"""Sweep scaling and per-point overhead: an 8-point sweep on 1 and on 2 workers.

The case is the Hodgkin & Huxley (1952) axon (radius 238 um, R_i 35.4 ohm*cm, 18.5 degC)
swept over 8 sodium-conductance factors. Measured, on the same machine in the same run:

* ``simulate``   one point's :func:`cable.simulate` in this process, kernels loaded
  (best of 3) — the work itself;
* ``cable run``  the same point as a ``cable run`` command (a fresh interpreter: imports,
  kernel cache load, run, summary) — what a user pays per point without a sweep;
* ``sweep, N workers``  on a local cluster of N worker processes (its start-up shown
  apart), one task per point (``batch = 1``, as before batching): the wall time per
  point of a first ("cold") sweep on fresh workers, which load the kernels at their
  first point, and of the same sweep again on the now warm workers; and the
  worker-side time of a point, first on its worker or not.

Ratios printed: warm per-point time / ``simulate`` (the overhead of task, transfer and
storage), cold per-point time / ``cable run``, and the 1-to-2-worker speed-up. Machines here are shared and
noisy: compare ratios, not absolute times.

Batched points (``cable sweep --batch``): a 64-point sweep of small strands (HH axons
of 101 nodes, 1 cm, dx 100 um, dt 10 us, 20 ms, output every 0.1 ms, at the model's
6.3 degC, swept over the stimulus amplitude) on one warm worker, ``--batch 1`` (one
``cable.simulate`` per point) against ``--batch 16`` (four tasks of 16 strands sharing
one kernel call each): the wall time per point of the whole sweep (tasks, transfers,
point files, the result file) and the worker-side time per point, best of
``--repeat``, their ratio, and whether the two results are identical.

Run::

    python tools/bench_sweep.py               # 6 cm axon, dx 25 um, dt 0.5 us, 20 ms (about 1 s a point)
    python tools/bench_sweep.py --quick       # smaller points (overhead-dominated)
    python tools/bench_sweep.py --batch-only  # only the batched-points measurement
"""

from __future__ import annotations

import argparse
import logging
import os
import shlex
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
import xarray as xr

import cable
from cable.case import dumps_toml
from cable.machine import usable_cores

POINTS = 8


def axon_case(length: float, dx: float, dt: float, duration: float) -> dict:
    return {
        "membrane": {"model": "hodgkin-huxley-1952", "temperature": 18.5},
        "fiber": {"length": length, "dx": dx, "radius": "238 um", "axial_resistivity": "35.4 ohm*cm"},
        "stimulus": [{"amplitude": 1000.0, "duration": 0.2, "width": 0.1}],
        "numerics": {"dt": dt},
        "run": {"duration": duration},
        "output": {"every": 0.1},
    }


def time_simulate(case: dict, repeat: int = 3) -> float:
    cable.simulate(case)  # load the kernels
    best = np.inf
    for _ in range(repeat):
        t0 = time.perf_counter()
        cable.simulate(case)
        best = min(best, time.perf_counter() - t0)
    return best


def time_cable_run(case_file: Path, repeat: int = 2) -> float:
    cmd = [sys.executable, "-m", "cable", "run", str(case_file), "-q"]
    best = np.inf
    for _ in range(repeat):
        t0 = time.perf_counter()
        subprocess.run(cmd, check=True, capture_output=True)
        best = min(best, time.perf_counter() - t0)
    return best


def time_sweep(case: dict, workers: int, folder: Path, warm_repeat: int = 1) -> dict:
    """A cold sweep on fresh workers, then the same sweep again on the warm ones (best of)."""
    from distributed import Client, LocalCluster

    t0 = time.perf_counter()
    cluster = LocalCluster(n_workers=workers, threads_per_worker=1, processes=True, dashboard_address=None,
                           silence_logs=logging.ERROR)
    client = Client(cluster)
    out = {"start": time.perf_counter() - t0, "warm": np.inf}
    try:
        for k in range(1 + warm_repeat):
            path = folder / f"sweep_{workers}_{k}.nc"
            t1 = time.perf_counter()
            ds = cable.sweep(case, client=client, output=path, progress=False, batch=1)
            wall = time.perf_counter() - t1
            assert int((ds["status"] == 0).sum()) == POINTS, "every point of the benchmark should conduct"
            if k == 0:
                out["cold"] = wall
                first, rest = [], []
                for f in sorted(path.with_name(path.name + ".points").glob("point-*.nc")):
                    with xr.open_dataset(f) as p:
                        (first if int(p.attrs["first_on_worker"]) else rest).append(float(p.attrs["wall_time_s"]))
                out.update(first=first, rest=rest)
            else:
                out["warm"] = min(out["warm"], wall)
    finally:
        client.close()
        cluster.close()
    return out


#: the batched-points measurement: points, and points per task of the batched sweep
BATCH_POINTS, BATCH_SIZE = 64, 16

SMALL = {"membrane": {"model": "hodgkin-huxley-1952"},
         "fiber": {"length": 1.0, "dx": 0.01, "radius": "238 um", "axial_resistivity": "35.4 ohm*cm"},
         "stimulus": {"S1": {"amplitude": 500.0, "duration": 0.5, "width": 0.05}},
         "numerics": {"dt": 0.01}, "run": {"duration": 20.0}, "output": {"every": 0.1},
         "sweep": {"stimulus.S1.amplitude": {"start": 500.0, "stop": 1000.0, "num": BATCH_POINTS}}}


def time_batching(folder: Path, repeat: int) -> dict:
    """The 64-point sweep with batch 1 and batch 16 on one warm worker process (best of ``repeat``)."""
    from distributed import Client, LocalCluster

    cluster = LocalCluster(n_workers=1, threads_per_worker=1, processes=True, dashboard_address=None,
                           silence_logs=logging.ERROR)
    client = Client(cluster)
    out, results = {}, {}
    try:
        cable.sweep(SMALL, client=client, progress=False, batch=BATCH_SIZE)  # load the kernels on the worker
        for size in (1, BATCH_SIZE):
            best = {"wall": np.inf, "worker": np.inf}
            for k in range(repeat):
                path = folder / f"batch_{size}_{k}.nc"
                t0 = time.perf_counter()
                ds = cable.sweep(SMALL, client=client, output=path, progress=False, batch=size)
                wall = time.perf_counter() - t0
                worker, sizes = 0.0, set()
                for f in path.with_name(path.name + ".points").glob("point-*.nc"):
                    with xr.open_dataset(f) as p:
                        worker += float(p.attrs["wall_time_s"])
                        sizes.add(int(p.attrs["batch_size"]))
                best = {"wall": min(best["wall"], wall / BATCH_POINTS),
                        "worker": min(best["worker"], worker / BATCH_POINTS), "batch_sizes": sorted(sizes)}
                results[size] = ds
            out[size] = best
    finally:
        client.close()
        cluster.close()
    a, b = (results[s].drop_attrs(deep=False) for s in (1, BATCH_SIZE))
    out["identical"] = a.identical(b)
    out["ok"] = int((results[BATCH_SIZE]["status"] == 0).sum())
    return out


def report_batching(r: dict) -> None:
    one, many = r[1], r[BATCH_SIZE]
    print(f"batched points: {BATCH_POINTS}-point sweep of HH strands (101 nodes, 2000 steps), 1 worker, "
          f"{r['ok']} points conducting")
    for size, m in ((1, one), (BATCH_SIZE, many)):
        print(f"    --batch {size:<3d} per point: sweep {1e3 * m['wall']:7.2f} ms, on the worker "
              f"{1e3 * m['worker']:7.2f} ms   (strands per kernel call: {m['batch_sizes']})")
    print(f"    per-point cost ratio batch 1 / batch {BATCH_SIZE}: sweep {one['wall'] / many['wall']:.2f}, "
          f"on the worker {one['worker'] / many['worker']:.2f}; results identical: {r['identical']}")


def main(argv=None) -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--quick", action="store_true", help="small points: the overhead dominates")
    ap.add_argument("--batch-only", action="store_true", help="only the batch 1 vs batch 16 measurement")
    ap.add_argument("--repeat", type=int, default=2, help="repeats of the batched-points measurement (best of)")
    args = ap.parse_args(argv)
    if args.batch_only:
        with tempfile.TemporaryDirectory() as tmp:
            report_batching(time_batching(Path(tmp), args.repeat))
        return
    geometry = (1.5, 0.02, 0.01, 4.0) if args.quick else (6.0, 0.0025, 0.0005, 20.0)
    case = axon_case(*geometry)
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        case_file = folder / "axon.toml"
        case_file.write_text(dumps_toml(case))
        swept = dict(case, sweep={"membrane.scale.g_Na": {"start": 1.0, "stop": 0.65, "num": POINTS}})
        t_sim = time_simulate(case)
        t_run = time_cable_run(case_file)
        runs = {w: time_sweep(swept, w, folder) for w in (1, 2)}
        batching = time_batching(folder, args.repeat)
    print(f"case: HH axon {geometry[0]:g} cm, dx {geometry[1]:g} cm, dt {geometry[2]:g} ms, {geometry[3]:g} ms; "
          f"{POINTS} points over membrane.scale.g_Na")
    print(f"simulate (in process, kernels loaded): {t_sim:8.3f} s")
    print(f"cable run (fresh process):            {t_run:8.3f} s   ({shlex.join(['cable', 'run', 'axon.toml'])})")
    for w, r in runs.items():
        cold, warm = r["cold"] / POINTS, r["warm"] / POINTS
        print(f"sweep, {w} worker{'s' if w > 1 else ' '}: cluster start {r['start']:5.2f} s; per point: cold sweep "
              f"{cold:6.3f} s, warm sweep {warm:6.3f} s; on a fresh worker: first point {np.mean(r['first']):.3f} s "
              f"(x{len(r['first'])}), others {np.mean(r['rest']):.3f} s")
        print(f"    warm per point / simulate = {warm / t_sim:5.2f}   cold per point / cable run = {cold / t_run:5.2f}")
    print(f"speed-up 1 -> 2 workers: warm {runs[1]['warm'] / runs[2]['warm']:.2f}, cold "
          f"{runs[1]['cold'] / runs[2]['cold']:.2f} (cores available: {usable_cores()}; "
          f"load average before: {os.getloadavg()[0]:.2f})")
    report_batching(batching)


if __name__ == "__main__":
    main()
