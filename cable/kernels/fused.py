"""The fast time loop, for models with a :class:`cable.membrane.base.FastPath`.

``advance_fast`` is a template like :func:`cable.kernels.integrate.advance` (same
splitting, stimuli, probes and status codes; see that module for the scheme), with

* the model's fast kernel bound to ``fast_reaction`` by
  :func:`cable.kernels.jit.specialise` (and inlined into the loop): states and
  parameters stored by state and by parameter (``sT`` (nstate, n), ``pT``) so that the
  node loops vectorise, or by node for models that say so (``FastPath.by_state``);
  the rates exact (``table`` with no rows) or tabulated;
* the probe in one vectorised pass over the nodes that neither cross the threshold,
  nor are in an upstroke, nor cross a repolarisation level (almost every node, almost
  always), and the full per-node pass (the same as ``integrate.probe``) over the runs
  of the others, and over every node while a stimulus is on;
* for batches of strands of one length (:mod:`cable.kernels.batch`), the strands
  stored interleaved and their diffusion solves run side by side (``strands`` > 1),
  each strand with its own factors and its own operations: bitwise its run alone;
* the potential checked for NaN or runaway every ``check_every`` steps, in a
  vectorised pass.

Batches of strands of different lengths (and single cells) use
``advance_fast_segments`` (each strand's diffusion solved on its own slice), and
batches on the reference path ``advance_segments`` (``integrate.advance`` with the
same change); both give each strand its result alone, bit for bit.

Every helper it calls per step is either in the same module as its own callees or
inlined (``jit_inline``): numba checks a cached function against its own file only,
so a cached helper calling into another file could go stale.
"""

import numpy as np

from cable.kernels.diffusion import diffuse, diffuse_interleaved, diffuse_segments
from cable.kernels.integrate import (GODUNOV, NONFINITE, OK, RUNAWAY, RUNAWAY_MV, STRANG, probe, probe_nodes,
                                     stimulus_current)
from cable.kernels.jit import jit, jit_inline


def fast_reaction(v, sT, pT, i_stim, dt, ion_scale, gating, table, v_lo, inv_dv, group):  # bound by specialise()
    raise NotImplementedError


def reaction(v, s, p, i_stim, dt, ion_scale, gating):  # bound by specialise() (advance_segments)
    raise NotImplementedError


@jit_inline
def quiet_pass(v, vprev, dnow, dt, threshold, pre_rate, vmin, level, ceiling, busy):
    """The probe of quiet nodes, in one vectorised pass over all nodes; the others are
    marked in ``busy`` and left as they were, for :func:`probe_nodes`.

    A node is quiet when it does not cross ``threshold`` upwards, does not fall below
    its next repolarisation level (``level``: -inf when none is pending) and does not
    rise above ``ceiling`` (its running peak while a level is pending, -inf in an
    upstroke, +inf otherwise; see :func:`bounds`). Its probe is then the rise rate kept
    for the next upstroke and the running lowest potential (what ``probe_nodes`` does
    for it, bit for bit: its running peak does not change, and is not read while no
    level is pending), and its ``vprev = v``. ``dnow = v - vprev`` at every node.
    Returns the number of busy nodes.
    """
    nbusy = 0
    for i in range(v.shape[0]):
        vi = v[i]
        vp = vprev[i]
        b = (vi > ceiling[i]) | ((vp < threshold) & (vi >= threshold)) | (vi < level[i])
        d = vi - vp
        rate = d / dt
        pr = pre_rate[i]
        grown = (rate if rate > pr else pr) if rate > 0.0 else 0.0
        pre_rate[i] = pr if b else grown
        lo = vmin[i]
        vmin[i] = lo if (b | (lo <= vi)) else vi
        dnow[i] = d
        vprev[i] = vp if b else vi
        busy[i] = b
        nbusy += b
    return nbusy


@jit_inline
def bounds(open_up, apd, level, ceiling, i0, i1):
    """``level`` and ``ceiling`` of nodes i0..i1-1 for :func:`quiet_pass`, from the
    probe's state (after :func:`probe_nodes` may have changed it)."""
    vpeak, lin, off, pending = apd[4], apd[5], apd[6], apd[8]
    nlev = apd[1].shape[0]
    for i in range(i0, i1):
        pk = vpeak[i]
        level[i] = lin[i] * pk + off[i]
        ceiling[i] = -np.inf if open_up[i] != 0 else (pk if pending[i] < nlev else np.inf)


@jit_inline
def probe_bounds(open_up, apd):
    """``level``, ``ceiling`` (see :func:`bounds`) and ``busy`` for :func:`block_probe`,
    made at the start of a loop call from the probe's state."""
    n = open_up.shape[0]
    level, ceiling, busy = np.empty(n), np.empty(n), np.empty(n, np.bool_)
    bounds(open_up, apd, level, ceiling, 0, n)
    return level, ceiling, busy


