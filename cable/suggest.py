"""Nearest-name suggestions for error messages: one rule for the whole package.

A name the user mistyped is compared with the allowed ones by :mod:`difflib`'s
similarity ratio (2 x matching characters / total characters); the closest at or above
:data:`CUTOFF` is offered. 0.5 keeps one- and two-letter typos of short keys ("lenght",
"strnd") and leaves unrelated names out.
"""

from __future__ import annotations

import difflib

#: the least similarity ratio at which a name is suggested
CUTOFF = 0.5


def closest(name, candidates, n: int = 1) -> list[str]:
    """The ``n`` allowed names closest to ``name`` (best first; empty when none is close)."""
    return difflib.get_close_matches(str(name), [str(c) for c in candidates], n=n, cutoff=CUTOFF)


def did_you_mean(name, candidates) -> str:
    """``" Did you mean 'x'?"`` for the closest allowed name, or ``""``."""
    near = closest(name, candidates)
    return f" Did you mean '{near[0]}'?" if near else ""
