"""The spellings a case accepts, mapped once, at loading, to the loader's own.

* ``fibre`` is the same section as ``fiber``: ``[fibre]``, ``--set fibre.dx=...``,
  ``cable keys fibre``; the case is stored with ``[fiber]``.
* Stimuli and regions are named tables: ``[stimulus.S1]``, ``[stimulus.S2]``,
  ``[region.zone]`` (any name), addressed as ``stimulus.S1.onset`` or
  ``region.zone.scale.G_Na``; their order in the file is their order (the first
  stimulus is the protocols' stimulus site). The old list form ``[[stimulus]]`` /
  ``[[region]]`` is read for one more release, as the names ``S1, S2, ...`` and
  ``R1, R2, ...``, with a note; a key with an index (``stimulus.0.amplitude``) names
  the entry in that place, also with a note.
* A stimulus's first pulse time is ``onset``; ``start``, its old name (which in a
  region means a position), is read with a note.

Notes on old spellings start with :data:`DEPRECATED`, so that a rerun of a file
written in the old form can tell them from the run's own notes.
"""

from __future__ import annotations

#: other spellings of a section -> the loader's own
SECTION_ALIASES = {"fibre": "fiber"}
#: sections of named tables -> the prefix of the names given to the old list form's entries
NAMED_SECTIONS = {"stimulus": "S", "region": "R"}
#: keys renamed inside an entry of a named section: old -> new
RENAMED_KEYS = {"stimulus": {"start": "onset"}}
#: the first word of every note about an old spelling
DEPRECATED = "deprecated:"


def _case_error(message):
    from cable.case.load import CaseError

    return CaseError(message)


def section_name(name: str) -> str:
    """The loader's name of a section (``fibre`` -> ``fiber``)."""
    return SECTION_ALIASES.get(name, name)


def canonical_raw(raw: dict) -> list[str]:
    """Rewrite, in place, a raw case's other spellings into the loader's; return the notes.

    Idempotent: a case already in the loader's spelling is left as it is, without notes.
    """
    notes: list[str] = []
    if not isinstance(raw, dict):
        return notes
    for alias, name in SECTION_ALIASES.items():
        if alias in raw and name in raw:
            raise _case_error(f"[{alias}] and [{name}] are the same section spelt two ways; give it once.")
    if any(alias in raw for alias in SECTION_ALIASES):
        items = [(section_name(k), v) for k, v in raw.items()]
        raw.clear()
        raw.update(items)
    for section, prefix in NAMED_SECTIONS.items():
        if section in raw:
            raw[section] = _named(section, prefix, raw[section], notes)
    return notes


def _is_named(table: dict) -> bool:
    """A table of named entries (every value a table), not one old-style entry."""
    return all(isinstance(v, dict) for v in table.values())


def _named(section: str, prefix: str, value, notes: list) -> object:
    if isinstance(value, dict) and _is_named(value):
        entries = value
    elif isinstance(value, dict):
        entries = {f"{prefix}1": value}
        notes.append(f"{DEPRECATED} a single [{section}] table of keys is the old form (read for this release); "
                     f"write it as [{section}.{prefix}1].")
    elif isinstance(value, list) and all(isinstance(v, dict) for v in value):
        entries = {f"{prefix}{k + 1}": v for k, v in enumerate(value)}
        if value:
            names = ", ".join(f"[{section}.{n}]" for n in entries)
            notes.append(f"{DEPRECATED} [[{section}]] (a list of tables) is the old form (read for this release); "
                         f"write named tables: {names}.")
    else:
        return value  # not tables at all: the section's own validation says so
    renamed = RENAMED_KEYS.get(section, {})
    out = {}
    for name, entry in entries.items():
        entry = dict(entry)
        for old, new in renamed.items():
            if old in entry:
                if new in entry:
                    raise _case_error(f"{section}.{name}: '{old}' is the old name of '{new}'; give one of them.")
                entry = {(new if k == old else k): v for k, v in entry.items()}
                notes.append(f"{DEPRECATED} {section}.{name}.{old} is the old name of {section}.{name}.{new} "
                             f"(read for this release).")
        out[name] = entry
    return out


def canonical_key(dotted: str, raw: dict | None = None, notes: list | None = None) -> str:
    """The loader's spelling of a dotted case key, e.g. ``fibre.dx`` -> ``fiber.dx``.

    An index into a named section (``stimulus.0.amplitude``) becomes the name of the
    entry in that place in ``raw`` (canonical spelling); ``stimulus.X.start`` becomes
    ``stimulus.X.onset``. A note for each old spelling is appended to ``notes``.
    """
    parts = str(dotted).split(".")
    if not parts or not parts[0]:
        return dotted
    parts[0] = section_name(parts[0])
    section = parts[0]
    if section in NAMED_SECTIONS and len(parts) > 1:
        table = raw.get(section) if isinstance(raw, dict) else None
        table = table if isinstance(table, dict) else {}
        if parts[1].isdigit() and parts[1] not in table:
            index, names = int(parts[1]), list(table)
            if index >= len(names):
                raise _case_error(
                    f"key {dotted!r}: index {index} is out of range; the case has {len(names)} "
                    f"{section} {'entry' if len(names) == 1 else 'entries'}"
                    f"{' (' + ', '.join(names) + ')' if names else ''}. Address an entry by its name, e.g. "
                    f"{section}.{names[0] if names else NAMED_SECTIONS[section] + '1'}.{'.'.join(parts[2:]) or '...'}.")
            parts[1] = names[index]
            if notes is not None:
                notes.append(f"{DEPRECATED} {dotted} addresses an entry by its place; its name is {section}."
                             f"{parts[1]} (the index is read for this release).")
        if len(parts) == 3 and parts[2] in RENAMED_KEYS.get(section, {}):
            new = RENAMED_KEYS[section][parts[2]]
            if notes is not None:
                notes.append(f"{DEPRECATED} {section}.{parts[1]}.{parts[2]} is the old name of "
                             f"{section}.{parts[1]}.{new} (read for this release).")
            parts[2] = new
    return ".".join(parts)


def entry_parts(dotted: str) -> list[str]:
    """A canonical key's parts without the entry name of a named section.

    ``region.zone.scale.G_Na`` -> ``["region", "scale", "G_Na"]``; other keys unchanged.
    """
    parts = str(dotted).split(".")
    if parts and parts[0] in NAMED_SECTIONS and len(parts) > 2:
        return [parts[0]] + parts[2:]
    return parts


def without_deprecations(notes: str) -> str:
    """Notes (one per line) without those about old spellings."""
    return "\n".join(line for line in str(notes).split("\n") if not line.startswith(DEPRECATED))
