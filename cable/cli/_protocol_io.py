"""Options and output shared by the protocol commands (threshold, erp, restitution, converge)."""

import shlex
import sys
from pathlib import Path

from cable.cli import add_set_option


def add_common(p) -> None:
    """CASE, -o/--overwrite, --set, -q and --figure."""
    p.add_argument("case", help="case file (TOML)")
    p.add_argument("-o", "--output", help="netCDF file for the protocol's result (default: printed only)")
    p.add_argument("--overwrite", action="store_true", help="replace an existing output file")
    add_set_option(p)
    p.add_argument("-q", "--quiet", action="store_true", help="print only the result (no line per run)")
    add_figure_option(p)


def add_rounds_options(p) -> None:
    """``--points``, ``--workers``: values tried per round of a search, threads sharing them."""
    p.add_argument("--points", type=int, metavar="K",
                   help="values tried per round of the search, run together (default: --workers; 1: plain "
                        "bisection; see cable/protocols/_rounds.py)")
    p.add_argument("--workers", type=int, metavar="N",
                   help="threads that share a round's runs (default: the cores free when the search starts, "
                        "at most 2)")


def add_figure_option(p) -> None:
    """--figure PATH (and its size and resolution): draw the result with :func:`cable.plot.protocol_figure`."""
    from cable.cli._figures import add_size_options

    p.add_argument("--figure", metavar="PATH", help="also draw the result: a .png, .pdf or .svg file "
                                                    "(default: no figure)")
    add_size_options(p, dest_size="figure_size", dest_dpi="figure_dpi")


def _figure_options(args):
    """The figure options in the form :mod:`cable.cli._figures` reads (size, dpi, title)."""
    from types import SimpleNamespace

    return SimpleNamespace(size=args.figure_size, dpi=args.figure_dpi, title=None)


def check_figure(args) -> None:
    """Check --figure's suffix and folder, --figure-size and --figure-dpi before any run."""
    from pathlib import Path

    from cable.case import CaseError
    from cable.cli import _figures
    from cable.plot import _common

    if not getattr(args, "figure", None):
        return
    try:
        _common.check_suffix(args.figure)
    except CaseError as exc:
        raise CaseError(f"--figure: {exc}") from None
    folder = Path(args.figure).parent
    if not folder.is_dir():
        raise CaseError(f"--figure {args.figure}: the folder '{folder}' does not exist.")
    if args.figure_dpi <= 0:
        raise CaseError(f"--figure-dpi {args.figure_dpi}: must be a positive whole number, e.g. "
                        f"{_figures.DEFAULT_DPI}.")
    size = _figures.pair(args.figure_size, "length", "--figure-size") if args.figure_size else \
        _figures.DEFAULT_SIZE_CM
    if not all(v > 0 for v in size):
        raise CaseError(f"--figure-size {' '.join(args.figure_size)}: width and height must be above 0.")
    _figures.check_pixels(size, args.figure_dpi, "--figure-size", "--figure-dpi")


def write_figure(args, ds) -> None:
    """Draw ``ds`` into the file of --figure (nothing without it)."""
    from pathlib import Path

    from cable.cli import _figures
    from cable.plot import protocol_figure

    if not getattr(args, "figure", None):
        return
    opts = _figure_options(args)
    with _figures.drawing(opts) as fig:
        protocol_figure(ds, fig)
        _figures.finish(fig, opts, Path(args.figure))


def prepare(args):
    """Load the case and check the output target before any run."""
    from cable import load_case
    from cable.io.netcdf import check_target

    case = load_case(Path(args.case), args.overrides)
    if args.output:
        check_target(args.output, args.overwrite, inputs=(args.case,))
    check_figure(args)
    return case


def finish(args, ds, text: str) -> int:
    """Print the result, record the command line, write the file when asked."""
    from cable.io.netcdf import write_dataset

    print(text)
    ds.attrs["command"] = "cable " + " ".join(shlex.quote(a) for a in sys.argv[1:])
    if args.output:
        write_dataset(ds, args.output, overwrite=args.overwrite)
        print(f"wrote {args.output}")
    write_figure(args, ds)
    return 0
