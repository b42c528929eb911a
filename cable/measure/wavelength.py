"""Wavelength of a strand's beats: conduction velocity times APD90 at the window's centre.

The usual estimate of the length of tissue a wave keeps refractory (common practice); the
APD90 is that of the node nearest the centre of the CV window.
"""

from __future__ import annotations

import numpy as np

from cable.measure import Inputs, Measurement


def centre_node(x: np.ndarray, window) -> int:
    """The node nearest the centre of the CV ``window`` [cm]."""
    return int(np.argmin(np.abs(x - 0.5 * (window[0] + window[1]))))


def _wavelength(inputs: Inputs) -> dict:
    setup = inputs.setup
    levels = list(setup.case.apd_levels)
    apd90 = inputs.out["apd"][1][levels.index(90.0), :, centre_node(setup.x, setup.cv_window)]
    cv = inputs.out["conduction_velocity"][1]
    return {"wavelength_apd": (("beat",), cv / 10.0 * apd90)}  # m/s -> cm/ms, times ms


def _applies(inputs: Inputs) -> bool:
    return inputs.setup.x is not None and 90.0 in inputs.setup.case.apd_levels


MEASUREMENT = Measurement("wavelength", ("wavelength_apd",), _wavelength, _applies, order=20)
