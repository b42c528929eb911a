"""``cable critical CASE --vary KEY --between LOW HIGH``: the value at which conduction turns into block."""

import sys

from cable.cli import EXIT_INPUT, add_set_option, say

NAME = "critical"
HELP = "bisect a case key for the value at which conduction through the strand turns into block"
ORDER = 6


def add_arguments(p):
    p.add_argument("case", help="case file (TOML)")
    p.add_argument("--vary", required=True, metavar="KEY",
                   help="the case key to bisect (required), e.g. membrane.scale.g_Na, stimulus.S1.amplitude, fibre.dx; "
                        "in a named table by its name: region.NAME.scale.g_Na, region.NAME.parameters.K_o, "
                        "region.NAME.coupling, region.NAME.end, stimulus.S2.onset")
    p.add_argument("--between", required=True, nargs=2, type=float, metavar=("LOW", "HIGH"),
                   help="the interval (required), in the key's canonical unit (see `cable keys`); one end must "
                        "conduct and the other block")
    p.add_argument("--tolerance", type=float, metavar="T",
                   help="width of the final bracket, same unit (default: 1%% of HIGH - LOW)")
    p.add_argument("--log", action="store_true",
                   help="bisect the logarithm of the value (keys spanning decades, e.g. a coupling factor); "
                        "the tolerance is then relative (default 0.01)")
    p.add_argument("--beat", type=int, metavar="B", help="judge this beat only (default: every beat must conduct)")
    p.add_argument("--criterion", default="block", metavar="C",
                   help="what failing means: block (default: a judged beat does not conduct), slow-response (or it "
                        "conducts as a slow response, upstroke below 10 V/s), cv-below=X (or its CV is below X m/s)")
    p.add_argument("-o", "--output", help="netCDF file for the runs made (default: none)")
    p.add_argument("--overwrite", action="store_true", help="replace an existing output file")
    add_set_option(p)
    from cable.cli._protocol_io import add_rounds_options

    add_rounds_options(p)
    p.add_argument("-q", "--quiet", action="store_true", help="print only the result (no line per run)")


def summarise(ds) -> str:
    """The search's result as a few lines (:func:`cable.protocols.critical.summary`, which ``cable info`` prints too)."""
    from cable.protocols.critical import summary

    return summary(ds)


def run(args):
    from cable import load_case
    from cable.protocols.critical import NoBracketError, find_critical

    from pathlib import Path

    case = load_case(Path(args.case), args.overrides)
    low, high = sorted(args.between)
    try:
        ds = find_critical(case, args.vary, low, high, tolerance=args.tolerance, beat=args.beat, log=args.log,
                           output=args.output, overwrite=args.overwrite, info=lambda m: say(args, m),
                           criterion=args.criterion, points=args.points, workers=args.workers)
    except NoBracketError as exc:
        print(f"cable: error: {exc}", file=sys.stderr)
        if args.output:
            print(f"wrote the {exc.runs.attrs['runs']} runs to {args.output}", file=sys.stderr)
        return EXIT_INPUT
    print(summarise(ds))
    if args.output:
        print(f"wrote {args.output}")
    return 0
