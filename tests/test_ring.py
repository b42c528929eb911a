"""Reentry on a ring (fiber.closed): one-way start, revolution period and CV, termination."""

import numpy as np
import pytest

import cable
from tests.conftest import hh_axon_case

#: the issue's check: on a ring much longer than the wavelength the period is L / CV of a
#: straight strand within 1% (the wave meets fully recovered tissue; common practice)
PERIOD_RTOL = 0.01
DX, DT = 0.05, 0.005


def ring(length, duration, **fiber):
    case = hh_axon_case(length=length, dx=DX, dt=DT, duration=duration)
    case["fiber"].update(closed=True, initial="one-way", **fiber)
    return case


@pytest.fixture(scope="module")
def strand():
    return cable.simulate(hh_axon_case(length=6.0, dx=DX, dt=DT, duration=8.0))


def test_long_ring_period_is_circumference_over_strand_cv(strand):
    length = 20.0  # about 10 wavelengths of the HH axon (CV x APD90 = 1.9 cm/ms x 0.9 ms)
    ds = cable.simulate(ring(length, 36.0))
    cv_strand = float(strand.conduction_velocity[0])  # m/s
    period = ds.revolution_period.values[1:]
    assert period.size >= 2 and int(ds.reentry_sustained) == 1
    np.testing.assert_allclose(period, length / (cv_strand / 10.0), rtol=PERIOD_RTOL)
    np.testing.assert_allclose(ds.revolution_cv.values[1:], cv_strand, rtol=PERIOD_RTOL)
    # the excitable gap is the period less the APD90 of the previous pass
    gap = ds.excitable_gap.values[1:]
    np.testing.assert_allclose(gap, period - ds.ring_apd.values[:-1], rtol=1e-12)
    assert np.all(gap > 0)


def test_ring_shorter_than_the_wavelength_does_not_sustain_reentry(strand):
    # Mines (1913), J Physiol 46:349: reentry needs a path longer than the wavelength
    wavelength = float(strand.wavelength_apd[0])  # cm, CV x APD90
    short = cable.simulate(ring(round(0.8 * wavelength / DX) * DX, 20.0))
    assert int(short.reentry_sustained) == 0
    assert np.isfinite(float(short.reentry_end)) and float(short.reentry_end) < 20.0
    long = cable.simulate(ring(round(4 * wavelength / DX) * DX, 30.0))
    assert int(long.reentry_sustained) == 1 and long.sizes["revolution"] >= 3


def test_stimulus_at_rest_sends_two_waves_that_annihilate():
    case = ring(6.0, 10.0)
    case["fiber"]["initial"] = "rest"
    ds = cable.simulate(case)
    assert int(ds.reentry_sustained) == 0 and ds.sizes["revolution"] == 1


def test_ring_result_streams_to_file_and_summary(tmp_path):
    from cable.cli.summary import summarise

    ds = cable.simulate(ring(8.0, 15.0), output=tmp_path / "ring.nc")
    assert ds.attrs["ring_circumference_cm"] == 8.0 and ds.x.size == 160
    text = summarise(ds)
    assert "ring: circumference 8 cm" in text and "reentry sustained" in text


@pytest.mark.parametrize("change, message", [
    ({"closed": False}, "fiber.initial = 'one-way' needs fiber.closed = true"),
    ({"cell_length": 0.1, "gap_junction_conductance": 500.0}, "ring of discrete cells"),
    ({"dx": 0.5, "length": 1.0}, "at least 3 nodes"),
])
def test_invalid_rings(change, message):
    case = ring(6.0, 10.0)
    case["fiber"].update(change)
    with pytest.raises(cable.CaseError, match=message):
        cable.load_case(case)


def test_one_way_needs_a_stimulus_and_no_safety_factor():
    case = ring(6.0, 10.0)
    del case["stimulus"]
    with pytest.raises(cable.CaseError, match="needs a \\[stimulus\\.S1\\]"):
        cable.load_case(case)
    case = ring(6.0, 10.0, )
    case["measure"] = {"safety_factor": True}
    with pytest.raises(cable.CaseError, match="not computed on a ring"):
        cable.prepare(case)


@pytest.mark.slow
def test_critical_ring_length_lies_between_wavelength_and_cv_times_erp(strand):
    # Mines (1913) and later ring studies: reentry needs a path longer than the wavelength
    # (CV x APD90), and it fails where the period L / CV falls below the refractory period
    # (the bounds; CV and ERP of a straight strand after one beat).
    crit_tol, erp_tol = 0.05, 0.05  # cm, ms: the bisections' final brackets
    ds = cable.find_critical(ring(4.0, 30.0), "fiber.length", 1.0, 8.0, tolerance=crit_tol)
    critical = ds.attrs["critical_value"]
    erp = float(cable.refractory_period(hh_axon_case(length=2.0, dx=DX, dt=DT, duration=10.0), s1_count=1,
                                        tolerance=erp_tol).erp)
    cv = float(strand.conduction_velocity[0]) / 10.0  # cm/ms
    wavelength = float(strand.wavelength_apd[0])
    assert wavelength < critical <= cv * (erp + erp_tol) + crit_tol
