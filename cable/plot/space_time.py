"""The space-time map: membrane potential over position and time, with the activation front.

Time runs along the horizontal axis and position along the vertical one (or the other
way round with ``time_axis="y"``), so the activation front of a beat is a line whose
slope is the local conduction velocity. Where a beat blocked, a cross marks the last
activated position; fibre regions from the case are hatched and named.
"""

from __future__ import annotations

import math
from numbers import Real

import numpy as np

from cable.case import CaseError
from cable.plot import _common

#: most samples drawn along each axis; longer fields are strided (a screen or a
#: 300 dpi column shows fewer pixels than this)
MAX_SAMPLES = 2000


def _uniform(v: np.ndarray) -> bool:
    if v.size < 3:
        return True
    d = np.diff(v)
    return bool(np.allclose(d, d[0], rtol=1e-6, atol=0.0))


def _edges(v: np.ndarray) -> tuple[float, float]:
    half = 0.5 * (v[1] - v[0]) if v.size > 1 else 0.5
    return float(v[0] - half), float(v[-1] + half)


def space_time(ds, ax=None, *, t_window=None, x_window=None, vmin=None, vmax=None, isochrones="front",
               block: bool = True, regions: bool = True, colorbar: bool = True, legend: bool = True,
               cmap: str = _common.FIELD_CMAP, time_axis: str = "x", variable: str = "vm",
               max_samples: int = MAX_SAMPLES):
    """Draw the space-time map of a strand's membrane potential.

    Parameters
    ----------
    ds : xarray.Dataset
        A result of :func:`cable.simulate` or :func:`cable.open_result` (with ``x``).
    ax : matplotlib.axes.Axes, optional
        Where to draw (the current pyplot Axes if omitted).
    t_window, x_window : (float, float), optional
        Time [ms] and position [cm] ranges to show; all by default.
    vmin, vmax : float, optional
        Colour limits [mV]; the shown data's range by default.
    isochrones : "front", float, sequence of float or None
        ``"front"``: each beat's activation front (the line t = activation_time(x)).
        A number ``dt`` [ms]: the front plus a mark every ``dt`` ms after the beat's
        onset (isochrones, closer together where conduction is slower). A sequence:
        marks at those times after onset. None or False: no overlay.
    block : bool
        Mark the last activated position of each blocked beat.
    regions : bool
        Hatch and name the ``[region.NAME]`` zones of the case, if any.
    colorbar : bool
        Add a labelled colour bar (then ``image.colorbar``).
    legend : bool
        Name the overlays in a small legend.
    cmap : str
        A matplotlib colour map; perceptually uniform ones (cividis, viridis, gray)
        keep the map readable in greyscale print.
    time_axis : "x" or "y"
        The axis time runs along.
    variable : str
        The field to draw (``vm`` or a stored state such as ``state_h``).
    max_samples : int
        Most samples drawn along each axis (longer fields are strided).

    Returns
    -------
    matplotlib.image.AxesImage or matplotlib.collections.QuadMesh
        The drawn field (pass it to ``fig.colorbar`` for a colour bar of your own).

    Raises
    ------
    CaseError
        The result has no such field or no fibre, or a window lies outside the data.
    """
    if variable not in ds.variables:
        fields = [str(v) for v in ds.data_vars if "t" in ds[v].dims]
        raise CaseError(f"variable = {variable!r} is not in the result.{_common.nearest_name(variable, fields)} "
                        f"Fields: {', '.join(fields) or '(none)'}.")
    if time_axis not in ("x", "y"):
        raise CaseError(f"time_axis = {time_axis!r}: allowed values are 'x', 'y'.")
    da = ds[variable]
    if "x" not in da.dims or "t" not in da.dims:
        raise CaseError(f"'{variable}' has dimensions {da.dims}; a space-time map needs (t, x): "
                        "the result is a single cell, not a fibre.")
    tw = _common.window(ds["t"].values, t_window, "t_window", "ms")
    xw = _common.window(ds["x"].values, x_window, "x_window", "cm")
    if tw is not None:
        da = da.sel(t=slice(*tw))
    if xw is not None:
        da = da.sel(x=slice(*xw))
    st = max(1, math.ceil(da.sizes["t"] / max_samples))
    sx = max(1, math.ceil(da.sizes["x"] / max_samples))
    da = da.isel(t=slice(None, None, st), x=slice(None, None, sx)).transpose("t", "x")
    t, x = da["t"].values, da["x"].values
    values = np.asarray(da.values, dtype=np.float64)
    finite = values[np.isfinite(values)]
    lo = float(vmin) if vmin is not None else (float(finite.min()) if finite.size else -1.0)
    hi = float(vmax) if vmax is not None else (float(finite.max()) if finite.size else 1.0)
    if not lo < hi:
        if vmin is not None and vmax is not None:
            raise CaseError(f"colour limits vmin = {vmin!r}, vmax = {vmax!r}: vmin must be below vmax.")
        lo, hi = lo - 1.0, hi + 1.0

    ax = _common.axes_or_current(ax)
    img = values.T if time_axis == "x" else values   # rows along the vertical axis
    hor, ver = (t, x) if time_axis == "x" else (x, t)
    if _uniform(t) and _uniform(x):
        extent = (*_edges(hor), *_edges(ver))
        art = ax.imshow(img, origin="lower", extent=extent, aspect="auto", interpolation="nearest",
                        cmap=cmap, vmin=lo, vmax=hi)
    else:
        art = ax.pcolormesh(hor, ver, img, shading="nearest", cmap=cmap, vmin=lo, vmax=hi, rasterized=True)
    t_label = _common.label(ds["t"], "time")
    x_label = _common.label(ds["x"], "position")
    ax.set_xlabel(t_label if time_axis == "x" else x_label)
    ax.set_ylabel(x_label if time_axis == "x" else t_label)
    limits = (ax.get_xlim(), ax.get_ylim())

    def point(tt, xx):
        return (tt, xx) if time_axis == "x" else (xx, tt)

    handles = []
    t_lo, t_hi = _edges(t)
    x_lo, x_hi = _edges(x)
    if isochrones is not None and isochrones is not False and "activation_time" in ds:
        handles += _fronts(ax, ds, isochrones, (t_lo, t_hi), (x_lo, x_hi), point)
    if block and "blocked" in ds and "block_x" in ds and "activation_time" in ds:
        handles += _blocks(ax, ds, (t_lo, t_hi), (x_lo, x_hi), point)
    if regions:
        handles += _regions(ax, ds, (x_lo, x_hi), time_axis)
    ax.set_xlim(*limits[0])
    ax.set_ylim(*limits[1])
    if colorbar:
        extend = {(False, False): "neither", (True, False): "min", (False, True): "max", (True, True): "both"}[
            (bool(finite.size) and finite.min() < lo, bool(finite.size) and finite.max() > hi)]
        ax.figure.colorbar(art, ax=ax, label=_common.label(ds[variable], variable), extend=extend)
    if legend and handles:
        # above the map, so that it hides no data; no wider than the map: measured once the
        # layout has given the colour bar its room, less a tenth that the layout takes again
        # once the legend is in (197 -> 188 pixels on a figure 8.5 cm wide at 100 dpi,
        # measured here); without a layout to run, the colour bar will take about a sixth of
        # the axes' present width. Above the region bar, when the bar runs along the top.
        above = 1.01 + (1.2 * REGION_BAR if regions and time_axis == "y" and _common.regions(ds) else 0.0)
        share = 1.0 if not colorbar else (0.9 if _laid_out(ax.figure) else 0.85)
        _common.legend_above(ax, handles, max_cols=3, share=share, y=above)
    return art


