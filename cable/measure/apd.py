"""Action-potential duration, peak and rest, tracked by the kernel's probes step by step.

For the k-th activation of node i (the k-th upward crossing of the activation
threshold) the probe (:func:`cable.kernels.integrate.probe_nodes`, and the block-wise
pass of :mod:`cable.kernels.fused`) records

* the resting potential: the lowest potential since the previous beat repolarised
  (past its last level), i.e. the minimum before this upstroke;
* the peak: the highest potential since the activation (while the beat repolarises);
* for each level L, the first downward crossing of V_peak - L/100 (V_peak - V_rest)
  after the activation, interpolated linearly within the step.

APD_L = crossing time - activation time (common practice: APD measured from the
activation crossing). All of it is probed every time step, at the point of the
splitting where the activation times are probed, so that it does not depend on
``output.every`` (within rounding of the interpolation: within a step).
"""

from __future__ import annotations

import numpy as np


class ApdProbe:
    """The per-node arrays of the repolarisation probe of a strand.

    Parameters
    ----------
    v0 : ndarray (n,)
        Initial potential [mV].
    cap : int
        Crossings stored per node (the activation probe's).
    levels : sequence of float
        Repolarisation levels [%], in the order of the result's ``level`` axis.
    """

    def __init__(self, v0, cap: int, levels):
        n = np.asarray(v0).shape[0]
        self.levels = np.asarray(levels, dtype=np.float64)
        order = np.argsort(self.levels, kind="stable")    # highest potential first
        self.fracs = np.ascontiguousarray(self.levels[order] / 100.0)
        self.slot = np.ascontiguousarray(order.astype(np.int64))
        self.dlast = np.zeros(n)               # the last step's change of the potential (upstroke rate)
        self.vmin = np.array(v0, dtype=np.float64)
        self.vpeak = np.array(v0, dtype=np.float64)
        self.lin = np.zeros(n)                 # next level = lin * peak + off (-inf: none pending)
        self.off = np.full(n, -np.inf)
        self.vrest = np.array(v0, dtype=np.float64)
        self.pending = np.full(n, self.levels.size, dtype=np.int64)
        self.rest = np.full((n, cap), np.nan)
        self.peak = np.full((n, cap), np.nan)
        self.repol = np.full((n, cap, self.levels.size), np.nan)

    def args(self) -> tuple:
        """The tuple the time loop takes (its ``apd`` argument)."""
        return (self.dlast, self.fracs, self.slot, self.vmin, self.vpeak, self.lin, self.off, self.vrest, self.pending,
                self.rest, self.peak, self.repol)

    def finish(self, nact) -> None:
        """Store the peak of the beats still repolarising (their running peak)."""
        cap = self.peak.shape[1]
        nodes = np.flatnonzero((self.pending < self.levels.size) & (nact > 0) & (nact <= cap))
        self.peak[nodes, nact[nodes] - 1] = self.vpeak[nodes]


def no_probe(n: int, cap: int) -> tuple:
    """An ``apd`` argument that tracks no level (for loops whose APD nobody reads)."""
    return ApdProbe(np.zeros(n), cap, ()).args()
