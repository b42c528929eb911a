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


def preflight(case, levels, ratio, beat, option: str | None = None) -> None:
    """Check --levels and --beat, and that the finest grid fits, before any level runs.

    ``option`` names the option to cite (``--certify`` for ``cable run``, which has no
    ``--levels``); default ``--levels N``.

    Raises
    ------
    CaseError
        A beat the case does not have, or a finest level too large to run (too many
        nodes or steps, or fields that do not fit in memory).
    """
    from cable.case import CaseError
    from cable.preparation import check_case_size

    if case.fiber is None:
        return  # the protocol says why a single cell has no certificate
    onsets = {round(t, 9) for s in case.stimuli for t in s.onsets() if t < case.duration}
    if not -len(onsets) <= beat < len(onsets):
        raise CaseError(f"beat {beat} (--beat): the case has {len(onsets)} beat(s) within run.duration; give 0 to "
                        f"{len(onsets) - 1}, or -1 for the last.")
    if isinstance(levels, int) and levels >= 3:
        shrink = 4.0 if ratio == "dt/dx^2" else 2.0
        k = levels - 1
        try:
            finest = case.with_overrides({"fiber.dx": case.fiber.dx / 2 ** k,
                                          "numerics.dt": case.numerics.dt / shrink ** k,
                                          "output.every": case.output_every / shrink ** k})
            check_case_size(finest)
        except CaseError as exc:
            if option is not None:
                raise CaseError(f"{option}: its finest grid (dx / {2 ** k:g}, dt / {shrink ** k:g}) cannot run: {exc} "
                                f"Run without {option}, or certify a coarser case with `cable converge`.") from None
            raise CaseError(f"--levels {levels}: the finest level (dx / {2 ** k:g}, dt / {shrink ** k:g}) cannot run: "
                            f"{exc} Give fewer levels (3 is enough for an observed order).") from None


def run(args):
    from cable.protocols.converge import convergence

    case = prepare(args)
    preflight(case, args.levels, args.ratio, args.beat)
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
