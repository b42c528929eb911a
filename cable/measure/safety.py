"""Safety factor of conduction (Shaw & Rudy 1997, Circ Res 81:727), tracked sample by sample.

Definition used
---------------
For a control volume W of the fibre (a cell of a discrete-cell fibre; otherwise the nodes
within ``safety_factor_length / 2`` of the node, default 100 um, the myocyte length of
Shaw & Rudy's fibre)::

    SF = (Q_c + Q_out) / Q_in,    each Q = integral over A of its current,

* I_c: the capacitive current of W (C_m dV/dt summed over its nodes);
* I_in: the axial current entering W through its upstream end, signed (positive into W);
* I_out: the axial current leaving W through its downstream end, signed (positive out of
  W, towards the next cell);
* A: the whole interval in which the net charge W has received, Q_m = integral of
  (I_in - I_out) = integral of (I_c + I_ion), is positive: it opens when the net axial
  current turns inward and closes when Q_m returns to zero (not earlier: with poor
  coupling the potential has kinks while Q_m is still large).

Upstream is the end through which W received more charge over A (for a wave crossing W,
the end facing it; :func:`safety_factors`).

Charge conservation gives I_in = I_c + I_out + I_ion, so SF = 1 - Q_ion / Q_in: SF > 1
when W's membrane produced net inward charge, SF < 1 when it consumed what it received.

Which currents: REFERENCES.md recalls the formula from memory with "inward" and
"outward" currents. Read as *ionic* currents the ratio is identically 1: Q_c + Q_out +
Q_in = Q_m, and Q_m = 0 at both ends of A. The published properties (about 1.5 in
normal tissue, falling with reduced excitability, *rising* with reduced coupling, below
1 at block) follow with I_in and I_out the *axial* currents into and out of the cell, as
in Shaw & Rudy's multicellular fibre, which is what is used here. The tests check the
charge balance against the model's ``currents`` kernel, that the ionic reading gives 1,
and the published properties.

The value is a property of the control volume, as in Shaw & Rudy's cell-based
definition: SF - 1 is roughly the ratio of W's own capacitive charge to the charge that
flows through it, so it tends to 1 as W shrinks to one node of a continuous cable.
Measured with LR1: 1.50 for Shaw & Rudy's fibre (100 um cells, a = 11 um, R_i 150
ohm*cm, R_g 1.5 ohm*cm^2; independent of dx from 100 to 10 um to 0.5 %), 1.62 for a
continuous cable of R_i 300 ohm*cm over 100 um windows. Compare values computed with
the same control volume.

Rules at the edges of the definition (ours):

* An interval still open at the next stimulus onset (or the end of the run) closes
  there: a node that did not activate, or a block site that never gives the charge back,
  so the charge its membrane lost is counted: SF < 1 for a node that did not activate. Intervals whose Q_in would
  depolarise W by less than ``MIN_DEPOLARISATION`` are dropped (noise at rest); such a
  node gets NaN.
* Nodes whose control volume holds a stimulated node get NaN (the stimulus is a third
  source).
* Near a sealed end the downstream load vanishes and SF rises: read SF away from ends.

Sampling: the currents are integrated over the stored samples (``output.every``), the
capacitive charge exactly (sum of dV), the axial ones by the trapezoidal rule. The
upstroke must span many samples: ``FINE_EVERY`` ms or less (measured in
tests/measure/test_safety.py); :func:`sampling_note` warns otherwise.
"""

from __future__ import annotations

import numpy as np

from cable.kernels.jit import jit
from cable.measure import Inputs, Measurement

#: intervals whose axial inflow would depolarise the control volume by less than this are
#: noise (at rest) and dropped [mV]
MIN_DEPOLARISATION = 0.5
#: default control-volume length without discrete cells: the 100 um myocyte of Shaw &
#: Rudy 1997 (from memory) [cm]
DEFAULT_LENGTH = 0.01
#: output.every up to this keeps the safety factor within ~1 % (measured: HH axon at
#: 18.5 degC, 1 mm control volume: 1 % at 0.02 ms, 1.5 % at 0.05 ms against 0.005 ms;
#: LR1 cells: under 0.1 % even at 0.1 ms; tests/measure/test_safety.py checks 0.02 ms) [ms]
FINE_EVERY = 0.02


