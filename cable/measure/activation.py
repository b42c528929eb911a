"""Beats, waves and block from the activation crossings recorded by the kernel.

A beat is the set of stimulus pulses sharing an onset time. Its wave is followed node
by node outward from the stimulated nodes that captured: the neighbour's activation
belonging to the wave is its first unused crossing no earlier than ``BACKWARD_TOLERANCE``
before, and no later than ``MAX_NODE_DELAY`` after, the node it came from. A beat that
captured but whose wave stopped before an end of the fibre is blocked; ``block_x`` is
the last activated position on the blocked side.

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

#: a neighbour may cross slightly before its upstream node (stimulated zone fires as a
#: block, collisions) [ms]
BACKWARD_TOLERANCE = 2.0
#: the longest node-to-node delay still counted as the same wave [ms]; very slow
#: conduction (0.3 cm/s at dx 100 um: 33 ms per node) would need more
MAX_NODE_DELAY = 50.0
#: time after the end of the pulse within which a stimulated node must cross [ms]
CAPTURE_LATENCY = 20.0


@dataclass
class Beats:
    onset: np.ndarray          # (nbeat,) [ms]
    index: np.ndarray          # (nbeat, n) crossing index k used, -1 if none
    activation: np.ndarray     # (nbeat, n) [ms], NaN if not reached
    captured: np.ndarray       # (nbeat,) bool
    blocked: np.ndarray        # (nbeat,) bool
    block_x: np.ndarray        # (nbeat,) [cm], NaN unless blocked
    block_side: np.ndarray     # (nbeat,) int: +1 wave stopped going right, -1 left, 0 none


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


def assign_beats(act: np.ndarray, nact: np.ndarray, x: np.ndarray, pulses: np.ndarray) -> Beats:
    """Follow each beat's wave through the crossings ``act[i, :nact[i]]``."""
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
            continue
        captured[b] = True
        # outward to the right from the rightmost captured node, then to the left
        right = hit.max()
        i = right
        while i + 1 < n:
            if index[b, i + 1] >= 0:
                i += 1
                continue
            t = activation[b, i]
            k = take(i + 1, t - BACKWARD_TOLERANCE, t + MAX_NODE_DELAY)
            if k < 0:
                break
            index[b, i + 1] = k
            activation[b, i + 1] = act[i + 1, k]
            i += 1
        right = i
        i = hit.min()
        while i - 1 >= 0:
            if index[b, i - 1] >= 0:
                i -= 1
                continue
            t = activation[b, i]
            k = take(i - 1, t - BACKWARD_TOLERANCE, t + MAX_NODE_DELAY)
            if k < 0:
                break
            index[b, i - 1] = k
            activation[b, i - 1] = act[i - 1, k]
            i -= 1
        left = i
        if right < n - 1:
            blocked[b], block_x[b], side[b] = True, x[right], 1
        elif left > 0:
            blocked[b], block_x[b], side[b] = True, x[left], -1
    return Beats(onsets, index, activation, captured, blocked, block_x, side)


def per_beat(values: np.ndarray, index: np.ndarray) -> np.ndarray:
    """Pick ``values[i, k]`` (per node and crossing) for each beat: shape (nbeat, n, ...)."""
    nb, n = index.shape
    out = np.full((nb, n) + values.shape[2:], np.nan)
    for b in range(nb):
        ok = index[b] >= 0
        out[b, ok] = values[np.flatnonzero(ok), index[b, ok]]
    return out
