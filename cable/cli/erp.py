"""``cable erp CASE``: effective and local refractory periods by S1-S2 bisection."""

from cable.cli import say
from cable.cli._protocol_io import add_common, add_rounds_options, finish, prepare

NAME = "erp"
HELP = "refractory periods: S1 train, then the shortest S1-S2 interval that captures and that propagates"
ORDER = 8


def add_arguments(p):
    from cable.protocols.refractory import DEFAULT_TOLERANCE

    add_common(p)
    p.add_argument("--cycle-length", type=float, metavar="MS",
                   help="S1 interval [ms] (default: the first stimulus's cycle_length)")
    p.add_argument("--s1-count", type=int, metavar="N", help="number of S1 pulses (default: the first stimulus's count)")
    p.add_argument("--s2-amplitude", type=float, metavar="UA_CM2", help="S2 amplitude [uA/cm^2] (default: the S1's)")
    p.add_argument("--s2-duration", type=float, metavar="MS", help="S2 duration [ms] (default: the S1's)")
    p.add_argument("--tolerance", type=float, default=DEFAULT_TOLERANCE, metavar="MS",
                   help=f"width of the final bracket on each interval [ms] (default {DEFAULT_TOLERANCE:g})")
    p.add_argument("--observe", type=float, metavar="MS",
                   help="how long each S2 is watched [ms] (default: twice the S1 wave's transit time plus the "
                        "capture latency and the S2 pulse)")
    add_rounds_options(p)


def run(args):
    from cable.case import CaseError
    from cable.protocols.refractory import DEFAULT_TOLERANCE, refractory_period, summary

    case = prepare(args)
    if not args.tolerance >= case.numerics.dt:
        raise CaseError(f"--tolerance {args.tolerance:g} ms: give at least numerics.dt = {case.numerics.dt:g} ms, "
                        f"the time resolution of each run (default {DEFAULT_TOLERANCE:g} ms).")
    ds = refractory_period(case, cycle_length=args.cycle_length, s1_count=args.s1_count,
                           s2_amplitude=args.s2_amplitude, s2_duration=args.s2_duration, tolerance=args.tolerance,
                           observe=args.observe, info=lambda m: say(args, m), points=args.points,
                           workers=args.workers)
    return finish(args, ds, summary(ds))
