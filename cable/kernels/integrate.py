"""The time loop: operator splitting of reaction and diffusion, stimuli, probes.

``advance`` is a template: :func:`cable.kernels.jit.specialise` binds ``reaction`` to
a membrane model's kernel and compiles one loop per model (cached on disk).

Splitting (S = stimulus + ionic reaction over dt, D(h) = diffusion over h):

* strang:  D(dt/2) S D(dt/2) each step (Strang 1968, SIAM J Numer Anal 5:506);
  with ``merge`` the two half steps between consecutive steps are joined into one
  D(dt), D(dt/2) S D(dt) S ... S D(dt/2) between outputs: same second order, half
  the solves.
* godunov: S D(dt) each step (first order).

Probes, updated every step right after the reaction (before the closing diffusion
step), so that every probed potential sits at the same point of the splitting whatever
``merge`` and the output interval (with ``merge`` the potential at the end of a step
is that point, except at the last step of each call, which closes with D(dt/2)):
upward crossings of ``threshold`` (time by linear interpolation), the maximal dV/dt of
each upstroke without the stimulus current, and per beat the resting potential (the
lowest potential since the previous beat repolarised), the peak and the downward
crossings of the repolarisation levels (:mod:`cable.measure.apd`).
"""

import numpy as np

from cable.kernels.diffusion import diffuse
from cable.kernels.jit import jit

STRANG = 0
GODUNOV = 1

# status codes returned by advance
OK = 0
NONFINITE = 1
RUNAWAY = 2

#: |V| above this is treated as a numerical blow-up [mV]
RUNAWAY_MV = 1000.0


def reaction(v, s, p, i_stim, dt, ion_scale, gating):  # replaced by specialise()
    raise NotImplementedError


@jit
def stimulus_current(t, dt, pulses, i_stim, first):
    """Fill i_stim [mV/ms] with the mean stimulus over [t, t+dt].

    ``pulses`` are sorted by onset (``simulate.stimulus_pulses``, ``batch._pulses``);
    ``first`` is the caller's cursor: every pulse before it has ended (0 at the start of
    a call). The pulses that have ended since are skipped and the scan stops at the
    first pulse starting after the step, so a step costs the pulses on rather than all
    of a long train. Returns (whether any is on, the new cursor).
    """
    any_on = False
    npulse = pulses.shape[0]
    while first < npulse and pulses[first, 1] <= t:
        first += 1
    for k in range(first, npulse):
        on = pulses[k, 0]
        if on >= t + dt:
            break      # this one and every later one start after the step
        off = pulses[k, 1]
        overlap = min(off, t + dt) - max(on, t)
        if overlap > 0.0:
            if not any_on:
                i_stim[:] = 0.0
            any_on = True
            i0 = int(pulses[k, 2])
            i1 = int(pulses[k, 3])
            amp = pulses[k, 4] * overlap / dt
            for i in range(i0, i1):
                i_stim[i] += amp
    return any_on, first


@jit
def step_rate(dnow, dlast, lo, up, h, stride, i, dt):
    """dV/dt of node ``i`` over the whole step [mV/ms], from the changes of the
    potential between the probes after two consecutive reactions (``dnow``, this step's;
    ``dlast``, the step's before).

    ``dnow`` lacks the diffusion of the rest of the step (``h``): it is added as h L
    applied to the mean of ``dnow`` and ``dlast`` (L the grid's diffusion operator,
    neighbours ``stride`` nodes away: strands interleaved in a batch). To second order
    in dt that is the increment of the whole step; the mean over two steps cancels the
    grid-scale modes that Crank-Nicolson leaves undamped and flips in sign every step
    with the half steps merged (which an explicit h L d would amplify by up to
    2 h (lo + up), ~100 on fine grids).
    """
    d = dnow[i]
    mid = 0.5 * (d + dlast[i])
    acc = 0.0
    if i >= stride:
        j = i - stride
        acc += lo[i] * (0.5 * (dnow[j] + dlast[j]) - mid)
    if i + stride < dnow.shape[0]:
        j = i + stride
        acc += up[i] * (0.5 * (dnow[j] + dlast[j]) - mid)
    return (d + h * acc) / dt


