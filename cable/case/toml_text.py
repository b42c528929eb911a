"""Case files as TOML text: reading (with its limits on nesting) and writing back."""

from __future__ import annotations

import math
import os
import tomllib
from pathlib import Path

from cable.case.validated import CaseError

#: deepest nesting of tables and lists accepted in a case
MAX_DEPTH = 32


def _depth(value, limit: int = MAX_DEPTH) -> int:
    """Nesting depth of tables/lists, counted without recursion (stops past ``limit``)."""
    stack, deepest = [(value, 0)], 0
    while stack:
        node, d = stack.pop()
        deepest = max(deepest, d)
        if deepest > limit:
            return deepest
        if isinstance(node, dict):
            stack.extend((v, d + 1) for v in node.values())
        elif isinstance(node, (list, tuple)):
            stack.extend((v, d + 1) for v in node)
    return deepest


def anchor_cellml_path(raw: dict, source) -> None:
    """A CellML path in a case file is relative to the file: made absolute here."""
    mem = raw.get("membrane") if isinstance(raw, dict) else None
    is_file = isinstance(source, (str, os.PathLike)) and _names_file(os.fspath(source))
    if not isinstance(mem, dict) or not is_file:
        return
    for key in ("cellml", "model"):
        value = mem.get(key)
        if isinstance(value, str) and value.split("?")[0].lower().endswith(".cellml") \
                and not Path(value).expanduser().is_absolute():
            mem[key] = str(Path(source).resolve().parent / value)


def read_toml(source) -> dict:
    if isinstance(source, str) and "\n" in source.strip() and not _names_file(source):
        return parse_toml(source, None)  # TOML text given as source (several lines): as before
    if not isinstance(source, (str, os.PathLike)):
        raise CaseError(f"case = {source!r}: give a path to a TOML case file, a dict, a Case, or TOML text as "
                        f"load_case(text=...); not {type(source).__name__}.")
    path = Path(source)
    if path.is_dir():
        raise CaseError(f"case file '{source}' is a folder; give the TOML file inside it"
                        + (f" (there: {', '.join(sorted(p.name for p in path.glob('*.toml'))[:5])})."
                           if any(path.glob("*.toml")) else "."))
    if not path.is_file():
        if path.exists():
            raise CaseError(f"case file '{source}' is not a regular file.")
        raise CaseError(f"case file '{source}' not found.")
    try:
        text = path.read_text(encoding="utf-8")
    except (OSError, UnicodeDecodeError) as exc:
        raise CaseError(f"case file '{source}' cannot be read: {exc}.") from None
    return parse_toml(text, path)


def _names_file(source: str) -> bool:
    try:
        return Path(source).is_file()
    except (OSError, ValueError):  # a name too long, or with a NUL: not a file
        return False


def parse_toml(text: str, path) -> dict:
    where = f"case file '{path}'" if path else "case text"
    try:
        raw = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise CaseError(f"{where} is not valid TOML: {exc}.") from None
    except RecursionError:
        raise CaseError(f"{where} is nested too deeply (more than {MAX_DEPTH} levels of tables or lists).") from None
    if _depth(raw) > MAX_DEPTH:
        raise CaseError(f"{where} is nested too deeply (more than {MAX_DEPTH} levels of tables or lists); a case "
                        f"has sections of keys and short lists.")
    return raw


def dumps_toml(raw: dict) -> str:
    """Write a raw case dict as TOML (the subset case files use)."""
    lines: list[str] = []

    def value(v):
        if isinstance(v, bool):
            return "true" if v else "false"
        if isinstance(v, (int, float)):
            if isinstance(v, float) and not math.isfinite(v):
                return "nan" if math.isnan(v) else ("inf" if v > 0 else "-inf")
            return repr(v)
        if isinstance(v, str):
            return '"' + v.replace("\\", "\\\\").replace('"', '\\"') + '"'
        if isinstance(v, (list, tuple)):
            return "[" + ", ".join(value(x) for x in v) + "]"
        if isinstance(v, dict):
            return "{" + ", ".join(f"{_bare(k)} = {value(x)}" for k, x in v.items()) + "}"
        raise TypeError(f"cannot write {v!r} as TOML")

    def table(prefix, d, header):
        scalars = {k: v for k, v in d.items() if not isinstance(v, dict) and not _is_table_list(v)}
        subs = {k: v for k, v in d.items() if isinstance(v, dict)}
        lists = {k: v for k, v in d.items() if _is_table_list(v)}
        # a table of named tables only ([stimulus] holding [stimulus.S1]) needs no header of its own
        header = header if scalars or lists or not subs else None
        if header:
            lines.append(header)
        for k, v in scalars.items():
            lines.append(f"{_bare(k)} = {value(v)}")
        if header or scalars:
            lines.append("")
        for k, v in subs.items():
            name = f"{prefix}.{_bare(k)}" if prefix else _bare(k)
            table(name, v, f"[{name}]")
        for k, v in lists.items():
            name = f"{prefix}.{_bare(k)}" if prefix else _bare(k)
            for item in v:
                table(name, item, f"[[{name}]]")

    table("", raw, None)
    return "\n".join(lines).strip() + "\n"


def _is_table_list(v):
    return isinstance(v, list) and v and all(isinstance(x, dict) for x in v)


def _bare(k: str) -> str:
    k = str(k)
    if k and all(ch.isalnum() or ch in "-_" for ch in k):
        return k
    return '"' + k.replace('"', '\\"') + '"'
