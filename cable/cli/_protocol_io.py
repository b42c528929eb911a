"""Options and output shared by the protocol commands (threshold, erp, restitution, converge)."""

import shlex
import sys

from cable.cli import add_set_option


def add_common(p) -> None:
    """CASE, -o/--overwrite, --set and -q."""
    p.add_argument("case", help="case file (TOML)")
    p.add_argument("-o", "--output", help="netCDF file for the protocol's result")
    p.add_argument("--overwrite", action="store_true", help="replace an existing output file")
    add_set_option(p)
    p.add_argument("-q", "--quiet", action="store_true", help="print only the result (no line per run)")


def prepare(args):
    """Load the case and check the output target before any run."""
    from cable import load_case
    from cable.io.netcdf import check_target

    case = load_case(args.case, args.overrides)
    if args.output:
        check_target(args.output, args.overwrite)
    return case


def finish(args, ds, text: str) -> int:
    """Print the result, record the command line, write the file when asked."""
    from cable.io.netcdf import write_dataset

    print(text)
    ds.attrs["command"] = "cable " + " ".join(shlex.quote(a) for a in sys.argv[1:])
    if args.output:
        write_dataset(ds, args.output, overwrite=args.overwrite)
        print(f"wrote {args.output}")
    return 0
