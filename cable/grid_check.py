"""Before a strand runs: is ``fiber.dx`` fine enough for the upstroke it will carry?

The conduction velocity of a finite-difference cable converges as dx^2, with an error
set by how many nodes the upstroke spans in space. Before the run, one space-clamped
cell of the strand's membrane is excited with the case's stimulus (the model's reaction
kernel at a small step, until the peak), which gives the upstroke time t_up = (peak -
rest) / (dV/dt)_max of the membrane's own current. A front whose speed goes as sqrt(D k)
with k ~ 1/t_up (Nagumo front: speed sqrt(D k / 2)(1 - 2a), width sqrt(2 D / k); closed
form) spans about ``L_up = sqrt(D t_up)`` in space. The relative CV error of the second-order
scheme is then about ``ERROR_CONSTANT (dx / L_up)^2``.

``ERROR_CONSTANT`` is a rule of thumb from two space errors measured here (so it is an
estimate, not a bound), which it fits alike: the ten Tusscher-Panfilov strand with
G_Na x 0.4 (``cases/sodium_channel_block.toml``, D 0.00154 cm^2/ms, L_up 0.037 cm) is 20 %
slow at dx = 500 um (0.44 against 0.555 m/s at 100 um): 0.11 (dx/L)^2 = 0.20; the
Hodgkin-Huxley axon at 18.5 degC (D 0.336 cm^2/ms, L_up 0.32 cm) has a space error of
0.04 % at dx = 200 um (the dx series of ``cable converge``; its larger error there is the
time step's): 0.11 (dx/L)^2 = 0.04 %. The warning says which dx would reach
``TARGET_ERROR`` and to check with ``cable converge`` (which also measures the time error).
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass

import numpy as np

#: estimated relative CV error = ERROR_CONSTANT (dx / L_up)^2 (see the module docstring)
ERROR_CONSTANT = 0.11
#: warn when the estimated CV error exceeds this [1]
WARN_ERROR = 0.05
#: the dx recommended is the one whose estimated error is this [1]
TARGET_ERROR = 0.02
#: step of the single-cell estimate [ms] and the longest time followed [ms]
ESTIMATE_DT = 0.005
ESTIMATE_SPAN = 30.0
#: an excursion smaller than this is no action potential [mV]
MIN_AMPLITUDE = 30.0


def upstroke_time(model, p_row: np.ndarray, capacitance: float, amplitude: float, duration: float) -> float:
    """(peak - rest) / (dV/dt)_max [ms] of one cell's upstroke, from its ionic current alone.

    One cell is advanced with the model's own reaction kernel (Rush-Larsen) at
    ``ESTIMATE_DT`` until past its peak; the stimulus [uA/cm^2] is applied for ``duration``
    [ms] and left out of dV/dt. NaN when the cell is not excited (no upstroke to resolve).
    """
    key = (model.name, np.asarray(p_row, dtype=np.float64).tobytes(), float(capacitance), float(amplitude),
           float(duration))
    return _upstroke_time(key)


@functools.lru_cache(maxsize=256)
def _upstroke_time(key) -> float:
    from cable.membrane import get_model

    name, p_bytes, capacitance, amplitude, duration = key
    model = get_model(name)
    scale = model.ion_scale(capacitance)
    v = np.array([model.resting_potential])
    s = np.ascontiguousarray(model.initial_states().reshape(1, -1).copy())
    p = np.frombuffer(p_bytes, dtype=np.float64).reshape(1, -1).copy()
    on, off = np.array([amplitude / capacitance]), np.zeros(1)
    rest = peak = float(v[0])
    rate = 0.0
    for k in range(int(ESTIMATE_SPAN / ESTIMATE_DT)):
        t = k * ESTIMATE_DT
        stim = on if t < duration else off
        before = float(v[0])
        model.reaction(v, s, p, stim, ESTIMATE_DT, scale, 0)
        if not math.isfinite(v[0]):
            return float("nan")
        rate = max(rate, (float(v[0]) - before) / ESTIMATE_DT - float(stim[0]))
        if v[0] > peak:
            peak = float(v[0])
        elif t > duration and v[0] < peak - 1.0:
            break  # past the peak
    if peak - rest < MIN_AMPLITUDE or rate <= 0.0:  # no action potential (passive or blocked membrane)
        return float("nan")
    return (peak - rest) / rate


@dataclass(frozen=True)
class UpstrokeGrid:
    """What the upstroke asks of the grid (see the module docstring).

    Attributes
    ----------
    t_up : float
        Upstroke time [ms] of one space-clamped cell.
    extent : float
        Spatial extent of the upstroke, sqrt(D t_up) [cm].
    error : float
        Estimated relative CV error at the case's dx [1].
    dx_needed : float
        The dx [cm] whose estimated error is ``TARGET_ERROR``.
    """

    t_up: float
    extent: float
    error: float
    dx_needed: float


def upstroke_grid(case, model, p_row) -> UpstrokeGrid | None:
    """The upstroke's extent and the grid it needs, or None (a single cell, no stimulus, no upstroke)."""
    if case.fiber is None or not case.stimuli:
        return None
    stim = case.stimuli[0]
    t_up = upstroke_time(model, p_row, case.fiber.capacitance, stim.amplitude, stim.duration)
    if not math.isfinite(t_up):
        return None
    extent = math.sqrt(case.fiber.diffusivity * t_up)
    return UpstrokeGrid(t_up=t_up, extent=extent, error=ERROR_CONSTANT * (case.fiber.dx / extent) ** 2,
                        dx_needed=extent * math.sqrt(TARGET_ERROR / ERROR_CONSTANT))


def coarse_grid_note(case, model, p_row) -> str | None:
    """One line warning when fiber.dx is too coarse for the upstroke, else None."""
    up = upstroke_grid(case, model, p_row)
    if up is None or up.error <= WARN_ERROR:
        return None
    dx, extent = case.fiber.dx, up.extent
    return (f"warning: fiber.dx = {dx:g} cm is coarse for this upstroke (it spans about {extent:.3g} cm, "
            f"{extent / dx:.3g} nodes): the conduction velocity may be about {100 * up.error:.0f}% off. "
            f"dx <= {up.dx_needed:.2g} cm should reach ~{100 * TARGET_ERROR:.0f}%; check with `cable converge`.")
