"""Adaptive time steps for a single cell, the level chosen inside one compiled loop.

A single cell has no diffusion, so nothing ties a step to the Strang sequence of a
block: the level is chosen again before every step, in the loop
(:func:`advance_cell`), by the rules of :mod:`cable.kernels.adaptive` (the fine step
through stimulus zones and while the potential rises below the threshold within
``REACH_MV`` of it; otherwise the longest level the potential's bound allows,
:func:`cable.kernels.adaptive.potential_step`, with every forward-Euler state changing
by at most ``REL_STEP`` of itself per step), the rates taken from the last step. One
call runs many output intervals and returns their samples, so the Python cost that
driving a cell in blocks had (one call of the loop per block of at most 16 steps,
~20-40 us each: the whole cost of a cell) is paid once per call.

Two further rules, for the loop's own freedom: the level the rules allow rises by at
most one per step (a step at most doubles), and the step is cut to what fits before the
next output time or stimulus zone (steps stay on the fine grid, samples on the output
grid; the next step rises from the level allowed, not from the cut one).

The pulses are looked up per zone (``CellZones``): outside a zone no pulse overlaps a
step, so a train of 1000 pulses costs nothing between them (the fixed loops scan every
pulse at every step).
"""

from __future__ import annotations

import functools
from dataclasses import dataclass

import numpy as np

from cable.kernels import adaptive
from cable.kernels.integrate import NONFINITE, OK, RUNAWAY, RUNAWAY_MV, probe, stimulus_current
from cable.kernels.adaptive import potential_step
from cable.kernels.jit import jit_inline, specialise
from cable.kernels.state import CHECK_EVERY


def cell_reaction(v, s, p, i_stim, dt, ion_scale, gating, table, v_lo, inv_dv, group):  # bound by specialise()
    raise NotImplementedError


def reaction(v, s, p, i_stim, dt, ion_scale, gating):  # bound by specialise() (reference_reaction)
    raise NotImplementedError


def reference_reaction(v, s, p, i_stim, dt, ion_scale, gating, table, v_lo, inv_dv, group):
    """The model's plain ``reaction`` with the fast kernels' arguments (the table unused)."""
    reaction(v, s, p, i_stim, dt, ion_scale, gating)


@dataclass(frozen=True)
class CellZones:
    """Stimulus zones on the fine grid and the pulses inside each.

    ``zones`` (m, 4): fine indices [start, stop) of the steps overlapping a pulse, merged,
    then the range [first, last) of the pulses (sorted by onset) starting inside.
    """

    zones: np.ndarray

    @staticmethod
    def of(pulses: np.ndarray, dt: float, n_end: int) -> "CellZones":
        spans = adaptive.stimulus_zones(pulses, dt, n_end)
        out = np.zeros((spans.shape[0], 4), dtype=np.int64)
        out[:, :2] = spans
        if spans.shape[0]:
            starts = np.floor(pulses[:, 0] / dt + 1e-9).astype(np.int64)
            zone = np.searchsorted(spans[:, 0], starts, side="right") - 1
            for z in range(spans.shape[0]):
                inside = np.flatnonzero(zone == z)
                out[z, 2], out[z, 3] = (inside[0], inside[-1] + 1) if inside.size else (0, 0)
        return CellZones(np.ascontiguousarray(out))


@jit_inline
def _allowed(v, d, h_last, threshold, s, s_last, fe, dt_max, dv_step, reach, rel_step, dv_power, dv_fast):
    """:func:`cable.kernels.adaptive.allowed_step` for one node, the forward-Euler rates
    from the last step (``s_last``: the states before it) [ms] (0: the fine step)."""
    if v < threshold and v > threshold - reach and d > 0.0:
        return 0.0
    step = potential_step(abs(d) / h_last, dt_max, dv_step, dv_power, dv_fast)
    for j in range(fe.shape[0]):
        if fe[j] == 0:
            continue
        change = abs(s[j] - s_last[j])
        if change > 0.0:
            limit = rel_step * (abs(s[j]) + 1e-300) * h_last / change
            if limit < step:
                step = limit
    return step


