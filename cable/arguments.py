"""Checks of the Python API's keyword arguments: the package's own error, naming the argument.

A wrong type given to :func:`cable.simulate`, :func:`cable.io.rerun.rerun` or
:func:`cable.sweep.run.sweep` (``output=5``, ``progress=3``) would otherwise surface as
a foreign ``TypeError`` deep inside netCDF4 or the time loop, after the case was
prepared; checked here, at the call, it is a :class:`cable.case.CaseError` that says
what the argument accepts.
"""

from __future__ import annotations

import os

from cable.case import CaseError

#: what each checked argument accepts: (test, description)
_ACCEPTS = {
    "output": (lambda v: v is None or isinstance(v, (str, os.PathLike)), "None or a file path (str or pathlib.Path)"),
    "overwrite": (lambda v: isinstance(v, bool), "True or False"),
    "progress": (lambda v: v is None or callable(v), "None or a callable progress(t_done, t_total)"),
    "command": (lambda v: v is None or isinstance(v, str), "None or a string (the command line)"),
    "info": (lambda v: v is None or callable(v), "None or a callable taking one message string"),
}


def check_call(function: str, **arguments) -> None:
    """Raise :class:`CaseError` for the first argument whose type ``function`` does not accept.

    Parameters
    ----------
    function : str
        The API function's name, for the message.
    **arguments
        The arguments to check, by name (names of :data:`_ACCEPTS`).
    """
    for name, value in arguments.items():
        test, accepts = _ACCEPTS[name]
        if not test(value):
            raise CaseError(f"{function}({name}={value!r}): {name} must be {accepts}, "
                            f"not {type(value).__name__}.")
    output = arguments.get("output")
    if isinstance(output, str) and not output.strip():
        raise CaseError(f"{function}(output={output!r}): give a file name, or None to keep the result in memory.")
