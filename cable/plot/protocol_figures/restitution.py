"""Figures of a restitution result (:func:`cable.restitution`): APD90 and CV against the
diastolic interval, the maximal slope drawn."""

from __future__ import annotations

import numpy as np

from cable.case import CaseError
from cable.plot import _common
from cable.plot.protocol_figures._parts import (_APD, _FAIL, _RING, _at_foot, _legend, _ms, _require, _scalar,
                                                  _side_by_side, _units)

#: the tangent drawn at the maximal restitution slope reaches this fraction of its
#: segment beyond each end, so that it shows beside the curve rather than on it
TANGENT_OVERHANG = 0.35


def _restitution_points(ds, y):
    di = np.asarray(ds["diastolic_interval"].values, dtype=float)
    val = np.asarray(ds[y].values, dtype=float)
    prop = np.asarray(ds["propagated"].values).astype(bool)
    interval = np.asarray(ds["interval"].values, dtype=float)
    # a beat that failed has a DI of its own only when its site activated; the others are
    # named by their interval (no position on the DI axis is invented for them)
    failed = ~prop & np.isfinite(di)
    unplaced = interval[~prop & ~np.isfinite(di)]
    ok = prop & np.isfinite(di) & np.isfinite(val)
    order = np.argsort(di[ok])
    one = np.asarray(ds["one_to_one"].values).astype(bool)[ok][order] if "one_to_one" in ds.variables else None
    return di[ok][order], val[ok][order], (di[failed], unplaced), one


def _failures(ds, ax, failed, one, x, y, xlabel):
    placed, unplaced = failed
    strand = np.isfinite(float(ds.attrs.get("measurement_x_cm", 0.0)))
    what = "no propagation" if strand else "no capture"
    _at_foot(ax, placed, _FAIL, what, xlabel)
    if one is not None and (~one).any():
        ax.plot(x[~one], y[~one], label="last beat of a train that was not 1:1", **_RING)
    if unplaced.size:
        kind = "S1-S2" if ds.attrs.get("protocol") == "s1s2" else "cycle length"
        values = ", ".join(_ms(v) for v in np.sort(unplaced)[::-1])
        ax.plot([], [], linestyle="none", label=f"{what} at {kind} {values} ms")


def restitution(ds, ax=None, *, slope: bool = True, legend: bool = True):
    """APD90 against the diastolic interval, with the maximal slope drawn and named.

    Parameters
    ----------
    ds : xarray.Dataset
        The result of :func:`cable.restitution` (S1-S2 or dynamic).
    ax : matplotlib.axes.Axes, optional
        Where to draw (the current pyplot Axes if omitted).
    slope : bool
        Draw the chord of maximal slope (between the two neighbouring points the
        protocol found it) extended beyond both ends, and name its slope and DI; also
        the APD90 at the basic cycle length as a dotted line.
    legend : bool
        Name the curves and marks.

    Returns
    -------
    matplotlib.axes.Axes

    Notes
    -----
    Beats that did not propagate are crosses at the foot of the axis, at their DI or,
    when the site never activated, at the DI aimed at (coupling interval or cycle
    length minus the basic APD90); in the dynamic protocol, the last beat of a cycle
    length at which some beat failed is ringed.

    Raises
    ------
    CaseError
        ``ds`` is not a restitution result.
    """
    _require(ds, ("diastolic_interval", "apd90", "propagated", "interval", "max_slope", "max_slope_di"),
             "restitution figure", "cable.restitution")
    ax = _common.axes_or_current(ax)
    di, apd, failed, one = _restitution_points(ds, "apd90")
    unit = _units(ds, "apd90", "ms")
    kind = "S1-S2" if ds.attrs.get("protocol") == "s1s2" else ds.attrs.get("protocol") or "computed"
    ax.plot(di, apd, markersize=5, linewidth=1.3, label=f"APD90 ({kind})", zorder=3, **_common.look(0))
    _failures(ds, ax, failed, one, di, apd, f"diastolic interval [{_units(ds, 'diastolic_interval', 'ms')}]")
    s, s_di = _scalar(ds, "max_slope"), _scalar(ds, "max_slope_di")
    if slope and np.isfinite(s) and di.size >= 2:
        mids = 0.5 * (di[1:] + di[:-1])
        k = int(np.argmin(np.abs(mids - s_di)))
        x0, x1 = di[k], di[k + 1]
        over = TANGENT_OVERHANG * (x1 - x0)
        xs = np.array([x0 - over, x1 + over])
        style = _common.look(1)
        ax.plot(xs, apd[k] + s * (xs - x0), color=style["color"], linestyle=style["linestyle"], linewidth=1.6,
                label=f"maximal slope {s:.2f} at DI {_ms(s_di)} {unit}", zorder=4)
        ax.annotate(f"slope {s:.2f}", (0.5 * (x0 + x1), apd[k] + s * 0.5 * (x1 - x0)), xytext=(8, -14),
                    textcoords="offset points", fontsize="small", color=style["color"])
        base = _scalar(ds, "apd90_s1")
        if np.isfinite(base):
            ax.axhline(base, label=f"APD90 at the basic cycle length {_ms(base)} {unit}", **_APD)
    ax.set_ylabel(f"APD90 [{unit}]")
    _legend(ax, legend, loc="lower right")
    return ax


def cv_restitution(ds, ax=None, *, legend: bool = True):
    """Conduction velocity against the diastolic interval.

    Parameters
    ----------
    ds : xarray.Dataset
        The result of :func:`cable.restitution` on a strand.
    ax : matplotlib.axes.Axes, optional
        Where to draw (the current pyplot Axes if omitted).
    legend : bool
        Name the curve and marks.

    Returns
    -------
    matplotlib.axes.Axes

    Raises
    ------
    CaseError
        ``ds`` is not a restitution result, or has no conduction velocity (a single cell).
    """
    _require(ds, ("diastolic_interval", "conduction_velocity", "propagated", "interval"),
             "cv_restitution figure", "cable.restitution")
    if not np.isfinite(np.asarray(ds["conduction_velocity"].values, dtype=float)).any():
        raise CaseError("cv_restitution figure: the result has no finite conduction_velocity (a single cell, "
                        "or no beat propagated); draw restitution() alone.")
    ax = _common.axes_or_current(ax)
    di, cv, failed, one = _restitution_points(ds, "conduction_velocity")
    ax.plot(di, cv, markersize=5, linewidth=1.3, label="conduction velocity", zorder=3, **_common.look(2))
    _failures(ds, ax, failed, one, di, cv, f"diastolic interval [{_units(ds, 'diastolic_interval', 'ms')}]")
    ax.set_ylabel(f"conduction velocity [{_units(ds, 'conduction_velocity', 'm/s')}]")
    _legend(ax, legend, loc="lower right")
    return ax




def figure(ds, fig) -> None:
    """APD90 and, on a strand, CV side by side (the figure of ``cable restitution --figure``)."""
    draws = [lambda ax: restitution(ds, ax, legend=False)]
    if "conduction_velocity" in ds.variables and \
            np.isfinite(np.asarray(ds["conduction_velocity"].values, dtype=float)).any():
        draws.append(lambda ax: cv_restitution(ds, ax, legend=False))
    _side_by_side(fig, draws)