@jit
def probe_nodes(v, vprev, dnow, t, dt, threshold, act, nact, pre_rate, open_up, upstroke, apd, i_stim, grid,
                i0, i1):
    """Probe nodes i0..i1-1 after the reaction of the step ending at t + dt (``dnow`` is
    ``v - vprev`` at every node; ``vprev`` and ``dlast`` are updated by the caller,
    :func:`close_probe`, after every node).

    Crossings; the upstroke rate (:func:`step_rate` with ``grid`` = (lo, up, h,
    stride), without the stimulus current ``i_stim`` of the step: the rate of the
    membrane's own and axial currents); the repolarisation probe ``apd`` (the arrays of
    :class:`cable.measure.apd.ApdProbe`).
    """
    cap = act.shape[1]
    dlast, fracs, slot, vmin, vpeak, lin, off, vrest, pending, rest, peak, repol = apd
    lo, up, h, stride = grid
    nlev = fracs.shape[0]
    for i in range(i0, i1):
        vi = v[i]
        vp = vprev[i]
        rate = (vi - vp) / dt - i_stim[i]      # the rise kept before the crossing (pre_rate)
        if vi < vmin[i]:
            vmin[i] = vi
        if vp < threshold and vi >= threshold:
            k = nact[i]
            if k < cap:
                act[i, k] = t + dt * (threshold - vp) / (vi - vp)
                upstroke[i, k] = max(pre_rate[i], step_rate(dnow, dlast, lo, up, h, stride, i, dt) - i_stim[i])
                nact[i] = k + 1
                open_up[i] = 1
            else:
                nact[i] = k + 1  # counted, not stored
            if nlev > 0:   # a new beat: its rest is the lowest potential since the last one repolarised
                if pending[i] < nlev and 0 < k <= cap:
                    peak[i, k - 1] = vpeak[i]
                if k < cap:
                    rest[i, k] = vmin[i]
                vrest[i] = vmin[i]
                vpeak[i] = vi
                pending[i] = 0
                lin[i] = 1.0 - fracs[0]
                off[i] = fracs[0] * vmin[i]
        if vi > vpeak[i]:
            vpeak[i] = vi
        if rate > 0.0:
            if rate > pre_rate[i]:
                pre_rate[i] = rate
            if open_up[i] == 1:
                k = nact[i] - 1
                if k < cap:
                    full = step_rate(dnow, dlast, lo, up, h, stride, i, dt) - i_stim[i]
                    if full > upstroke[i, k]:
                        upstroke[i, k] = full
        else:
            pre_rate[i] = 0.0
            open_up[i] = 0
        if pending[i] < nlev:
            k = nact[i] - 1
            # the levels below the peak, highest first: several may be crossed in one step
            while pending[i] < nlev and vi < lin[i] * vpeak[i] + off[i]:
                level = lin[i] * vpeak[i] + off[i]
                j = pending[i]
                if k < cap:
                    repol[i, k, slot[j]] = t + dt * min(1.0, max(0.0, (vp - level) / (vp - vi)))
                j += 1
                pending[i] = j
                if j < nlev:
                    lin[i] = 1.0 - fracs[j]
                    off[i] = fracs[j] * vrest[i]
                else:      # repolarised: the next rest is looked for from here
                    lin[i] = 0.0
                    off[i] = -np.inf
                    vmin[i] = vi
            if k < cap:
                peak[i, k] = vpeak[i]


@jit
def probe(v, vprev, t, dt, threshold, act, nact, pre_rate, open_up, upstroke, apd, i_stim, grid):
    """Probe every node (:func:`probe_nodes`), then ``vprev = v`` and ``dlast = v - vprev``."""
    dnow = v - vprev
    probe_nodes(v, vprev, dnow, t, dt, threshold, act, nact, pre_rate, open_up, upstroke, apd, i_stim, grid,
                0, v.shape[0])
    close_probe(v, vprev, dnow, apd[0])


@jit
def close_probe(v, vprev, dnow, dlast):
    """After the probe of a step: ``dlast = dnow``, ``vprev = v``."""
    for i in range(v.shape[0]):
        dlast[i] = dnow[i]
        vprev[i] = v[i]


def advance(v, s, p, t0, nsteps, dt, pulses, lo, up, theta, half, full, splitting, merge,
            gating, ion_scale, threshold, vprev, act, nact, pre_rate, open_up, upstroke,
            apd, i_stim, work, check_every):
    """Advance the strand by ``nsteps`` steps of ``dt`` from time ``t0``.

    Returns (status, step, node): status OK, or NONFINITE / RUNAWAY with the step and
    node where it was found (checked every ``check_every`` steps and at the end).
    """
    stim_on = True
    first_pulse = 0
    sub_h, cp_h, inv_h = half
    sub_f, cp_f, inv_f = full
    grid = (lo, up, dt if splitting == GODUNOV else 0.5 * dt, 1)   # the probe's: diffusion after it
    for k in range(nsteps):
        t = t0 + k * dt
        if splitting == STRANG:
            if merge and k > 0:
                diffuse(v, lo, up, dt, theta, sub_f, cp_f, inv_f, work)
            else:
                diffuse(v, lo, up, 0.5 * dt, theta, sub_h, cp_h, inv_h, work)
        any_on, first_pulse = stimulus_current(t, dt, pulses, i_stim, first_pulse)
        if stim_on and not any_on:
            i_stim[:] = 0.0
        stim_on = any_on
        reaction(v, s, p, i_stim, dt, ion_scale, gating)
        probe(v, vprev, t, dt, threshold, act, nact, pre_rate, open_up, upstroke, apd, i_stim, grid)
        if splitting == GODUNOV:
            diffuse(v, lo, up, dt, theta, sub_f, cp_f, inv_f, work)
        elif not merge or k == nsteps - 1:
            diffuse(v, lo, up, 0.5 * dt, theta, sub_h, cp_h, inv_h, work)
        if (k + 1) % check_every == 0 or k == nsteps - 1:
            for i in range(v.shape[0]):
                vi = v[i]
                if not np.isfinite(vi):
                    return NONFINITE, k, i
                if abs(vi) > RUNAWAY_MV:
                    return RUNAWAY, k, i
    return OK, nsteps, -1
