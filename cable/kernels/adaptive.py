"""Adaptive time steps (``numerics.dt_max``): the compiled loops driven in blocks.

The steps are chosen from the levels dt x 2^k (k = 0, 1, ... while dt x 2^k <= dt_max),
so that the Crank-Nicolson factors and the rate tables of each level are computed once.
Each block is one call of the run's compiled loop (:func:`cable.kernels.loop.advance`)
at one level: a complete Strang sequence, D(h/2) S D(h) ... S
D(h/2), so a change of level between blocks keeps the splitting's order. Between blocks
the level is chosen from the state (:func:`allowed_step`):

* the fine step wherever a stimulus is on (a block never crosses a pulse's start or
  end: blocks end at the fine step holding it), wherever a node below the activation
  threshold rises within ``REACH_MV`` of it (a wave arriving, a slow depolarisation), and
  wherever the potential changes fast (an upstroke): the step is at most what
  :func:`potential_step` allows at max |dV/dt| (``DV_STEP_MV``, ``DV_POWER``,
  ``DV_FAST_MV``);
* the states that the reaction integrates by forward Euler (those whose ``kinetics``
  rate b is 0: concentrations) bound the step so that each changes by at most
  ``REL_STEP`` of its magnitude per step (the rate measured over the last block);
  Rush-Larsen gates are exact for a constant potential and allow any step.

While the fine step is needed at a few nodes only (a front crossing the strand: the
nodes in its upstroke, those rising toward the threshold within ``WINDOW_REACH_MV``, those
whose forward-Euler states change fast behind it), a block of fine steps reacts only
those nodes (the reaction's window, widened by ``WINDOW_MARGIN`` nodes, at most
``WINDOW_MOST`` of the strand) every step, and the others once per block, at its middle
step, over the longest level their own rates allow (:func:`window_choice`; the
diffusion of every node stays at the fine step). The result's ``steps_windowed`` and
``reactions_saved`` count those blocks' steps and the node reactions they saved.

The blocks are driven from compiled code (:mod:`cable.kernels.adaptive_strand`, one call
per output interval); a single cell has its own loop (:mod:`cable.kernels.adaptive_cell`).
Blocks end at every output time (samples stay on the output grid), at stimulus edges,
and after at most ``BLOCK_STEPS`` steps, when the level is chosen again. Activation
times, repolarisation crossings and the upstroke rate are interpolated within the step
where they occur by the loop's own probes; the probe's last-step difference (``dlast``,
used by :func:`cable.kernels.integrate.step_rate`) is rescaled to the new step when the
level changes.
"""

from __future__ import annotations

import numpy as np

from cable.kernels import diffusion, tables
from cable.kernels.jit import jit, jit_inline
from cable.kernels.loop import Rates
from cable.kernels.state import step_of

#: the bound of the potential (:func:`potential_step`): at |dV/dt| = 1 mV/ms a step may
#: change it by ``DV_STEP_MV``, and the step scales as |dV/dt|^-``DV_POWER``: shorter than a
#: fixed change per step in the slow plateau (where the long steps make the APD90 error:
#: TP06 cell, measured here), longer in the fast phases 1 and 3 (where they make little);
#: at most ``DV_FAST_MV`` per step at any rate (the upstrokes). Chosen on a TP06 cell and
#: the strands of the accuracy tests (DEVELOPERS.md, "Adaptive steps in one compiled loop")
DV_STEP_MV = 0.1
DV_POWER = 0.3
DV_FAST_MV = 0.25
#: a node below the threshold and rising, closer to it than this, keeps the fine step [mV]
REACH_MV = 15.0
#: a forward-Euler state may change by at most this fraction of its magnitude per step
REL_STEP = 0.02
#: the level is chosen again after at most this many steps of a block
BLOCK_STEPS = 16
#: nodes beside those that need the fine step that take it with them (the reaction's
#: window, :func:`window_choice`)
WINDOW_MARGIN = 3
#: a node below the threshold and rising, closer to it than this, is in the window [mV]
WINDOW_REACH_MV = 60.0
#: the window is used only while it holds at most this fraction of the nodes
WINDOW_MOST = 0.5
#: the magnitude of a forward-Euler state is at least this fraction of its largest
#: magnitude over the nodes (a state near zero is judged on its scale, not on zero)
FLOOR_FRACTION = 1e-3


#: the largest Rush-Larsen step measured stable for a whole action potential of a cell
#: (``cable/kernels/schemes.py``, note above ``STABLE_DT``; measured there) [ms]
RUSH_LARSEN_STABLE = {"hodgkin-huxley-1952": 0.0445, "luo-rudy-1991": 0.464, "ten-tusscher-panfilov-2006": 0.470}


