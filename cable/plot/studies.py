"""Figures of the studies of issue 17: calibration runs, reentry on a ring, the pseudo-ECG.

Each function draws into the Axes given (or pyplot's current one) and returns it.
"""

from __future__ import annotations

import numpy as np

from cable.plot import _common


def calibration(ds, ax=None):
    """The runs of a calibration (value against measurement, numbered), the target and the value found."""
    ax = _common.axes_or_current(ax)
    a = ds.attrs
    v, m = ds["run_value"].values, ds["run_measure"].values
    order = np.argsort(v)
    ax.plot(v[order], m[order], color="#7a7a7a", linestyle=":", zorder=1)
    ax.plot(v, m, linestyle="none", marker="o", color=_common.look(0)["color"], label="runs", zorder=2)
    for k, (vi, mi) in enumerate(zip(v, m)):
        if np.isfinite(mi):
            ax.annotate(str(k), (vi, mi), textcoords="offset points", xytext=(4, 4), fontsize="x-small")
    ax.axhline(a["target"], color=_common.look(1)["color"], linestyle="--", label=f"target {a['target']:g}")
    found = float(ds["value"])
    if np.isfinite(found):
        ax.axvline(found, color=_common.look(2)["color"], linestyle="-.", label=f"found {found:.6g}")
    unit = a.get("units", "")
    ax.set_xlabel(a["key"] + (f" [{unit}]" if unit and unit != "1" else ""))
    ax.set_ylabel(f"{a['measure']} [{a['measure_units']}]")
    ax.legend(loc="best", fontsize="small")
    return ax
