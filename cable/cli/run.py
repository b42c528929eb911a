"""``cable run CASE -o OUT.nc``: simulate a case and write its result."""

import shlex
import sys

from cable.cli import add_set_option, say
from cable.cli.check import SWEEP_NOTE

NAME = "run"
HELP = "simulate a case file and write the result to netCDF"
ORDER = 1


def add_arguments(p):
    p.add_argument("case", help="case file (TOML)")
    p.add_argument("-o", "--output", help="result file (.nc) (default: none, only the summary is printed)")
    p.add_argument("--overwrite", action="store_true", help="replace an existing result file")
    add_set_option(p)
    p.add_argument("-q", "--quiet", action="store_true",
                   help="print nothing but errors (no progress line; without -q it is drawn on a terminal only)")
    p.add_argument("--dry-run", action="store_true",
                   help="check the case and print what the run implies (as `cable check`), without running it")
    p.add_argument("--certify", action="store_true",
                   help="then rerun at dx/2 and dx/4 and print a convergence certificate (see `cable converge`)")


def run(args):
    from cable import load_case
    from cable.cli.summary import summarise

    from pathlib import Path

    from cable.io.netcdf import check_target

    case = load_case(Path(args.case), args.overrides)
    if args.output:
        check_target(args.output, args.overwrite, inputs=(args.case,))
    if args.certify:
        from cable.cli.converge import preflight

        preflight(case, 3, "dt/dx^2", -1, option="--certify")  # the refined grids must fit before the first run starts
    if args.dry_run:
        from cable.cli.check import report_text

        print(report_text(case, args.output))
        return 0
    if "sweep" in case.extra:
        say(args, SWEEP_NOTE)
    command = "cable " + " ".join(shlex.quote(a) for a in sys.argv[1:])
    ds = _simulate(args, case, command)
    if not args.quiet:
        print(summarise(ds))
        if args.output:
            print(f"wrote {args.output}")
    if args.certify:
        from cable.cli.converge import certify

        certify(args, case, ds)
    return 0


def _simulate(args, case, command):
    """Run with the progress line on a terminal (not with -q) and say how long compiling took."""
    from cable.cli._progress import RunProgress
    from cable.kernels.jit import compile_timer
    from cable.simulate import simulate_streamed

    progress = None if args.quiet else RunProgress(sys.stderr)

    def info(msg):
        if progress is not None:
            progress.clear()
        say(args, msg)

    with compile_timer() as compiled:
        try:
            # the fields stay on file (the summary reads the measurements): memory does not grow with the run
            return simulate_streamed(case, output=args.output, overwrite=args.overwrite, command=command, info=info,
                                     progress=progress if progress is not None and progress.tty else None)
        finally:
            if progress is not None:
                progress.clear()
            if compiled.seconds is not None:
                say(args, f"compiling the kernels took {compiled.seconds:.1f} s of this run's time (first run "
                          f"of the model only; later runs load them from the cache)")
