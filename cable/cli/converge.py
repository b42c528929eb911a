"""``cable converge CASE``: a convergence certificate (CV and APD90 on refined grids)."""

import sys

from cable.cli import say
from cable.cli._protocol_io import add_common, finish, prepare

NAME = "converge"
HELP = "convergence certificate: rerun at dx, dx/2, dx/4; observed order, extrapolated CV, error of the case's grid"
ORDER = 10


def add_arguments(p):
    add_common(p)
    add_options(p)


def add_options(p):
    """--levels, --ratio, --beat (shared with ``cable run --certify``)."""
    p.add_argument("--levels", type=int, default=3, metavar="N", help="number of grids (default 3)")
    p.add_argument("--ratio", choices=("dt/dx^2", "dt/dx"), default="dt/dx^2",
                   help="what stays fixed as dx halves: dt/dx^2 (dt / 4 per level, formal order 2; default) or "
                        "dt/dx (dt / 2 per level, formal order 1, cheaper)")
    p.add_argument("--beat", type=int, default=-1, metavar="B", help="beat to measure (default: the last)")


def report(args, ds) -> str:
    """The certificate text; its warnings also go to stderr."""
    from cable.protocols.converge import summary

    for line in filter(None, ds.attrs.get("warning", "").split("\n")):
        print(f"cable: warning: {line}", file=sys.stderr)
    return summary(ds)


def run(args):
    from cable.protocols.converge import convergence

    case = prepare(args)
    ds = convergence(case, levels=args.levels, ratio=args.ratio, beat=args.beat, info=lambda m: say(args, m))
    return finish(args, ds, report(args, ds))


def certify(args, case, base) -> None:
    """``cable run --certify``: the certificate of a run just made (its result is level 0)."""
    from cable.protocols.converge import convergence

    if case.fiber is None:
        print("certify: a single cell has no grid to refine; no certificate.", file=sys.stderr)
        return
    ds = convergence(case, levels=getattr(args, "levels", 3), ratio=getattr(args, "ratio", "dt/dx^2"),
                     beat=getattr(args, "beat", -1), base=base, info=lambda m: say(args, m))
    print(report(args, ds))
