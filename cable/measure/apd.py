"""Action-potential duration, tracked sample by sample so that fields need not be kept.

For the k-th activation of node i (the k-th upward crossing of the activation
threshold, timed exactly in the kernel), the tracker records the resting potential
(the lowest sample since the previous repolarisation), the peak, and for each level L
the first downward crossing of V_peak - L/100 (V_peak - V_rest) after the peak,
interpolated linearly between samples. APD_L = crossing time - activation time
(common practice: APD measured from the activation crossing; the sampling interval
limits its precision to a fraction of ``output.every``).
"""

import numpy as np

from cable.kernels.jit import jit


@jit
def track(v, t, vprev, tprev, act, nact, seen, phase, vmin, rest, peak, repol, levels):
    """Update the tracker with the sample v at time t (previous sample vprev at tprev)."""
    n = v.shape[0]
    cap = act.shape[1]
    nlev = levels.shape[0]
    for i in range(n):
        vi = v[i]
        if nact[i] > seen[i]:
            k = min(nact[i], cap) - 1
            seen[i] = nact[i]
            if k >= 0:
                rest[i, k] = vmin[i]
                peak[i, k] = max(vi, vprev[i])
                phase[i] = 1
        if phase[i] == 1:
            k = min(seen[i], cap) - 1
            if vi > peak[i, k]:
                peak[i, k] = vi
            amp = peak[i, k] - rest[i, k]
            done = True
            for j in range(nlev):
                if np.isnan(repol[i, k, j]):
                    level = peak[i, k] - levels[j] / 100.0 * amp
                    if vi < level and vprev[i] >= level:
                        repol[i, k, j] = tprev + (t - tprev) * (vprev[i] - level) / (vprev[i] - vi)
                    else:
                        done = False
            if done:
                phase[i] = 0
                vmin[i] = vi
        else:
            if vi < vmin[i]:
                vmin[i] = vi


class ApdTracker:
    """Holds the tracker arrays of a strand; call :meth:`update` with each sample."""

    def __init__(self, v0, act, levels):
        n, cap = act.shape
        self.levels = np.asarray(levels, dtype=np.float64)
        self.seen = np.zeros(n, dtype=np.int64)
        self.phase = np.zeros(n, dtype=np.int64)
        self.vmin = np.array(v0, dtype=np.float64)
        self.rest = np.full((n, cap), np.nan)
        self.peak = np.full((n, cap), np.nan)
        self.repol = np.full((n, cap, self.levels.size), np.nan)
        self.vprev = np.array(v0, dtype=np.float64)
        self.tprev = 0.0

    def update(self, v, t, act, nact):
        track(v, t, self.vprev, self.tprev, act, nact, self.seen, self.phase, self.vmin,
              self.rest, self.peak, self.repol, self.levels)
        self.vprev[:] = v
        self.tprev = t
