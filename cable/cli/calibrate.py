"""``cable calibrate CASE --vary KEY --target MEASURE=VALUE``: the key's value that hits a measured target."""

import shlex
import sys

from cable.cli import add_set_option, say

NAME = "calibrate"
HELP = "find the value of a case key at which a measurement (CV, APD, wavelength, ERP) equals a target, on the case's grid"
ORDER = 7


def add_arguments(p):
    from cable.cli._protocol_io import add_figure_option

    p.add_argument("case", help="case file (TOML)")
    p.add_argument("--vary", required=True, metavar="KEY",
                   help="the numeric case key to calibrate (required), e.g. fibre.conductivity, membrane.scale.g_Na")
    p.add_argument("--target", required=True, metavar="MEASURE=VALUE",
                   help="(required) conduction_velocity=V [m/s], wavelength=L [cm], erp=T [ms] (effective "
                        "refractory period of an S1-S2 search, as `cable erp` with its defaults) or apdNN=T [ms] (APD at NN%% "
                        "repolarisation at the centre of the CV window, e.g. apd90=250)")
    p.add_argument("--between", nargs=2, type=float, metavar=("LOW", "HIGH"),
                   help="bracket of the key, canonical unit (default: searched from the case's value, seeded by "
                        "CV ~ sqrt(conductivity))")
    p.add_argument("--beat", type=int, default=0, metavar="B", help="the beat measured (default 0, the first)")
    p.add_argument("--rtol", type=float, metavar="R", help="relative tolerance of the value (default 1e-5; 1e-3 for an erp target)")
    p.add_argument("-o", "--output", help="netCDF file for the result and its runs (default: none)")
    p.add_argument("--overwrite", action="store_true", help="replace an existing output file")
    add_set_option(p)
    p.add_argument("-q", "--quiet", action="store_true", help="print only the result (no line per run)")
    add_figure_option(p)


def run(args):
    from cable import load_case
    from cable.case import CaseError
    from cable.cli._protocol_io import check_figure, write_figure
    from cable.io.netcdf import check_target, write_dataset
    from cable.protocols.calibrate import calibrate, parse_target, summary

    case = load_case(args.case, args.overrides)
    measure, target, level = parse_target(args.target)
    if args.output:
        check_target(args.output, args.overwrite)
    check_figure(args)
    if args.beat < 0:
        raise CaseError(f"--beat {args.beat}: must be 0 or more.")
    ds = calibrate(case, args.vary, measure, target, level=level, beat=args.beat, between=args.between,
                   rtol=args.rtol, info=lambda m: say(args, m))
    ds.attrs["command"] = "cable " + " ".join(shlex.quote(a) for a in sys.argv[1:])
    if args.output:
        write_dataset(ds, args.output, overwrite=args.overwrite)
        say(args, f"wrote {args.output}")
    write_figure(args, ds)   # the protocol's figure (cable.protocols.calibrate.figure)
    print(summary(ds))  # last: its last line is KEY = VALUE UNIT, for scripts
    return 0
