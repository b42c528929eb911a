"""The case sections other modules own, and where each is declared.

A section such as ``[region.NAME]`` belongs to the module that uses it: that module
declares it as ``SECTION = Section(...)`` (its name, whether it is a list of tables,
its keys and the function that validates it), beside the code that reads it. This
table only says which module declares which section; the loader imports the module
when a case needs it, so nothing is registered as a side effect of an import and the
sections a case may hold do not depend on what was imported before.
"""

from __future__ import annotations

import importlib
from dataclasses import dataclass
from typing import Callable

from cable.case.schema import LIST_SECTIONS, SECTIONS

#: section -> the module that declares it (``SECTION``); validated in this order, after
#: the loader's own sections
OWNERS = {
    "sweep": "cable.sweep.spec",
    "region": "cable.regions",
    "drug": "cable.drugs",
    "electrode": "cable.electrodes",
}


@dataclass(frozen=True)
class Section:
    """A case section owned by another module than the loader.

    Attributes
    ----------
    name : str
        The section's name in a case file.
    is_list : bool
        Written as a list of tables (``[[electrode]]``).
    validate : callable
        ``validate(raw_value, case_so_far) -> value``: the validated section, kept in
        ``Case.extra[name]``; raises :class:`cable.case.CaseError`.
    keys : dict of str to Key, optional
        The keys of one entry, as ``cable keys`` lists them.
    """

    name: str
    is_list: bool
    validate: Callable
    keys: dict | None = None


def section(name: str) -> Section:
    """The declaration of an owned section (imports its module)."""
    declared = importlib.import_module(OWNERS[name]).SECTION
    if declared.name != name:  # a slip in OWNERS: say so rather than validate the wrong table
        raise AssertionError(f"{OWNERS[name]}.SECTION declares [{declared.name}], not [{name}]")
    return declared


def owned() -> list[Section]:
    """Every owned section, in the order they are validated."""
    return [section(name) for name in OWNERS]


def all_names() -> set[str]:
    """Every section a case may hold: the loader's and the owned ones."""
    return set(SECTIONS) | set(OWNERS)


def list_names() -> set[str]:
    """The sections written as lists of tables (``[[name]]``)."""
    return set(LIST_SECTIONS) | {s.name for s in owned() if s.is_list}
