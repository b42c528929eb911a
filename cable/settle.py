"""Settling the coupled strand before the first beat.

Nodes are prepared one parameter set at a time, as single cells (at their own rest,
:func:`cable.prepace.settle_nodes`, or at the end of their own pacing,
:func:`cable.prepace.prepace_nodes`). Where neighbouring nodes differ (regions), the
coupled strand is not at rest in that state: current flows across each boundary and
the nodes relax over the first hundreds of ms, so that the first beat would meet
tissue different from the later ones (a beat 0 that blocks where the later beats
pass). :func:`settle_strand` integrates the coupled strand without stimulus, in
chunks of ``CHUNK`` ms, until the largest |dV/dt| falls below ``RATE`` (at most
``LONGEST`` ms); the run then starts from there, and a note says how long it took.
With pre-pacing, the settling adds to the diastolic interval after the last pre-pacing
beat (the note says so).
"""

from __future__ import annotations

import numpy as np

from cable.kernels import integrate
from cable.kernels.loop import Stimulus, no_rates
from cable.kernels.state import godunov_steps, unprobed

#: settle in chunks of this much time [ms], until max |dV/dt| < RATE [mV/ms], at most
#: LONGEST ms; RATE is 1/10 of the drift a 100 ms run could show within 0.1 mV
CHUNK = 10.0
RATE = 1e-4
LONGEST = 2000.0
#: strands whose nodes start within this of one another [mV] need no settling
SPREAD = 0.01
#: the step tried first [ms] (the rest does not depend on it); the run's own step is the fallback
COARSE_DT = 0.05


def needs_settling(v0: np.ndarray) -> bool:
    """Whether the nodes start at different potentials (and so are not at rest together)."""
    return v0.size > 1 and float(np.ptp(v0)) > SPREAD


def _settle(advance, model, p, grid, v0, s0, dt, ion_scale):
    v = v0.copy()
    s = np.ascontiguousarray(s0.copy())
    loop_grid, step = godunov_steps(grid.lo, grid.up, dt, 0, ion_scale)
    stimulus = Stimulus(np.zeros((0, 5)), np.zeros(v.size))
    steps = max(1, int(round(CHUNK / dt)))
    t, rate = 0.0, np.inf
    while t < LONGEST:
        before = v.copy()
        status, _, _ = advance(v, s, p, 0.0, steps, loop_grid, step, stimulus, unprobed(v), no_rates())
        t += steps * dt
        if status != integrate.OK or not np.all(np.isfinite(s)):
            return None
        rate = float(np.max(np.abs(v - before))) / (steps * dt)
        if rate < RATE:
            break
    return v, s, t, rate


def settle_strand(case, model, p, grid, v0, s0, prepaced: bool):
    """The coupled strand's state after settling without stimulus; (v0, s0, note).

    Parameters
    ----------
    case : cable.case.Case
    model : cable.membrane.MembraneModel
    p : ndarray (n, nparam)
        Parameters per node.
    grid : cable.fiber.Grid
    v0, s0 : ndarray
        The nodes' single-cell states (n,), (n, nstate).
    prepaced : bool
        Whether the states are the end of pre-pacing (said in the note).

    Returns
    -------
    v0, s0 : ndarray
        Unchanged (note None) when every node starts at the same potential.
    note : str or None
    """
    from cable.case import CaseError
    from cable.kernels import loops

    if not needs_settling(v0):
        return v0, s0, None
    advance = loops.loop(model.name)   # Rush-Larsen: a rest is a fixed point of every scheme
    p = np.ascontiguousarray(np.broadcast_to(p, (v0.size, p.shape[1])))
    ion_scale = model.ion_scale(case.fiber.capacitance)
    for dt in (COARSE_DT, min(max(case.numerics.dt, 1e-3), 0.01)):
        result = _settle(advance, model, p, grid, v0, s0, dt, ion_scale)
        if result is not None:
            break
    else:
        raise CaseError("the coupled strand has no stable rest (settling without stimulus diverged); check the "
                        "regions' parameters.")
    v, s, t, rate = result
    moved = float(np.max(np.abs(v - v0)))
    note = (f"settled the coupled strand for {t:g} ms before the first beat (its regions differ; nodes moved by up "
            f"to {moved:.3g} mV; final max |dV/dt| {rate:.1e} mV/ms"
            + (", not settled: raise cable.settle.LONGEST" if rate >= RATE else "")
            + ("; this adds to the diastolic interval after the last pre-pacing beat" if prepaced else "") + ")")
    return v, s, note
