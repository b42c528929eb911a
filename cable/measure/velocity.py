"""Conduction velocity: the slope of a linear fit of position against activation time."""

from __future__ import annotations

import numpy as np

from cable.measure import Inputs, Measurement, on_a_strand
from cable.units import CM_PER_MS_TO_M_PER_S

#: fewest nodes a CV fit uses
MIN_FIT_NODES = 3


def window_nodes(x: np.ndarray, window: tuple[float, float]) -> np.ndarray:
    """Indices of the nodes inside ``window`` [cm] (ends included, to a rounding tolerance)."""
    tol = 1e-9 * max(1.0, float(x[-1]))
    return np.flatnonzero((x >= window[0] - tol) & (x <= window[1] + tol))


def default_window(length: float) -> tuple[float, float]:
    """The middle half of the fibre [cm]."""
    return (0.25 * length, 0.75 * length)


def conduction_velocity(activation: np.ndarray, x: np.ndarray, window) -> np.ndarray:
    """CV [m/s] per beat from ``activation`` (nbeat, n) [ms].

    NaN for a beat that did not activate every node of the window (block, no capture).
    The speed is unsigned: a wave running leftward has the same CV.
    """
    nodes = window_nodes(x, window)
    out = np.full(activation.shape[0], np.nan)
    if nodes.size < MIN_FIT_NODES:
        return out
    xs = x[nodes]
    for b in range(activation.shape[0]):
        t = activation[b, nodes]
        if not np.all(np.isfinite(t)) or np.ptp(t) <= 0:
            continue
        slope = np.polyfit(t, xs, 1)[0]  # cm/ms
        out[b] = abs(slope) * CM_PER_MS_TO_M_PER_S
    return out


def _velocity(inputs: Inputs) -> dict:
    cv = conduction_velocity(inputs.beats.activation, inputs.setup.x, inputs.setup.cv_window)
    return {"conduction_velocity": (("beat",), cv)}


MEASUREMENT = Measurement("conduction velocity", ("conduction_velocity",), _velocity, on_a_strand, order=10)