def stability_note(model_name: str, dt: float, dt_max: float) -> str | None:
    """A warning when the longest level exceeds the Rush-Larsen step measured stable on the model."""
    top = step_levels(dt, dt_max)[-1]
    limit = RUSH_LARSEN_STABLE.get(model_name)
    if limit is None or top <= limit:
        return None
    return (f"warning: numerics.dt_max = {dt_max:g} ms allows steps of {top:g} ms, beyond the largest Rush-Larsen "
            f"step measured stable on {model_name} ({limit:g} ms); a long step that sets off an oscillation is "
            f"cut back only once the potential moves: give dt_max <= {limit:g} ms.")


def step_levels(dt: float, dt_max: float | None) -> tuple[float, ...]:
    """The steps dt x 2^k up to ``dt_max`` [ms]; (dt,) when adaptive stepping is off."""
    if dt_max is None:
        return (dt,)
    out = [dt]
    while 2.0 * out[-1] <= dt_max * (1.0 + 1e-9):
        out.append(2.0 * out[-1])
    return tuple(out)


def stimulus_zones(pulses: np.ndarray, dt: float, n_end: int) -> np.ndarray:
    """Fine-step index ranges [start, stop) whose steps overlap a pulse, merged, (m, 2)."""
    spans = []
    for on, off in pulses[:, :2]:
        j0 = int(np.floor(on / dt + 1e-9))
        j1 = int(np.ceil(off / dt - 1e-9))
        if j1 <= j0:
            j1 = j0 + 1
        if j0 < n_end:
            spans.append((j0, min(j1, n_end)))
    spans.sort()
    merged = []
    for j0, j1 in spans:
        if merged and j0 <= merged[-1][1]:
            merged[-1][1] = max(merged[-1][1], j1)
        else:
            merged.append([j0, j1])
    return np.array(merged, dtype=np.int64).reshape(-1, 2)


@jit_inline
def potential_step(rate, dt_max, dv_step, dv_power, dv_fast):
    """The longest step [ms] the potential's rate |dV/dt| [mV/ms] allows: ``dv_step`` [mV] per
    step at 1 mV/ms, the step scaling as rate^-``dv_power`` (1: the change per step is
    ``dv_step`` at every rate)."""
    if rate <= 0.0:
        return dt_max
    step = dv_step / rate if dv_power == 1.0 else min(dv_step * rate ** -dv_power, dv_fast / rate)
    return min(step, dt_max)


@jit
def allowed_step(v, dlast, dt_last, threshold, s, s_before, fe, t_block, by_state, dt_max, dv_step, reach, rel_step,
                 dv_power=1.0, dv_fast=1.0):
    """The longest step the state allows [ms] (0: the fine step).

    ``dlast``: each node's change of potential over the last step of ``dt_last``;
    ``s``, ``s_before``: the states now and at the start of the last block (of
    ``t_block`` ms; 0: no block yet); ``fe``: 1 for the states integrated by forward
    Euler; ``by_state``: states stored (nstate, n), else (n, nstate); ``dv_step``,
    ``reach``, ``rel_step``: the bounds (``DV_STEP_MV``, ``REACH_MV``, ``REL_STEP``).
    """
    n = v.shape[0]
    rate = 0.0
    for i in range(n):
        vi = v[i]
        d = dlast[i]
        if vi < threshold and vi > threshold - reach and d > 0.0:
            return 0.0
        a = abs(d)
        if a > rate:
            rate = a
    rate /= dt_last
    step = potential_step(rate, dt_max, dv_step, dv_power, dv_fast)
    if t_block <= 0.0:
        return step
    return euler_bound(s, s_before, fe, t_block, by_state, rel_step, step, 0, 0)


@jit_inline
def euler_bound(s, s_before, fe, t_block, by_state, rel_step, step, skip0, skip1):
    """``step`` cut so that no forward-Euler state changes by more than ``rel_step`` of
    its magnitude per step (its rate over the last block of ``t_block`` ms), nodes
    skip0 .. skip1 - 1 left out."""
    nstate = fe.shape[0]
    n = s.shape[1] if by_state else s.shape[0]
    for j in range(nstate):
        if fe[j] == 0:
            continue
        big = 0.0
        for i in range(n):
            y = abs(s[j, i]) if by_state else abs(s[i, j])
            if y > big:
                big = y
        floor = FLOOR_FRACTION * big + 1e-300
        for i in range(n):
            if skip0 <= i < skip1:
                continue
            if by_state:
                y, y0 = s[j, i], s_before[j, i]
            else:
                y, y0 = s[i, j], s_before[i, j]
            change = abs(y - y0)
            if change > 0.0:
                limit = rel_step * max(abs(y), floor) * t_block / change
                if limit < step:
                    step = limit
    return step


