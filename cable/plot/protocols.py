"""Figures of the protocol results: strength-duration, refractoriness, restitution, convergence.

Each function takes the Dataset its protocol returns (:func:`cable.strength_duration`,
:func:`cable.refractory_period`, :func:`cable.restitution`, :func:`cable.convergence`),
read back from netCDF or fresh, and draws into the Axes given (pyplot's current one if
omitted). Nothing is recomputed except the curves of the fitted laws, drawn from the
fitted parameters the result carries. :func:`protocol_figure` lays out the panels a
command's ``--figure`` writes.

Looks follow :mod:`cable.plot._common`: curves told apart by dash pattern and marker as
well as colour, so that they stay apart in greyscale print.
"""

from __future__ import annotations

import numpy as np

from cable.case import CaseError
from cable.plot import _common
from cable.protocols.threshold import law_threshold

#: points on each drawn fitted curve (a smooth line on a log axis)
CURVE_POINTS = 200
#: fitted curves run this factor beyond the shortest and longest duration computed
CURVE_MARGIN = 1.5
#: on a log axis spanning at most this many decades, the minor ticks at 2 and 5 are labelled too
MINOR_LABEL_DECADES = 2.0
#: rows of the refractory-period strip, bottom to top
OUTCOMES = ("no capture", "local response only", "propagated")
#: the tangent drawn at the maximal restitution slope reaches this fraction of its
#: segment beyond each end, so that it shows beside the curve rather than on it
TANGENT_OVERHANG = 0.35

#: looks of the marked intervals and of the failures (dark, mid and light greys with
#: distinct dash patterns: they read in greyscale print)
_ERP = {"color": "#1b1b3a", "linestyle": "-", "linewidth": 1.4}
_LOCAL = {"color": "#b8860b", "linestyle": "--", "linewidth": 1.4}
_APD = {"color": "#4a7fb0", "linestyle": ":", "linewidth": 1.6}
_FAIL = {"marker": "x", "markersize": 7, "markeredgewidth": 1.6, "color": "0.25", "linestyle": "none"}
_RING = {"marker": "o", "markersize": 10, "markerfacecolor": "none", "markeredgecolor": "0.2",
         "markeredgewidth": 1.1, "linestyle": "none"}
#: the marks of each fit's chronaxie (and charge intercept): one shape, in the fit's colour, on its curve
_FIT_MARK = "D"
#: the case's own grid in a convergence figure: a large open star
_CASE_GRID = {"marker": "*", "markersize": 15, "markerfacecolor": "none", "markeredgecolor": "#8b2f4b",
              "markeredgewidth": 1.3, "linestyle": "none", "clip_on": False}


#: the two fitted strength-duration laws: (suffix of their variables, name)
_LAWS = (("lapicque", "Lapicque"), ("weiss", "Weiss"))
#: the fitted parameters a strength-duration result carries
_LAW_FITS = tuple(f"{q}_{key}" for key, _law in _LAWS for q in ("rheobase", "chronaxie"))


def _require(ds, names, who, maker):
    missing = [n for n in names if n not in ds.variables]
    if missing:
        have = [str(v) for v in ds.variables]
        raise CaseError(f"{who}: the result has no {', '.join(map(repr, missing))}; it needs the Dataset of "
                        f"{maker}.{_common.nearest_name(missing[0], have)} Variables: {', '.join(have) or '(none)'}.")


def _units(ds, name, default):
    """The typeset unit of a variable (µA/cm², ms)."""
    return _common.unit_text(str(ds[name].attrs.get("units") or default))


def _ms(value) -> str:
    """A duration in a label: one decimal, the precision the protocols' searches report [ms]."""
    return f"{value:.1f}"


def _scalar(ds, name) -> float:
    return float(ds[name]) if name in ds.variables else np.nan


def _legend(ax, legend, **kw):
    if legend:
        ax.legend(fontsize="small", frameon=False, **kw)


def _plain_log(axis) -> None:
    """Tick labels of a log axis as plain numbers (0.5, 2, 10), not powers of ten."""
    from matplotlib.ticker import FuncFormatter

    def minor(v, _pos):
        lo, hi = sorted(axis.get_view_interval())
        if v <= 0 or lo <= 0 or np.log10(hi / lo) > MINOR_LABEL_DECADES:
            return ""
        mantissa = round(v / 10.0 ** np.floor(np.log10(v)), 6)
        return f"{v:g}" if mantissa in (2.0, 5.0) else ""

    axis.set_major_formatter(FuncFormatter(lambda v, _pos: f"{v:g}"))
    axis.set_minor_formatter(FuncFormatter(minor))


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


def _at_foot(ax, xs, style, label, xlabel):
    """The x label, and a strip below the axes for points with no value (none without them)."""
    xs = np.asarray(xs, dtype=float)
    xs = xs[np.isfinite(xs)]
    _common.strip_below(ax, [(label, [(xs, style)])], xlabel)


# --------------------------------------------------------------------------- strength-duration

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


# --------------------------------------------------------------------------- refractoriness

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


# --------------------------------------------------------------------------- restitution

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


