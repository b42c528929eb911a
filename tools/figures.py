"""Regenerate the README figures in docs/figures/ from the bundled example cases.

* ``space_time_map.png`` — the space-time map of ``cases/ischaemic_zone.toml``: a paced
  ventricular strand whose ischaemic zone (hatched, border dotted) blocks every other
  beat (crosses), with each beat's activation front (the same as
  ``cable run cases/ischaemic_zone.toml -o zone.nc`` then ``cable map zone.nc``);
* ``cv_sweep.png`` — conduction velocity of the squid axon of
  ``cases/axon_sodium_sweep.toml`` against a scale factor on g_Na at two temperatures,
  block marked where the wave failed (the same as ``cable sweep`` then ``cable plot-sweep``).

Run::

    python tools/figures.py                 # both figures (about 15 s)
    python tools/figures.py --out /tmp/f    # somewhere else
"""

from __future__ import annotations

import argparse
from pathlib import Path

import xarray as xr

import cable
from cable.plot import _common, layout

ROOT = Path(__file__).resolve().parents[1]
MAP_CASE = ROOT / "cases" / "ischaemic_zone.toml"
SWEEP_CASE = ROOT / "cases" / "axon_sodium_sweep.toml"
#: Dask workers of the local cluster of the sweep
WORKERS = 2
#: figure size [inch] (about 16 x 10 cm) and resolution
SIZE = (6.3, 3.9)
DPI = 200


def space_time_figure(out: Path) -> Path:
    ds = cable.simulate(MAP_CASE)
    fig = _common.new_figure(size=SIZE, dpi=DPI)
    ax = fig.add_subplot()
    cable.plot.space_time(ds, ax)
    return _checked(fig, out / "space_time_map.png")


def cv_sweep_dataset() -> xr.Dataset:
    """CV and block over (g_Na scale, temperature): the sweep of SWEEP_CASE on Dask."""
    return cable.sweep(SWEEP_CASE, workers=WORKERS, progress=False)


def sweep_figure(out: Path) -> Path:
    ds = cv_sweep_dataset()
    fig = _common.new_figure(size=SIZE, dpi=DPI)
    ax = fig.add_subplot()
    cable.plot.sweep(ds, "conduction_velocity", "g_Na", ax, hue="temperature")
    return _checked(fig, out / "cv_sweep.png")


def _checked(fig, path: Path) -> Path:
    """Save ``fig`` once it passes the layout check (cable.plot.layout); the captions are in the README."""
    found = layout.problems(fig)
    if found:
        raise SystemExit(f"{path.name}: " + "; ".join(found))
    return _common.save(fig, path)


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--out", type=Path, default=ROOT / "docs" / "figures", help="folder for the figures")
    args = ap.parse_args(argv)
    args.out.mkdir(parents=True, exist_ok=True)
    for make in (space_time_figure, sweep_figure):
        print(f"wrote {make(args.out)}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())  # (the guard also keeps Dask's worker processes from re-running it)
