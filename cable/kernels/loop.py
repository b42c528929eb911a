"""The time loop: operator splitting of reaction and diffusion, stimuli, probes.

One template, :func:`advance`, is every time loop of the package: single strands, batches
of strands (interleaved, or laid end to end), single cells (settling, pre-pacing) and
the blocks of the adaptive stepper. :func:`cable.kernels.loops.loop` specialises it per
model and reaction scheme (:func:`cable.kernels.jit.specialise` binds ``react`` and the
diffusion layout) and numba caches each on disk. It takes five small containers
(named tuples, typed by numba) besides the node arrays::

    advance(v, s, p, t0, nsteps, grid, step, stimulus, probes, rates) -> (status, step, node)

    v            float64[n]   membrane potential [mV], updated in place
    s, p         states and parameters: by node (n, nstate) on the reference path, by
                 state (nstate, n) on the fast path where the model's FastPath says so
    grid         Grid: coupling (lo, up), theta, the factors of D(dt/2) and D(dt), the
                 solver's work array and the layout (strands interleaved, or offsets)
    step         Step: dt [ms], splitting, merge, gating, ion_scale, check_every
    stimulus     Stimulus: the pulses (m, 5) and the step's stimulus i_stim [mV/ms]
    probes       Probes: threshold [mV] and the probe arrays (LoopArrays.probes)
    rates        Rates: the rate table and its groups (a table with no rows: exact
                 rates; ignored on the reference path)

Splitting (S = stimulus + ionic reaction over dt, D(h) = diffusion over h):

* strang:  D(dt/2) S D(dt/2) each step (Strang 1968, SIAM J Numer Anal 5:506);
  with ``merge`` the two half steps between consecutive steps are joined into one
  D(dt), D(dt/2) S D(dt) S ... S D(dt/2) between outputs: same second order, half
  the solves.
* godunov: S D(dt) each step (first order).

The reaction is the model's own kernel (``reaction``, states by node) or its fast kernel
(``FastPath.kernel``, with the rate table), or a scheme of :mod:`cable.kernels.schemes`
applied to the model's ``kinetics``: which one is bound to ``react`` by
:func:`cable.kernels.loops.loop`.

With a reaction window (``Step.window``, given only by the adaptive strand driver,
:mod:`cable.kernels.adaptive_strand`) the nodes of the window react every step (in work
arrays that hold their states for the call) and the others once, at one step of the
call, over a longer step; without one (:func:`no_window`, every other run) the
reaction is the one call above, unchanged.

Probes, updated every step right after the reaction (before the closing diffusion
step), so that every probed potential sits at the same point of the splitting whatever
``merge`` and the output interval (with ``merge`` the potential at the end of a step
is that point, except at the last step of each call, which closes with D(dt/2)):
upward crossings of ``threshold`` (time by linear interpolation), the maximal dV/dt of
each upstroke without the stimulus current, and per beat the resting potential (the
lowest potential since the previous beat repolarised), the peak and the downward
crossings of the repolarisation levels (:mod:`cable.measure.apd`). The per-node probe
is :func:`cable.kernels.integrate.probe_nodes`; here the quiet nodes (neither crossing
the threshold, nor in an upstroke, nor crossing a repolarisation level: almost every
node, almost always) take one vectorised pass that does for them what it would, bit for
bit, and the runs of the others (and every stimulated node) take the per-node pass.

The potential is checked for NaN or runaway every ``check_every`` steps, in a
vectorised pass.

Every helper it calls per step is either in the same module as its own callees or
inlined (``jit_inline``): numba checks a cached function against its own file only,
so a cached helper calling into another file could go stale.
"""

from collections import namedtuple

import numpy as np

from cable.kernels.diffusion import diffuse, diffuse_interleaved, diffuse_segments
from cable.kernels.integrate import (GODUNOV, NONFINITE, OK, RUNAWAY, RUNAWAY_MV, STRANG, probe_nodes,
                                     stimulus_current)
from cable.kernels.jit import jit, jit_inline