# --------------------------------------------------------------------------- convergence

#: the grid-spacing axis runs this factor beyond the coarsest and the finest grid
CONVERGENCE_MARGIN = 1.25
#: quantities of a convergence result: variable per level, prefix of its scalars, name
_CONVERGED = {"cv": ("conduction_velocity", "CV"), "apd90": ("apd90", "APD90")}


def convergence(ds, ax=None, *, quantity: str = "cv", error: bool = False, legend: bool = True):
    """CV (or APD90) against grid spacing on a log axis, with the extrapolated value.

    Parameters
    ----------
    ds : xarray.Dataset
        The result of :func:`cable.convergence`.
    ax : matplotlib.axes.Axes, optional
        Where to draw (the current pyplot Axes if omitted).
    quantity : {"cv", "apd90"}
        What to draw.
    error : bool
        Draw instead the estimated relative error 100 |f - f*| / |f*| [%] of each grid on
        log-log axes, with a reference line of the formal order through the finest grid.
    legend : bool
        Name the curves: the computed values with their observed order (and the formal
        one), the Richardson-extrapolated value, the case's own grid with its error.

    Returns
    -------
    matplotlib.axes.Axes

    Raises
    ------
    CaseError
        ``ds`` is not a convergence result, or ``quantity`` is unknown.
    """
    if quantity not in _CONVERGED:
        raise CaseError(f"convergence figure: quantity = {quantity!r}; allowed values are "
                        f"{', '.join(map(repr, _CONVERGED))}.{_common.nearest_name(quantity, _CONVERGED)}")
    from matplotlib.ticker import NullFormatter

    var, name = _CONVERGED[quantity]
    _require(ds, (var, "dx", f"{quantity}_extrapolated", f"{quantity}_observed_order", "propagated"),
             "convergence figure", "cable.convergence")
    ax = _common.axes_or_current(ax)
    dx = np.asarray(ds["dx"].values, dtype=float)
    f = np.asarray(ds[var].values, dtype=float)
    prop = np.asarray(ds["propagated"].values).astype(bool)
    unit, dx_unit = _units(ds, var, "m/s" if quantity == "cv" else "ms"), _units(ds, "dx", "cm")
    ext = _scalar(ds, f"{quantity}_extrapolated")
    p, used = _scalar(ds, f"{quantity}_observed_order"), _scalar(ds, f"{quantity}_order_used")
    formal = ds.attrs.get("formal_order")
    order = f"observed order {p:.2f}" if np.isfinite(p) else "observed order undetermined"
    if formal is not None:
        order += f" (formal {float(formal):g})"
    ok = np.isfinite(f)
    rel_err = _scalar(ds, f"{quantity}_relative_error")
    # grid spacings read best in µm (a cardiac or axon grid is 10-500 µm): short tick labels
    scale, dx_unit = (1e4, "µm") if dx_unit == "cm" else (1.0, dx_unit)
    case_text = f"the case's grid, dx = {dx[0] * scale:.3g} {dx_unit}" if dx.size else "the case's grid"
    if np.isfinite(rel_err):
        case_text += f": error {100 * rel_err:.2g} %"
    if error:
        err = 100.0 * np.abs(f - ext) / abs(ext) if np.isfinite(ext) and ext != 0 else np.full(f.size, np.nan)
        good = np.isfinite(err) & (err > 0)
        ax.plot(dx[good], err[good], markersize=5, linewidth=1.3, label=f"{name}: {order}", zorder=3,
                clip_on=False, **_common.look(0))
        if good.any() and formal is not None:
            fine = int(np.flatnonzero(good)[np.argmin(dx[good])])
            ref = err[fine] * (dx / dx[fine]) ** float(formal)
            ax.plot(dx, ref, color="0.45", linestyle="--", linewidth=1.0, label=f"slope {float(formal):g}")
        if good.size and good[0]:
            ax.plot(dx[:1], err[:1], label=case_text, zorder=4, **_CASE_GRID)
        ax.set_yscale("log")
        _plain_log(ax.yaxis)
        ax.set_ylabel(f"{name} error [%]")
    else:
        # not clipped: on a short panel the margin of the limits is less than a marker
        ax.plot(dx[ok], f[ok], markersize=5, linewidth=1.3, label=f"{name}: {order}", zorder=3, clip_on=False,
                **_common.look(0))
        if np.isfinite(ext):
            text = f"Richardson extrapolation {ext:.4g} {unit}"
            if np.isfinite(used) and np.isfinite(p) and used != p:
                text += f" (with order {used:g})"
            ax.axhline(ext, color=_common.look(1)["color"], linestyle="--", linewidth=1.3, label=text)
        if ok.size and ok[0]:
            ax.plot(dx[:1], f[:1], label=case_text, zorder=4, **_CASE_GRID)
        ax.set_ylabel(f"{name} [{unit}]")
    block = " (numerical block)" if int(ds.attrs.get("numerical_block", 0) or 0) else ""
    ax.set_xscale("log")
    ax.set_xticks(dx, [f"{v * scale:.3g}" for v in dx])      # one tick per grid
    ax.xaxis.set_minor_formatter(NullFormatter())
    if ok.size:    # a little room beyond the coarsest and finest grids, so that no mark is cut
        ax.set_xlim(dx.min() / CONVERGENCE_MARGIN, dx.max() * CONVERGENCE_MARGIN)
    _at_foot(ax, dx[~prop], _FAIL, f"no propagation{block}", f"dx [{dx_unit}]")
    _legend(ax, legend)
    return ax


