"""The figure of a refractory-period result (:func:`cable.refractory_period`): the S2 trials by
outcome, with the ERP, the local refractory period and APD90 marked."""

from __future__ import annotations

import numpy as np

from cable.plot import _common
from cable.plot.protocol_figures._parts import _APD, _legend, _ms, _require, _scalar, _side_by_side, _units

#: rows of the refractory-period strip, bottom to top
OUTCOMES = ("no capture", "local response only", "propagated")

#: looks of the marked intervals and of the failures (dark, mid and light greys with
#: distinct dash patterns: they read in greyscale print)
_ERP = {"color": "#1b1b3a", "linestyle": "-", "linewidth": 1.4}
_LOCAL = {"color": "#b8860b", "linestyle": "--", "linewidth": 1.4}


def refractory(ds, ax=None, *, legend: bool = True):
    """The S2 coupling intervals tried, by outcome, with ERP, local refractory period and APD90.

    Each trial is a mark on one of three rows (:data:`OUTCOMES`): the S2 wave
    propagated, gave a local response only, or did not capture. The effective
    refractory period (solid), the local refractory period (dashed) and the APD90 of
    the last S1 beat at the site (dotted) are vertical lines; the vulnerable window
    between the two periods is hatched.

    Parameters
    ----------
    ds : xarray.Dataset
        The result of :func:`cable.refractory_period`.
    ax : matplotlib.axes.Axes, optional
        Where to draw (the current pyplot Axes if omitted).
    legend : bool
        Name the lines with their values [ms], beside the Axes.

    Returns
    -------
    matplotlib.axes.Axes

    Raises
    ------
    CaseError
        ``ds`` is not a refractory-period result.
    """
    _require(ds, ("coupling_interval", "s2_captured", "s2_propagated", "erp", "local_refractory_period"),
             "refractory figure", "cable.refractory_period")
    ax = _common.axes_or_current(ax)
    ci = np.asarray(ds["coupling_interval"].values, dtype=float)
    prop = np.asarray(ds["s2_propagated"].values).astype(bool)
    cap = np.asarray(ds["s2_captured"].values).astype(bool) | prop
    unit = _units(ds, "coupling_interval", "ms")
    looks = ({"marker": "x", "markersize": 8, "markeredgewidth": 1.6, "color": "0.45"},
             {"marker": "s", "markersize": 7, "markerfacecolor": "white", "markeredgewidth": 1.4,
              "color": "#b8860b"},
             {"marker": "o", "markersize": 7, "color": "#1b1b3a"})
    for row, (name, mask, style) in enumerate(zip(OUTCOMES, (~cap, cap & ~prop, prop), looks)):
        if mask.any():
            ax.plot(ci[mask], np.full(mask.sum(), row), linestyle="none", label=f"S2 {name}", zorder=3, **style)
    erp, local = _scalar(ds, "erp"), _scalar(ds, "local_refractory_period")
    apd = _scalar(ds, "apd90_s1")
    if np.isfinite(erp) and np.isfinite(local) and erp > local:
        ax.axvspan(local, erp, facecolor="0.9", edgecolor="0.55", hatch="///", linewidth=0,
                   label=f"vulnerable window {_ms(erp - local)} {unit}")
    if np.isfinite(erp):
        ax.axvline(erp, label=f"ERP {_ms(erp)} {unit}", **_ERP)
    if np.isfinite(local):
        ax.axvline(local, label=f"local refractory period {_ms(local)} {unit}", **_LOCAL)
    if np.isfinite(apd):
        ax.axvline(apd, label=f"APD90 of the last S1 {_ms(apd)} {unit}", **_APD)
    ax.set_yticks(range(len(OUTCOMES)), OUTCOMES)
    ax.set_ylim(-0.6, len(OUTCOMES) - 0.4)
    ax.set_xlabel(f"S1-S2 coupling interval [{unit}]")
    ax.set_ylabel("S2 outcome")
    # below the axes, in two columns: beside them it would take half the width
    _legend(ax, legend, loc="upper center", bbox_to_anchor=(0.5, -0.18), ncols=2)
    return ax




def figure(ds, fig) -> None:
    """The trials (the figure of ``cable erp --figure``)."""
    _side_by_side(fig, [lambda ax: refractory(ds, ax, legend=False)])
