"""cable: action-potential conduction along a fibre.

A research tool for electrophysiology modellers; not for clinical decisions.

Public API (everything a command does is one of these):

* :func:`simulate` — run a case, get an ``xarray.Dataset``;
* :func:`load_case` — read and validate a case (TOML path, text or dict);
* :func:`check_case` — what a run of a case implies (grid, stability, memory, time), without running it;
* :func:`get_model`, :func:`model_names` — the membrane-model registry;
* :func:`find_critical` — bisection for the severity at which conduction blocks;
* :func:`calibrate` — the value of a key at which CV, APD or wavelength hits a target;
* :func:`strength_duration`, :func:`refractory_period`, :func:`restitution`,
  :func:`convergence` — the standard protocols;
* :func:`sweep` — parameter sweeps on Dask;
* :func:`open_result`, :func:`rerun` — result files;
* :mod:`cable.plot` — figures from results (each function takes a matplotlib Axes).
"""

import importlib

__version__ = "0.1.0"

from cable.case import Case, CaseError, load_case  # noqa: E402
from cable.membrane import get_model, model_names  # noqa: E402
from cable.simulate import SimulationError, simulate  # noqa: E402
from cable.preparation import prepare  # noqa: E402
from cable.sweep import sweep  # noqa: E402  (the function; dask is imported on first call)

# Imported on first use: they pull in dask, matplotlib or scipy, which a plain run does not need.
_LAZY = {
    "check_case": "cable.check",
    "find_critical": "cable.protocols.critical",
    "strength_duration": "cable.protocols.threshold",
    "refractory_period": "cable.protocols.refractory",
    "restitution": "cable.protocols.restitution",
    "convergence": "cable.protocols.converge",
    "calibrate": "cable.protocols.calibrate",
    "open_result": "cable.io.netcdf",
    "rerun": "cable.io.rerun",
    "plot": None,
}


def __getattr__(name):
    if name not in _LAZY:
        raise AttributeError(f"module 'cable' has no attribute {name!r}")
    if _LAZY[name] is None:
        return importlib.import_module(f"cable.{name}")
    return getattr(importlib.import_module(_LAZY[name]), name)


__all__ = ["Case", "CaseError", "SimulationError", "get_model", "load_case", "model_names", "prepare",
           "simulate", "sweep", "__version__", *_LAZY]
