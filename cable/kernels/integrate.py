"""One step's stimulus and per-node probe, and the codes of the time loop.

The time loop itself is :func:`cable.kernels.loop.advance` (one template for every run);
this module holds what it shares with the single-cell adaptive loop
(:mod:`cable.kernels.adaptive_cell`): the splitting codes, the status codes, the mean
stimulus over a step (:func:`stimulus_current`) and the probe of a node after the
reaction (:func:`probe_nodes`, :func:`probe`): upward crossings of the threshold (time
by linear interpolation), the maximal dV/dt of each upstroke without the stimulus
current, and per beat the resting potential (the lowest potential since the previous
beat repolarised), the peak and the downward crossings of the repolarisation levels
(:mod:`cable.measure.apd`).
"""

import numpy as np

from cable.kernels.jit import jit

STRANG = 0
GODUNOV = 1

# status codes returned by the time loops
OK = 0
NONFINITE = 1
RUNAWAY = 2

#: |V| above this is treated as a numerical blow-up [mV]
RUNAWAY_MV = 1000.0


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

