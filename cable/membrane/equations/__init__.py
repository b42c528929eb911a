"""Membrane models from their equations: descriptions, the kernel generator, CellML import and export.

* :mod:`.description`: a model written once, as equations (:class:`Equations`);
* :mod:`.analysis`, :mod:`.codegen`, :mod:`.compile`: the generated module and the model built from it;
* :mod:`.cellml_import`, :mod:`.cellml_export`: CellML files in and out (through libcellml).
"""

from cable.membrane.equations.description import EqParameter, EqState, Equations
from cable.membrane.equations.errors import EquationError

__all__ = ["EqParameter", "EqState", "EquationError", "Equations"]
