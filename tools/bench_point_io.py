"""What a sweep's client spends per point besides the run: loading its case, writing and reading its file.

    python tools/bench_point_io.py [--repeat N]

Uses the first point of cases/axon_sodium_sweep.toml. Prints the milliseconds per point
of ``load_case`` (the client loads each point's case once, to group the points; the
worker runs that Case without loading it again), of ``PointStore.write`` and of
``PointStore.read`` (which a sweep no longer does for the points it has just written),
beside one ``cable.simulate`` of the point.
"""

from __future__ import annotations

import argparse
import tempfile
import time
from pathlib import Path

import cable
from cable.sweep import store
from cable.sweep.spec import point_raw

CASE = Path(__file__).resolve().parent.parent / "cases" / "axon_sodium_sweep.toml"


def per_call(fn, repeat: int) -> float:
    """Mean wall time of ``fn()`` [ms]."""
    t0 = time.perf_counter()
    for _ in range(repeat):
        fn()
    return (time.perf_counter() - t0) / repeat * 1e3


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--repeat", type=int, default=50)
    args = parser.parse_args()
    case = cable.load_case(CASE)
    spec = case.extra["sweep"]
    raw = point_raw(case.raw, spec.overrides(0))
    point = cable.load_case(raw)
    result = cable.simulate(point)  # compiles (or loads) the time loop before it is timed
    labelled = store.label(store.point_dataset(result, False), spec, 0)
    with tempfile.TemporaryDirectory() as folder:
        points = store.PointStore(Path(folder) / "out.nc", "bench", len(spec))
        t_load = per_call(lambda: cable.load_case(raw), args.repeat)
        t_write = per_call(lambda: points.write(0, labelled, {"worker": "bench"}), args.repeat)
        t_read = per_call(lambda: points.read(0), args.repeat)
    t_run = per_call(lambda: cable.simulate(point), max(1, args.repeat // 10))
    print(f"per point [ms]: load_case {t_load:.2f}, point file write {t_write:.2f}, read {t_read:.2f}; "
          f"simulate {t_run:.1f} ({CASE.name}, point 0)")


if __name__ == "__main__":
    main()
