"""``cable plot-sweep SWEEP.nc --y conduction_velocity --x g_Na``: a measurement against a swept key."""

from cable.cli import _figures

NAME = "plot-sweep"
HELP = "draw a measurement of a sweep result against a swept key, one curve per --hue value, block marked"
ORDER = 32


def add_arguments(p):
    p.add_argument("result", help="sweep result file (.nc)")
    p.add_argument("--y", required=True, help="the measurement, e.g. conduction_velocity")
    p.add_argument("--x", required=True, help="the swept key along the horizontal axis, e.g. g_Na")
    p.add_argument("--hue", help="another swept key: one curve per value")
    p.add_argument("--sel", action="append", default=[], metavar="DIM=VALUE",
                   help="fix another dimension, e.g. --sel beat=0 (repeatable)")
    p.add_argument("--logx", action="store_true", help="logarithmic horizontal axis")
    p.add_argument("--logy", action="store_true", help="logarithmic vertical axis")
    _figures.add_figure_options(p, ".sweep.png")


def _selection(items) -> dict:
    from cable.case import CaseError

    out = {}
    for item in items:
        if "=" not in item:
            raise CaseError(f"--sel {item!r}: expected DIM=VALUE, e.g. --sel beat=0.")
        dim, value = item.split("=", 1)
        out[dim.strip()] = value.strip()
    return out


def run(args):
    from cable.io.netcdf import open_result
    from cable.plot import sweep

    out = _figures.output_path(args, ".sweep.png")
    with open_result(args.result) as ds:
        with _figures.drawing(args) as fig:
            sweep(ds, args.y, args.x, fig.add_subplot(), hue=args.hue, select=_selection(args.sel),
                  logx=args.logx, logy=args.logy)
            _figures.finish(fig, args, out)
    return 0
