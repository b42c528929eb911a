"""What the protocol figures share: checks, unit labels, log ticks, the strip of failures,
and panels side by side with a legend below each.

Looks follow :mod:`cable.plot._common`: curves told apart by dash pattern and marker as
well as colour, so that they stay apart in greyscale print.
"""

from __future__ import annotations

import numpy as np

from cable.case import CaseError
from cable.plot import _common

#: on a log axis spanning at most this many decades, the minor ticks at 2 and 5 are labelled too
MINOR_LABEL_DECADES = 2.0

#: looks of the marked intervals and of the failures (dark, mid and light greys with
#: distinct dash patterns: they read in greyscale print)
_APD = {"color": "#4a7fb0", "linestyle": ":", "linewidth": 1.6}
_FAIL = {"marker": "x", "markersize": 7, "markeredgewidth": 1.6, "color": "0.25", "linestyle": "none"}
_RING = {"marker": "o", "markersize": 10, "markerfacecolor": "none", "markeredgecolor": "0.2",
         "markeredgewidth": 1.1, "linestyle": "none"}


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



def _at_foot(ax, xs, style, label, xlabel):
    """The x label, and a strip below the axes for points with no value (none without them)."""
    xs = np.asarray(xs, dtype=float)
    xs = xs[np.isfinite(xs)]
    _common.strip_below(ax, [(label, [(xs, style)])], xlabel)



#: narrowest panel of :func:`cable.plot.protocol_figure` side by side [cm]: its tick and axis labels fit
MIN_PANEL_CM = 5.0
#: most columns of the legend under the panels of :func:`cable.plot.protocol_figure`
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
