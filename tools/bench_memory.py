"""Peak memory of a streamed ``cable run`` against the simulated duration.

``vm`` is written to the result file while the run goes (see :mod:`cable.io.netcdf`),
so the peak memory of a run should not grow with its duration. This benchmark runs
``cable run`` in child processes on the bundled squid-axon case refined to many nodes
and sampled often, for a duration T and for FACTOR x T, and reads each child's peak
resident memory (``ru_maxrss`` from ``os.wait4``). The same pair without ``-o`` (the
field held in memory) shows what the measurement would catch.

The claim: the streamed long run's peak stays within 10% of the short run's.

Run::

    python tools/bench_memory.py                      # 6001 nodes, 10 ms and 100 ms
    python tools/bench_memory.py --nodes 2001 --short 5 --factor 10
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
CASE = ROOT / "cases" / "squid_axon.toml"
#: the claim checked: long-run peak over short-run peak, streamed
LIMIT = 1.10
#: sampling interval [ms]: often, so that the field is large
EVERY_MS = 0.01


def child(args, extra) -> tuple[float, float]:
    """Run ``python -m cable run ...`` as a child; its peak RSS [MiB] and wall time [s]."""
    cmd = [sys.executable, "-m", "cable", "run", str(CASE), "-q", *extra]
    t0 = time.perf_counter()
    proc = subprocess.Popen(cmd, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
    _, status, usage = os.wait4(proc.pid, 0)
    proc.returncode = os.waitstatus_to_exitcode(status)
    err = proc.stderr.read().decode()
    proc.stderr.close()
    if proc.returncode != 0:
        raise SystemExit(f"child failed ({proc.returncode}): {' '.join(cmd)}\n{err}")
    return usage.ru_maxrss / 1024.0, time.perf_counter() - t0   # Linux: ru_maxrss in KiB


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--nodes", type=int, default=6001, help="nodes on the 3 cm axon (default 6001)")
    ap.add_argument("--short", type=float, default=10.0, help="short duration [ms] (default 10)")
    ap.add_argument("--factor", type=float, default=10.0, help="long / short duration (default 10)")
    ap.add_argument("--no-memory-pair", action="store_true", help="skip the in-memory contrast runs")
    args = ap.parse_args(argv)
    dx_um = 3.0e4 / (args.nodes - 1)
    common = ["--set", f'fiber.dx="{dx_um:.6g} um"', "--set", f"output.every={EVERY_MS}"]
    durations = (args.short, args.short * args.factor)
    rows = []
    with tempfile.TemporaryDirectory() as tmp:
        out = Path(tmp) / "bench.nc"
        child(args, common + ["--set", "run.duration=1", "-o", str(out), "--overwrite"])  # compile once, cached
        modes = [("streamed to file", ["-o", str(out), "--overwrite"])]
        if not args.no_memory_pair:
            modes.append(("held in memory", []))
        for mode, extra in modes:
            for duration in durations:
                rss, wall = child(args, common + ["--set", f"run.duration={duration:g}"] + extra)
                samples = int(round(duration / EVERY_MS)) + 1
                field_mb = samples * args.nodes * 8 / 2 ** 20
                size = out.stat().st_size / 2 ** 20 if extra else float("nan")
                rows.append((mode, duration, samples, field_mb, rss, wall, size))
    print(f"squid axon, {args.nodes} nodes, vm sampled every {EVERY_MS:g} ms; peak RSS of each `cable run` child")
    print(f"{'mode':>17}  {'ms':>6}  {'samples':>7}  {'field MiB':>9}  {'peak MiB':>8}  {'wall s':>6}  {'file MiB':>8}")
    for mode, duration, samples, field_mb, rss, wall, size in rows:
        print(f"{mode:>17}  {duration:6g}  {samples:7d}  {field_mb:9.1f}  {rss:8.1f}  {wall:6.1f}  {size:8.1f}")
    ratios = {}
    for mode in dict.fromkeys(r[0] for r in rows):
        short, long_ = [r[4] for r in rows if r[0] == mode]
        ratios[mode] = long_ / short
        print(f"{mode}: peak of the {args.factor:g}x longer run / shorter run = {ratios[mode]:.3f}")
    ok = ratios["streamed to file"] <= LIMIT
    print(f"streamed peak within {100 * (LIMIT - 1):.0f}%: {'yes' if ok else 'NO'}")
    return 0 if ok else 1


if __name__ == "__main__":
    raise SystemExit(main())
