"""Batched strands (cable.kernels.batch.simulate_batch) give each case its own result.

The strands of a batch share one time loop but no coupling (sealed ends), so each
must evolve as it does alone: the same fields and measurements as ``cable.simulate``
to rounding (common practice for a reordering of the same arithmetic).
"""

import numpy as np
import pytest

import cable
from cable.kernels.batch import simulate_batch

#: batched against alone: the two-sided solve meets in the middle of the whole batch
#: instead of each strand, so the same sums are rounded in another order (~1e-16 per
#: step, grown over ~1e3 steps through the upstroke)
VM_ATOL = 1e-8          # [mV]
MEASURE_RTOL = 1e-9


def _hh(length=1.0, g_na=1.0, amplitude=600.0, **numerics):
    # the Hodgkin & Huxley (1952) axon: radius 238 um, 35.4 ohm*cm, 18.5 degC
    return {"membrane": {"model": "hodgkin-huxley-1952", "temperature": 18.5, "scale": {"g_Na": g_na}},
            "fiber": {"length": length, "dx": 0.01, "radius": "238 um", "axial_resistivity": "35.4 ohm*cm"},
            "stimulus": [{"amplitude": amplitude, "duration": 0.3, "width": 0.05}],
            "numerics": {"dt": 0.005, **numerics}, "run": {"duration": 5.0}, "output": {"every": 0.05}}


def _same(batched, alone):
    np.testing.assert_allclose(batched.vm, alone.vm, rtol=0.0, atol=VM_ATOL)
    for name in ("conduction_velocity", "activation_time", "apd", "upstroke_velocity"):
        np.testing.assert_allclose(batched[name], alone[name], rtol=MEASURE_RTOL, equal_nan=True)
    for name in ("captured", "blocked"):
        np.testing.assert_array_equal(batched[name], alone[name])


@pytest.mark.parametrize("rates", ["tabulated", "exact", "reference"])
def test_batch_equals_separate_runs(rates):
    # different conductances, lengths (grids) and stimuli in one batch
    cases = [_hh(1.0, 1.0, rates=rates), _hh(0.7, 0.8, rates=rates), _hh(1.2, 0.6, 900.0, rates=rates),
             _hh(1.0, 0.05, rates=rates)]            # the last one does not propagate
    batched = simulate_batch(cases)
    assert [ds.attrs["batch_size"] for ds in batched] == [4] * 4
    for case, ds in zip(cases, batched):
        _same(ds, cable.simulate(case))
    assert not bool(batched[3].captured[0]) or bool(batched[3].blocked[0])


def test_batch_groups_cases_by_time_loop():
    # a different dt cannot share the loop: two groups, results still per case and in order
    cases = [_hh(1.0, 1.0), _hh(1.0, 0.9, dt=0.0025), _hh(1.0, 0.8), _hh(1.0, 0.7, dt=0.0025)]
    batched = simulate_batch(cases)
    assert [ds.attrs["batch_size"] for ds in batched] == [2, 2, 2, 2]
    assert [ds.attrs["dt_ms"] for ds in batched] == [0.005, 0.0025, 0.005, 0.0025]
    for case, ds in zip(cases, batched):
        _same(ds, cable.simulate(case))


def test_single_cells_batch_too():
    cells = [{"membrane": {"model": "hodgkin-huxley-1952", "scale": {"g_K": f}},
              "stimulus": [{"amplitude": 20.0, "duration": 0.5}],
              "numerics": {"dt": 0.01}, "run": {"duration": 12.0}, "output": {"every": 0.1}} for f in (1.0, 0.8)]
    for case, ds in zip(cells, simulate_batch(cells)):
        alone = cable.simulate(case)
        np.testing.assert_allclose(ds.vm, alone.vm, rtol=0.0, atol=VM_ATOL)
        np.testing.assert_allclose(ds.apd, alone.apd, rtol=MEASURE_RTOL, equal_nan=True)


def test_a_failing_strand_fails_alone():
    # forward-Euler gates at dt = 20 us: stable for a normal stimulus, driven to NaN by a
    # hundredfold one; both share the loop, and the failure is the second case's own
    good = _hh(1.0, 1.0, 600.0, dt=0.02, gating="forward-euler")
    bad = _hh(1.0, 1.0, 60000.0, dt=0.02, gating="forward-euler")
    for case in (good, bad):
        case["output"]["every"] = 0.2
    out = simulate_batch([good, bad, good], errors="return")
    assert isinstance(out[1], cable.SimulationError)
    _same(out[0], cable.simulate(good))
    _same(out[2], cable.simulate(good))
    with pytest.raises(cable.SimulationError):
        simulate_batch([good, bad])
    with pytest.raises(ValueError, match="errors = 'ignore'"):
        simulate_batch([good], errors="ignore")