@jit_inline
def block_probe(v, vprev, dnow, t, dt, threshold, act, nact, pre_rate, open_up, upstroke, apd, i_stim, grid, stim_on,
                level, ceiling, busy):
    """The probe of :func:`cable.kernels.integrate.probe`, but for ``dlast``: the quiet
    nodes in one vectorised pass (:func:`quiet_pass`), the runs of busy nodes by
    ``probe_nodes`` (and every stimulated node while a stimulus is on: its current is
    taken out of the rates there), their ``level`` and ``ceiling`` then brought up to
    date (:func:`bounds`).
    Leaves ``dnow = v - vprev`` (the caller makes it the next step's ``dlast``) and
    ``vprev = v``."""
    n = v.shape[0]
    if stim_on:
        for i in range(n):   # stimulated nodes take the full pass (their current out of the rates)
            if i_stim[i] != 0.0:
                ceiling[i] = -np.inf   # busy; bounds() below sets it again
    if quiet_pass(v, vprev, dnow, dt, threshold, pre_rate, apd[3], level, ceiling, busy) > 0:
        i = 0
        while i < n:
            if busy[i]:
                j = i + 1
                while j < n and busy[j]:
                    j += 1
                probe_nodes(v, vprev, dnow, t, dt, threshold, act, nact, pre_rate, open_up, upstroke, apd, i_stim,
                            grid, i, j)
                bounds(open_up, apd, level, ceiling, i, j)
                for m in range(i, j):
                    vprev[m] = v[m]
                i = j
            else:
                i += 1


@jit_inline
def _keep_dlast(dlast0, dlast, steps):
    """After ``steps`` swaps the last step's changes are in ``dlast``: into the caller's ``dlast0``."""
    if steps % 2 == 1:
        for i in range(dlast0.shape[0]):
            dlast0[i] = dlast[i]


@jit
def check(v):
    """(status, node) of the first non-finite or runaway potential; (OK, -1) if none."""
    bad = False
    for i in range(v.shape[0]):
        a = abs(v[i])
        bad = bad | (a != a) | (a > RUNAWAY_MV)
    if bad:
        for i in range(v.shape[0]):
            vi = v[i]
            if not np.isfinite(vi):
                return NONFINITE, i
            if abs(vi) > RUNAWAY_MV:
                return RUNAWAY, i
    return OK, -1


@jit_inline
def _diffuse(v, lo, up, h, theta, pivot, elim, back, work, strands):
    if strands == 1:
        diffuse(v, lo, up, h, theta, pivot, elim, back, work)
    else:
        diffuse_interleaved(v, lo, up, h, theta, pivot, elim, back, work, strands)


def advance_fast(v, sT, pT, t0, nsteps, dt, pulses, lo, up, theta, half, full, splitting, merge,
                 gating, ion_scale, threshold, vprev, act, nact, pre_rate, open_up, upstroke,
                 apd, i_stim, work, check_every, table, v_lo, inv_dv, group, strands):
    """Advance the strand by ``nsteps`` steps of ``dt`` from time ``t0``.

    Arguments as for :func:`cable.kernels.integrate.advance`, with ``sT`` and ``pT``
    stored by state and parameter, the rate tables (``table`` (ngroup, nrow, ncol),
    ``v_lo`` [mV], ``inv_dv`` [1/mV]; a table with no rows: exact rates; ``group``: each
    node's table group, see ``cable.kernels.tables``), and ``strands``: 1 for one
    strand (factors from ``diffusion.factor``), S for S strands of one length stored
    interleaved (factors from ``diffusion.factor_interleaved``, see
    ``diffusion.diffuse_interleaved``). Returns (status, step, node).
    """
    level, ceiling, busy = probe_bounds(open_up, apd)
    dlast0 = apd[0]
    dnow = np.empty_like(dlast0)
    stim_on = True
    first_pulse = 0
    pv_h, el_h, bk_h = half
    pv_f, el_f, bk_f = full
    grid = (lo, up, dt if splitting == GODUNOV else 0.5 * dt, strands)   # the probe's: diffusion after it
    for k in range(nsteps):
        t = t0 + k * dt
        if splitting == STRANG:
            if merge and k > 0:
                _diffuse(v, lo, up, dt, theta, pv_f, el_f, bk_f, work, strands)
            else:
                _diffuse(v, lo, up, 0.5 * dt, theta, pv_h, el_h, bk_h, work, strands)
        any_on, first_pulse = stimulus_current(t, dt, pulses, i_stim, first_pulse)
        if stim_on and not any_on:
            i_stim[:] = 0.0
        stim_on = any_on
        fast_reaction(v, sT, pT, i_stim, dt, ion_scale, gating, table, v_lo, inv_dv, group)
        block_probe(v, vprev, dnow, t, dt, threshold, act, nact, pre_rate, open_up, upstroke, apd, i_stim, grid,
                    stim_on, level, ceiling, busy)
        dnow, apd = apd[0], (dnow,) + apd[1:]    # this step's changes are the next step's dlast
        if splitting == GODUNOV:
            _diffuse(v, lo, up, dt, theta, pv_f, el_f, bk_f, work, strands)
        elif not merge or k == nsteps - 1:
            _diffuse(v, lo, up, 0.5 * dt, theta, pv_h, el_h, bk_h, work, strands)
        if (k + 1) % check_every == 0 or k == nsteps - 1:
            status, node = check(v)
            if status != OK:
                _keep_dlast(dlast0, apd[0], k + 1)
                return status, k, node
    _keep_dlast(dlast0, apd[0], nsteps)
    return OK, nsteps, -1


