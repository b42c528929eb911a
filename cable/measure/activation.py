"""Beats, waves and block from the activation crossings recorded by the kernel.

A beat is the set of stimulus pulses sharing an onset time. Its wave is followed node
by node outward from the stimulated nodes that captured: the neighbour's activation
belonging to the wave is its first unused crossing no earlier than ``BACKWARD_TOLERANCE``
before, and no later than ``MAX_NODE_DELAY`` after, the node it came from. A beat that
captured but whose wave stopped before an end of the fibre is blocked; ``block_x`` is
the last activated position on the blocked side.

Block means the wave stopped, which the run must have gone on long enough to show: a
wave whose last activation was less than ``WAIT_FACTOR`` times its locally measured
node-to-node delay (the mean over its last ``LOCAL_NODES`` nodes, at least the last
delay) before the end of the run, and less than ``MAX_NODE_DELAY``, may still be
travelling. Such a beat is ``timed_out`` (not blocked; ``front_x`` is its last
activated position), as is a beat whose capture deadline lies after the end of the
run and whose stimulated nodes did not cross yet.

What ``captured`` means, exactly: some stimulated node crossed the activation threshold
between the onset and ``CAPTURE_LATENCY`` after the end of the pulse. That is what "the
stimulus excited the tissue" means for any stimulus near threshold, but not always: a
stimulus far above threshold (several times rheobase) can carry the stimulated nodes
over the threshold passively, without an action potential (an inexcitable membrane, or
tissue deep in its refractory period). The beat is then ``captured`` and ``blocked``
within the reach of the stimulus' electrotonic spread, instead of not captured; for
the HH axon with g_Na = 0 and 1000 uA/cm^2 for 0.2 ms, block_x = 0.16 cm. Telling the
two apart needs the sign of the ionic current at the stimulated nodes during the
upstroke (inward: regenerative), which the kernels do not record;
``cable.protocols.refractory`` checks it from stored states for its local refractory
period.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from cable.kernels.jit import jit

#: a neighbour may cross slightly before its upstream node (stimulated zone fires as a
#: block, collisions) [ms]
BACKWARD_TOLERANCE = 2.0
#: the longest node-to-node delay still counted as the same wave [ms]; very slow
#: conduction (0.3 cm/s at dx 100 um: 33 ms per node) would need more
MAX_NODE_DELAY = 50.0
#: time after the end of the pulse within which a stimulated node must cross [ms]
CAPTURE_LATENCY = 20.0
#: a wave is taken to have stopped when the run went on for this many times its local
#: node-to-node delay after its last activation (common practice: a margin for the
#: slowing of decremental conduction near block, which lengthens the last delays)
WAIT_FACTOR = 5.0
#: nodes over which the local delay is measured
LOCAL_NODES = 5


@dataclass
class Beats:
    onset: np.ndarray          # (nbeat,) [ms]
    index: np.ndarray          # (nbeat, n) crossing index k used, -1 if none
    activation: np.ndarray     # (nbeat, n) [ms], NaN if not reached
    captured: np.ndarray       # (nbeat,) bool
    blocked: np.ndarray        # (nbeat,) bool
    block_x: np.ndarray        # (nbeat,) [cm], NaN unless blocked
    block_side: np.ndarray     # (nbeat,) int: +1 wave stopped going right, -1 left, 0 none
    timed_out: np.ndarray = None   # (nbeat,) bool: the run ended before the wave could be seen to stop
    front_x: np.ndarray = None     # (nbeat,) [cm], last activated position of a timed-out wave, else NaN


def beat_onsets(pulses: np.ndarray) -> tuple[np.ndarray, list[np.ndarray], np.ndarray]:
    """Unique onset times, the seed nodes of each, and the capture deadline of each."""
    if pulses.shape[0] == 0:
        return np.zeros(0), [], np.zeros(0)
    onsets = np.unique(np.round(pulses[:, 0], 9))
    seeds, deadline = [], []
    for t in onsets:
        sel = np.abs(pulses[:, 0] - t) < 1e-9
        nodes = np.unique(np.concatenate([np.arange(int(a), int(b)) for a, b in pulses[sel][:, 2:4]]))
        seeds.append(nodes)
        deadline.append(pulses[sel, 1].max() + CAPTURE_LATENCY)
    deadline = np.array(deadline)
    deadline[:-1] = np.minimum(deadline[:-1], onsets[1:])
    return onsets, seeds, deadline


def stopped(activation: np.ndarray, last: int, step: int, t_end: float | None) -> bool:
    """Whether the wave whose last activated node is ``last`` (coming from the side
    ``-step``) was seen to stop before ``t_end`` [ms] (None: the run's end is unknown, so yes)."""
    if t_end is None:
        return True
    t_last = activation[last]
    waited = t_end - t_last
    if waited >= MAX_NODE_DELAY:
        return True
    times = []
    for m in range(LOCAL_NODES + 1):      # the wave's own nodes behind the last one
        i = last - step * m
        if not (0 <= i < activation.size and np.isfinite(activation[i])):
            break
        times.append(activation[i])
    if len(times) < 2:       # the wave did not travel: the stimulated zone's own spread
        return waited >= CAPTURE_LATENCY
    delay = max((times[0] - times[-1]) / (len(times) - 1), times[0] - times[1], 0.0)
    return waited >= WAIT_FACTOR * delay


def assign_beats(act: np.ndarray, nact: np.ndarray, x: np.ndarray, pulses: np.ndarray,
                 t_end: float | None = None) -> Beats:
    """Follow each beat's wave through the crossings ``act[i, :nact[i]]``.

    ``t_end`` [ms]: the end of the computed run; a wave still possibly travelling then
    is ``timed_out`` rather than blocked (see the module's notes). None: no such check.
    """
    n, cap = act.shape
    onsets, seeds, deadline = beat_onsets(pulses)
    nb = onsets.size
    used = np.zeros((n, cap), dtype=bool)
    count = np.minimum(nact, cap)
    index = np.full((nb, n), -1, dtype=np.int64)
    activation = np.full((nb, n), np.nan)
    captured = np.zeros(nb, dtype=bool)
    blocked = np.zeros(nb, dtype=bool)
    block_x = np.full(nb, np.nan)
    side = np.zeros(nb, dtype=np.int64)
    timed_out = np.zeros(nb, dtype=bool)
    front_x = np.full(nb, np.nan)

    def take(i, lo, hi):
        for k in range(count[i]):
            if not used[i, k] and lo <= act[i, k] < hi:
                used[i, k] = True
                return k
        return -1

    for b in range(nb):
        t0 = onsets[b]
        for i in seeds[b]:
            k = take(i, t0 - 1e-9, deadline[b])
            if k >= 0:
                index[b, i] = k
                activation[b, i] = act[i, k]
        hit = np.flatnonzero(index[b] >= 0)
        if hit.size == 0:
            timed_out[b] = t_end is not None and t_end < deadline[b]
            continue
        captured[b] = True
        # outward to the right from the rightmost captured node, then to the left
        right = _walk(act, count, used, index[b], activation[b], int(hit.max()), 1)
        left = _walk(act, count, used, index[b], activation[b], int(hit.min()), -1)
        ends = [(right, 1)] if right < n - 1 else []
        ends += [(left, -1)] if left > 0 else []
        running = [(i, way) for i, way in ends if not stopped(activation[b], i, way, t_end)]
        if running:
            timed_out[b], front_x[b] = True, x[running[0][0]]
        elif ends:
            blocked[b], block_x[b], side[b] = True, x[ends[0][0]], ends[0][1]
    return Beats(onsets, index, activation, captured, blocked, block_x, side, timed_out, front_x)


@jit
def _walk(act, count, used, index, activation, start, way):
    """Follow one beat's wave from node ``start`` in direction ``way`` (+1 or -1): each
    next node takes its first unused crossing within [t - BACKWARD_TOLERANCE,
    t + MAX_NODE_DELAY) of its neighbour's time t (nodes already assigned are passed).
    Fills ``index`` and ``activation`` (this beat's rows); returns the last node reached."""
    n = act.shape[0]
    i = start
    while 0 <= i + way < n:
        j = i + way
        if index[j] < 0:
            t = activation[i]
            lo, hi = t - BACKWARD_TOLERANCE, t + MAX_NODE_DELAY
            k = -1
            for m in range(count[j]):
                if not used[j, m] and lo <= act[j, m] < hi:
                    used[j, m] = True
                    k = m
                    break
            if k < 0:
                break
            index[j] = k
            activation[j] = act[j, k]
        i = j
    return i


def per_beat(values: np.ndarray, index: np.ndarray) -> np.ndarray:
    """Pick ``values[i, k]`` (per node and crossing) for each beat: shape (nbeat, n, ...)."""
    nb, n = index.shape
    out = np.full((nb, n) + values.shape[2:], np.nan)
    for b in range(nb):
        ok = index[b] >= 0
        out[b, ok] = values[np.flatnonzero(ok), index[b, ok]]
    return out
