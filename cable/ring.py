"""Reentry on a ring (``[fiber] closed = true``): the one-way start and the measurements.

A ring couples its last node to its first (``cable.fiber``; the cyclic diffusion solve
is in ``cable.kernels.diffusion.factor_ring``). Two ways to set a wave circulating:

* ``initial = "one-way"``: an open strand of the ring's nodes (the closing edge cut) is
  stimulated by stimulus 0 (once, in its zone) and run until its wave reaches the far
  end (the last node crosses the activation threshold); that state, front at the last
  node and refractory tail behind it, starts the ring, so the wave can only go on past
  the closing edge into the first nodes. Stimulus 0 is not applied on the ring; the
  other stimuli are, their times counted from the start of the ring run.
* ``initial = "rest"`` with stimuli of one's own, e.g. an S2 next to the refractory
  tail of an S1 wave (unidirectional block).

Measurements at the reference node x = 0, one entry per pass of a wave (upward
threshold crossing): the revolution period (time since the previous pass), the mean
CV around the ring (circumference / period), APD90 at the node, the excitable gap
(period minus the APD90 of the previous pass: how long the node had recovered before
the wave came back), whether the wave still circulated at the end of the run, and
otherwise when it was last seen. Reentry needs a path longer than the wavelength
(Mines 1913, J Physiol 46:349): a ring shorter than CV x APD90 does not sustain it.
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np

from cable.case import CaseError

#: extra threshold crossings stored per node of a ring (one per revolution), beyond the stimuli's
RING_PASSES = 256
#: the wave counts as still circulating when some node was activated within this fraction of
#: the last period before the end of the run (a circulating front activates a node every dx/CV)
ALIVE_FRACTION = 0.1
#: the one-way start steps the open strand by this many steps between checks of the far end
CHECK_STEPS = 20


def ring_cases(case):
    """(ring case, strand case): the stimuli of the ring run, and the one pulse of the first stimulus."""
    first = replace(case.stimuli[0], count=1, onset=0.0)
    return replace(case, stimuli=case.stimuli[1:]), replace(case, stimuli=(first,))


def one_way_start(case, model, grid, p, v0, s0, threshold, ion_scale):
    """The state (v, s) of the open strand when stimulus 0's wave reaches its far end.

    Raises
    ------
    CaseError
        When the wave does not reach the far end within ``run.duration``.
    """
    from cable.kernels import diffusion, integrate
    from cable.kernels.state import loop_arrays, scheme_codes
    from cable.kernels import loops
    from cable.kernels.loop import no_rates
    from cable.kernels.state import step_of
    from cable.preparation import stimulus_pulses

    _, strand = ring_cases(case)
    num = case.numerics
    gating, theta, splitting = scheme_codes(num)
    lo, up = grid.lo.copy(), grid.up.copy()
    lo[0] = up[-1] = 0.0  # cut the closing edge: an open strand of the same nodes
    pulses = stimulus_pulses(strand, grid.x, [])
    dt = num.dt
    half, full = diffusion.factor(lo, up, 0.5 * dt, theta), diffusion.factor(lo, up, dt, theta)
    v = v0.copy()
    arrays = loop_arrays(model, False, v, s0, p, pulses.shape[0])
    advance = loops.loop(model.name)
    loop_grid = arrays.grid(lo, up, theta, half, full)
    step = step_of(dt, splitting, num.merge_half_steps, gating, ion_scale)
    stimulus, probes = arrays.stimulus(pulses), arrays.probes(threshold)
    t = 0.0
    n = v.size
    while t < case.duration:
        status, _, _ = advance(v, arrays.s, arrays.p, t, CHECK_STEPS, loop_grid, step, stimulus, probes, no_rates())
        t += CHECK_STEPS * dt
        if status != integrate.OK:
            raise CaseError("fiber.initial = \"one-way\": the open strand run that starts the ring failed "
                            "numerically; check the first stimulus and numerics.dt.")
        if arrays.nact[n - 1] > 0:
            return v, np.ascontiguousarray(arrays.s), t
    raise CaseError(f"fiber.initial = \"one-way\": the wave of the first stimulus did not reach the far end of the open "
                    f"strand within run.duration = {case.duration:g} ms (no capture, or block); raise the stimulus "
                    f"or lengthen the run.")


def outputs(length: float, act, nact, repol, levels, t_end: float) -> dict:
    """The reentry measurements at the reference node 0 as ``{name: (dims, array)}``.

    Parameters
    ----------
    length : float
        Circumference [cm].
    act, nact : ndarray
        Threshold crossings per node [ms] and their counts (the kernel's probes).
    repol : ndarray, shape (n, cap, nlevel)
        Repolarisation times of each crossing (``ApdTracker.repol``).
    levels : sequence of float
        The APD levels of ``repol`` (90 among them).
    t_end : float
        Time computed [ms].
    """
    cap = act.shape[1]
    k = int(min(nact[0], cap))
    passes = act[0, :k]
    period = np.full(k, np.nan)
    period[1:] = np.diff(passes)
    apd90 = repol[0, :k, list(levels).index(90.0)] - passes
    gap = np.full(k, np.nan)
    gap[1:] = period[1:] - apd90[:-1]
    counts = np.minimum(nact, cap)
    stored = [act[i, counts[i] - 1] for i in range(act.shape[0]) if counts[i] > 0]
    latest = float(np.nanmax(stored)) if stored else np.nan
    last_period = period[-1] if k >= 2 else np.nan
    alive = bool(k >= 2 and np.isfinite(last_period) and t_end - latest <= ALIVE_FRACTION * last_period)
    with np.errstate(divide="ignore", invalid="ignore"):
        cv = length / period * 10.0  # cm/ms -> m/s
    return {
        "revolution_time": (("revolution",), passes),
        "revolution_period": (("revolution",), period),
        "revolution_cv": (("revolution",), cv),
        "ring_apd": (("revolution",), apd90),
        "excitable_gap": (("revolution",), gap),
        "reentry_sustained": ((), np.int8(alive)),
        "reentry_end": ((), np.float64(np.nan if alive else latest)),
    }


def summary_lines(ds) -> list:
    """Lines on the reentry of a ring result (empty for an open fibre)."""
    if "revolution_period" not in ds:
        return []
    period = np.asarray(ds["revolution_period"].values, dtype=float)
    cv = np.asarray(ds["revolution_cv"].values, dtype=float)
    gap = np.asarray(ds["excitable_gap"].values, dtype=float)
    n = period.size
    lines = [f"ring: {n} pass(es) at x = 0"]
    if n >= 2:
        lines.append(f"revolution period {np.nanmean(period[1:]):.4g} ms (last {period[-1]:.4g}), CV around the ring "
                     f"{np.nanmean(cv[1:]):.4g} m/s, excitable gap {np.nanmean(gap[1:]):.4g} ms")
    if int(ds["reentry_sustained"].values):
        lines.append("reentry sustained to the end of the run")
    else:
        end = float(ds["reentry_end"].values)
        when = f"last activation on the ring at {end:.4g} ms" if np.isfinite(end) else "no activation"
        lines.append(f"no reentry: the wave died within its first revolution ({when})" if n < 2 else
                     f"reentry ended: {when}")
    return lines
