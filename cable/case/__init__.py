"""Case files: the schema of their keys and the loader that validates them.

The sections other modules own ([sweep], [region.NAME], [drug.NAME], [[electrode]])
are declared by those modules and listed in :mod:`cable.case.sections`; the loader
imports them when a case needs them.
"""

from cable.case.load import (Case, CaseError, Fiber, Membrane, Numerics, Stimulus, dumps_toml, load_case,
                             parse_assignment, set_key)
from cable.case.schema import SECTIONS

__all__ = ["Case", "CaseError", "Fiber", "Membrane", "Numerics", "Stimulus", "SECTIONS", "dumps_toml",
           "load_case", "parse_assignment", "set_key"]
