"""Figures of a convergence certificate (:func:`cable.convergence`): CV or APD90 against the
grid spacing, or its estimated error, with the extrapolated value."""

from __future__ import annotations

import numpy as np

from cable.case import CaseError
from cable.plot import _common
from cable.plot.protocol_figures._parts import _FAIL, _at_foot, _legend, _plain_log, _require, _scalar, _side_by_side, _units

#: the case's own grid in a convergence figure: a large open star
_CASE_GRID = {"marker": "*", "markersize": 15, "markerfacecolor": "none", "markeredgecolor": "#8b2f4b",
              "markeredgewidth": 1.3, "linestyle": "none", "clip_on": False}

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




def figure(ds, fig) -> None:
    """CV, its estimated error, and APD90 when computed (the figure of ``cable converge --figure``)."""
    draws = [lambda ax: convergence(ds, ax, legend=False), lambda ax: convergence(ds, ax, error=True, legend=False)]
    if "apd90" in ds.variables and np.isfinite(_scalar(ds, "apd90_extrapolated")):
        draws.append(lambda ax: convergence(ds, ax, quantity="apd90", legend=False))
    _side_by_side(fig, draws)
