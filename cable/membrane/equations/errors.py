"""The error raised for a bad model description or a CellML file that cannot be used."""

from cable.case.load import CaseError


class EquationError(CaseError):
    """A model description or CellML file that cannot be turned into a model.

    A :class:`cable.case.CaseError`, so that the command line reports it with exit status 2.
    """
