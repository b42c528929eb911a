"""What the figure functions share: labels from attributes, regions, a greyscale-safe cycle, saving."""

from __future__ import annotations

from cable.suggest import did_you_mean
import re
import textwrap
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from cable.case import CaseError

#: output formats by suffix
FORMATS = {".png": "png", ".pdf": "pdf", ".svg": "svg"}

#: default colour map of fields: cividis rises monotonically in lightness, so it prints
#: as an ordered grey ramp and reads for the common colour-vision deficiencies
FIELD_CMAP = "cividis"

#: line looks for traces and sweep curves: dark-to-light colours (distinct in grey),
#: each with its own dash pattern and marker so that greyscale print keeps them apart
LINE_LOOKS = (
    {"color": "#1b1b3a", "linestyle": "-", "marker": "o"},
    {"color": "#b8860b", "linestyle": "--", "marker": "s"},
    {"color": "#4a7fb0", "linestyle": "-.", "marker": "^"},
    {"color": "#7a7a7a", "linestyle": ":", "marker": "D"},
    {"color": "#8b2f4b", "linestyle": (0, (5, 1, 1, 1, 1, 1)), "marker": "v"},
    {"color": "#3d7d4f", "linestyle": (0, (1, 1)), "marker": "P"},
)

#: mark of a conduction block: a white cross edged in black reads on light and dark
BLOCK_MARK = {"marker": "X", "markersize": 9, "markerfacecolor": "white", "markeredgecolor": "black",
              "markeredgewidth": 1.2, "linestyle": "none"}


def look(k: int) -> dict:
    """The k-th line look of :data:`LINE_LOOKS` (cycling)."""
    return dict(LINE_LOOKS[k % len(LINE_LOOKS)])


#: axis labels longer than this wrap onto a second line [characters]
LABEL_WIDTH = 36


def label(obj, fallback: str, *, short: bool = False) -> str:
    """``"long name [unit]"`` from a DataArray's attributes (``fallback`` for the name), wrapped.

    The unit is typeset (:func:`unit_text`). With ``short``, a known variable gets its
    short axis name (:data:`SHORT_NAMES`, "CV [m/s]") and a swept case key its last part
    ("g_Na scale" for ``membrane.scale.g_Na``).
    """
    attrs = getattr(obj, "attrs", {}) or {}
    name = str(attrs.get("long_name") or fallback)
    if short:
        name = short_name(str(attrs.get("case_key") or getattr(obj, "name", None) or fallback), name)
    unit = unit_text(attrs.get("units"))
    text = name if not unit else f"{name} [{unit}]"
    return textwrap.fill(text, LABEL_WIDTH, break_long_words=False)


#: short axis names of measurements, as a paper writes them
SHORT_NAMES = {"conduction_velocity": "CV", "wavelength": "wavelength", "wavelength_apd": "wavelength",
               "wavelength_erp": "wavelength (ERP)", "apd": "APD",
               "upstroke_velocity": "dV/dt max", "resting_potential": "resting potential",
               "peak_potential": "peak potential", "block_x": "block site", "safety_factor": "safety factor",
               "activation_time": "activation time", "vm": "V"}


#: how a sweep result's coordinates begin their long name (cable.sweep)
SWEPT_PREFIX = "swept case key "


def short_name(name: str, long_name: str = "") -> str:
    """A short axis name: :data:`SHORT_NAMES`, or the last parts of a dotted case key.

    ``membrane.scale.g_Na`` -> ``g_Na scale``, ``membrane.temperature`` -> ``temperature``,
    ``region.0.parameters.K_o`` -> ``K_o``; other names are kept.
    """
    if name in SHORT_NAMES:
        return SHORT_NAMES[name]
    if long_name.startswith(SWEPT_PREFIX):     # a sweep's coordinate names its full case key
        name = long_name[len(SWEPT_PREFIX):].strip()
    parts = [p for p in str(name).split(".") if p and not p.isdigit()]
    if len(parts) >= 2 and parts[-2] == "scale":
        return f"{parts[-1]} scale"
    if len(parts) >= 2:
        return parts[-1]
    return str(name)


#: ASCII unit spellings (as the files store them) -> typeset forms
_UNIT_WORDS = {"degC": "°C", "ohm": "Ω", "percent": "%", "mmol/L": "mM", "umol/L": "µM", "nmol/L": "nM"}
_SUPERSCRIPT = str.maketrans("-0123456789", "⁻⁰¹²³⁴⁵⁶⁷⁸⁹")


