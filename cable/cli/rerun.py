"""``cable rerun OUT.nc -o NEW.nc``: repeat a run from its result file alone and compare.

Exit status 0 when every stored variable, coordinate and attribute the run determines
matches the original exactly (``activation_time`` and the main measurements are listed
first), 1 when one differs or is missing, 2 for a file that cannot be rerun.
"""

import shlex
import sys

from cable.cli import say

NAME = "rerun"
HELP = "repeat a run from the case stored in its result file and report whether the result is identical"
ORDER = 21

#: exit status when the rerun's result differs from the original's
EXIT_DIFFERENT = 1


def add_arguments(p):
    p.add_argument("result", help="result file (.nc) written by `cable run`")
    p.add_argument("-o", "--output", help="write the new result here (.nc) (default: none, kept in memory)")
    p.add_argument("--overwrite", action="store_true", help="replace an existing output file")
    p.add_argument("-q", "--quiet", action="store_true", help="print only the verdict")


def run(args):
    from cable.cli.summary import summarise
    from cable.io.rerun import COMPARED, rerun

    command = "cable " + " ".join(shlex.quote(a) for a in sys.argv[1:])
    report = rerun(args.result, args.output, overwrite=args.overwrite, command=command,
                   info=lambda m: say(args, m))
    if not args.quiet:
        print(summarise(report.result))
        for key, (then, now) in report.versions.items():
            print(f"note: {key} was {then} for the original run and is {now} now")
    for name, (same, diff) in report.compared.items():
        if name in report.missing:
            verdict = f"MISSING from the {report.missing[name]}"
        else:
            verdict = "identical" if same else f"DIFFERS (largest difference {diff:.3g})"
        if not same or name in COMPARED:
            print(f"{name}: {verdict}")
    same_vars = sum(1 for same, _ in report.compared.values() if same)
    print(f"{same_vars} of {len(report.compared)} variables identical")
    for name, (then, now) in report.attributes.items():
        print(f"attribute {name}: DIFFERS (original {_short(then)}, rerun {_short(now)})")
    if args.output and not args.quiet:
        print(f"wrote {args.output}")
    print(f"rerun of {args.result}: {'identical' if report.identical else 'NOT identical'}")
    return 0 if report.identical else EXIT_DIFFERENT


def _short(value) -> str:
    text = "(absent)" if value is None else repr(value)
    return text if len(text) <= 60 else text[:57] + "..."