#: the strand: coupling to the left and right neighbour (lo, up) [1/ms], the diffusion's
#: theta, the factors (pivot, elim, back) of D(dt/2) (``half``) and D(dt) (``full``)
#: (``cable.kernels.diffusion``), the solver's work array (n) and the layout: the number
#: of strands stored interleaved (1: one strand) or the offsets (nstrand + 1) of strands
#: laid end to end
Grid = namedtuple("Grid", "lo up theta half full work layout")
#: the step: dt [ms], splitting (STRANG, GODUNOV), merge (bool), gating (0 Rush-Larsen,
#: 1 forward Euler), ion_scale (1/C_m or 1), check_every [steps], window (:data:`Window`)
Step = namedtuple("Step", "dt splitting merge gating ion_scale check_every window")
#: the reaction's window (adaptive strands, ``cable.kernels.adaptive_strand``): with
#: ``on``, the nodes ``inner`` react every step and the nodes ``outer`` once, at step
#: ``at`` of the call, over ``dt`` [ms] with the rate table ``table`` (that level's);
#: ``work`` and ``rest``: (v, s, p, i_stim, group) work arrays of each (:func:`make_window`);
#: ``by_state``: the states' layout. Off (:func:`no_window`): every node every step
Window = namedtuple("Window", "on at dt table by_state inner outer work rest")
#: the stimulus schedule: pulses (m, 5) = (on, off [ms], first node, end node, amplitude
#: [mV/ms]), sorted by onset, and the step's stimulus at each node i_stim (n) [mV/ms]
Stimulus = namedtuple("Stimulus", "pulses i_stim")
#: the probes: threshold [mV], vprev (n), act and upstroke (n, cap), nact (n), pre_rate
#: (n), open_up (n) and the repolarisation probe's arrays (``ApdProbe.args()``)
Probes = namedtuple("Probes", "threshold vprev act nact pre_rate open_up upstroke apd")
#: the fast path's rates: table (ngroup, nrow, ncol), v_lo [mV], inv_dv [1/mV] and each
#: node's table group (``cable.kernels.tables``)
Rates = namedtuple("Rates", "table v_lo inv_dv group")


def no_rates() -> Rates:
    """Rates for the reference path (and exact rates on the fast path): a table with no rows."""
    return Rates(np.zeros((1, 0, 1)), 0.0, 1.0, np.zeros(1, dtype=np.int64))


def no_window() -> Window:
    """The reaction of every node at every step (no window)."""
    none = (np.zeros(0), np.zeros((0, 0)), np.zeros((0, 0)), np.zeros(0), np.zeros(0, dtype=np.int64))
    return Window(False, -1, 0.0, np.zeros((1, 0, 1)), False, np.zeros(0, dtype=np.int64),
                  np.zeros(0, dtype=np.int64), none, none)


# ----------------------------------------------------------------------------- bindings
def react(v, s, p, i_stim, dt, ion_scale, gating, rates):  # bound by specialise()
    raise NotImplementedError


def diffuse_layout(v, lo, up, h, theta, factors, work, layout):  # bound by specialise()
    raise NotImplementedError


def stride_of(layout):  # bound by specialise(): neighbours' distance in the node arrays
    raise NotImplementedError


def reaction(v, s, p, i_stim, dt, ion_scale, gating):  # bound by specialise() (react_reference)
    raise NotImplementedError


def fast_reaction(v, sT, pT, i_stim, dt, ion_scale, gating, table, v_lo, inv_dv, group):  # bound (react_fast)
    raise NotImplementedError


def react_reference(v, s, p, i_stim, dt, ion_scale, gating, rates):
    """The reaction step by the model's ``reaction`` (or a scheme's kernel of that signature)."""
    reaction(v, s, p, i_stim, dt, ion_scale, gating)


def react_fast(v, s, p, i_stim, dt, ion_scale, gating, rates):
    """The reaction step by the model's fast kernel (or a scheme's kernel of that signature)."""
    fast_reaction(v, s, p, i_stim, dt, ion_scale, gating, rates.table, rates.v_lo, rates.inv_dv, rates.group)


