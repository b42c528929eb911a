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


def pseudo_ecg(ds, ax=None, *, t_window=None, legend: bool = True):
    """The pseudo-ECG of each electrode against time, the T-wave peak and the end of QT marked.

    Parameters
    ----------
    ds : xarray.Dataset
        A result with ``pseudo_ecg`` (a case with ``[[electrode]]``).
    ax : matplotlib.axes.Axes, optional
    t_window : (float, float), optional
        Time range [ms].
    """
    from cable.case import CaseError

    if "pseudo_ecg" not in ds.variables:
        raise CaseError("the result has no 'pseudo_ecg': add an [[electrode]] to the case and run it again.")
    ax = _common.axes_or_current(ax)
    t = ds["t"].values
    keep = np.ones(t.size, dtype=bool)
    if t_window is not None:
        lo, hi = _common.window(t, t_window, "t_window", "ms")
        keep = (t >= lo) & (t <= hi)
    for j in range(ds.sizes["electrode"]):
        style = _common.look(j)
        marker = style.pop("marker")
        y = ds["pseudo_ecg"].values[j]
        label = f"x = {float(ds.electrode_x[j]):.3g} cm, {float(ds.electrode_distance[j]):.3g} cm off the axis"
        ax.plot(t[keep], y[keep], linewidth=1.4, label=label, **style)
        for b in range(ds.sizes.get("beat", 0)):
            tp = float(ds.t_peak[j, b])
            if np.isfinite(tp):
                ax.plot([tp], [np.interp(tp, t, y)], marker=marker, color=style["color"], linestyle="none")
            end = float(ds.qrs_onset[j, b]) + float(ds.qt_interval[j, b])
            if np.isfinite(end):
                ax.axvline(end, color=style["color"], linestyle=":", linewidth=0.8)
    ax.axhline(0.0, color="#7a7a7a", linewidth=0.6)
    ax.set_xlabel(_common.label(ds["t"], "time"))
    ax.set_ylabel(f"pseudo-ECG [{ds['pseudo_ecg'].attrs.get('units', 'mV')}]")  # the long name is too long here
    ax.ticklabel_format(axis="y", style="sci", scilimits=(-3, 3))
    if legend:
        ax.legend(fontsize="small", frameon=False)
    return ax


def ring(ds, axes=None):
    """A ring's revolutions: period and CV per pass at x = 0 (two Axes; default a new pyplot figure)."""
    from cable.case import CaseError

    if "revolution_period" not in ds.variables:
        raise CaseError("the result is not a ring's (no revolution_period): run a case with [fiber] closed = true.")
    if axes is None:
        import matplotlib.pyplot as plt

        axes = plt.figure(figsize=(6.4, 4.8), layout="constrained").subplots(2, 1, sharex=True)
    t = ds["revolution_time"].values
    for axis, name in zip(axes, ("revolution_period", "revolution_cv")):
        axis.plot(t, ds[name].values, **_common.look(0))
        axis.set_ylabel(_common.label(ds[name], name))
    axes[-1].set_xlabel(_common.label(ds["revolution_time"], "time"))
    if not int(ds["reentry_sustained"].values):
        end = float(ds["reentry_end"].values)
        if np.isfinite(end):
            for axis in axes:
                axis.axvline(end, color="#7a7a7a", linestyle=":", label=f"reentry ended ({end:.4g} ms)")
            axes[0].legend(fontsize="small", frameon=False)
    return list(axes)
