"""Conduction block per beat: which way the wave passed, and the pattern over a train.

From the beats of :func:`cable.measure.activation.assign_beats` (each beat's wave
followed node by node outward from the stimulated nodes that captured):

* ``reached_left`` / ``reached_right``: the beat's wave reached the left (x = 0) or right
  (x = L) end of the fibre. A stimulus placed inside or beside an injured region shows
  unidirectional block as one of them false: the direction that passes is the one
  whose end was reached.
* ``block_side``: +1 the wave stopped while travelling right (toward x = L), -1 while
  travelling left, 2 both ways, 0 no block (or no capture, or a wave still travelling
  when the run ended: ``timed_out``).
* ``conducted``: the stimulus captured and the wave reached both ends.

:func:`conduction_pattern` turns the ``conducted`` flags of a pacing train into the
usual ratio of stimuli to conducted beats: "1:1", "2:1", "3:2" ... (the smallest period
the sequence repeats with, after a leading transient of at most half the train).
"""

from __future__ import annotations

import numpy as np

from cable.measure import Inputs, Measurement, on_a_strand

#: codes of block_side
NONE, RIGHT, LEFT, BOTH = 0, 1, -1, 2
#: codes of outcome (cable.io.schema.CODES)
NOT_CAPTURED, CONDUCTED, BLOCKED, TIMED_OUT, OTHER = 0, 1, 2, 3, 4
#: a propagated upstroke slower than this [V/s] (median over the CV window) is a slow
#: response: calcium-current-driven responses rise at about 1-10 V/s, sodium-driven ones
#: at 100-1000 V/s (Cranefield 1975, The Conduction of the Cardiac Impulse: the slow
#: response and cardiac arrhythmias, Futura; values from memory)
SLOW_RESPONSE_V_PER_S = 10.0


def directions(beats) -> dict[str, np.ndarray]:
    """Per-beat direction flags (bool arrays) and ``block_side`` (int) of ``beats``."""
    index = beats.index
    n = index.shape[1]
    captured = np.asarray(beats.captured, dtype=bool)
    right = captured & (index[:, n - 1] >= 0)
    left = captured & (index[:, 0] >= 0)
    side = np.full(index.shape[0], NONE, dtype=np.int8)
    side[captured & left & ~right] = RIGHT
    side[captured & right & ~left] = LEFT
    side[captured & ~left & ~right] = BOTH
    if getattr(beats, "timed_out", None) is not None:
        side[np.asarray(beats.timed_out, dtype=bool)] = NONE    # not seen to stop: no block
    return {"reached_left": left, "reached_right": right, "block_side": side,
            "conducted": captured & left & right}


def outcome(beats) -> np.ndarray:
    """Per-beat outcome code: NOT_CAPTURED, CONDUCTED, BLOCKED, TIMED_OUT (else OTHER)."""
    d = directions(beats)
    out = np.full(len(beats.onset), OTHER, dtype=np.int8)
    out[~np.asarray(beats.captured, dtype=bool)] = NOT_CAPTURED
    out[np.asarray(beats.blocked, dtype=bool)] = BLOCKED
    out[d["conducted"]] = CONDUCTED
    if beats.timed_out is not None:
        out[np.asarray(beats.timed_out, dtype=bool)] = TIMED_OUT
    return out


def slow_response(upstroke, x, window, conducted) -> np.ndarray:
    """Per beat: the wave conducted with a median upstroke velocity over the window's
    nodes below ``SLOW_RESPONSE_V_PER_S`` (``upstroke`` (nbeat, n) [V/s])."""
    from cable.measure.velocity import window_nodes

    nodes = window_nodes(x, window)
    out = np.zeros(upstroke.shape[0], dtype=bool)
    for b in range(upstroke.shape[0]):
        rates = upstroke[b, nodes]
        if conducted[b] and np.all(np.isfinite(rates)):
            out[b] = float(np.median(rates)) < SLOW_RESPONSE_V_PER_S
    return out


def outputs(beats) -> dict:
    """The block outputs of a strand as ``{name: (dims, array)}``."""
    d = directions(beats)
    out = {
        "conducted": (("beat",), d["conducted"].astype(np.int8)),
        "reached_left": (("beat",), d["reached_left"].astype(np.int8)),
        "reached_right": (("beat",), d["reached_right"].astype(np.int8)),
        "block_side": (("beat",), d["block_side"]),
        "outcome": (("beat",), outcome(beats)),
    }
    if beats.timed_out is not None:
        out["timed_out"] = (("beat",), np.asarray(beats.timed_out).astype(np.int8))
        out["front_x"] = (("beat",), np.asarray(beats.front_x, dtype=np.float64))
    return out


def conduction_pattern(conducted) -> str:
    """The conduction ratio of a train: "1:1", "2:1", "3:2", "no conduction", or "irregular ...".

    Parameters
    ----------
    conducted : array of bool, or an xarray.Dataset with a ``conducted`` variable
        One flag per beat, in order.

    Returns
    -------
    str
        "N:M" (N stimuli per M conducted beats) for the smallest period N the flags
        repeat with; a leading transient of at most half the beats is allowed and named
        ("2:1 from beat 1"). "irregular (k of n conducted)" when no period fits.
    """
    if hasattr(conducted, "data_vars"):
        conducted = conducted["conducted"].values
    c = np.asarray(conducted, dtype=bool)
    total = c.size
    if total == 0:
        return "no beats"
    if not c.any():
        return "no conduction"
    for skip in range(0, total // 2 + 1):
        rest = c[skip:]
        m = rest.size
        for period in range(1, max(1, m // 2) + 1):
            if np.array_equal(rest[period:], rest[:-period]):
                passed = int(rest[:period].sum())
                text = "no conduction" if passed == 0 else ("1:1" if passed == period else f"{period}:{passed}")
                return text if skip == 0 else f"{text} from beat {skip}"
    return f"irregular ({int(c.sum())} of {total} conducted)"


def _block(inputs: Inputs) -> dict:
    out = outputs(inputs.beats)
    ups = inputs.out["upstroke_velocity"][1]
    setup = inputs.setup
    out["slow_response"] = (("beat",), slow_response(ups, setup.x, setup.cv_window,
                                                     out["conducted"][1] == 1).astype(np.int8))
    return out


OUTPUTS = ("conducted", "reached_left", "reached_right", "block_side", "outcome", "timed_out", "front_x",
           "slow_response")
MEASUREMENT = Measurement("block and conduction", OUTPUTS, _block, on_a_strand, order=30)
