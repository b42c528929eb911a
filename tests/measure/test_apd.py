"""APD, peak and rest come from the kernel's probes: they do not depend on the output
interval (``output.every``)."""

import numpy as np
import pytest

import cable

#: output intervals of issue 13, item 2 [ms]
EVERY = (0.01, 0.1, 1.0, 5.0, 20.0)
#: APD90 within 0.1 ms and peak within 0.5 mV across them (the issue's tolerances: a
#: fraction of the time step's effect; the probe is the same every step, so what is left
#: is rounding)
APD_TOL = 0.1
PEAK_TOL = 0.5


def _lr1(every):
    # a Luo & Rudy (1991) strand of 0.4 cm (tissue settings of tests/test_cardiac_strand.py)
    case = {
        "membrane": {"model": "luo-rudy-1991"},
        "fiber": {"length": 0.4, "dx": 0.02, "conductivity": 1000.0 / 162.0, "surface_to_volume": 2000.0,
                  "capacitance": 2.0},
        "stimulus": [{"amplitude": 200.0, "duration": 1.0, "width": 0.06}],
        "numerics": {"dt": 0.01},
        "run": {"duration": 440.0},
        "output": {"every": every},
        "measure": {"apd_levels": [50, 90]},
    }
    return cable.simulate(case)


@pytest.mark.slow
def test_apd_peak_and_rest_do_not_depend_on_output_interval():
    results = {every: _lr1(every) for every in EVERY}
    ref = results[EVERY[0]]
    apd90 = ref.apd.sel(level=90.0).isel(beat=0).values
    assert np.all((apd90 > 250.0) & (apd90 < 450.0))        # LR1 at 1 Hz-like rest: ~350 ms (Luo & Rudy 1991)
    for every, ds in results.items():
        for level in (50.0, 90.0):
            np.testing.assert_allclose(ds.apd.sel(level=level).isel(beat=0).values,
                                       ref.apd.sel(level=level).isel(beat=0).values, atol=APD_TOL,
                                       err_msg=f"APD{level:g} at output.every {every} ms")
        np.testing.assert_allclose(ds.peak_potential.isel(beat=0).values, ref.peak_potential.isel(beat=0).values,
                                   atol=PEAK_TOL, err_msg=f"peak at output.every {every} ms")
        np.testing.assert_allclose(ds.resting_potential.isel(beat=0).values,
                                   ref.resting_potential.isel(beat=0).values, atol=PEAK_TOL)


def test_peak_is_the_highest_potential_of_the_stored_trace():
    # with every step stored, the probed peak is the trace's maximum (probed after the
    # reaction, stored after the closing half step: within 0.5 mV) and the rest its value
    # before the upstroke
    ds = _lr1(0.01)
    node = ds.sizes["x"] // 2
    vm = ds.vm.isel(x=node).values
    assert float(ds.peak_potential[0, node]) == pytest.approx(vm.max(), abs=PEAK_TOL)
    assert float(ds.resting_potential[0, node]) == pytest.approx(vm[: np.argmax(vm)].min(), abs=PEAK_TOL)