@jit
def _prefix(v, volume, out):
    acc = 0.0
    out[0] = 0.0
    for i in range(v.shape[0]):
        acc += volume[i] * v[i]
        out[i + 1] = acc


@jit
def _flows(v, edge, a, b):
    # signed axial currents into the window [a, b] through its left and right ends (in mV/ms
    # times node volume; positive: into W); a sealed fibre end carries none
    n = v.shape[0]
    left = 0.0
    right = 0.0
    if a > 0:
        left = edge[a - 1] * (v[a - 1] - v[a])
    if b < n - 1:
        right = edge[b] * (v[b + 1] - v[b])
    return left, right


@jit
def _close(i, t, state, acc, t0, kopen, qmin, rec, rec_k, nrec, activated):
    # store the interval of node i if it counts; return 1 if it had to be dropped (full)
    state[i] = 0
    if activated or max(acc[i, 2], acc[i, 3]) >= qmin[i]:
        k = nrec[i]
        if k < rec.shape[1]:
            rec[i, k, 0] = t0[i]
            rec[i, k, 1] = t
            rec[i, k, 2] = acc[i, 1]
            rec[i, k, 3] = acc[i, 2]
            rec[i, k, 4] = acc[i, 3]
            rec_k[i, k] = kopen[i] if activated else -1
            nrec[i] = k + 1
            return 0
        return 1
    return 0


@jit
def track(v, vprev, t, tprev, nact, nact_prev, edge, volume, wlo, whi, force, state, acc, t0, kopen,
          qmin, rec, rec_k, nrec, pre, pre_prev):
    """Advance the safety-factor intervals of every node by one sample (see module doc).

    ``acc[i]`` holds Q_m, Q_c and the signed axial charges through the left and right ends
    of node i's open interval; ``force`` closes every open interval first (a stimulus
    onset passed). Returns the number of intervals dropped for want of room.
    """
    n = v.shape[0]
    h = t - tprev
    dropped = 0
    _prefix(v, volume, pre)
    _prefix(vprev, volume, pre_prev)
    for i in range(n):
        if force and state[i] == 1:
            dropped += _close(i, tprev, state, acc, t0, kopen, qmin, rec, rec_k, nrec, nact_prev[i] > kopen[i])
        a = wlo[i]
        b = whi[i]
        l1, r1 = _flows(v, edge, a, b)
        l0, r0 = _flows(vprev, edge, a, b)
        ql = 0.5 * (l0 + l1) * h
        qr = 0.5 * (r0 + r1) * h
        dqm = ql + qr
        if state[i] == 0:
            if dqm <= 0.0:
                continue
            state[i] = 1
            t0[i] = tprev
            kopen[i] = nact_prev[i]
            for j in range(4):
                acc[i, j] = 0.0
        acc[i, 0] += dqm
        acc[i, 1] += (pre[b + 1] - pre[a]) - (pre_prev[b + 1] - pre_prev[a])
        acc[i, 2] += ql
        acc[i, 3] += qr
        if acc[i, 0] <= 0.0:
            dropped += _close(i, t, state, acc, t0, kopen, qmin, rec, rec_k, nrec, nact[i] > kopen[i])
    return dropped


def safety_factors(q_c, q_left, q_right):
    """SF = (Q_c + Q_out) / Q_in from the signed end charges of intervals (arrays alike).

    The upstream end is the one through which W received more charge over A (for a wave
    travelling through W, the end facing the wave); Q_in is the signed charge entering
    there and Q_out the signed charge leaving through the other end (Shaw & Rudy 1997).
    """
    q_in = np.maximum(q_left, q_right)
    q_out = -np.minimum(q_left, q_right)
    with np.errstate(divide="ignore", invalid="ignore"):
        return (q_c + q_out) / q_in


