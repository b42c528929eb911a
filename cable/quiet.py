"""When a run has nothing left to happen: ``run.stop_when_quiet``.

A run may end early, without changing any measurement of its beats, once

1. every stimulus pulse has ended and its capture deadline has passed
   (``CAPTURE_LATENCY`` of :mod:`cable.measure.activation` after the last pulse's end);
2. no beat would be read as ``timed_out`` at this time (rather than blocked or
   conducted): the caller's ``judge`` says so (``cable.simulate`` asks
   :func:`cable.measure.activation.assign_beats`), once; without a judge, or when it
   finds a beat timed out, the last threshold crossing of any node must lie at least
   ``MAX_NODE_DELAY`` back (the longest a wave may take from node to node: no wave can
   be read as travelling after it);
3. every node that was activated has repolarised past every APD level measured (the
   repolarisation probe has no level pending), so every APD, peak and rest is stored;
4. every node is within ``run.quiet_tolerance`` of its resting potential (the settled
   initial state of the run).

Then no stimulus is left, no wave is running, and the strand is at rest: what the
remaining time would add is diastole. The rest measured for each beat is the lowest
potential before its upstroke, so it is unchanged too. A model that oscillates by
itself, or a strand whose rest drifts beyond the tolerance after the beats (changed
ion concentrations), simply runs to ``run.duration``. Rings are not stopped (their
reentry is judged against the whole run), nor runs with ``measure.safety_factor``: its
charges are integrated over the beat's window to the end of the run, and the last
diastole still adds to them (at the 1e-4 level on the HH axon, measured here).

The check is made between output intervals, from the probes the kernel keeps anyway
(a few vectorised passes over the nodes, after the last pulse only), so the stop is at
the end of the first quiet output interval.
"""

from __future__ import annotations

import numpy as np

from cable.measure.activation import CAPTURE_LATENCY, MAX_NODE_DELAY


class QuietCheck:
    """The test of :mod:`cable.quiet` for one time loop (a strand, or a batch of strands).

    Parameters
    ----------
    pulses : ndarray (npulse, 5)
        The loop's pulse table (onset, end, first node, end node, amplitude).
    v_rest : ndarray (n,)
        The resting potential of each node [mV] (the loop's initial potential).
    tolerance : float
        How close to ``v_rest`` every node must be [mV].
    n_levels : int
        Repolarisation levels probed (the APD probe's).
    judge : callable, optional
        ``judge(t) -> bool``: no beat would be ``timed_out`` if the run ended at ``t``.
    """

    def __init__(self, pulses: np.ndarray, v_rest: np.ndarray, tolerance: float, n_levels: int, judge=None):
        last_end = float(np.max(pulses[:, 1])) if pulses.shape[0] else 0.0
        self.not_before = last_end + CAPTURE_LATENCY
        self.v_rest = np.array(v_rest, dtype=np.float64)
        self.tolerance = float(tolerance)
        self.n_levels = int(n_levels)
        self.judge = judge

    def __call__(self, t: float, v: np.ndarray, act: np.ndarray, nact: np.ndarray, pending: np.ndarray) -> bool:
        """Whether the loop is quiet at time ``t`` [ms] (see the module's conditions).

        ``act``, ``nact``: the activation probe (crossings per node and their count);
        ``pending``: the APD probe's next pending level per node (``n_levels``: none).
        """
        if t < self.not_before:
            return False
        if np.any(pending < self.n_levels):
            return False
        if np.max(np.abs(v - self.v_rest)) > self.tolerance:
            return False
        cap = act.shape[1]
        if np.any(nact > cap):  # crossings beyond the cap are counted, not stored: their times are unknown
            return False
        if self.judge is not None:
            judge, self.judge = self.judge, None   # asked once: then the rule below
            if judge(t):
                return True
        hit = np.flatnonzero(nact > 0)
        return not (hit.size and t < float(np.nanmax(act[hit, nact[hit] - 1])) + MAX_NODE_DELAY)


def wanted(case, default: bool = False) -> bool:
    """Whether a run of ``case`` stops when quiet: ``run.stop_when_quiet`` if given, else ``default``.

    Rings never do, nor runs that measure the safety factor (see the module's notes).
    """
    if case.fiber is not None and case.fiber.closed:
        return False
    if case.fiber is not None and case.safety_factor:
        return False
    given = getattr(case, "stop_when_quiet", None)
    return default if given is None else bool(given)


def quiet_by_default(case):
    """``case`` with ``run.stop_when_quiet = true`` unless the case gives it (the protocols' default)."""
    if getattr(case, "stop_when_quiet", None) is not None:
        return case
    return case.with_overrides({"run.stop_when_quiet": True})
