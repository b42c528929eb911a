"""List the modules and functions of cable/ beyond the sizes of the style guide.

A module is over when it has more than ``MAX_MODULE_LINES`` lines (every line of the
file); a function when its source, from ``def`` to its last line and without its
docstring, has more than ``MAX_FUNCTION_LINES`` (a nested function counts within the
one that holds it, and on its own as well; a method is named ``Class.method``).

    python tools/sizes.py                # every module of cable/
    python tools/sizes.py cable/sweep    # some folders or files only

Prints one line per offender, ``path: N lines`` or ``path:LINE name: N lines``, and
exits 1 when there is one (0 otherwise). ``tests/test_sizes.py`` runs it on the
modules that were brought within the sizes, so that they stay there.
"""

from __future__ import annotations

import ast
import sys
from pathlib import Path

#: most lines of a module (style guide: "Modules <= ~500 lines")
MAX_MODULE_LINES = 500
#: most lines of a function, its docstring not counted (style guide: "functions <= ~80 lines")
MAX_FUNCTION_LINES = 80

ROOT = Path(__file__).resolve().parent.parent


def _docstring_lines(node: ast.AST) -> int:
    body = getattr(node, "body", None)
    if body and isinstance(body[0], ast.Expr) and isinstance(body[0].value, ast.Constant) \
            and isinstance(body[0].value.value, str):
        return body[0].end_lineno - body[0].lineno + 1
    return 0


def function_sizes(source: str) -> list[tuple[str, int, int]]:
    """``(name, first line, lines)`` of every function and method of a module's source."""
    out = []

    def visit(node, prefix):
        for child in ast.iter_child_nodes(node):
            if isinstance(child, (ast.FunctionDef, ast.AsyncFunctionDef)):
                name = prefix + child.name
                out.append((name, child.lineno, child.end_lineno - child.lineno + 1 - _docstring_lines(child)))
                visit(child, name + ".")
            elif isinstance(child, ast.ClassDef):
                visit(child, prefix + child.name + ".")
            else:
                visit(child, prefix)

    visit(ast.parse(source), "")
    return out


def offenders(paths) -> list[str]:
    """The lines :func:`main` prints for these files (folders: their ``*.py``, recursively)."""
    files = []
    for path in paths:
        path = Path(path)
        files += sorted(path.rglob("*.py")) if path.is_dir() else [path]
    out = []
    for path in files:
        source = path.read_text(encoding="utf-8")
        shown = path.resolve().relative_to(ROOT) if path.resolve().is_relative_to(ROOT) else path
        n = len(source.splitlines())
        if n > MAX_MODULE_LINES:
            out.append(f"{shown}: {n} lines (module; at most {MAX_MODULE_LINES})")
        for name, line, size in function_sizes(source):
            if size > MAX_FUNCTION_LINES:
                out.append(f"{shown}:{line} {name}: {size} lines (function; at most {MAX_FUNCTION_LINES})")
    return out


def main(argv=None) -> int:
    argv = sys.argv[1:] if argv is None else argv
    found = offenders(argv or [ROOT / "cable"])
    for line in found:
        print(line)
    return 1 if found else 0


if __name__ == "__main__":
    sys.exit(main())