def _laid_out(fig) -> bool:
    """Run the figure's layout engine now (the axes take their final width); False without one."""
    engine = fig.get_layout_engine()
    if engine is None:
        return False
    try:
        engine.execute(fig)
    except Exception:  # a canvas that cannot measure text yet: the estimate is used instead
        return False
    return True


def _front_style():
    from matplotlib import patheffects

    return {"color": "white", "linewidth": 1.3,
            "path_effects": [patheffects.Stroke(linewidth=2.6, foreground="black"), patheffects.Normal()]}


def _fronts(ax, ds, isochrones, t_range, x_range, point):
    """Each beat's front t = activation_time(x), and marks at chosen times after onset."""
    from matplotlib.lines import Line2D

    act = ds["activation_time"]
    if "x" not in act.dims:
        return []
    act = act.sel(x=slice(*x_range)).transpose("beat", "x")
    xs = act["x"].values
    onsets = ds["beat_onset"].values if "beat_onset" in ds else np.zeros(act.sizes["beat"])
    spacing, fixed = None, None
    if isinstance(isochrones, Real) and not isinstance(isochrones, bool):
        if not isochrones > 0:
            raise CaseError(f"isochrones = {isochrones!r}: give a spacing above 0 ms, a list of times, "
                            "'front' or None.")
        spacing = float(isochrones)
    elif not isinstance(isochrones, str):
        try:
            fixed = np.asarray(list(isochrones), dtype=float)
        except (TypeError, ValueError):
            raise CaseError(f"isochrones = {isochrones!r}: allowed are 'front', a spacing [ms], a list of times "
                            "[ms] or None.") from None
    elif isochrones != "front":
        raise CaseError(f"isochrones = {isochrones!r}: allowed are 'front', a spacing [ms], a list of times "
                        "[ms] or None.")
    style = _front_style()
    drawn = marked = False
    for b, row in enumerate(act.values):
        ok = np.isfinite(row) & (row >= t_range[0]) & (row <= t_range[1])
        if not ok.any():
            continue
        tt = np.where(ok, row, np.nan)
        ax.plot(*point(tt, xs), **style, scalex=False, scaley=False)
        drawn = True
        if spacing is None and fixed is None:
            continue
        if spacing is not None:
            marks = onsets[b] + spacing * np.arange(1, int(np.floor((np.nanmax(row) - onsets[b]) / spacing)) + 1)
        else:
            marks = onsets[b] + fixed
        for tm in marks[(marks >= t_range[0]) & (marks <= t_range[1])]:
            xm = _crossings(row, xs, tm)
            if xm.size:
                ax.plot(*point(np.full(xm.size, tm), xm), marker="o", markersize=4, markerfacecolor="black",
                        markeredgecolor="white", linestyle="none", scalex=False, scaley=False)
                marked = True
    handles = []
    if drawn:
        handles.append(Line2D([], [], label="activation front", **style))
    if marked:
        what = f"every {spacing:g} ms" if spacing is not None else "at set times"
        handles.append(Line2D([], [], marker="o", markersize=4, markerfacecolor="black", markeredgecolor="white",
                              linestyle="none", label=f"isochrones, {what}"))
    return handles