def unit_text(units) -> str:
    """A unit string typeset for a figure: ``uA/cm^2`` -> ``µA/cm²``, ``degC`` -> ``°C``.

    ``u`` as a prefix becomes ``µ``, powers become superscripts, ``ohm`` becomes ``Ω``
    and ``*`` a middle dot; a dimensionless unit (``1``, empty, None) gives ``""``.
    """
    if units is None:
        return ""
    text = str(units).strip()
    if text in ("", "1", "dimensionless"):
        return ""
    if text in _UNIT_WORDS:
        return _UNIT_WORDS[text]
    for word, typeset in _UNIT_WORDS.items():
        text = re.sub(rf"\b{re.escape(word)}\b", typeset, text)
    text = re.sub(r"(?<![A-Za-z])u(?=[A-Za-zΩ])", "µ", text)
    text = re.sub(r"\^(-?\d+)", lambda m: m.group(1).translate(_SUPERSCRIPT), text)
    return text.replace("*", "·")


def axes_or_current(ax):
    """``ax``, or the current pyplot Axes when None (pyplot only then)."""
    if ax is not None:
        return ax
    import matplotlib.pyplot as plt

    return plt.gca()


nearest_name = did_you_mean


def window(values: np.ndarray, win, what: str, unit: str):
    """Validate a ``(lo, hi)`` window against the data's range; None means all."""
    if win is None:
        return None
    try:
        lo, hi = (float(v) for v in win)
    except (TypeError, ValueError):
        raise CaseError(f"{what} = {win!r}: give two numbers [{unit}], low then high.") from None
    if not lo < hi:
        raise CaseError(f"{what} = {win!r}: the low end must be below the high end.")
    vmin, vmax = float(np.nanmin(values)), float(np.nanmax(values))
    if hi < vmin or lo > vmax:
        raise CaseError(f"{what} = [{lo:g}, {hi:g}] {unit} lies outside the data ({vmin:g} to {vmax:g} {unit}).")
    return lo, hi


@dataclass(frozen=True)
class Zone:
    """A region of the fibre as drawn: core ``[start, end]`` and ``border`` ramp [cm], and a label."""

    start: float
    end: float
    label: str
    border: float = 0.0


def _value(value, unit: str) -> str:
    text = f"{value:.4g}" if isinstance(value, float) else str(value)
    return f"{text} {unit}" if unit else text


def _describe(region, model, name: str) -> str:
    """``"zone, 2-4 mm: K_o = 12 mM, G_Na × 0.3"`` from a validated region (values in the model's units)."""
    parts = []
    for key, value in region.parameters.items():
        par = model.parameter(key)
        shown = par.choices[int(value)] if par.choices is not None else value  # a label is stored by its index
        parts.append(f"{key} = {_value(shown, unit_text(par.units))}")
    parts += [f"{key} × {value:g}" for key, value in region.scale.items()]
    if region.coupling is not None:
        parts.append(f"coupling × {region.coupling:g}")
    start, end = region.start, region.end
    where = f"{start * 10:.3g}–{end * 10:.3g} mm" if end < 1.0 else f"{start:.3g}–{end:.3g} cm"
    return f"{name}, {where}" + (": " + ", ".join(parts) if parts else "")


def regions(ds) -> list[Zone]:
    """Regions of the fibre, from the case stored with the result, in order.

    The case text travels in the result's ``case`` attribute and is loaded (validated)
    here: the zones are the case's :class:`cable.regions.Region` entries, in canonical
    units. A result without a case, or whose case has no regions or does not load (a
    CellML file no longer where it was), has none. Each zone's label names the region,
    its extent and what differs there, with units.
    """
    text = getattr(ds, "attrs", {}).get("case")
    if not text:
        return []
    from cable.case import CaseError, load_case
    from cable.membrane import get_model
    from cable.regions import regions_of

    try:
        case = load_case(text=str(text))
    except CaseError:
        return []
    found = regions_of(case)
    model = get_model(case.membrane.model) if found else None
    return [Zone(r.start, r.end, _describe(r, model, r.name), r.border) for r in found]


#: legend entries are not wrapped narrower than this [characters]
LEGEND_MIN_WRAP = 16


def legend_above(ax, handles, *, max_cols: int = 3, share: float = 1.0, y: float = 1.01, **kw):
    """A legend in a row above the axes, with as many columns (up to ``max_cols``) as fit its width.

    ``share`` is the part of the axes' present width the legend may take (less than 1
    when a colour bar will still take room from it). A legend wider than its axes would
    push the layout apart (constrained layout makes room for it beside the axes), so the
    columns are reduced until it fits; without a renderer to measure with, ``max_cols``
    columns are used.
    """
    opts = dict(loc="lower left", bbox_to_anchor=(0.0, y), fontsize="small", frameon=False,
                borderaxespad=0.0, handlelength=1.8, **kw)
    ncols = max(1, min(len(handles), max_cols))
    leg = ax.legend(handles=handles, ncols=ncols, **opts)
    renderer = _renderer(ax.figure)
    if renderer is None:
        return leg
    room = share * ax.get_window_extent(renderer).width
    while ncols > 1 and leg.get_window_extent(renderer).width > room:
        ncols -= 1
        leg.remove()
        leg = ax.legend(handles=handles, ncols=ncols, **opts)
    width = max(len(h.get_label()) for h in handles)
    while leg.get_window_extent(renderer).width > room and width > LEGEND_MIN_WRAP:
        # one column is still too wide: wrap the longest entries onto more lines
        width = int(width * 0.8)
        for text in leg.get_texts():
            text.set_text(textwrap.fill(text.get_text().replace("\n", " "), width, break_long_words=False))
    return leg


