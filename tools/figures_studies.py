"""The README figure of the four studies (docs/figures/studies.png), from the bundled cases.

Panels: (a) the runs of ``cable calibrate cases/calibrate_cv.toml --vary fiber.conductivity
--target conduction_velocity=0.6``; (b) CV and APD90 of ``cases/drug_block.toml`` against the
compound's concentration (its [sweep] values, run one by one); (c) the space-time map of
``cases/axon_ring.toml`` (the ring unrolled); (d) the pseudo-ECG of
``cases/transmural_ecg.toml`` and of the same strand made homogeneous.

Run::

    python tools/figures_studies.py              # about a minute on 2 cores
    python tools/figures_studies.py --out /tmp/f
"""

from __future__ import annotations

import argparse
from pathlib import Path

import numpy as np

import cable
from cable.plot import _common

ROOT = Path(__file__).resolve().parents[1]
CASES = ROOT / "cases"
SIZE = (9.0, 6.6)  # inch
DPI = 160


def calibration_panel(ax):
    ds = cable.calibrate(CASES / "calibrate_cv.toml", "fiber.conductivity", "conduction_velocity", 0.6)
    cable.plot.calibration(ds, ax)
    ax.set_title("(a) calibrating conductivity to a CV of 0.6 m/s, dx 250 um", fontsize="small")


def drug_panel(ax):
    case = cable.load_case(CASES / "drug_block.toml")
    conc = [0.0, 0.3, 1.0, 3.0, 10.0, 30.0]  # uM, the case's [sweep]
    cv, apd = [], []
    for c in conc:
        ds = cable.simulate(case.with_overrides({"drug.compound_a.concentration": c * 1e-3}))
        cv.append(float(ds.conduction_velocity[0]))
        apd.append(float(ds.apd.sel(level=90).isel(beat=0).sel(x=1.0, method="nearest")))
    x = np.array(conc[1:])
    ax.semilogx(x, cv[1:], **_common.look(0), label="CV [m/s]")
    ax.axhline(cv[0], color=_common.look(0)["color"], linewidth=0.6, linestyle=":")
    ax.set_xlabel("compound_a concentration [µM]")
    ax.set_ylabel("conduction velocity [m/s]")
    twin = ax.twinx()
    twin.semilogx(x, apd[1:], **_common.look(1), label="APD90 [ms]")
    twin.axhline(apd[0], color=_common.look(1)["color"], linewidth=0.6, linestyle=":")
    twin.set_ylabel("APD90 at 1 cm [ms]")
    # the no-drug levels (dotted) lie beyond the drug points: keep them in view
    ax.set_ylim(0.9 * min(cv), 1.04 * max(cv))
    twin.set_ylim(min(apd) - 0.05 * (max(apd) - min(apd)), max(apd) + 0.05 * (max(apd) - min(apd)))
    ax.set_title("(b) mixed I_Na / I_Kr block (dotted: no drug)", fontsize="small")
    ax.legend(handles=ax.lines[:1] + twin.lines[:1], fontsize="small", loc="center left", frameon=False)


def ring_panel(ax):
    ds = cable.simulate(CASES / "axon_ring.toml")
    cable.plot.space_time(ds, ax)
    period = float(np.nanmean(ds.revolution_period.values[1:]))
    ax.set_title(f"(c) one-way reentry on a 20 cm ring: period {period:.3g} ms", fontsize="small")
    ax.set_ylabel("position round the ring [cm]")


def ecg_panel(ax):
    het = cable.simulate(CASES / "transmural_ecg.toml")
    homo = cable.simulate(cable.load_case(CASES / "transmural_ecg.toml", ["region=[]"]))
    for k, (ds, name) in enumerate(((het, "endo / M / epi"), (homo, "endo only"))):
        style = _common.look(k)
        style.pop("marker")
        ax.plot(ds.t, ds.pseudo_ecg.values[0] * 1e6, label=name, **style)  # mV -> nV
    ax.axhline(0, color="#7a7a7a", linewidth=0.6)
    ax.set_ylim(-0.5, 0.5)
    ax.set_xlabel("time [ms]")
    ax.set_ylabel("pseudo-ECG [nV]")
    ax.set_title("(d) pseudo-ECG 2 cm beyond the epicardium (QRS clipped)", fontsize="small")
    ax.legend(fontsize="small", frameon=False)


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--out", type=Path, default=ROOT / "docs" / "figures", help="folder for the figure")
    args = ap.parse_args(argv)
    args.out.mkdir(parents=True, exist_ok=True)
    fig = _common.new_figure(size=SIZE, dpi=DPI)
    axes = fig.subplots(2, 2).ravel()
    for make, ax in zip((calibration_panel, drug_panel, ring_panel, ecg_panel), axes):
        make(ax)
    print(f"wrote {_common.save(fig, args.out / 'studies.png')}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