@jit_inline
def diffuse_strands(v, lo, up, h, theta, factors, work, strands):
    """D(h) of one strand, or of ``strands`` strands stored interleaved (each bitwise alone)."""
    pivot, elim, back = factors
    if strands == 1:
        diffuse(v, lo, up, h, theta, pivot, elim, back, work)
    else:
        diffuse_interleaved(v, lo, up, h, theta, pivot, elim, back, work, strands)


@jit_inline
def strands_stride(strands):
    return strands


@jit_inline
def diffuse_end_to_end(v, lo, up, h, theta, factors, work, offsets):
    """D(h) of strands laid end to end (strand j on nodes offsets[j] .. offsets[j + 1] - 1), each alone."""
    pivot, elim, back = factors
    diffuse_segments(v, lo, up, h, theta, pivot, elim, back, work, offsets)


@jit_inline
def segments_stride(offsets):
    return 1


# ----------------------------------------------------------------------------- probe
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



# ----------------------------------------------------------------------------- window
@jit_inline
def _gather(v, s, p, i_stim, group, by_state, nodes, vw, sw, pw, iw, gw, shared_p, shared_g):
    """Copy the nodes ``nodes`` (indices) of the node arrays into the work arrays (``pw``,
    ``gw`` only where the parameters / table groups differ by node)."""
    for c in range(nodes.shape[0]):
        i = nodes[c]
        vw[c] = v[i]
        iw[c] = i_stim[i]
        if by_state:
            for j in range(s.shape[0]):
                sw[j, c] = s[j, i]
            if not shared_p:
                for j in range(p.shape[0]):
                    pw[j, c] = p[j, i]
        else:
            for j in range(s.shape[1]):
                sw[c, j] = s[i, j]
            if not shared_p:
                for j in range(p.shape[1]):
                    pw[c, j] = p[i, j]
        if not shared_g:
            gw[c] = group[i]


@jit_inline
def _scatter(v, s, by_state, nodes, vw, sw, with_v):
    """The states (and with ``with_v`` the potential) of the work arrays back to their nodes."""
    for c in range(nodes.shape[0]):
        i = nodes[c]
        if with_v:
            v[i] = vw[c]
        if by_state:
            for j in range(s.shape[0]):
                s[j, i] = sw[j, c]
        else:
            for j in range(s.shape[1]):
                s[i, j] = sw[c, j]


@jit_inline
def _work(v, s, p, group, by_state, count):
    """Work arrays for ``count`` nodes in the layout of ``s`` and ``p`` (``p`` itself when
    the parameters are shared by every node, ``group`` itself with one table group)."""
    n = v.shape[0]
    shared_p = (p.shape[1] == 1) if by_state else (p.shape[0] == 1)
    shared_g = group.shape[0] != n
    if by_state:
        sw = np.empty((s.shape[0], count))
        pw = p if shared_p else np.empty((p.shape[0], count))
    else:
        sw = np.empty((count, s.shape[1]))
        pw = p if shared_p else np.empty((count, p.shape[1]))
    gw = group if shared_g else np.empty(count, dtype=group.dtype)
    return np.empty(count), sw, pw, np.empty(count), gw, shared_p, shared_g


@jit_inline
def _parts(v, s, p, i_stim, group, by_state, nodes):
    """Work arrays of ``nodes`` with their parameters and table groups copied in."""
    vw, sw, pw, iw, gw, shared_p, shared_g = _work(v, s, p, group, by_state, nodes.shape[0])
    _gather(v, s, p, i_stim, group, by_state, nodes, vw, sw, pw, iw, gw, shared_p, shared_g)
    return vw, sw, pw, iw, gw


@jit_inline
def make_window(v, s, p, i_stim, group, by_state, start, stop, at, dt, table):
    """The window of nodes start .. stop - 1 (see :data:`Window`), the others reacting at
    step ``at`` over ``dt`` with ``table``."""
    n = v.shape[0]
    inner = np.arange(start, stop)
    outer = np.concatenate((np.arange(0, start), np.arange(stop, n)))
    return Window(True, at, dt, table, by_state, inner, outer, _parts(v, s, p, i_stim, group, by_state, inner),
                  _parts(v, s, p, i_stim, group, by_state, outer))

