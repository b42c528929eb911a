"""The command line: ``cable SUBCOMMAND ...``, a thin layer over the public API.

Each subcommand is one module of this package defining ``NAME``, ``HELP``,
``add_arguments(parser)`` and ``run(args) -> int``; they are found by listing the
package, so adding a command means adding one file.

Exit codes: 0 success (the result is written), 1 ``cable rerun`` found a difference,
2 invalid input (case, option, file; nothing is run or replaced), 3 numerical failure
(a partial result is kept), 4 the result could not be written (disk full, file system
error; the message says what was kept), 5 a sweep is incomplete because the cluster
failed (the points computed are stored; run it again to finish), 130 interrupted (a
partial result is kept).

A reader that goes away (``cable sweep ... | head``) does not stop the work: printing
stops, and the command computes and writes its result as it would otherwise.
"""

from __future__ import annotations

import argparse
import importlib
import pkgutil
import signal
import sys
import textwrap
from pathlib import Path

CAUTION = "Research tool for modelling studies; not for clinical or diagnostic decisions."

#: the headings of `cable --help` and their commands, in order; a command listed in none
#: goes under "other"
GROUPS = {
    "simulate": ("run", "check", "sweep", "rerun"),
    "protocols": ("critical", "calibrate", "threshold", "erp", "restitution", "converge"),
    "inspect": ("models", "keys", "info"),
    "figures": ("map", "traces", "plot-sweep"),
}

EXIT_OK, EXIT_INPUT, EXIT_NUMERICAL, EXIT_INTERRUPTED = 0, 2, 3, 130
EXIT_OUTPUT, EXIT_CLUSTER = 4, 5


def _commands():
    here = str(Path(__file__).parent)
    mods = []
    for info in pkgutil.iter_modules([here]):
        if info.name.startswith("_"):
            continue
        mods.append(importlib.import_module(f"cable.cli.{info.name}"))
    return sorted(mods, key=lambda m: getattr(m, "ORDER", 50))


class _Parser(argparse.ArgumentParser):
    def error(self, message):
        self.print_usage(sys.stderr)
        self.exit(EXIT_INPUT, f"cable: error: {message}\n")


def _grouped(mods) -> str:
    """The commands under their headings (:data:`GROUPS`), one line each, for `cable --help`."""
    width = max(len(m.NAME) for m in mods) + 2
    placed = {name: group for group, names in GROUPS.items() for name in names}
    lines = []
    for group in [*GROUPS, "other"]:
        members = [m for m in mods if placed.get(m.NAME, "other") == group]
        members.sort(key=lambda m: GROUPS[group].index(m.NAME) if group in GROUPS else m.NAME)
        if members:
            lines.append(f"{group}:")
            lines += [f"  {m.NAME:<{width}}{m.HELP}" for m in members]
            lines.append("")
    return "\n".join(lines) + "\n`cable COMMAND --help` shows a command's options and their defaults."


def build_parser() -> argparse.ArgumentParser:
    from cable import __version__

    mods = _commands()
    parser = _Parser(
        prog="cable",
        description=textwrap.fill("Simulate action-potential conduction along a fibre (monodomain cable) and "
                                  "measure conduction velocity, block, APD and refractoriness. " + CAUTION, 79),
        epilog=_grouped(mods),
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    parser.add_argument("--version", action="version", version=f"cable {__version__}")
    # the commands are listed, grouped, in the epilog (argparse lists subcommands in one block)
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser,
                                help="one of the commands below")
    for mod in mods:
        p = sub.add_parser(mod.NAME, description=f"{mod.HELP}.")
        mod.add_arguments(p)
        p.set_defaults(_run=mod.run)
    return parser


def _terminate(signum, frame):
    raise KeyboardInterrupt


class _Unbroken:
    """A text stream that stops printing, silently, once its reader has gone (a closed pipe).

    Python ignores SIGPIPE, so writing to a closed pipe raises BrokenPipeError wherever
    a print happens, which would abandon the work; here the stream's descriptor is
    pointed at /dev/null instead (so that the interpreter's last flush is quiet too).
    """

    def __init__(self, stream):
        self._stream = stream
        self.broken = False

    def write(self, text):
        if not self.broken:
            try:
                self._stream.write(text)
                self._stream.flush()
            except BrokenPipeError:
                self._gone()
        return len(text)

    def flush(self):
        if not self.broken:
            try:
                self._stream.flush()
            except BrokenPipeError:
                self._gone()

    def _gone(self):
        import os

        self.broken = True
        try:
            null = os.open(os.devnull, os.O_WRONLY)
            os.dup2(null, self._stream.fileno())
            os.close(null)
        except (OSError, ValueError, AttributeError):  # no descriptor (a test's capture): nothing to quiet
            pass

    def isatty(self):
        return not self.broken and self._stream.isatty()

    def __getattr__(self, name):
        return getattr(self._stream, name)


def main(argv=None) -> int:
    out, err = sys.stdout, sys.stderr
    sys.stdout, sys.stderr = _Unbroken(out), _Unbroken(err)
    try:
        return _main(argv)
    finally:
        sys.stdout, sys.stderr = out, err


def _main(argv) -> int:
    from cable.case import CaseError
    from cable.io import OutputError
    from cable.simulate import SimulationError

    parser = build_parser()
    args = parser.parse_args(argv)
    if not getattr(args, "_run", None):
        parser.print_help()
        return EXIT_INPUT
    previous = signal.signal(signal.SIGTERM, _terminate)
    try:
        return int(args._run(args) or 0)
    except CaseError as exc:
        print(f"cable: error: {exc}", file=sys.stderr)
        return EXIT_INPUT
    except SimulationError as exc:
        print(f"cable: numerical failure: {exc}", file=sys.stderr)
        return EXIT_NUMERICAL
    except KeyboardInterrupt:
        print("cable: interrupted", file=sys.stderr)
        return EXIT_INTERRUPTED
    except OutputError as exc:
        print(f"cable: error: {exc}", file=sys.stderr)
        return EXIT_OUTPUT
    except MemoryError:
        print("cable: error: out of memory; store less (a larger output.every, fewer output.states, an output "
              "file to stream to) or run a smaller case.", file=sys.stderr)
        return EXIT_INPUT
    except RecursionError:
        print("cable: error: the input is nested too deeply to read.", file=sys.stderr)
        return EXIT_INPUT
    except OSError as exc:  # a file system refusing (disk full, permissions): the user's to fix, no traceback
        print(f"cable: error: {exc.strerror or exc}" + (f": '{exc.filename}'" if exc.filename else "") + ".",
              file=sys.stderr)
        return EXIT_INPUT
    except Exception as exc:
        from cable.sweep.run import ClusterError

        if not isinstance(exc, ClusterError):
            raise
        print(f"cable: error: {exc}", file=sys.stderr)
        return EXIT_CLUSTER
    finally:
        signal.signal(signal.SIGTERM, previous)


def add_set_option(parser) -> None:
    """The ``--set KEY=VALUE`` option shared by commands that read a case."""
    parser.add_argument("--set", dest="overrides", action="append", default=[], metavar="KEY=VALUE",
                        help="override a case key, e.g. --set membrane.scale.g_Na=0.5 or stimulus.S1.onset=10 "
                             "(repeatable; default: the case as written)")


def say(args, msg: str) -> None:
    if not getattr(args, "quiet", False):
        print(msg, file=sys.stderr)
