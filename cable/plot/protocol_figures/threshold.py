"""Figures of a strength-duration result (:func:`cable.strength_duration`): threshold and charge
against pulse duration, with Lapicque's and Weiss's fits drawn from the fitted parameters."""

from __future__ import annotations

import numpy as np

from cable.plot import _common
from cable.plot.protocol_figures._parts import (_RING, _at_foot, _legend, _plain_log, _require, _scalar,
                                                  _side_by_side, _units)
from cable.protocols.threshold import law_threshold

#: points on each drawn fitted curve (a smooth line on a log axis)
CURVE_POINTS = 200
#: fitted curves run this factor beyond the shortest and longest duration computed
CURVE_MARGIN = 1.5
#: the marks of each fit's chronaxie (and charge intercept): one shape, in the fit's colour, on its curve
_FIT_MARK = "D"


#: the two fitted strength-duration laws: (suffix of their variables, name)
_LAWS = (("lapicque", "Lapicque"), ("weiss", "Weiss"))
#: the fitted parameters a strength-duration result carries
_LAW_FITS = tuple(f"{q}_{key}" for key, _law in _LAWS for q in ("rheobase", "chronaxie"))



def _fits(ds):
    """(suffix, name, rheobase, chronaxie, look) of each strength-duration fit with finite values."""
    for k, (key, law) in enumerate(_LAWS, start=1):
        rh, c = _scalar(ds, f"rheobase_{key}"), _scalar(ds, f"chronaxie_{key}")
        if np.isfinite(rh) and np.isfinite(c):
            yield key, law, rh, c, _common.look(k)


def _fit_mark(ax, x, y, color):
    """A fit's open mark at (x, y): its chronaxie or its charge intercept."""
    # not clipped: the charge intercept sits on the axis at d = 0
    ax.plot([x], [y], marker=_FIT_MARK, markersize=6, markerfacecolor="white", markeredgecolor=color,
            markeredgewidth=1.3, linestyle="none", zorder=4, clip_on=False)



def strength_duration(ds, ax=None, *, logx: bool = True, logy: bool = True, fits: bool = True,
                      legend: bool = True):
    """Threshold amplitude against pulse duration, with Lapicque's and Weiss's fits.

    Parameters
    ----------
    ds : xarray.Dataset
        The result of :func:`cable.strength_duration`.
    ax : matplotlib.axes.Axes, optional
        Where to draw (the current pyplot Axes if omitted).
    logx, logy : bool
        Logarithmic duration and amplitude axes (default both).
    fits : bool
        Draw both fitted laws (Lapicque I = I_rh / (1 - exp(-d ln2 / c)), Weiss
        I = I_rh (1 + c/d)) with each fit's rheobase I_rh [uA/cm^2] and chronaxie c
        [ms]; each rheobase as a dotted horizontal line and
        each chronaxie as an open mark at (c, 2 I_rh), where the threshold is twice the
        rheobase (Lapicque's definition).
    legend : bool
        Name the curves (each fit with its rheobase, chronaxie and rms relative residual).

    Returns
    -------
    matplotlib.axes.Axes

    Raises
    ------
    CaseError
        ``ds`` is not a strength-duration result.
    """
    _require(ds, ("threshold",) + _LAW_FITS, "strength_duration figure", "cable.strength_duration")
    ax = _common.axes_or_current(ax)
    d = np.asarray(ds["duration"].values, dtype=float)
    amp = np.asarray(ds["threshold"].values, dtype=float)
    unit = _units(ds, "threshold", "uA/cm^2")
    ok = np.isfinite(amp)
    ax.plot(d[ok], amp[ok], markersize=5, linewidth=1.2, label="computed threshold", zorder=3, **_common.look(0))
    if fits and d.size:
        dd = np.geomspace(d.min() / CURVE_MARGIN, d.max() * CURVE_MARGIN, CURVE_POINTS) if logx else \
            np.linspace(d.min() / CURVE_MARGIN, d.max() * CURVE_MARGIN, CURVE_POINTS)
        for key, law, rh, c, style in _fits(ds):
            rms = _scalar(ds, f"{key}_rms_relative_residual")
            text = f"{law} fit: I_rh {rh:.3g} {unit}, c {c:.3g} ms"
            if np.isfinite(rms):
                text += f" (rms {100 * rms:.2g} %)"
            ax.plot(dd, law_threshold(key, rh, c, dd), color=style["color"], linestyle=style["linestyle"],
                    linewidth=1.3, label=text)
            ax.axhline(rh, color=style["color"], linestyle=":", linewidth=0.9)
            _fit_mark(ax, c, 2.0 * rh, style["color"])
        # one legend entry each for the marks the two fits share
        ax.plot([], [], color="0.35", linestyle=":", linewidth=0.9, label="rheobase I_rh of each fit")
        ax.plot([], [], marker=_FIT_MARK, markersize=6, markerfacecolor="white", markeredgecolor="0.35",
                linestyle="none", label="chronaxie c: threshold 2 I_rh")
    ax.set_ylabel(f"threshold [{unit}]")
    if logx:
        ax.set_xscale("log")
        _plain_log(ax.xaxis)
    _at_foot(ax, d[~ok], _RING | {"markersize": 7}, "no threshold found",
             f"stimulus duration [{_units(ds, 'duration', 'ms')}]")
    if logy:
        ax.set_yscale("log")
        _plain_log(ax.yaxis)
    _legend(ax, legend)
    return ax


