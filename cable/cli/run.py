"""``cable run CASE -o OUT.nc``: simulate a case and write its result."""

import shlex
import sys

from cable.cli import add_set_option, say

NAME = "run"
HELP = "simulate a case file and write the result to netCDF"
ORDER = 1


def add_arguments(p):
    p.add_argument("case", help="case file (TOML)")
    p.add_argument("-o", "--output", help="result file (.nc) (default: none, only the summary is printed)")
    p.add_argument("--overwrite", action="store_true", help="replace an existing result file")
    add_set_option(p)
    p.add_argument("-q", "--quiet", action="store_true", help="print nothing but errors")
    p.add_argument("--certify", action="store_true",
                   help="then rerun at dx/2 and dx/4 and print a convergence certificate (see `cable converge`)")


def run(args):
    from cable import load_case, simulate
    from cable.cli.summary import summarise

    from pathlib import Path

    from cable.io.netcdf import check_target

    case = load_case(Path(args.case), args.overrides)
    if args.output:
        check_target(args.output, args.overwrite, inputs=(args.case,))
    if "sweep" in case.raw:
        say(args, "note: `cable run` runs the case as given and ignores its [sweep]; `cable sweep` runs the points.")
    if args.certify:
        from cable.cli.converge import preflight

        preflight(case, 3, "dt/dx^2", -1, option="--certify")  # the refined grids must fit before the first run starts
    command = "cable " + " ".join(shlex.quote(a) for a in sys.argv[1:])
    ds = simulate(case, output=args.output, overwrite=args.overwrite, command=command,
                  info=lambda m: say(args, m))
    if not args.quiet:
        print(summarise(ds))
        if args.output:
            print(f"wrote {args.output}")
    if args.certify:
        from cable.cli.converge import certify

        certify(args, case, ds)
    return 0