def _renderer(fig):
    """A renderer to measure text with, or None (a figure canvas without one)."""
    for get in (getattr(fig.canvas, "get_renderer", None), getattr(fig, "_get_renderer", None)):
        if get is None:
            continue
        try:
            return get()
        except Exception:  # backends differ in what they can measure before drawing
            continue
    return None


def check_suffix(path) -> str:
    """The matplotlib format of an output path (PNG, PDF or SVG by suffix)."""
    suffix = Path(path).suffix.lower()
    if suffix not in FORMATS:
        raise CaseError(f"figure '{path}': suffix '{suffix or '(none)'}' is not supported; use one of "
                        f"{', '.join(FORMATS)}.{nearest_name(suffix, FORMATS)}")
    return FORMATS[suffix]


def new_figure(size=(6.4, 4.0), dpi=200):
    """A figure without pyplot (no display, no global state): ``matplotlib.figure.Figure``."""
    from matplotlib.figure import Figure

    return Figure(figsize=size, dpi=dpi, layout="constrained")


def save(fig, path, dpi=None) -> Path:
    """Save ``fig`` in the format its suffix names; check the folder first."""
    path = Path(path)
    fmt = check_suffix(path)
    folder = path.parent if str(path.parent) else Path(".")
    if not folder.is_dir():
        raise CaseError(f"figure folder '{folder}' does not exist.")
    fig.savefig(path, format=fmt, dpi=dpi or fig.dpi, metadata=_metadata(fmt))
    return path


def _metadata(fmt: str) -> dict:
    from cable import __version__

    creator = f"cable {__version__}"
    if fmt == "png":
        return {"Software": creator}
    if fmt == "pdf":
        return {"Creator": creator}
    return {"Creator": creator} if fmt == "svg" else {}


#: height of one row of a strip of outcomes below the axes, and the gap between it and
#: the axes [fraction of the axes' height]
STRIP_ROW, STRIP_GAP = 0.09, 0.03
#: spread of several curves' marks within a row of the strip [row height]
STRIP_SPREAD = 0.5


def strip_below(ax, rows, xlabel: str = ""):
    """A strip below ``ax``, sharing its x axis, with a row per outcome that has no value.

    Block, no capture, no propagation are outcomes, not values: drawn on the value axis
    they would read as values (or sit at invented ones), so they get rows of their own
    below it. The strip carries the x tick labels and ``xlabel``; ``ax`` hides its own.

    Parameters
    ----------
    ax : matplotlib.axes.Axes
    rows : list of (str, list of (array, dict))
        Per row its name and the marks in it: x positions [data] and a line style each;
        several sets in one row are spread a little apart vertically.
    xlabel : str

    Returns
    -------
    matplotlib.axes.Axes or None
        The strip (``ax.child_axes``), or None when no row has a mark (then ``ax``
        keeps the x label).
    """
    rows = [(text, [(np.asarray(xs, dtype=float), st) for xs, st in sets if np.size(xs)]) for text, sets in rows]
    rows = [(text, sets) for text, sets in rows if sets]
    if not rows:
        ax.set_xlabel(xlabel)
        return None
    height = STRIP_ROW * len(rows)
    strip = ax.inset_axes([0.0, -(STRIP_GAP + height), 1.0, height], sharex=ax)
    ax.tick_params(axis="x", which="both", labelbottom=False)
    ax.set_xlabel("")
    for r, (text, sets) in enumerate(rows):
        for k, (xs, style) in enumerate(sets):
            offset = 0.0 if len(sets) == 1 else STRIP_SPREAD * (k / (len(sets) - 1) - 0.5)
            strip.plot(xs, np.full(xs.size, r + offset), **{"linestyle": "none", **style, "label": text})
    strip.set_ylim(-0.5, len(rows) - 0.5)
    strip.set_yticks(range(len(rows)), [text for text, _sets in rows], fontsize="small")
    strip.tick_params(axis="y", length=0)
    for side in ("top", "right"):
        strip.spines[side].set_visible(False)
    strip.set_xlabel(xlabel)
    return strip
