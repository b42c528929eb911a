"""Regenerate the README figures in docs/figures/ from the bundled example cases.

* ``space_time_map.png`` — the space-time map of ``cases/ischaemic_zone.toml``: a paced
  ventricular strand whose ischaemic zone (hatched, border dotted) blocks every other
  beat (crosses), with each beat's activation front (the same as
  ``cable run cases/ischaemic_zone.toml -o zone.nc`` then ``cable map zone.nc``);
* ``cv_sweep.png`` — conduction velocity of the squid axon of ``cases/squid_axon.toml``
  against a scale factor on g_Na at two temperatures, block marked where the wave failed.

The sweep is computed here as a loop of :func:`cable.simulate` runs assembled into a
Dataset shaped like a sweep result (dimensions named after the swept keys), so the
figure does not depend on the Dask sweep engine.

Run::

    python tools/figures.py                 # both figures (about 15 s)
    python tools/figures.py --out /tmp/f    # somewhere else
"""

from __future__ import annotations

import argparse
from pathlib import Path

import numpy as np
import xarray as xr

import cable
from cable.plot import _common

ROOT = Path(__file__).resolve().parents[1]
MAP_CASE = ROOT / "cases" / "ischaemic_zone.toml"
CASE = ROOT / "cases" / "squid_axon.toml"
#: scale factors on g_Na: from failure of propagation to the published conductance
G_NA_SCALES = np.round(np.arange(0.2, 1.01, 0.05), 3)
#: temperatures [degC]: Hodgkin & Huxley's reference temperature and their propagated-AP run
TEMPERATURES = (6.3, 18.5)
#: figure size [inch] (about 16 x 10 cm) and resolution
SIZE = (6.3, 3.9)
DPI = 200


def space_time_figure(out: Path) -> Path:
    ds = cable.simulate(MAP_CASE)
    fig = _common.new_figure(size=SIZE, dpi=DPI)
    ax = fig.add_subplot()
    cable.plot.space_time(ds, ax)
    fig.suptitle("ischaemic zone, 2 Hz pacing: 2:1 block (cases/ischaemic_zone.toml)", fontsize="medium")
    return _common.save(fig, out / "space_time_map.png")


def cv_sweep_dataset() -> xr.Dataset:
    """CV and block over (g_Na scale, temperature), one run per point."""
    base = cable.load_case(CASE)
    shape = (G_NA_SCALES.size, len(TEMPERATURES))
    cv = np.full(shape, np.nan)
    blocked = np.zeros(shape, dtype=np.int8)
    for i, g in enumerate(G_NA_SCALES):
        for j, temp in enumerate(TEMPERATURES):
            case = base.with_overrides({"membrane.scale.g_Na": float(g), "membrane.temperature": f"{temp} degC",
                                        "run.duration": "8 ms"})
            ds = cable.simulate(case)
            cv[i, j] = float(ds["conduction_velocity"][0])
            blocked[i, j] = int(ds["blocked"][0]) or int(not ds["captured"][0])
    return xr.Dataset(
        {"conduction_velocity": (("g_Na", "temperature"), cv, cable.io.schema.attrs("conduction_velocity")),
         "blocked": (("g_Na", "temperature"), blocked, cable.io.schema.attrs("blocked"))},
        coords={"g_Na": ("g_Na", G_NA_SCALES, {"long_name": "scale factor on g_Na (membrane.scale.g_Na)",
                                               "units": "1"}),
                "temperature": ("temperature", np.array(TEMPERATURES), {"long_name": "temperature",
                                                                        "units": "degC"})},
        attrs={"source": f"cable {cable.__version__}", "case": base.text})


def sweep_figure(out: Path) -> Path:
    ds = cv_sweep_dataset()
    fig = _common.new_figure(size=SIZE, dpi=DPI)
    ax = fig.add_subplot()
    cable.plot.sweep(ds, "conduction_velocity", "g_Na", ax, hue="temperature")
    ax.set_title("squid giant axon: CV against sodium conductance", fontsize="medium")
    return _common.save(fig, out / "cv_sweep.png")


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--out", type=Path, default=ROOT / "docs" / "figures", help="folder for the figures")
    args = ap.parse_args(argv)
    args.out.mkdir(parents=True, exist_ok=True)
    for make in (space_time_figure, sweep_figure):
        print(f"wrote {make(args.out)}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