def control_volumes(grid, length: float) -> tuple[np.ndarray, np.ndarray]:
    """First and last node (inclusive) of each node's control volume.

    The node's cell for discrete cells; otherwise the nodes within ``length / 2`` [cm].
    """
    n = grid.n
    if grid.cell is not None:
        cell = grid.cell
        first = np.searchsorted(cell, cell, side="left")
        last = np.searchsorted(cell, cell, side="right") - 1
        return first.astype(np.int64), last.astype(np.int64)
    dx = float(grid.x[1] - grid.x[0]) if n > 1 else 1.0
    half = int(np.floor(0.5 * length / dx + 1e-9))
    idx = np.arange(n)
    return np.maximum(idx - half, 0).astype(np.int64), np.minimum(idx + half, n - 1).astype(np.int64)


def sampling_note(every: float) -> str | None:
    """A warning when ``output.every`` [ms] is too coarse for the safety factor."""
    if every > FINE_EVERY:
        return (f"measure.safety_factor integrates the currents over the stored samples: output.every = "
                f"{every:g} ms is coarse for an upstroke (use {FINE_EVERY:g} ms or less); the safety factor "
                f"will be inaccurate.")
    return None


class SafetyTracker:
    """Safety-factor intervals of a strand; call :meth:`update` with each sample.

    Parameters
    ----------
    grid : cable.fiber.Grid
    v0 : ndarray
        Initial potential [mV].
    onsets : ndarray
        Stimulus onset times [ms] (open intervals without activation close there).
    stimulated : ndarray of bool
        Nodes any stimulus is applied to.
    length : float
        Control-volume length without discrete cells [cm].
    capacity : int
        Intervals stored per node.
    """

    def __init__(self, grid, v0, onsets, stimulated, length=DEFAULT_LENGTH, capacity=32):
        n = grid.n
        self.grid = grid
        self.wlo, self.whi = control_volumes(grid, length)
        vol = np.asarray(grid.volume, dtype=np.float64)
        prefix = np.concatenate([[0.0], np.cumsum(vol)])
        window_volume = prefix[self.whi + 1] - prefix[self.wlo]
        self.qmin = MIN_DEPOLARISATION * window_volume
        cum = np.concatenate([[0], np.cumsum(np.asarray(stimulated, dtype=np.int64))])
        self.excluded = (cum[self.whi + 1] - cum[self.wlo]) > 0
        self.edge = np.ascontiguousarray(grid.edge, dtype=np.float64)
        self.volume = np.ascontiguousarray(vol)
        self.onsets = np.sort(np.asarray(onsets, dtype=np.float64))
        self.next_onset = 0
        self.state = np.zeros(n, dtype=np.int64)
        self.acc = np.zeros((n, 4))
        self.t0 = np.zeros(n)
        self.kopen = np.zeros(n, dtype=np.int64)
        self.rec = np.full((n, capacity, 5), np.nan)
        self.rec_k = np.full((n, capacity), -1, dtype=np.int64)
        self.nrec = np.zeros(n, dtype=np.int64)
        self.vprev = np.array(v0, dtype=np.float64)
        self.nact_prev = np.zeros(n, dtype=np.int64)
        self.tprev = 0.0
        self.dropped = 0
        self._pre = np.zeros(n + 1)
        self._pre_prev = np.zeros(n + 1)

    def update(self, v, t, nact):
        """Take the sample ``v`` [mV] at time ``t`` [ms]; ``nact`` the crossing counts."""
        force = False
        while self.next_onset < self.onsets.size and self.onsets[self.next_onset] <= t:
            if self.onsets[self.next_onset] > self.tprev:
                force = True
            self.next_onset += 1
        self.dropped += track(v, self.vprev, t, self.tprev, nact, self.nact_prev, self.edge, self.volume,
                              self.wlo, self.whi, force, self.state, self.acc, self.t0, self.kopen, self.qmin,
                              self.rec, self.rec_k, self.nrec, self._pre, self._pre_prev)
        self.vprev[:] = v
        self.nact_prev[:] = nact
        self.tprev = t

    def finish(self):
        """Close the intervals still open at the end of the run."""
        for i in np.flatnonzero(self.state == 1):
            activated = bool(self.nact_prev[i] > self.kopen[i])
            self.dropped += _close(i, self.tprev, self.state, self.acc, self.t0, self.kopen, self.qmin,
                                   self.rec, self.rec_k, self.nrec, activated)

    def per_beat(self, beats) -> np.ndarray:
        """Safety factor (nbeat, n) for the beats of :func:`cable.measure.activation.assign_beats`.

        An activated node takes the interval holding the crossing its beat used; a node
        the beat's wave did not reach takes its largest interval (by Q_in) that opened
        between the beat's onset and the next; NaN otherwise.
        """
        self.finish()
        nb, n = beats.index.shape
        out = np.full((nb, n), np.nan)
        ends = np.append(beats.onset[1:], np.inf)
        rec, rec_k, nrec = self.rec, self.rec_k, self.nrec
        sf = safety_factors(rec[:, :, 2], rec[:, :, 3], rec[:, :, 4])
        valid = np.arange(rec.shape[1])[None, :] < nrec[:, None]
        for b in range(nb):
            k = beats.index[b]
            hit = valid & (rec_k == k[:, None]) & (k[:, None] >= 0)
            got = hit.any(axis=1)
            first = np.argmax(hit, axis=1)
            out[b, got] = sf[got, first[got]]
            if beats.captured[b]:
                free = valid & (rec_k < 0) & (rec[:, :, 0] >= beats.onset[b] - 1e-9) & (rec[:, :, 0] < ends[b])
                missing = (k < 0) & free.any(axis=1)
                qin = np.where(free, np.fmax(rec[:, :, 3], rec[:, :, 4]), -np.inf)
                best = np.argmax(qin, axis=1)
                out[b, missing] = sf[missing, best[missing]]
        out[:, self.excluded] = np.nan
        return out