def _crossings(row, xs, tm) -> np.ndarray:
    """Positions where the activation time passes ``tm`` (linear between nodes)."""
    a, b = row[:-1], row[1:]
    with np.errstate(invalid="ignore", divide="ignore"):
        hit = np.isfinite(a) & np.isfinite(b) & (a != b) & (np.minimum(a, b) <= tm) & (tm < np.maximum(a, b))
        frac = (tm - a[hit]) / (b[hit] - a[hit])
    return xs[:-1][hit] + frac * np.diff(xs)[hit]


def _blocks(ax, ds, t_range, x_range, point):
    from matplotlib.lines import Line2D

    blocked = np.asarray(ds["blocked"].values).astype(bool).reshape(-1)
    bx = np.asarray(ds["block_x"].values, dtype=float).reshape(-1)
    act = ds["activation_time"]
    if "x" not in act.dims:
        return []
    drawn = False
    for b in np.flatnonzero(blocked):
        if not np.isfinite(bx[b]) or not x_range[0] <= bx[b] <= x_range[1]:
            continue
        tb = float(act.isel(beat=int(b)).sel(x=bx[b], method="nearest"))
        if not np.isfinite(tb) or not t_range[0] <= tb <= t_range[1]:
            continue
        # not clipped: a beat blocked near the start of the run sits on the map's edge
        ax.plot(*point(tb, bx[b]), **_common.BLOCK_MARK, scalex=False, scaley=False, zorder=5, clip_on=False)
        ax.annotate("block", point(tb, bx[b]), xytext=(7, 7), textcoords="offset points", fontsize="small",
                    color="black", bbox={"boxstyle": "round,pad=0.2", "facecolor": "white", "edgecolor": "none",
                                         "alpha": 0.85}, zorder=6)
        drawn = True
    return [Line2D([], [], label="conduction block", **_common.BLOCK_MARK)] if drawn else []