def advance_fast_segments(v, sT, pT, t0, nsteps, dt, pulses, lo, up, theta, half, full, splitting, merge,
                          gating, ion_scale, threshold, vprev, act, nact, pre_rate, open_up, upstroke,
                          apd, i_stim, work, check_every, table, v_lo, inv_dv, group, offsets):
    """:func:`advance_fast` for strands laid end to end (strand j on nodes
    ``offsets[j]`` to ``offsets[j + 1] - 1``, factors from
    ``diffusion.factor_segments``): each strand's diffusion solved alone
    (``diffusion.diffuse_segments``), everything else as in :func:`advance_fast`."""
    level, ceiling, busy = probe_bounds(open_up, apd)
    dlast0 = apd[0]
    dnow = np.empty_like(dlast0)
    stim_on = True
    first_pulse = 0
    pv_h, el_h, bk_h = half
    pv_f, el_f, bk_f = full
    grid = (lo, up, dt if splitting == GODUNOV else 0.5 * dt, 1)   # the probe's: diffusion after it
    for k in range(nsteps):
        t = t0 + k * dt
        if splitting == STRANG:
            if merge and k > 0:
                diffuse_segments(v, lo, up, dt, theta, pv_f, el_f, bk_f, work, offsets)
            else:
                diffuse_segments(v, lo, up, 0.5 * dt, theta, pv_h, el_h, bk_h, work, offsets)
        any_on, first_pulse = stimulus_current(t, dt, pulses, i_stim, first_pulse)
        if stim_on and not any_on:
            i_stim[:] = 0.0
        stim_on = any_on
        fast_reaction(v, sT, pT, i_stim, dt, ion_scale, gating, table, v_lo, inv_dv, group)
        block_probe(v, vprev, dnow, t, dt, threshold, act, nact, pre_rate, open_up, upstroke, apd, i_stim, grid,
                    stim_on, level, ceiling, busy)
        dnow, apd = apd[0], (dnow,) + apd[1:]    # this step's changes are the next step's dlast
        if splitting == GODUNOV:
            diffuse_segments(v, lo, up, dt, theta, pv_f, el_f, bk_f, work, offsets)
        elif not merge or k == nsteps - 1:
            diffuse_segments(v, lo, up, 0.5 * dt, theta, pv_h, el_h, bk_h, work, offsets)
        if (k + 1) % check_every == 0 or k == nsteps - 1:
            status, node = check(v)
            if status != OK:
                _keep_dlast(dlast0, apd[0], k + 1)
                return status, k, node
    _keep_dlast(dlast0, apd[0], nsteps)
    return OK, nsteps, -1


def advance_segments(v, s, p, t0, nsteps, dt, pulses, lo, up, theta, half, full, splitting, merge,
                     gating, ion_scale, threshold, vprev, act, nact, pre_rate, open_up, upstroke,
                     apd, i_stim, work, check_every, offsets):
    """:func:`cable.kernels.integrate.advance` (the reference loop: the model's
    ``reaction`` bound by specialise, states by node) for strands laid end to end,
    each strand's diffusion solved alone as in :func:`advance_fast_segments`."""
    stim_on = True
    first_pulse = 0
    sub_h, cp_h, inv_h = half
    sub_f, cp_f, inv_f = full
    grid = (lo, up, dt if splitting == GODUNOV else 0.5 * dt, 1)   # the probe's: diffusion after it
    for k in range(nsteps):
        t = t0 + k * dt
        if splitting == STRANG:
            if merge and k > 0:
                diffuse_segments(v, lo, up, dt, theta, sub_f, cp_f, inv_f, work, offsets)
            else:
                diffuse_segments(v, lo, up, 0.5 * dt, theta, sub_h, cp_h, inv_h, work, offsets)
        any_on, first_pulse = stimulus_current(t, dt, pulses, i_stim, first_pulse)
        if stim_on and not any_on:
            i_stim[:] = 0.0
        stim_on = any_on
        reaction(v, s, p, i_stim, dt, ion_scale, gating)
        probe(v, vprev, t, dt, threshold, act, nact, pre_rate, open_up, upstroke, apd, i_stim, grid)
        if splitting == GODUNOV:
            diffuse_segments(v, lo, up, dt, theta, sub_f, cp_f, inv_f, work, offsets)
        elif not merge or k == nsteps - 1:
            diffuse_segments(v, lo, up, 0.5 * dt, theta, sub_h, cp_h, inv_h, work, offsets)
        if (k + 1) % check_every == 0 or k == nsteps - 1:
            for i in range(v.shape[0]):
                vi = v[i]
                if not np.isfinite(vi):
                    return NONFINITE, k, i
                if abs(vi) > RUNAWAY_MV:
                    return RUNAWAY, k, i
    return OK, nsteps, -1
