"""``cable check CASE``: what a run of the case implies, printed without running it (see :mod:`cable.check`)."""

from cable.cli import add_set_option

NAME = "check"
HELP = "print what a case implies (grid, stability, stimulated nodes, regions, memory, time) without running it"
ORDER = 2

#: what `cable run` says about a case with a [sweep] (it runs the case as given)
SWEEP_NOTE = "note: `cable run` runs the case as given and ignores its [sweep]; `cable sweep` runs the points."


def add_arguments(p):
    p.add_argument("case", help="case file (TOML)")
    p.add_argument("-o", "--output", help="the result file the run would write (its disk need is estimated; default: none)")
    add_set_option(p)
    p.add_argument("--timed-steps", type=int, default=None, metavar="N",
                   help="steps of the short timed run that estimates the run's time (default 300; 0 skips it)")


def run(args):
    from pathlib import Path

    from cable import load_case

    case = load_case(Path(args.case), args.overrides)
    print(report_text(case, args.output, args.timed_steps))
    return 0


def report_text(case, output=None, timed_steps=None) -> str:
    """The check of a loaded case as printed (raises CaseError where the run would refuse)."""
    from cable.case import CaseError
    from cable.check import TIMED_STEPS, check_case

    if timed_steps is not None and timed_steps < 0:
        raise CaseError(f"--timed-steps {timed_steps}: give 0 (no timed run) or more steps.")
    report = check_case(case, output=output, timed_steps=TIMED_STEPS if timed_steps is None else timed_steps)
    lines = report.lines()
    if "sweep" in case.extra:
        lines.append(SWEEP_NOTE)
    return "\n".join(lines)
