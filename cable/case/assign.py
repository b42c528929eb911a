"""``--set KEY=VALUE``: reading an assignment and setting a dotted key in a raw case."""

from __future__ import annotations

import tomllib

from cable.case import names, sections
from cable.case.validated import CaseError
from cable.case.values import nearest


def parse_assignment(text: str, option: str = "--set") -> tuple[str, object]:
    """Split ``KEY=VALUE`` and read VALUE as a TOML value (a bare word is a string).

    ``option`` names the command-line option in messages (``--set``, ``--vary``).
    """
    if not isinstance(text, str) or "=" not in text:
        example = "membrane.scale.g_Na=[1,0.5]" if option in ("--over", "--vary") else "membrane.scale.g_Na=0.5"
        raise CaseError(f"{option} {text!r}: expected KEY=VALUE, e.g. {example}.")
    key, value = text.split("=", 1)
    key, value = key.strip(), value.strip()
    try:
        parsed = tomllib.loads(f"v = {value}")["v"]
    except tomllib.TOMLDecodeError:
        parsed = value
    except RecursionError:
        raise CaseError(f"{option} {key}: the value is nested too deeply.") from None
    return key, parsed


def set_key(raw: dict, dotted: str, value, notes: list | None = None) -> None:
    """Set ``section.key`` (named entries: ``stimulus.S1.amplitude``) in a raw case.

    The key may use the other spellings of :mod:`cable.case.names` (``fibre.dx``, an
    index ``stimulus.0.start``); a note on each old one is appended to ``notes``.
    """
    parts = dotted.split(".")
    if not all(parts):
        raise CaseError(f"key {dotted!r} is not a dotted case key such as membrane.scale.g_Na.")
    dotted = names.canonical_key(dotted, raw, notes)
    parts = dotted.split(".")
    node = raw
    for depth, part in enumerate(parts[:-1]):
        nxt = parts[depth + 1]
        if not isinstance(node, (dict, list)):
            _not_a_table(dotted, parts[:depth], node)
        if isinstance(node, list):
            index = _index(dotted, part, node)
            node = node[index]
            continue
        part = _spelt_as(node, part, parts[depth - 1] if depth else "")
        if part not in node:
            if depth == 0 and part not in sections.all_names():
                raise CaseError(f"unknown section '{part}' in key {dotted!r}.{nearest(part, sections.all_names())}")
            node[part] = [] if nxt.isdigit() else {}
        node = node[part]
        if isinstance(node, dict) and nxt.isdigit() and part in sections.list_names():
            raise CaseError(f"{dotted!r}: [{part}] is a single table; write [[{part}]] to index it.")
    last = parts[-1]
    if isinstance(node, list):
        node[_index(dotted, last, node)] = value
    elif isinstance(node, dict):
        node[_spelt_as(node, last, parts[-2] if len(parts) > 1 else "")] = value
    else:
        _not_a_table(dotted, parts[:-1], node)


#: tables keyed by a model's names (conductances, parameters), where case is not significant
_NAME_TABLES = {"scale", "parameters", "block"}


def _spelt_as(node: dict, part: str, parent: str) -> str:
    """``part`` as the table already spells it: ``--set membrane.scale.g_Na`` replaces a
    case's ``G_Na`` rather than adding a second entry (model names ignore case)."""
    if parent not in _NAME_TABLES or part in node:
        return part
    same = [k for k in node if str(k).casefold() == part.casefold()]
    return same[0] if len(same) == 1 else part


def _not_a_table(dotted, head, node):
    where = ".".join(head)
    raise CaseError(f"key {dotted!r}: {where} = {repr(node)} is a value, not a table, so it has no key "
                    f"'{dotted[len(where) + 1:]}'; set {where} itself, e.g. --set {where}=...")


def _index(dotted, part, seq):
    if not part.isdigit():
        raise CaseError(f"key {dotted!r}: '{part}' must be a list index (0 to {len(seq) - 1}).")
    index = int(part)
    if index >= len(seq):
        section = dotted.split(".")[0]
        raise CaseError(f"key {dotted!r}: index {index} is out of range; the case has {len(seq)} "
                        f"{'entry' if len(seq) == 1 else 'entries'} ({'none' if not seq else f'0 to {len(seq) - 1}'}). "
                        f"To add one, give the whole list, e.g. --set '{section}=[{{...}}, {{...}}]'.")
    return index
