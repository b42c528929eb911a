"""``cable plot-sweep SWEEP.nc --y conduction_velocity --x g_Na``: a measurement against a swept key.

A swept key is named by its dimension (``g_Na``) or by the full case key
(``membrane.scale.g_Na``). ``--hue`` and ``--sel``, the earlier names of ``--curves-by``
and ``--fix``, are still read (hidden from ``--help``).
"""

import argparse

from cable.cli import _figures

NAME = "plot-sweep"
HELP = "draw a measurement of a sweep result against a swept key, one curve per value of another, block marked"
ORDER = 32


def add_arguments(p):
    p.add_argument("result", help="sweep result file (.nc)")
    p.add_argument("--y", required=True, help="the measurement (required), e.g. conduction_velocity")
    p.add_argument("--x", required=True, metavar="KEY",
                   help="the swept key along the horizontal axis (required): its short name, e.g. g_Na, or the "
                        "case key, e.g. membrane.scale.g_Na")
    p.add_argument("--curves-by", dest="hue", metavar="KEY",
                   help="another swept key (short name or case key): one curve per value (default: one curve)")
    p.add_argument("--fix", dest="sel", action="append", default=[], metavar="KEY=VALUE",
                   help="hold another swept key (or beat, level) at one value, e.g. --fix beat=0 or "
                        "--fix membrane.temperature=6.3 (repeatable; the nearest value of a numeric key; "
                        "default: none, a key left with several values is an error)")
    p.add_argument("--hue", dest="hue", default=argparse.SUPPRESS, help=argparse.SUPPRESS)
    p.add_argument("--sel", dest="sel", action="append", help=argparse.SUPPRESS)
    p.add_argument("--logx", action="store_true", help="logarithmic horizontal axis (default: linear)")
    p.add_argument("--logy", action="store_true", help="logarithmic vertical axis (default: linear)")
    _figures.add_figure_options(p, ".sweep.png")


def dimension(ds, name: str | None) -> str | None:
    """The sweep's name for a swept key: a dimension or coordinate as given, or the one whose
    ``case_key`` is ``name`` (in any spelling the case accepts, ``fibre.radius`` too)."""
    from cable.case import CaseError
    from cable.case.names import canonical_key

    if name is None or name in ds.dims or name in ds.coords:
        return name
    try:
        spelt = {name, canonical_key(name)}
    except CaseError:
        spelt = {name}
    for coord in ds.coords:
        if ds[coord].attrs.get("case_key") in spelt:
            return str(coord)
    return name  # unknown: the figure's own message lists the dimensions


def _selection(ds, items) -> dict:
    from cable.case import CaseError

    out = {}
    for item in items:
        if "=" not in item:
            raise CaseError(f"--fix {item!r}: expected KEY=VALUE, e.g. --fix beat=0.")
        dim, value = item.split("=", 1)
        out[dimension(ds, dim.strip())] = value.strip()
    return out


def run(args):
    from cable.io.netcdf import open_result
    from cable.plot import sweep

    out = _figures.output_path(args, ".sweep.png")
    with open_result(args.result) as ds:
        with _figures.drawing(args) as fig:
            sweep(ds, args.y, dimension(ds, args.x), fig.add_subplot(), hue=dimension(ds, args.hue),
                  select=_selection(ds, args.sel), logx=args.logx, logy=args.logy)
            _figures.finish(fig, args, out)
    return 0