def charge_duration(ds, ax=None, *, fits: bool = True, legend: bool = True):
    """Threshold charge against pulse duration, with each fitted law's charge (Weiss's a straight line).

    Parameters
    ----------
    ds : xarray.Dataset
        The result of :func:`cable.strength_duration`.
    ax : matplotlib.axes.Axes, optional
        Where to draw (the current pyplot Axes if omitted).
    fits : bool
        Draw both fits' charges Q = d I(d) from zero duration: Weiss's line of slope
        I_rh [uA/cm^2] and intercept I_rh c [nC/cm^2], Lapicque's curve from I_rh tau
        (intercepts marked).
    legend : bool
        Name the curves.

    Returns
    -------
    matplotlib.axes.Axes

    Raises
    ------
    CaseError
        ``ds`` is not a strength-duration result.
    """
    _require(ds, ("charge",) + _LAW_FITS, "charge_duration figure", "cable.strength_duration")
    ax = _common.axes_or_current(ax)
    d = np.asarray(ds["duration"].values, dtype=float)
    q = np.asarray(ds["charge"].values, dtype=float)
    unit = _units(ds, "charge", "nC/cm^2")
    ok = np.isfinite(q)
    # not clipped: the axis starts at d = 0, where the shortest pulse's mark may reach over it
    ax.plot(d[ok], q[ok], markersize=5, linewidth=1.2, label="computed threshold charge", zorder=3,
            clip_on=False, **_common.look(0))
    if fits and d.size:
        dd = np.linspace(0.0, d.max() * 1.05, CURVE_POINTS)[1:]
        for key, law, rh, c, style in _fits(ds):
            # Weiss: the straight line Q = I_rh (d + c); Lapicque: Q = I_rh d / (1 - exp(-d/tau)),
            # which starts at I_rh tau (tau = c / ln 2) at d = 0 (marked)
            q0 = rh * c if key == "weiss" else rh * c / np.log(2.0)
            ax.plot(np.r_[0.0, dd], np.r_[q0, dd * law_threshold(key, rh, c, dd)], color=style["color"],
                    linestyle=style["linestyle"], linewidth=1.3, label=f"{law} fit: I_rh {rh:.3g}, c {c:.3g} ms")
            _fit_mark(ax, 0.0, q0, style["color"])
    ax.set_xlim(left=0.0)
    ax.set_ylim(bottom=0.0)
    ax.set_xlabel(f"stimulus duration [{_units(ds, 'duration', 'ms')}]")
    ax.set_ylabel(f"charge [{unit}]")
    _legend(ax, legend, loc="upper left")
    return ax




def figure(ds, fig) -> None:
    """Amplitude and charge side by side (the figure of ``cable threshold --figure``)."""
    _side_by_side(fig, [lambda ax: strength_duration(ds, ax, legend=False),
                        lambda ax: charge_duration(ds, ax, legend=False)])
