"""``cable threshold CASE --durations ...``: strength-duration curve, rheobase and chronaxie."""

from cable.cli import say
from cable.cli._protocol_io import add_common, add_rounds_options, finish, prepare

#: smallest --tolerance: a bracket of 1 ppm of the amplitude (about 20 halvings) is far finer
#: than any model's accuracy, and near the float64 spacing (2e-16) bisection stops halving
MIN_TOLERANCE = 1e-6

NAME = "threshold"
HELP = "strength-duration: threshold amplitude per pulse duration, with Lapicque's and Weiss's fits"
ORDER = 7


def add_arguments(p):
    from cable.protocols.threshold import DEFAULT_TOLERANCE

    add_common(p)
    p.add_argument("--durations", nargs="+", type=float, required=True, metavar="MS",
                   help="stimulus pulse durations [ms] (required), e.g. 0.1 0.2 0.5 1 2")
    p.add_argument("--mode", choices=("strand", "cell"), default="strand",
                   help="capture means a wave reaching the far end of the fibre (strand) or the single "
                        "cell crossing the activation threshold (cell); default strand")
    p.add_argument("--tolerance", type=float, default=DEFAULT_TOLERANCE, metavar="REL",
                   help=f"relative width of the final amplitude bracket (default {DEFAULT_TOLERANCE:g})")
    p.add_argument("--observe", type=float, metavar="MS",
                   help="how long to watch after the pulse [ms] (default: the case's run.duration)")
    add_rounds_options(p)


def run(args):
    from cable.protocols.threshold import strength_duration, summary

    from cable.case import CaseError

    if not args.tolerance >= MIN_TOLERANCE:
        raise CaseError(f"--tolerance {args.tolerance:g}: give at least {MIN_TOLERANCE:g} (relative width of the "
                        f"final amplitude bracket, e.g. 0.01 for 1 %).")
    case = prepare(args)
    ds = strength_duration(case, args.durations, tolerance=args.tolerance, mode=args.mode, observe=args.observe,
                           info=lambda m: say(args, m), points=args.points, workers=args.workers)
    return finish(args, ds, summary(ds))
