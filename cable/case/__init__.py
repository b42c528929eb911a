"""Case files: the schema of their keys and the loader that validates them."""

from cable.case.load import (Case, CaseError, Fiber, Membrane, Numerics, Stimulus, dumps_toml, load_case,
                             parse_assignment, register_section, set_key)
from cable.case.schema import SECTIONS
import cable.sweep.spec  # noqa: E402,F401  registers the [sweep] section
import cable.regions  # noqa: E402,F401  registers the [region] section
import cable.drugs  # noqa: E402,F401  registers the [drug] section
import cable.electrodes  # noqa: E402,F401  registers the [[electrode]] section

__all__ = ["Case", "CaseError", "Fiber", "Membrane", "Numerics", "Stimulus", "SECTIONS", "dumps_toml",
           "load_case", "parse_assignment", "register_section", "set_key"]
