"""Options and saving shared by the figure commands (map, traces, plot-sweep).

Every command that draws names the figure's size and resolution ``--figure-size`` and
``--figure-dpi`` (the protocols' ``--figure PATH`` too); ``--size`` and ``--dpi``, the
plot commands' earlier spellings, are still read, hidden from ``--help``.
"""

from __future__ import annotations

import argparse
import contextlib
from pathlib import Path

from cable.case import CaseError

#: default figure size [cm]: wide enough for a two-column journal figure
DEFAULT_SIZE_CM = (16.0, 10.0)
#: default resolution of PNG output [dots per inch]; the usual minimum for line art in print
DEFAULT_DPI = 300
#: most pixels along either side of a figure: 139 cm at 300 dpi; matplotlib refuses 2^16
#: and the memory of the image grows with the square (16384^2 x 4 bytes = 1 GiB)
MAX_PIXELS = 2 ** 14


def add_figure_options(p, default_suffix: str, *, stacked: bool = False) -> None:
    p.add_argument("-o", "--output", metavar="FIGURE",
                   help=f"figure file: .png, .pdf or .svg (default: the input's name + '{default_suffix}')")
    add_size_options(p, dest_size="size", dest_dpi="dpi", stacked=stacked, aliases=True)
    p.add_argument("--title", help="a title above the figure (default: none)")


def add_size_options(p, *, dest_size: str, dest_dpi: str, stacked: bool = False, aliases: bool = False) -> None:
    """``--figure-size W H`` and ``--figure-dpi DPI`` (``aliases``: also the hidden ``--size``, ``--dpi``)."""
    p.add_argument("--figure-size", dest=dest_size, nargs=2, metavar=("W", "H"),
                   help=f"figure width and height; bare numbers in cm, or with a unit (85mm, 3.5in); "
                        f"default {DEFAULT_SIZE_CM[0]:g} x {DEFAULT_SIZE_CM[1]:g} cm"
                        + (f"; stacked panels: {STACKED_FIRST_CM:g} cm plus {STACKED_EACH_CM:g} cm per panel "
                           f"after the first, at least {DEFAULT_SIZE_CM[1]:g} cm" if stacked else ""))
    p.add_argument("--figure-dpi", dest=dest_dpi, type=int, default=DEFAULT_DPI, metavar="DPI",
                   help=f"resolution of PNG output (default {DEFAULT_DPI})")
    if aliases:
        p.add_argument("--size", dest=dest_size, nargs=2, default=argparse.SUPPRESS, help=argparse.SUPPRESS)
        p.add_argument("--dpi", dest=dest_dpi, type=int, default=argparse.SUPPRESS, help=argparse.SUPPRESS)


def quantity(text: str, kind: str, option: str) -> float:
    """A command-line value in the canonical unit of ``kind`` (bare numbers already are)."""
    from cable import units

    try:
        return units.to_canonical(float(text) if _is_number(text) else text, kind)
    except units.UnitError as exc:
        raise CaseError(f"{option} {text!r}: {exc}; give a number in {units.CANONICAL[kind]} or a value "
                        f"with a unit.") from None


def pair(values, kind: str, option: str):
    if values is None:
        return None
    return tuple(quantity(v, kind, option) for v in values)


def _is_number(text: str) -> bool:
    try:
        float(text)
    except ValueError:
        return False
    return True


#: font size [pt] per cm of figure width, and its bounds: a single journal column
#: (8.5 cm) gets 6 pt, the smallest size journals print; 14 cm and wider get 10 pt
FONT_PT_PER_CM = 0.7
FONT_PT_RANGE = (6.0, 10.0)


def size_cm(args) -> tuple[float, float]:
    size = pair(args.size, "length", "--figure-size") if args.size else DEFAULT_SIZE_CM
    if not all(v > 0 for v in size):
        raise CaseError(f"--figure-size {' '.join(args.size)}: width and height must be above 0.")
    return size


#: stacked panels (traces of several states): height of the first panel and of each
#: further one [cm]; 3 cm keeps a panel's tick labels and a two-line label readable
STACKED_FIRST_CM, STACKED_EACH_CM = 7.0, 3.0


def stacked_size(args, panels: int) -> None:
    """Without --figure-size, a figure of ``panels`` stacked panels grows in height with their number."""
    if args.size is None and panels > 1:
        height = max(DEFAULT_SIZE_CM[1], STACKED_FIRST_CM + STACKED_EACH_CM * (panels - 1))
        args.size = [f"{DEFAULT_SIZE_CM[0]:g}", f"{height:g}"]


def check_pixels(size, dpi: int, size_option: str = "--figure-size", dpi_option: str = "--figure-dpi") -> None:
    """Refuse a figure of more than :data:`MAX_PIXELS` along a side (``size`` in cm)."""
    if dpi <= 0:
        raise CaseError(f"{dpi_option} {dpi}: must be a positive whole number, e.g. {DEFAULT_DPI}.")
    pixels = [v / 2.54 * dpi for v in size]
    if not all(p <= MAX_PIXELS for p in pixels):
        raise CaseError(f"{size_option} {size[0]:g} x {size[1]:g} cm at {dpi_option} {dpi} gives "
                        f"{pixels[0]:.0f} x {pixels[1]:.0f} pixels; at most {MAX_PIXELS} per side are drawn. "
                        f"Lower {dpi_option} (default {DEFAULT_DPI}) or the size (default "
                        f"{DEFAULT_SIZE_CM[0]:g} x {DEFAULT_SIZE_CM[1]:g} cm).")


@contextlib.contextmanager
def drawing(args):
    """A pyplot-free figure of the requested size [cm] and dpi, fonts scaled to its width.

    The font size is in force while the figure is drawn and saved (use :func:`finish`
    inside the ``with``).
    """
    import matplotlib

    from cable.plot import _common

    width, height = size_cm(args)
    check_pixels((width, height), args.dpi)
    font = min(max(FONT_PT_PER_CM * width, FONT_PT_RANGE[0]), FONT_PT_RANGE[1])
    with matplotlib.rc_context({"font.size": font}):
        yield _common.new_figure(size=(width / 2.54, height / 2.54), dpi=args.dpi)


def output_path(args, default_suffix: str) -> Path:
    from cable.plot import _common

    out = Path(args.output) if args.output else Path(args.result).with_suffix(default_suffix)
    _common.check_suffix(out)
    return out


def finish(fig, args, out: Path) -> None:
    from cable.plot import _common

    if args.title:
        fig.suptitle(args.title)
    _common.save(fig, out, dpi=args.dpi)
    print(f"wrote {out}")
