"""``cable restitution CASE``: APD90, CV and wavelength against the diastolic interval."""

from cable.cli import say
from cable.cli._protocol_io import add_common, finish, prepare

NAME = "restitution"
HELP = "restitution: APD90 and CV against diastolic interval by S1-S2 or dynamic pacing"
ORDER = 9


def add_arguments(p):
    from cable.protocols.restitution import DEFAULT_BEATS

    add_common(p)
    p.add_argument("--protocol", choices=("s1s2", "dynamic"), default="s1s2",
                   help="one S2 per coupling interval after an S1 train, or a train at decreasing cycle length "
                        "(default s1s2)")
    p.add_argument("--intervals", nargs="+", type=float, metavar="MS",
                   help="coupling intervals (s1s2) or cycle lengths (dynamic) [ms]; default: diastolic intervals "
                        "spaced geometrically from the basic cycle down")
    p.add_argument("--cycle-length", type=float, metavar="MS",
                   help="basic (S1) cycle length [ms] (default: the first stimulus's cycle_length)")
    p.add_argument("--s1-count", type=int, metavar="N", help="S1 pulses before each S2 (default: the first stimulus's count)")
    p.add_argument("--beats", type=int, default=DEFAULT_BEATS, metavar="N",
                   help=f"dynamic protocol: beats per cycle length (default {DEFAULT_BEATS})")
    p.add_argument("--observe", type=float, metavar="MS",
                   help="s1s2: how long each S2 is watched [ms] (default: the S1 beat's APD90 plus twice the "
                        "wave's transit time and the capture latency)")


def run(args):
    from cable.protocols.restitution import restitution, summary

    from cable.case import CaseError

    if args.beats < 1:
        raise CaseError(f"--beats {args.beats}: must be a whole number of at least 1 (beats per cycle length).")
    case = prepare(args)
    ds = restitution(case, args.intervals, args.protocol, cycle_length=args.cycle_length, s1_count=args.s1_count,
                     beats=args.beats, observe=args.observe, info=lambda m: say(args, m))
    return finish(args, ds, summary(ds))