def tracker_for(case, grid, v0, pulses, notes: list) -> SafetyTracker:
    """The tracker of a run whose case asks for it (``[measure] safety_factor = true``).

    Parameters
    ----------
    case : Case
    grid : cable.fiber.Grid
    v0 : ndarray
        Initial potential [mV].
    pulses : ndarray
        The run's pulse table (onset, end, first node, last node + 1, amplitude).
    notes : list of str
        Receives the warning of :func:`sampling_note`.
    """
    given = case.safety_factor_length  # converted to cm by the loader
    length = given if given is not None else (case.fiber.cell_length or DEFAULT_LENGTH)
    if length >= case.fiber.length:
        from cable.case import CaseError

        what = f"measure.safety_factor_length = {given:g}" if given is not None else \
            f"the control volume (fiber.cell_length = {length:g} cm, the default)"
        raise CaseError(f"{what}: the control volume ({length:g} cm) must be shorter than the fibre "
                        f"({case.fiber.length:g} cm); give measure.safety_factor_length, e.g. 0.01 cm (one cell).")
    stimulated = np.zeros(grid.n, dtype=bool)
    for row in pulses:
        stimulated[int(row[2]):int(row[3])] = True
    note = sampling_note(case.output_every)
    if note:
        notes.append(note)
    if grid.cell is None and grid.n > 1 and length < 2.0 * float(grid.x[1] - grid.x[0]) - 1e-12:
        # one node alone: SF - 1 is about W's own capacitive charge over the charge through it
        notes.append(f"measure.safety_factor: the control volume ({length:g} cm) holds one node at fiber.dx = "
                     f"{float(grid.x[1] - grid.x[0]):g} cm, where the safety factor tends to 1 whatever the "
                     f"tissue; refine dx to {0.5 * length:g} cm or less, or lengthen "
                     f"measure.safety_factor_length.")
    return SafetyTracker(grid, v0, pulses[:, 0], stimulated, length, capacity=max(32, 4 * pulses.shape[0] + 8))


def _safety(inputs: Inputs) -> dict:
    return {"safety_factor": (("beat", "x"), inputs.setup.safety.per_beat(inputs.beats))}


def _asked(inputs: Inputs) -> bool:
    return inputs.setup.x is not None and inputs.setup.safety is not None


MEASUREMENT = Measurement("safety factor", ("safety_factor",), _safety, _asked, order=40)
