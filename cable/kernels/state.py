"""The arrays and codes a time loop runs on, set up once for ``cable.simulate`` and
``cable.kernels.batch`` alike (so both size, store and pass them the same way).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from cable.kernels import diffusion, integrate, tables
from cable.kernels.loop import Grid, Probes, Step, Stimulus, no_window
from cable.measure.apd import ApdProbe, no_probe

#: how often the loop checks for NaN / runaway potential [steps]: often enough that a
#: potential blown up by a huge stimulus cannot recover unseen between checks (the
#: check is one vectorised pass over the nodes, ~1/20 of a step's work at most)
CHECK_EVERY = 20
#: most threshold crossings stored per node
MAX_CROSSINGS = 4096


def crossing_cap(n_pulses: int) -> int:
    """Threshold crossings stored per node (more are counted, not stored): two per pulse, bounded."""
    return max(16, min(2 * n_pulses + 8, MAX_CROSSINGS))


def scheme_codes(num) -> tuple[int, float, int]:
    """(gating, theta, splitting): the kernel's codes for a case's ``numerics`` section."""
    gating = 0 if num.gating == "rush-larsen" else 1
    splitting = integrate.STRANG if num.splitting == "strang" else integrate.GODUNOV
    return gating, diffusion.THETA[num.diffusion], splitting


@dataclass
class LoopArrays:
    """States, parameters and probes of one time loop (node arrays, updated in place)."""

    by_state: bool       #: states stored (nstate, n) and parameters by parameter (fast path)
    s: np.ndarray
    p: np.ndarray
    act: np.ndarray      #: activation crossings [ms], (n, cap)
    nact: np.ndarray     #: crossings counted per node
    upstroke: np.ndarray  #: maximal dV/dt of each upstroke [mV/ms], (n, cap)
    vprev: np.ndarray
    pre_rate: np.ndarray
    open_up: np.ndarray
    apd: ApdProbe        #: rest, peak and repolarisation crossings per beat
    i_stim: np.ndarray
    work: np.ndarray

    def probes(self, threshold: float) -> Probes:
        """The probes of the time loop, with the activation ``threshold`` [mV]."""
        return Probes(float(threshold), self.vprev, self.act, self.nact, self.pre_rate, self.open_up, self.upstroke,
                      self.apd.args())

    def stimulus(self, pulses: np.ndarray) -> Stimulus:
        """The stimulus schedule of the time loop (``pulses`` as ``preparation.stimulus_pulses`` makes them)."""
        return Stimulus(pulses, self.i_stim)

    def grid(self, lo, up, theta: float, half, full, layout=1) -> Grid:
        """The grid of the time loop: couplings, theta, the factors of D(dt/2) and D(dt), layout."""
        return Grid(lo, up, float(theta), tuple(half), tuple(full), self.work, layout)

    def state(self, j: int) -> np.ndarray:
        """State ``j`` at every node."""
        return self.s[j] if self.by_state else self.s[:, j]


def step_of(dt: float, splitting: int, merge: bool, gating: int, ion_scale: float,
            check_every: int = CHECK_EVERY) -> Step:
    """The step of the time loop (codes from :func:`scheme_codes`)."""
    return Step(float(dt), int(splitting), bool(merge), int(gating), float(ion_scale), int(check_every), no_window())


def godunov_steps(lo, up, dt: float, gating: int, ion_scale: float) -> tuple[Grid, Step]:
    """(Grid, Step) of a run that wants only the states reached (settling, pre-pacing a cell):
    Godunov splitting, Crank-Nicolson, the check every 200 steps; ``lo``, ``up`` the couplings
    (zero for one cell, where the diffusion changes nothing)."""
    fac = diffusion.factor(lo, up, dt, 0.5)
    return (Grid(lo, up, 0.5, fac, fac, np.zeros(lo.shape[0]), 1),
            Step(float(dt), integrate.GODUNOV, False, int(gating), float(ion_scale), 200, no_window()))


def unprobed(v: np.ndarray) -> Probes:
    """Probes that record nothing (threshold out of reach, no repolarisation levels), for
    runs that want only the states (settling, the rest of a cell)."""
    n = v.shape[0]
    return Probes(1e9, v.copy(), np.full((n, 1), np.nan), np.zeros(n, dtype=np.int64), np.zeros(n),
                  np.zeros(n, dtype=np.int64), np.full((n, 1), np.nan), no_probe(n, 1))


def loop_arrays(model, fast: bool, v: np.ndarray, s0: np.ndarray, p: np.ndarray, n_pulses: int,
                levels=(90.0,)) -> LoopArrays:
    """The loop's arrays for initial potential ``v`` (n,), states ``s0`` (n, nstate) and
    parameters ``p`` ((n, nparam) or (1, nparam)); ``fast``: the fast reaction path;
    ``levels``: the repolarisation levels [%] probed."""
    n = v.shape[0]
    by_state = bool(fast and model.fast.by_state)
    if by_state:  # stored by state and by parameter (see cable.kernels.loop)
        s = np.array(s0.T, order="C")   # a copy: the transpose of one state is a view of s0
        p = tables.by_parameter(p)
    else:
        s = np.ascontiguousarray(s0.copy())
        p = np.ascontiguousarray(np.broadcast_to(p, (n, p.shape[1])))
    cap = crossing_cap(n_pulses)
    return LoopArrays(by_state=by_state, s=s, p=p, act=np.full((n, cap), np.nan), nact=np.zeros(n, dtype=np.int64),
                      upstroke=np.full((n, cap), np.nan), vprev=v.copy(), pre_rate=np.zeros(n),
                      open_up=np.zeros(n, dtype=np.int64), apd=ApdProbe(v, cap, levels), i_stim=np.zeros(n),
                      work=np.zeros(n))