#: hatch of each region's bar in the margin (cycling), and the bar's width [axes fraction]
REGION_HATCHES = ("///", "\\\\\\", "xxx", "...")
REGION_BAR = 0.025


def _regions(ax, ds, x_range, time_axis):
    """Mark each region by a hatched bar in the margin beside the map and thin lines at its ends.

    Nothing is laid over the field itself but the lines (dashed: the region's ends,
    dotted: the ends of its border ramp), so the potential inside the region stays
    visible; the legend names each region with its extent and what differs there.
    """
    from matplotlib.lines import Line2D
    from matplotlib.patches import Patch

    zones = [z for z in _common.regions(ds) if z.end + z.border > x_range[0] and z.start - z.border < x_range[1]]
    if not zones:
        return []
    line = ax.axhline if time_axis == "x" else ax.axvline
    if time_axis == "x":     # the bar runs along the position axis, beside the map
        bar = ax.inset_axes([1.0 + 0.2 * REGION_BAR, 0.0, REGION_BAR, 1.0], sharey=ax)
        span = bar.axhspan
    else:
        bar = ax.inset_axes([0.0, 1.0 + 0.2 * REGION_BAR, 1.0, REGION_BAR], sharex=ax)
        span = bar.axvspan
    bar.set_axis_off()
    handles = []
    for k, zone in enumerate(zones):
        hatch = REGION_HATCHES[k % len(REGION_HATCHES)]
        a, b = max(zone.start, x_range[0]), min(zone.end, x_range[1])
        if b > a:
            span(a, b, facecolor="white", edgecolor="0.25", hatch=hatch, linewidth=0.6)
        if zone.border > 0:
            for lo, hi in ((zone.start - zone.border, zone.start), (zone.end, zone.end + zone.border)):
                lo, hi = max(lo, x_range[0]), min(hi, x_range[1])
                if hi > lo:
                    span(lo, hi, facecolor="0.85", edgecolor="none")
        for edge in (zone.start, zone.end):
            if x_range[0] < edge < x_range[1]:
                line(edge, color="white", linewidth=0.7, linestyle=(0, (4, 3)), alpha=0.8)
        for edge in ((zone.start - zone.border, zone.end + zone.border) if zone.border > 0 else ()):
            if x_range[0] < edge < x_range[1]:
                line(edge, color="white", linewidth=0.7, linestyle=(0, (1, 2)), alpha=0.8)
        handles.append(Patch(facecolor="white", edgecolor="0.25", hatch=hatch, linewidth=0.6,
                             label=zone.label))
    if any(z.border > 0 for z in zones):
        width = max(z.border for z in zones)
        handles.append(Line2D([], [], color="0.3", linewidth=0.9, linestyle=(0, (1, 2)),
                              label=f"border ramp, {width * 10:.3g} mm"))
    return handles
