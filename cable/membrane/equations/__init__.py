"""Membrane models from their equations: descriptions, the kernel generator, CellML import and export.

* :mod:`.description`: a model written once, as equations (:class:`Equations`);
* :mod:`.analysis`, :mod:`.codegen`, :mod:`.compile`: the generated module and the model built from it;
* :mod:`.cache`: the generated modules on disk, loaded without sympy;
* :mod:`.cellml_import`, :mod:`.cellml_export`: CellML files in and out (through libcellml).

The names below are imported on first use: the description form needs sympy, which a
process whose models are all in the cache never imports.
"""

from cable.membrane.equations.errors import EquationError

__all__ = ["EqParameter", "EqState", "EquationError", "Equations"]


def __getattr__(name):
    if name in ("EqParameter", "EqState", "Equations"):
        from cable.membrane.equations import description

        return getattr(description, name)
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
