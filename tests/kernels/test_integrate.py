"""The stimulus of one step (cable/kernels/integrate.py: stimulus_current)."""

import numpy as np

from cable.kernels import integrate


def _every_pulse(t, dt, pulses, n):
    # the definition: the mean over [t, t + dt] of every pulse's current, pulse by pulse
    out = np.zeros(n)
    for on, off, i0, i1, amp in pulses:
        overlap = min(off, t + dt) - max(on, t)
        if overlap > 0.0:
            out[int(i0):int(i1)] += amp * overlap / dt
    return out


def test_cursor_gives_every_pulse_exactly_and_skips_the_ended(rng):
    # a train of pulses of mixed durations and sites, overlapping, sorted by onset (as
    # simulate and batch give them); steps that start and end inside and between pulses
    n, dt = 12, 0.03
    onsets = np.sort(rng.uniform(0.0, 20.0, 40))
    pulses = np.column_stack([onsets, onsets + rng.uniform(0.01, 3.0, 40), rng.integers(0, 6, 40),
                              rng.integers(6, 12, 40), rng.uniform(-5.0, 50.0, 40)])
    i_stim = np.zeros(n)
    first = 0
    for k in range(800):
        t = k * dt
        on, first = integrate.stimulus_current(t, dt, pulses, i_stim, first)
        want = _every_pulse(t, dt, pulses, n)
        assert on == bool(np.any([min(off, t + dt) - max(a, t) > 0.0 for a, off in pulses[:, :2]]))
        if on:
            np.testing.assert_array_equal(i_stim, want)   # same sums in the same order: bit for bit
        assert np.all(pulses[:first, 1] <= t)   # the cursor passes only pulses that have ended
    assert first == 40   # all ended by t = 24 ms
