"""Sweep plots: a measurement against a swept key, one curve per value of another, block marked.

A sweep result is an ``xarray.Dataset`` whose dimensions are named after the swept
keys (``g_Na``, ``membrane.scale.g_Na``...) and whose variables are the measurements,
e.g. ``conduction_velocity(g_Na, beat)`` and ``blocked(g_Na, beat)``.
"""

from __future__ import annotations

import numpy as np

from cable.case import CaseError
from cable.plot import _common


def _select(da, select):
    """``da`` at ``{dimension: value}`` for the dimensions it has (nearest for numbers)."""
    for dim, value in (select or {}).items():
        if dim not in da.dims:
            continue
        coord = da[dim]
        try:
            if coord.dtype.kind in "fciu":
                da = da.sel({dim: float(value)}, method="nearest")
            else:
                da = da.sel({dim: str(value)})
        except (KeyError, ValueError, TypeError):
            raise CaseError(f"select {dim} = {value!r}: not a value of '{dim}' "
                            f"(values: {', '.join(map(str, coord.values[:8]))}).") from None
    return da


def _reduce(da, keep, select, what):
    """Select ``select`` and squeeze length-1 dimensions, keeping ``keep``."""
    unknown = [d for d in (select or {}) if d not in da.dims]
    if unknown:
        raise CaseError(f"select: {', '.join(map(repr, unknown))} is not a dimension of {what}."
                        f"{_common.nearest_name(unknown[0], da.dims)} Dimensions: {', '.join(map(str, da.dims))}.")
    da = _select(da, select)
    extra = [d for d in da.dims if d not in keep]
    left = [d for d in extra if da.sizes[d] > 1]
    if left:
        first = {d: (da[d].values[0].item() if d in da.coords else 0) for d in left}
        cli = " ".join(f"--fix {d}={v}" for d, v in first.items())
        raise CaseError(f"{what} still varies along {', '.join(left)}: choose one value of each "
                        f"({cli}; in Python select={first!r}) or draw one curve per value (--curves-by, "
                        f"in Python hue=).")
    return da.squeeze(extra, drop=True) if extra else da


def sweep(ds, y: str, x: str, ax=None, *, hue: str | None = None, select=None, block: bool = True,
          legend: bool = True, logx: bool = False, logy: bool = False):
    """Draw a measurement of a sweep against one swept key.

    Parameters
    ----------
    ds : xarray.Dataset
        A sweep result (dimensions named after the swept keys).
    y : str
        The measurement, e.g. ``"conduction_velocity"``.
    x : str
        The swept key along the horizontal axis (a dimension of ``y``).
    ax : matplotlib.axes.Axes, optional
        Where to draw (the current pyplot Axes if omitted).
    hue : str, optional
        Another dimension: one curve per value.
    select : dict, optional
        ``{dimension: value}`` for every other dimension longer than one (e.g.
        ``{"beat": 0}``); the nearest value for numeric coordinates.
    block : bool
        Mark the points whose wave blocked (variable ``blocked``) with a cross, and
        those whose stimulus did not capture (``captured`` = 0) with an open circle,
        in a strip below the axes (one row per outcome, in the curve's colour; the
        strip is ``ax.child_axes[0]`` and carries the x label).
    legend : bool
        Name the curves beside the axes (the strip names its rows).
    logx, logy : bool
        Logarithmic axes.

    Returns
    -------
    matplotlib.axes.Axes

    Raises
    ------
    CaseError
        ``y``, ``x`` or ``hue`` unknown, or a dimension left unchosen.
    """

    if y not in ds.data_vars:
        names = [str(v) for v in ds.data_vars]
        raise CaseError(f"y = {y!r} is not a variable of the sweep.{_common.nearest_name(y, names)} "
                        f"Variables: {', '.join(names) or '(none)'}.")
    da = ds[y]
    for what, dim in (("x", x), ("hue", hue)):
        if dim is not None and dim not in da.dims:
            raise CaseError(f"{what} = {dim!r} is not a dimension of '{y}'.{_common.nearest_name(dim, da.dims)} "
                            f"Dimensions: {', '.join(map(str, da.dims))}.")
    if hue == x:
        raise CaseError(f"hue = {hue!r} is the same as x; choose another dimension or none.")
    keep = [x] + ([hue] if hue else [])
    da = _reduce(da, keep, select, f"'{y}'").transpose(*keep)
    flags = []      # (mask over keep, marker style, legend label)
    if block:
        for name, invert, mark, text in (("blocked", False, "x", "blocked"),
                                         ("captured", True, "o", "no capture")):
            mask = _flag(ds, name, x, keep, select, da, invert)
            if mask is not None:
                flags.append((mask, mark, text))

    ax = _common.axes_or_current(ax)
    xs = np.asarray(da[x].values if x in da.coords else np.arange(da.sizes[x]))
    groups = list(da[hue].values) if hue else [None]
    handles = []
    looks = []
    for k, g in enumerate(groups):
        row = da.isel({hue: k}).values if hue else da.values
        style = _common.look(k)
        looks.append(style)
        name = None if hue is None else f"{g:g}" if isinstance(g, (float, np.floating)) else str(g)
        (line,) = ax.plot(xs, row, markersize=5, linewidth=1.4, label=name, **style)
        if hue is not None:
            handles.append(line)
    if logx:
        ax.set_xscale("log")
    if logy:
        ax.set_yscale("log")
    x_label = _common.label(ds[x] if x in ds.coords else None, x, short=True)
    ax.set_ylabel(_common.label(ds[y], y, short=True))
    rows = []
    for mask, mark, text in flags:
        sets = []
        for k, style in enumerate(looks):
            hit = (mask.isel({hue: k}).values if hue else mask.values).astype(bool)
            if hit.any():
                sets.append((xs[hit], _foot_style(mark, style["color"])))
        rows.append((text, sets))
    _common.strip_below(ax, rows, x_label)
    if legend and handles:
        title = _common.label(ds[hue], hue, short=True) if hue and hue in ds.coords else hue
        # beside the axes, where it hides no point
        ax.legend(handles=handles, title=title, fontsize="small", title_fontsize="small", frameon=False,
                  loc="upper left", bbox_to_anchor=(1.02, 1.0), borderaxespad=0.0)
    return ax


def _foot_style(mark: str, color) -> dict:
    if mark == "x":
        return {"marker": "x", "markersize": 7, "markeredgewidth": 1.6, "color": color}
    return {"marker": mark, "markersize": 6, "markeredgewidth": 1.3, "markerfacecolor": "none",
            "markeredgecolor": color, "color": color}


def _flag(ds, name, x, keep, select, da, invert):
    """A boolean mask over ``keep`` from a 0/1 variable (any over the dimensions left).

    Only the values 1 (or 0 with ``invert``) count: a sweep marks a point without a
    result (failed, not computed, a beat it did not have) with -1, which is neither.
    """
    if name not in ds.data_vars or x not in ds[name].dims:
        return None
    flag = _select(ds[name], select) == (0 if invert else 1)
    others = [d for d in flag.dims if d not in keep]
    return (flag.any(others) if others else flag).broadcast_like(da).transpose(*keep)
