"""The blocks of :class:`cable.kernels.adaptive.Stepper` driven from compiled code.

``advance_levels`` does what ``Stepper.run`` did in Python, block by block: the level
chosen by :func:`cable.kernels.adaptive.allowed_step` at the start of each block (the
fine step inside stimulus zones), the block cut to the next zone edge, output time and
``BLOCK_STEPS`` steps, ``dlast`` rescaled on a change of level, the states kept for the
forward-Euler bound, and the block run by the run's own compiled loop
(:func:`cable.kernels.loop.advance`, unchanged) at that level's factors, step and rate
table. Same arithmetic in the same order, so the results are those of the
Python driver bit for bit; what goes is numba's dispatch of the loop's arguments per
block (~20-40 us, up to 12 blocks per millisecond of fine steps). One call runs one
output interval (``cable.simulate`` samples, checks and reports between them).
"""

from __future__ import annotations

import functools

from cable.kernels.adaptive import BLOCK_STEPS, allowed_step, window_choice
from cable.kernels.jit import specialise
from cable.kernels.loop import Grid, Rates, Step, make_window


def loop(v, s, p, t0, nsteps, grid, step, stimulus, probes, rates):  # bound by specialise(): the run's loop
    raise NotImplementedError


def advance_levels(v, s, p, n0, n1, dt, hs, grid, halves, fulls, step, stimulus, probes, tables, rates, zones, fe,
                   by_state, bounds, ctl, t_block, s_before, counts, trace, v_start, windowed):
    """Advance from fine step ``n0`` to ``n1`` in blocks (see the module docstring).

    ``hs``: the levels; ``grid``, ``step``, ``stimulus``, ``probes``, ``rates``: the loop's
    containers (:mod:`cable.kernels.loop`) at the fine step, whose factors, dt and table
    each block replaces by its level's: ``halves``, ``fulls``, the factors of D(h/2) and
    D(h) per level (each part stacked (nlev, ...)), and ``tables`` (nlev, ngroup, rows,
    cols); ``zones`` (m, 2):
    ``adaptive.stimulus_zones``; ``bounds``: (dv_step, reach, rel_step, dv_power,
    dv_fast, window margin, window's largest share, windows on (1.0) or off, window reach);
    ``ctl``: [level of the last block, zone reached, blocks traced]; ``t_block``:
    [length of the last block, ms]; ``s_before``: the states at its start; ``counts``:
    steps per level; ``trace`` (m, 3): (fine index, steps, level) of the blocks while
    ``ctl[2]`` < m; ``v_start``: the potential at the block's start; ``windowed``: [steps
    with a reaction window, node reactions saved] (added to). A block of fine steps takes
    the reaction's window of :func:`cable.kernels.adaptive.window_choice` where it has
    one (``loop.Window``). Returns (status, step, node) as ``Stepper.run``.
    """
    dv_step, reach, rel_step, dv_power, dv_fast, margin, most, windows, window_reach = bounds
    nlev = hs.shape[0]
    top = 0       # the longest level of a window's other nodes: at most BLOCK_STEPS fine steps
    while top + 1 < nlev and (2 << top) <= BLOCK_STEPS:
        top += 1
    nz = zones.shape[0]
    track = False
    for j in range(fe.shape[0]):
        track = track or fe[j] != 0
    threshold = probes.threshold
    dlast = probes.apd[0]
    n = n0
    while n < n1:
        z = ctl[1]
        while z < nz and zones[z, 1] <= n:
            z += 1
        ctl[1] = z
        inside = False
        edge = 1 << 62
        if z < nz:
            inside = zones[z, 0] <= n
            edge = zones[z, 1] if inside else zones[z, 0]
        cur = ctl[0]
        k = 0
        if not inside:
            allowed = allowed_step(v, dlast, hs[cur], threshold, s, s_before, fe, t_block[0], by_state,
                                   hs[nlev - 1], dv_step, reach, rel_step, dv_power, dv_fast)
            while k + 1 < nlev and hs[k + 1] <= allowed:
                k += 1
        span = min(edge, n1) - n
        while (1 << k) > span:
            k -= 1
        width = 1 << k
        m = min(span // width, BLOCK_STEPS)
        h = hs[k]
        lump = 0        # a window: its nodes react at the fine step, the others once per block at level lump
        if k == 0 and nlev > 1 and not inside and windows != 0.0:
            start, stop, other = window_choice(v, dlast, hs[cur], v_start, threshold, s, s_before, fe, t_block[0],
                                               by_state, hs[k + 1], hs[nlev - 1], dv_step, window_reach, rel_step,
                                               dv_power, dv_fast, int(margin), most)
            while lump < top and k + lump + 1 < nlev and hs[k + lump + 1] <= other and (2 << lump) * width <= span:
                lump += 1
            if lump > 0:
                m = 1 << lump
        if k != cur:                     # the probe's last difference, per step of the new level
            ratio = h / hs[cur]
            for i in range(dlast.shape[0]):
                dlast[i] *= ratio
            ctl[0] = k
        if track:
            s_before[:, :] = s
        v_start[:] = v
        if ctl[2] < trace.shape[0]:
            trace[ctl[2], 0] = n
            trace[ctl[2], 1] = m
            trace[ctl[2], 2] = k
            ctl[2] += 1
        level_grid = Grid(grid.lo, grid.up, grid.theta, (halves[0][k], halves[1][k], halves[2][k]),
                          (fulls[0][k], fulls[1][k], fulls[2][k]), grid.work, grid.layout)
        if lump > 0:
            window = make_window(v, s, p, stimulus.i_stim, rates.group, by_state, start, stop, m // 2,
                                 hs[k + lump], tables[k + lump])
        else:
            window = step.window
        level_step = Step(h, step.splitting, step.merge, step.gating, step.ion_scale, step.check_every, window)
        status, done, node = loop(v, s, p, n * dt, m, level_grid, level_step, stimulus, probes,
                                  Rates(tables[k], rates.v_lo, rates.inv_dv, rates.group))
        if status != 0:
            counts[k] += done + 1
            return status, n - n0 + (done + 1) * width - 1, node
        counts[k] += m
        t_block[0] = m * h
        n += m * width
        if lump > 0:      # the others' change over the block, per step of h: their rate for the next choice
            windowed[0] += m
            windowed[1] += (m - 1) * (v.shape[0] - (stop - start))
            for i in range(v.shape[0]):
                if i < start or i >= stop:
                    dlast[i] = (v[i] - v_start[i]) / m
    return 0, n1 - n0, -1


@functools.lru_cache(maxsize=None)
def driver(advance):
    """The compiled block driver of the run's loop ``advance`` (a specialised dispatcher of
    :func:`cable.kernels.loop.advance`)."""
    return specialise(advance_levels, advance.py_func.__qualname__, loop=advance, depends=(advance.py_func,))
