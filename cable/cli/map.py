"""``cable map OUT.nc -o map.png``: the space-time map of a result (PNG, PDF or SVG)."""

from cable.cli import _figures

NAME = "map"
HELP = "draw the space-time map of vm from a result file, with activation fronts and block"
ORDER = 30


def add_arguments(p):
    p.add_argument("result", help="result file (.nc) written by `cable run`")
    _figures.add_figure_options(p, ".map.png")
    p.add_argument("--t-window", nargs=2, metavar=("A", "B"), help="time range; bare numbers in ms (or '1 s'); default: the whole run")
    p.add_argument("--x-window", nargs=2, metavar=("A", "B"), help="position range; bare numbers in cm (or '5mm'); default: the whole fibre")
    p.add_argument("--vlim", nargs=2, metavar=("LO", "HI"), help="colour limits; bare numbers in mV (default: the field's range)")
    p.add_argument("--isochrones", metavar="STEP", help="mark the front every STEP after each beat's onset "
                   "(bare number in ms; default: the front line only)")
    p.add_argument("--no-front", action="store_true", help="do not draw the activation fronts")
    p.add_argument("--variable", default="vm", help="the field to draw: vm (default) or a stored state_NAME")
    p.add_argument("--time-axis", choices=("x", "y"), default="x", help="the axis time runs along (default x)")
    p.add_argument("--cmap", default=None, help="matplotlib colour map (default cividis, greyscale-safe)")


def run(args):
    from cable.case import CaseError
    from cable.io.netcdf import open_result, require
    from cable.plot import _common, space_time

    out = _figures.output_path(args, ".map.png")
    isochrones = "front"
    if args.no_front:
        isochrones = None
    if args.isochrones is not None:
        if args.no_front:
            raise CaseError("--isochrones marks the front, which --no-front removes; give one of them.")
        isochrones = _figures.quantity(args.isochrones, "time", "--isochrones")
    cmap = args.cmap or _common.FIELD_CMAP
    import matplotlib

    if cmap not in matplotlib.colormaps:
        raise CaseError(f"--cmap {cmap!r} is not a matplotlib colour map.{_common.nearest_name(cmap, list(matplotlib.colormaps))} "
                        "Greyscale-safe ones: cividis, viridis, magma, gray.")
    with open_result(args.result) as ds:
        require(ds, [args.variable], args.result, "draw a space-time map")
        vlim = _figures.pair(args.vlim, "potential", "--vlim") if args.vlim else (None, None)
        with _figures.drawing(args) as fig:
            space_time(ds, fig.add_subplot(), t_window=_figures.pair(args.t_window, "time", "--t-window"),
                       x_window=_figures.pair(args.x_window, "length", "--x-window"), vmin=vlim[0], vmax=vlim[1],
                       isochrones=isochrones, cmap=cmap, time_axis=args.time_axis, variable=args.variable)
            _figures.finish(fig, args, out)
    return 0