@jit_inline
def window_close(v, s, window, inner, work):
    """The window's states back to the node arrays (the end of the call)."""
    if window.on:
        _scatter(v, s, window.by_state, inner, work[0], work[1], False)   # the potential is v's own


# ----------------------------------------------------------------------------- the loop
def advance(v, s, p, t0, nsteps, grid, step, stimulus, probes, rates):
    """Advance by ``nsteps`` steps of ``step.dt`` from time ``t0`` (see the module docstring).

    Returns (status, step, node): status OK, or NONFINITE / RUNAWAY with the step and
    node where it was found (checked every ``step.check_every`` steps and at the end).
    """
    lo, up, theta, half, full, work, layout = grid
    dt, splitting, merge, gating, ion_scale, check_every, window = step
    pulses, i_stim = stimulus
    table, v_lo, inv_dv, group = rates
    windowed, inner, outer, wwork, wrest = window.on, window.inner, window.outer, window.work, window.rest
    if windowed:    # the window's states stay in its work arrays until the end of the call
        _gather(v, s, p, i_stim, group, window.by_state, inner, wwork[0], wwork[1], wwork[2], wwork[3], wwork[4],
                True, True)
    threshold, vprev, act, nact, pre_rate, open_up, upstroke, apd = probes
    level, ceiling, busy = probe_bounds(open_up, apd)
    dlast0 = apd[0]
    dnow = np.empty_like(dlast0)
    stim_on = True
    first_pulse = 0
    # the probe's grid: the diffusion after it, and the neighbours' distance
    where = (lo, up, dt if splitting == GODUNOV else 0.5 * dt, stride_of(layout))
    for k in range(nsteps):
        t = t0 + k * dt
        if splitting == STRANG:
            if merge and k > 0:
                diffuse_layout(v, lo, up, dt, theta, full, work, layout)
            else:
                diffuse_layout(v, lo, up, 0.5 * dt, theta, half, work, layout)
        any_on, first_pulse = stimulus_current(t, dt, pulses, i_stim, first_pulse)
        if stim_on and not any_on:
            i_stim[:] = 0.0
        stim_on = any_on
        if windowed:     # the window every step, the others once (see Window)
            vw, sw, pw, iw, gw = wwork
            for c in range(inner.shape[0]):
                vw[c] = v[inner[c]]
                iw[c] = i_stim[inner[c]]
            react(vw, sw, pw, iw, dt, ion_scale, gating, Rates(table, v_lo, inv_dv, gw))
            for c in range(inner.shape[0]):
                v[inner[c]] = vw[c]
            if k == window.at:
                vr, sr, pr, ir, gr = wrest
                _gather(v, s, p, i_stim, group, window.by_state, outer, vr, sr, pr, ir, gr, True, True)
                react(vr, sr, pr, ir, window.dt, ion_scale, gating, Rates(window.table, v_lo, inv_dv, gr))
                _scatter(v, s, window.by_state, outer, vr, sr, True)
        else:
            react(v, s, p, i_stim, dt, ion_scale, gating, rates)
        block_probe(v, vprev, dnow, t, dt, threshold, act, nact, pre_rate, open_up, upstroke, apd, i_stim, where,
                    stim_on, level, ceiling, busy)
        dnow, apd = apd[0], (dnow,) + apd[1:]    # this step's changes are the next step's dlast
        if splitting == GODUNOV:
            diffuse_layout(v, lo, up, dt, theta, full, work, layout)
        elif not merge or k == nsteps - 1:
            diffuse_layout(v, lo, up, 0.5 * dt, theta, half, work, layout)
        if (k + 1) % check_every == 0 or k == nsteps - 1:
            status, node = check(v)
            if status != OK:
                _keep_dlast(dlast0, apd[0], k + 1)
                window_close(v, s, window, inner, wwork)
                return status, k, node
    _keep_dlast(dlast0, apd[0], nsteps)
    window_close(v, s, window, inner, wwork)
    return OK, nsteps, -1
