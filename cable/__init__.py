"""cable: action-potential conduction along a fibre.

A research tool for electrophysiology modellers; not for clinical decisions.

The public API:

* :func:`simulate` — run a case, get an ``xarray.Dataset``;
* :func:`load_case` — read and validate a case (TOML path, text or dict);
* :func:`get_model`, :func:`model_names` — the membrane-model registry.
"""

__version__ = "0.1.0"

from cable.case import Case, CaseError, load_case  # noqa: E402
from cable.membrane import get_model, model_names  # noqa: E402
from cable.simulate import SimulationError, prepare, simulate  # noqa: E402

__all__ = ["Case", "CaseError", "SimulationError", "get_model", "load_case", "model_names", "prepare",
           "simulate", "__version__"]