@jit_inline
def _node_step(v, dlast, dt_last, v_start, i, s, s_before, fe, floors, t_block, by_state, dt_max, dv_step, dv_power,
               dv_fast, rel_step):
    """The longest step node ``i`` allows alone: its potential's bound at its rate (the
    larger of its last step's and its mean over the last block, since ``v_start``) and
    its forward-Euler states' (``floors``: each state's floor, :data:`FLOOR_FRACTION`)."""
    rate = abs(dlast[i]) / dt_last
    if t_block > 0.0:
        rate = max(rate, abs(v[i] - v_start[i]) / t_block)
    step = potential_step(rate, dt_max, dv_step, dv_power, dv_fast)
    if t_block > 0.0:
        for j in range(fe.shape[0]):
            if fe[j] == 0:
                continue
            if by_state:
                y, y0 = s[j, i], s_before[j, i]
            else:
                y, y0 = s[i, j], s_before[i, j]
            change = abs(y - y0)
            if change > 0.0:
                step = min(step, rel_step * max(abs(y), floors[j]) * t_block / change)
    return step


@jit
def window_choice(v, dlast, dt_last, v_start, threshold, s, s_before, fe, t_block, by_state, h_fine, dt_max,
                  dv_step, reach, rel_step, dv_power, dv_fast, margin, most):
    """The reaction's window when the fine step is needed at a few nodes only (a front).

    The nodes that need the fine step by the rules of :func:`allowed_step` applied to
    each node alone (rising below the threshold within ``reach``, or a step shorter
    than ``h_fine``, the second level, by :func:`_node_step`), widened by ``margin``
    nodes on each side, are the window [start, stop). Returns (start, stop, the longest
    step the other nodes allow [ms]); the step is 0 when there is no window to use (no
    node needs the fine step, or more than ``most`` of them do).
    """
    n = v.shape[0]
    nstate = fe.shape[0]
    floors = np.zeros(nstate)
    for j in range(nstate):
        if fe[j] != 0:
            big = 0.0
            for i in range(n):
                big = max(big, abs(s[j, i]) if by_state else abs(s[i, j]))
            floors[j] = FLOOR_FRACTION * big + 1e-300
    first, last = n, -1
    step = dt_max
    for i in range(n):
        vi = v[i]
        node = _node_step(v, dlast, dt_last, v_start, i, s, s_before, fe, floors, t_block, by_state, dt_max,
                          dv_step, dv_power, dv_fast, rel_step)
        if (vi < threshold and vi > threshold - reach and dlast[i] > 0.0) or node < h_fine:
            first = min(first, i)
            last = i
    if last < 0:
        return 0, 0, 0.0
    start, stop = max(0, first - margin), min(n, last + 1 + margin)
    if stop - start > most * n:
        return start, stop, 0.0
    for i in range(n):
        if i < start or i >= stop:
            step = min(step, _node_step(v, dlast, dt_last, v_start, i, s, s_before, fe, floors, t_block, by_state,
                                        dt_max, dv_step, dv_power, dv_fast, rel_step))
    return start, stop, step


def euler_states(model, v0: float, s0: np.ndarray, p: np.ndarray, gating: int) -> np.ndarray:
    """1 for each state the reaction integrates by forward Euler (every state with
    forward-Euler gating; else those whose ``kinetics`` gate rate b is 0)."""
    nstate = len(model.states)
    if gating != 0 or model.kinetics is None:
        return np.ones(nstate, dtype=np.int64)
    a = np.zeros(nstate)
    b = np.zeros(nstate)
    model.kinetics(float(v0), np.ascontiguousarray(s0, dtype=np.float64), np.ascontiguousarray(p, dtype=np.float64),
                   0, 0.0, a, b)
    return (b == 0.0).astype(np.int64)


def _stacked(parts) -> np.ndarray:
    """The arrays of ``parts`` (one per level) stacked along a first axis, contiguous."""
    return np.ascontiguousarray(np.stack([np.asarray(x) for x in parts]))