# --------------------------------------------------------------------------- whole figures

#: narrowest panel of :func:`protocol_figure` side by side [cm]: its tick and axis labels fit
MIN_PANEL_CM = 5.0
#: most columns of the legend under the panels of :func:`protocol_figure`
LEGEND_COLUMNS = 2


def _side_by_side(fig, draws):
    """Panels side by side, each in its own part of the figure with its legend below it.

    Panels narrower than :data:`MIN_PANEL_CM` go on further rows instead. Each legend is
    as wide as its panel (in up to :data:`LEGEND_COLUMNS` columns, long
    entries wrapped), so that no legend takes the height or the width of the others.
    """
    width_cm = fig.get_size_inches()[0] * 2.54
    cols = max(1, min(len(draws), int(width_cm // MIN_PANEL_CM)))
    rows = -(-len(draws) // cols)
    parts = list(fig.subfigures(rows, cols, squeeze=False).ravel())[:len(draws)] if len(draws) > 1 else [fig]
    axes = []
    for part, draw in zip(parts, draws):
        ax = part.add_subplot()
        draw(ax)
        handles, labels = ax.get_legend_handles_labels()
        if handles:
            _legend_below(part, handles, labels)
        axes.append(ax)
    return axes


def _legend_below(fig, handles, labels):
    """A legend under the panel of ``fig`` (a figure or subfigure), in as many columns as fit it."""
    import textwrap

    def make(ncols, texts):
        return fig.legend(handles, texts, loc="outside lower center", ncols=ncols, fontsize="small", frameon=False)

    ncols = min(LEGEND_COLUMNS, len(handles))
    leg = make(ncols, labels)
    renderer = _common._renderer(fig.figure)
    if renderer is None:
        return leg
    room = 0.98 * fig.bbox.width
    width = max(len(t) for t in labels)
    while leg.get_window_extent(renderer).width > room and (ncols > 1 or width > _common.LEGEND_MIN_WRAP):
        leg.remove()
        if ncols > 1:
            ncols -= 1
        else:   # one column is still too wide: wrap the longest entries
            width = int(width * 0.8)
        leg = make(ncols, [textwrap.fill(t, width, break_long_words=False) for t in labels])
    return leg


def protocol_figure(ds, fig=None, *, title: str | None = None):
    """The figure a protocol command's ``--figure`` writes: its panels side by side.

    Strength-duration: amplitude and charge; refractoriness: the trials; restitution:
    APD90 and (on a strand) CV; convergence: CV, its estimated error, and APD90 when
    computed. The kind is recognised from the variables of ``ds``; one legend sits below
    the panels.

    Parameters
    ----------
    ds : xarray.Dataset
        A protocol result.
    fig : matplotlib.figure.Figure, optional
        Where to draw; default a new pyplot-free Figure (:func:`cable.plot._common.new_figure`).
    title : str, optional
        A title above the panels (none by default: a paper's caption says what it is).

    Returns
    -------
    matplotlib.figure.Figure

    Raises
    ------
    CaseError
        ``ds`` is no protocol result.
    """
    fig = fig if fig is not None else _common.new_figure(size=(10.0, 5.0))
    quiet = {"legend": False}
    if "rheobase_weiss" in ds.variables:
        _side_by_side(fig, [lambda ax: strength_duration(ds, ax, **quiet), lambda ax: charge_duration(ds, ax, **quiet)])
    elif "erp" in ds.variables:
        _side_by_side(fig, [lambda ax: refractory(ds, ax, **quiet)])
    elif "max_slope" in ds.variables:
        draws = [lambda ax: restitution(ds, ax, **quiet)]
        if "conduction_velocity" in ds.variables and \
                np.isfinite(np.asarray(ds["conduction_velocity"].values, dtype=float)).any():
            draws.append(lambda ax: cv_restitution(ds, ax, **quiet))
        _side_by_side(fig, draws)
    elif "cv_extrapolated" in ds.variables:
        draws = [lambda ax: convergence(ds, ax, **quiet), lambda ax: convergence(ds, ax, error=True, **quiet)]
        if "apd90" in ds.variables and np.isfinite(_scalar(ds, "apd90_extrapolated")):
            draws.append(lambda ax: convergence(ds, ax, quantity="apd90", **quiet))
        _side_by_side(fig, draws)
    else:
        raise CaseError("figure: the result is none of strength-duration, refractory period, restitution or "
                        f"convergence (its variables: {', '.join(map(str, ds.data_vars)) or '(none)'}).")
    if title:
        fig.suptitle(str(title), fontsize="medium")
    return fig
