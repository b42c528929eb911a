"""The time loop: operator splitting of reaction and diffusion, stimuli, probes.

``advance`` is a template: :func:`cable.kernels.jit.specialise` binds ``reaction`` to
a membrane model's kernel and compiles one loop per model (cached on disk).

Splitting (S = stimulus + ionic reaction over dt, D(h) = diffusion over h):

* strang:  D(dt/2) S D(dt/2) each step (Strang 1968, SIAM J Numer Anal 5:506);
  with ``merge`` the two half steps between consecutive steps are joined into one
  D(dt), D(dt/2) S D(dt) S ... S D(dt/2) between outputs: same second order, half
  the solves.
* godunov: S D(dt) each step (first order).

Probes, updated every step after the reaction: upward crossings of ``threshold`` (time
by linear interpolation) and the maximal dV/dt of each upstroke.
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
def stimulus_current(t, dt, pulses, i_stim):
    """Fill i_stim [mV/ms] with the mean stimulus over [t, t+dt]; return True if any."""
    any_on = False
    for k in range(pulses.shape[0]):
        on = pulses[k, 0]
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
    return any_on


@jit
def probe_nodes(v, vprev, t, dt, threshold, act, nact, pre_rate, open_up, upstroke, i0, i1):
    """Probe nodes i0..i1-1 after a step ending at t + dt (crossings, upstroke rates)."""
    cap = act.shape[1]
    for i in range(i0, i1):
        vi = v[i]
        vp = vprev[i]
        rate = (vi - vp) / dt
        if vp < threshold and vi >= threshold:
            k = nact[i]
            if k < cap:
                act[i, k] = t + dt * (threshold - vp) / (vi - vp)
                upstroke[i, k] = max(pre_rate[i], rate)
                nact[i] = k + 1
                open_up[i] = 1
            else:
                nact[i] = k + 1  # counted, not stored
        if rate > 0.0:
            if rate > pre_rate[i]:
                pre_rate[i] = rate
            if open_up[i] == 1:
                k = nact[i] - 1
                if k < cap and rate > upstroke[i, k]:
                    upstroke[i, k] = rate
        else:
            pre_rate[i] = 0.0
            open_up[i] = 0
        vprev[i] = vi


@jit
def probe(v, vprev, t, dt, threshold, act, nact, pre_rate, open_up, upstroke):
    probe_nodes(v, vprev, t, dt, threshold, act, nact, pre_rate, open_up, upstroke, 0, v.shape[0])


def advance(v, s, p, t0, nsteps, dt, pulses, lo, up, theta, half, full, splitting, merge,
            gating, ion_scale, threshold, vprev, act, nact, pre_rate, open_up, upstroke,
            i_stim, work, check_every):
    """Advance the strand by ``nsteps`` steps of ``dt`` from time ``t0``.

    Returns (status, step, node): status OK, or NONFINITE / RUNAWAY with the step and
    node where it was found (checked every ``check_every`` steps and at the end).
    """
    stim_on = True
    sub_h, cp_h, inv_h = half
    sub_f, cp_f, inv_f = full
    for k in range(nsteps):
        t = t0 + k * dt
        if splitting == STRANG:
            if merge and k > 0:
                diffuse(v, lo, up, dt, theta, sub_f, cp_f, inv_f, work)
            else:
                diffuse(v, lo, up, 0.5 * dt, theta, sub_h, cp_h, inv_h, work)
        any_on = stimulus_current(t, dt, pulses, i_stim)
        if stim_on and not any_on:
            i_stim[:] = 0.0
        stim_on = any_on
        reaction(v, s, p, i_stim, dt, ion_scale, gating)
        if splitting == GODUNOV:
            diffuse(v, lo, up, dt, theta, sub_f, cp_f, inv_f, work)
        elif not merge or k == nsteps - 1:
            diffuse(v, lo, up, 0.5 * dt, theta, sub_h, cp_h, inv_h, work)
        probe(v, vprev, t, dt, threshold, act, nact, pre_rate, open_up, upstroke)
        if (k + 1) % check_every == 0 or k == nsteps - 1:
            for i in range(v.shape[0]):
                vi = v[i]
                if not np.isfinite(vi):
                    return NONFINITE, k, i
                if abs(vi) > RUNAWAY_MV:
                    return RUNAWAY, k, i
    return OK, nsteps, -1