class Stepper:
    """Runs output intervals as blocks of steps at the levels (see the module docstring).

    Parameters
    ----------
    advance : numba dispatcher
        The run's compiled loop (run block by block by ``adaptive_strand.driver``).
    setup : cable.preparation.Setup
    arrays : cable.kernels.state.LoopArrays
    levels : sequence of float
        From :func:`step_levels`.
    rates : list of cable.kernels.tables.Plan or None
        The fast path's plan per level (None: the reference loop).
    codes : (gating, theta, splitting, merge)
    n_end : int
        Fine steps of the whole run.
    windows : bool
        Let the reaction of a front's nodes take the fine step while the others take a
        long one (``window_choice``, ``cable.kernels.adaptive_strand``); False: every
        node at the level of the block.
    """

    def __init__(self, advance, setup, arrays, levels, rates, codes, n_end, windows=True):
        self.setup = setup
        self.arrays = arrays
        self.levels = tuple(levels)
        self.dt = self.levels[0]
        self.gating, self.theta, self.splitting, self.merge = codes
        lo, up = setup.grid.lo, setup.grid.up
        self.factors = [(diffusion.factor(lo, up, 0.5 * h, self.theta), diffusion.factor(lo, up, h, self.theta))
                        for h in self.levels]
        self.halves = tuple(_stacked([f[0][j] for f in self.factors]) for j in range(3))
        self.fulls = tuple(_stacked([f[1][j] for f in self.factors]) for j in range(3))
        fast = rates[0] is not None
        if fast:
            self.tables = _stacked([r.table for r in rates])   # (level, group, row, column)
            self.v_lo, self.inv_dv = float(rates[0].v_lo), float(rates[0].inv_dv)
            self.group = np.ascontiguousarray(rates[0].group)  # the table groups: the same at every level
        else:
            self.tables, self.v_lo, self.inv_dv = np.zeros((len(self.levels), 1, 0, 1)), 0.0, 1.0
            self.group = np.zeros(1, dtype=np.int64)
        from cable.kernels.adaptive_strand import driver

        self.driver = driver(advance)
        self.rates = Rates(self.tables[0], self.v_lo, self.inv_dv, self.group)
        self.grid = arrays.grid(lo, up, self.theta, self.factors[0][0], self.factors[0][1])
        self.step = step_of(self.dt, self.splitting, self.merge, self.gating, setup.ion_scale)
        self.stimulus = arrays.stimulus(setup.pulses)
        self.probes = arrays.probes(setup.threshold)
        self.zones = np.ascontiguousarray(stimulus_zones(setup.pulses, self.dt, n_end))
        self.fe = euler_states(setup.model, setup.v0[0], setup.s0[0], setup.p, self.gating)
        self.s_before = arrays.s.copy()
        self.ctl = np.zeros(3, dtype=np.int64)    # level of the last block (0 at first), zone reached, blocks traced
        self.t_block = np.zeros(1)
        self.counts = np.zeros(len(self.levels), dtype=np.int64)
        self.windowed = np.zeros(2, dtype=np.int64)   # steps with a reaction window, node-reactions saved
        self.v_start = np.zeros(setup.grid.lo.shape[0])
        self.bounds = (DV_STEP_MV, REACH_MV, REL_STEP, DV_POWER, DV_FAST_MV, float(WINDOW_MARGIN), WINDOW_MOST,
                       1.0 if windows else 0.0, WINDOW_REACH_MV)
        self.trace = np.zeros((0, 3), dtype=np.int64)   # give rows to record the blocks (fine index, steps, level)

    def run(self, v, n0: int, n1: int) -> tuple[int, int, int]:
        """Advance from fine step ``n0`` to ``n1``; (status, step, node) as the loop returns, ``step``
        counted in fine steps from ``n0`` (the failure lies in the fine step ending at ``n0 + step + 1``)."""
        a = self.arrays
        status, step, node = self.driver(
            v, a.s, a.p, n0, n1, self.dt, np.array(self.levels), self.grid, self.halves, self.fulls, self.step,
            self.stimulus, self.probes, self.tables, self.rates, self.zones, self.fe, a.by_state, self.bounds,
            self.ctl, self.t_block, self.s_before, self.counts, self.trace, self.v_start, self.windowed)
        return int(status), int(step), int(node)

    def outputs(self) -> dict:
        """The steps taken per level, as measurements (``step_dt``, ``steps_taken``)."""
        return {"step_dt": (("step_level",), np.array(self.levels)),
                "steps_taken": (("step_level",), self.counts.copy()),
                "steps_windowed": ((), int(self.windowed[0])),
                "reactions_saved": ((), int(self.windowed[1]))}


def level_plans(model, p, levels, gating, rates: str, reaction: str) -> list:
    """The fast path's plan (rate table) per level, as ``tables.plan`` makes it for one dt."""
    return [tables.plan(model, p, h, gating, rates, reaction=reaction) for h in levels]