def advance_cell(v, s, p, n0, n1, dt, hs, tables, v_lo, inv_dv, group, pulses, zones, spb, gating, ion_scale, threshold,
                 fe, bounds, ctl, s_last, cols, out, counts, vprev, act, nact, pre_rate, open_up, upstroke, apd,
                 i_stim, lohi, check_every, trace):
    """Advance one cell from fine step ``n0`` to ``n1`` at the levels ``hs`` (dt x 2^k).

    ``tables`` (nlev, 1, rows, cols): the fast kernel's table per level (no rows: exact), ``group``
    the cell's table group (0);
    ``zones``: :class:`CellZones`; ``spb``: fine steps per output interval: at every
    multiple of it after ``n0`` the row ``out[r]`` gets the potential and the states
    ``cols``; ``fe``: 1 for the forward-Euler states; ``bounds``: (``DV_STEP_MV``,
    ``REACH_MV``, ``REL_STEP``, ``DV_POWER``, ``DV_FAST_MV``); ``ctl``: [level of the
    last step, level the rules allowed for it (both -1 before the first step), steps
    traced] (kept between calls); ``s_last``: the states before the last step;
    ``counts``: steps per level (added to); ``lohi``: a zero coupling (the probe's grid); ``trace``
    (m, 2): the fine index and level of the steps, while ``ctl[2]`` < m (counted
    there; an array with no rows keeps none). The rest as for
    :func:`cable.kernels.loop.advance` (states and parameters of the one node, by
    node or by state: the same order for one node).

    Returns (status, fine steps done from ``n0`` when it failed (else ``n1 - n0``), rows).
    """
    sf = s.reshape(-1)
    nlev = hs.shape[0]
    dv_step, reach, rel_step, dv_power, dv_fast = bounds
    k = ctl[0]
    nz = zones.shape[0]
    z = 0
    while z < nz and zones[z, 1] <= n0:
        z += 1
    n = n0
    row = 0
    done = 0
    stim_on = True
    while n < n1:
        while z < nz and zones[z, 1] <= n:
            z += 1
        inside = z < nz and zones[z, 0] <= n
        edge = zones[z, 1] if inside else (zones[z, 0] if z < nz else n1)
        bound = min(edge, n1, (n // spb + 1) * spb)
        if inside or k < 0:
            rule = 0
        else:
            step = _allowed(v[0], apd[0][0], hs[k], threshold, sf, s_last, fe, hs[nlev - 1], dv_step, reach,
                            rel_step, dv_power, dv_fast)
            rule = 0
            while rule + 1 < nlev and hs[rule + 1] <= step and rule <= ctl[1]:
                rule += 1
        ctl[1] = rule
        kk = rule
        while (1 << kk) > bound - n:     # cut to fit: the next rule still rises from ``rule``
            kk -= 1
        h = hs[kk]
        if k >= 0 and kk != k:
            apd[0][0] *= h / hs[k]          # the probe's last difference, per step of the new level
        k = kk
        t = n * dt
        if inside:
            any_on, _ = stimulus_current(t, h, pulses[zones[z, 2]:zones[z, 3]], i_stim, 0)
        else:
            any_on = False
        if stim_on and not any_on:
            i_stim[0] = 0.0
        stim_on = any_on
        for j in range(sf.shape[0]):
            s_last[j] = sf[j]
        cell_reaction(v, s, p, i_stim, h, ion_scale, gating, tables[kk], v_lo, inv_dv, group)
        probe(v, vprev, t, h, threshold, act, nact, pre_rate, open_up, upstroke, apd, i_stim, (lohi, lohi, 0.5 * h, 1))
        counts[kk] += 1
        if ctl[2] < trace.shape[0]:
            trace[ctl[2], 0] = n
            trace[ctl[2], 1] = kk
            ctl[2] += 1
        n += 1 << kk
        done += 1
        if done % check_every == 0 or n % spb == 0:
            a = abs(v[0])
            if not np.isfinite(a) or a > RUNAWAY_MV:
                ctl[0] = k
                return (NONFINITE if not np.isfinite(a) else RUNAWAY), n - n0, row
        if n % spb == 0:
            out[row, 0] = v[0]
            for c in range(cols.shape[0]):
                out[row, 1 + c] = sf[cols[c]]
            row += 1
    ctl[0] = k
    return OK, n1 - n0, row


@functools.lru_cache(maxsize=None)
def _cell_loop_for(model_name: str, fast: bool):
    from cable.membrane import get_model

    model = get_model(model_name)
    if fast:
        return specialise(advance_cell, f"{model.name}_fast", cell_reaction=model.fast.kernel)
    plain = specialise(reference_reaction, model.name, reaction=model.reaction)
    return specialise(advance_cell, model.name, cell_reaction=plain, depends=(model.reaction,))


def cell_loop(model, fast: bool):
    """The compiled single-cell loop of ``model`` (``fast``: its fast kernel with tables)."""
    return _cell_loop_for(model.name, bool(fast))


class CellStepper:
    """Runs a single cell with adaptive steps, many output intervals per call of the loop.

    Parameters
    ----------
    model : MembraneModel
    arrays : cable.kernels.state.LoopArrays
        The cell's arrays (one node).
    p_nodes : ndarray (1, nparam)
        The cell's parameters, by node.
    levels : sequence of float
        From :func:`cable.kernels.adaptive.step_levels`.
    plans : list of cable.kernels.tables.Plan or None
        The fast path's plan per level (None: the model's plain reaction).
    pulses : ndarray (npulse, 5)
    n_end : int
        Fine steps of the whole run.
    spb : int
        Fine steps per output interval.
    cols : sequence of int
        The states sampled with the potential.
    ion_scale, threshold : float
    """

    single_cell = True

    def __init__(self, model, arrays, p_nodes, levels, plans, pulses, n_end, spb, cols, ion_scale, threshold):
        self.arrays = arrays
        self.levels = np.array(levels, dtype=np.float64)
        self.dt = float(levels[0])
        fast = plans[0] is not None
        self.loop = cell_loop(model, fast)
        if fast:
            self.tables = np.ascontiguousarray(np.stack([pl.table for pl in plans]))
            self.v_lo, self.inv_dv = float(plans[0].v_lo), float(plans[0].inv_dv)
        else:
            self.tables = np.zeros((len(levels), 1, 0, 1))
            self.v_lo, self.inv_dv = 0.0, 1.0
        self.group = np.zeros(1, dtype=np.int64)   # one cell: one table group
        self.pulses = np.ascontiguousarray(pulses, dtype=np.float64)
        self.zones = CellZones.of(self.pulses, self.dt, n_end).zones
        self.spb = int(spb)
        self.cols = np.array(cols, dtype=np.int64)
        self.ion_scale, self.threshold = float(ion_scale), float(threshold)
        self.fe = adaptive.euler_states(model, arrays.vprev[0], arrays.s.reshape(-1), p_nodes, 0)
        self.bounds = (adaptive.DV_STEP_MV, adaptive.REACH_MV, adaptive.REL_STEP, adaptive.DV_POWER,
                       adaptive.DV_FAST_MV)
        self.ctl = np.array([-1, -1, 0], dtype=np.int64)
        self.trace = np.zeros((0, 2), dtype=np.int64)   # give rows to record the steps (fine index, level)
        self.s_last = arrays.s.reshape(-1).copy()
        self.counts = np.zeros(len(levels), dtype=np.int64)
        self.lohi = np.zeros(1)

    def run(self, v, n0: int, n1: int):
        """Advance from fine step ``n0`` to ``n1``; (status, fine steps done, samples (rows, 1 + cols)).

        The samples are those of the output times after ``n0`` up to ``n1`` (or to the failure)."""
        a = self.arrays
        rows = n1 // self.spb - n0 // self.spb
        out = np.empty((rows, 1 + self.cols.shape[0]))
        status, done, got = self.loop(v, a.s, a.p, n0, n1, self.dt, self.levels, self.tables, self.v_lo,
                                      self.inv_dv, self.group, self.pulses, self.zones, self.spb, 0, self.ion_scale,
                                      self.threshold, self.fe, self.bounds, self.ctl, self.s_last, self.cols, out,
                                      self.counts, *a.probes(self.threshold)[1:], a.i_stim, self.lohi, CHECK_EVERY,
                                      self.trace)
        return status, done, out[:got]

    def outputs(self) -> dict:
        """The steps taken per level, as measurements (``step_dt``, ``steps_taken``)."""
        return {"step_dt": (("step_level",), self.levels.copy()),
                "steps_taken": (("step_level",), self.counts.copy())}
