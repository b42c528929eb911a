"""The command line: ``cable SUBCOMMAND ...``, a thin layer over the public API.

Each subcommand is one module of this package defining ``NAME``, ``HELP``,
``add_arguments(parser)`` and ``run(args) -> int``; they are found by listing the
package, so adding a command means adding one file.

Exit codes: 0 success, 2 invalid input (case, option, file), 3 numerical failure
(a partial result is kept), 130 interrupted.
"""

from __future__ import annotations

import argparse
import importlib
import pkgutil
import signal
import sys
from pathlib import Path

CAUTION = "Research tool for modelling studies; not for clinical or diagnostic decisions."

EXIT_OK, EXIT_INPUT, EXIT_NUMERICAL, EXIT_INTERRUPTED = 0, 2, 3, 130


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


def build_parser() -> argparse.ArgumentParser:
    from cable import __version__

    parser = _Parser(
        prog="cable",
        description="Simulate action-potential conduction along a fibre (monodomain cable) and measure "
                    "conduction velocity, block, APD and refractoriness. " + CAUTION,
        epilog=CAUTION,
    )
    parser.add_argument("--version", action="version", version=f"cable {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    for mod in _commands():
        p = sub.add_parser(mod.NAME, help=mod.HELP, description=f"{mod.HELP}. {CAUTION}")
        mod.add_arguments(p)
        p.set_defaults(_run=mod.run)
    return parser


def _terminate(signum, frame):
    raise KeyboardInterrupt


def main(argv=None) -> int:
    from cable.case import CaseError
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
    except BrokenPipeError:
        return EXIT_OK
    except MemoryError:
        print("cable: error: out of memory; store less (a larger output.every, fewer output.states, an output "
              "file to stream to) or run a smaller case.", file=sys.stderr)
        return EXIT_INPUT
    except OSError as exc:  # a file system refusing (disk full, permissions): the user's to fix, no traceback
        print(f"cable: error: {exc.strerror or exc}" + (f": '{exc.filename}'" if exc.filename else "") + ".",
              file=sys.stderr)
        return EXIT_INPUT
    finally:
        signal.signal(signal.SIGTERM, previous)


def add_set_option(parser) -> None:
    """The ``--set KEY=VALUE`` option shared by commands that read a case."""
    parser.add_argument("--set", dest="overrides", action="append", default=[], metavar="KEY=VALUE",
                        help="override a case key, e.g. --set membrane.scale.g_Na=0.5 or stimulus.0.start=10 "
                             "(repeatable)")


def say(args, msg: str) -> None:
    if not getattr(args, "quiet", False):
        print(msg, file=sys.stderr)
