"""How fast one position's trace and one time's profile read back, per chunk shape.

Writes a float32 field ``vm(t, x)`` shaped like a long cable result (travelling waves
on a resting background, so zlib sees realistic data) with several chunk shapes, then
times, each in a freshly opened file: reading the trace at one position, the profile at
one time, and the whole field. The package's choice is the row marked ``*``
(:func:`cable.io.netcdf.chunk_shape`).

Run::

    python tools/bench_chunks.py            # 20000 samples x 601 nodes and 4000 x 4001
    python tools/bench_chunks.py --quick    # smaller, for a smoke check
"""

from __future__ import annotations

import argparse
import tempfile
import time
from pathlib import Path

import netCDF4
import numpy as np

from cable.io import netcdf


def field(nt: int, nx: int) -> np.ndarray:
    """Waves every 300 samples crossing the fibre at 0.5 node per sample, plus small noise."""
    t = np.arange(nt)[:, None]
    x = np.arange(nx)[None, :]
    phase = (t - 2.0 * x) % 300.0
    rng = np.random.default_rng(7)
    vm = -85.0 + 125.0 * np.exp(-phase / 60.0) * (phase >= 0)
    return (vm + 0.01 * rng.standard_normal((nt, nx))).astype(np.float32)


def best_of(fn, repeat=5) -> float:
    times = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return min(times)


def measure(path: Path, data: np.ndarray, chunks) -> dict:
    nt, nx = data.shape
    t0 = time.perf_counter()
    with netCDF4.Dataset(path, "w") as nc:
        nc.createDimension("t", nt)
        nc.createDimension("x", nx)
        var = nc.createVariable("vm", "f4", ("t", "x"), zlib=True, complevel=4, chunksizes=chunks)
        block = min(chunks[0], netcdf.MAX_T_CHUNK)
        for k in range(0, nt, block):      # written in blocks of samples, as the run streams them
            var[k:k + block] = data[k:k + block]
    write = time.perf_counter() - t0

    def read(sel):
        def go():
            with netCDF4.Dataset(path) as nc:
                nc["vm"][sel]
        return go

    return {
        "trace_ms": 1e3 * best_of(read((slice(None), nx // 2))),
        "profile_ms": 1e3 * best_of(read((nt // 2, slice(None)))),
        "all_ms": 1e3 * best_of(read((slice(None), slice(None))), repeat=2),
        "write_s": write,
        "MB": path.stat().st_size / 1e6,
    }


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="small fields only")
    args = ap.parse_args(argv)
    shapes = [(2000, 601)] if args.quick else [(20000, 601), (4000, 4001)]
    with tempfile.TemporaryDirectory() as tmp:
        for nt, nx in shapes:
            data = field(nt, nx)
            print(f"\nvm({nt} samples, {nx} nodes): {data.nbytes / 1e6:.0f} MB as float32")
            print(f"  {'chunks (t, x)':>16}  {'trace ms':>9}  {'profile ms':>10}  {'all ms':>8}  "
                  f"{'write s':>8}  {'file MB':>8}")
            ours = netcdf.chunk_shape(nt, nx)
            candidates = [ours, (256, 256), (64, nx), (256, nx), (nt, 1), (nt, 16)]
            seen = set()
            for chunks in candidates:
                chunks = (min(chunks[0], nt), min(chunks[1], nx))
                if chunks in seen:
                    continue
                seen.add(chunks)
                r = measure(Path(tmp) / "f.nc", data, chunks)
                mark = "*" if chunks == ours else " "
                print(f"{mark} {str(chunks):>16}  {r['trace_ms']:9.1f}  {r['profile_ms']:10.2f}  "
                      f"{r['all_ms']:8.0f}  {r['write_s']:8.2f}  {r['MB']:8.1f}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
