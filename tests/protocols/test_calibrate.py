"""cable calibrate: the value of a key at which a measurement hits a target, on the case's grid."""

import math

import numpy as np
import pytest

import cable
from cable.protocols.calibrate import UnreachableError, calibrate, parse_target
from tests.conftest import hh_axon_case

#: the issue's check: the found value, rerun, gives the target within 0.1%
RERUN_RTOL = 1e-3
TARGET = 15.0  # m/s, below the HH axon's 18.8 (Hodgkin & Huxley 1952)


def hh_tissue(dx, length=2.0):
    """The HH axon written in the tissue form: sigma = 1/R_i, chi = 2/a (same D, cable theory)."""
    case = hh_axon_case(length=length, dx=dx, dt=0.005, duration=3.0)
    case["fiber"] = {"length": length, "dx": dx, "conductivity": 1000 / 35.4, "surface_to_volume": 2 / 0.0238}
    return case


def _cv(case, sigma):
    return float(cable.simulate(cable.load_case(case, [f"fiber.conductivity={sigma!r}"])).conduction_velocity[0])


def test_found_conductivity_rerun_gives_the_target_and_grids_differ_as_the_grid_error_predicts():
    fine, coarse = hh_tissue(0.0125), hh_tissue(0.1)
    f = calibrate(fine, "fiber.conductivity", "conduction_velocity", TARGET)
    c = calibrate(coarse, "fiber.conductivity", "conduction_velocity", TARGET)
    sf, sc = float(f.value), float(c.value)
    assert abs(float(f.residual)) < RERUN_RTOL * TARGET
    assert _cv(fine, sf) == pytest.approx(TARGET, rel=RERUN_RTOL)
    assert _cv(coarse, sc) == pytest.approx(TARGET, rel=RERUN_RTOL)
    assert f.sizes["run"] == f.attrs["runs"] and f.attrs["runs"] <= 10
    # Prediction. On a grid, CV(sigma, dx) = sqrt(sigma) F(dx / sqrt(sigma)) (the monodomain
    # scales x by sqrt(D); common practice), so at the fine value the coarse grid's relative CV
    # error e predicts sigma_c / sigma_f = (target / CV_c(sigma_f))^2. What it leaves out is the
    # change of F over the shift, of order 2 e times the shift: allow twice that.
    cv_c = _cv(coarse, sf)
    e = abs(1 - cv_c / TARGET)
    predicted = (TARGET / cv_c) ** 2 - 1
    shift = sc / sf - 1
    assert predicted > 0.01  # the coarse grid's error is not negligible here (about 3%)
    assert abs(shift - predicted) <= 4 * e * abs(predicted)


def test_apd_target_and_bracket_given():
    # APD90 of the HH axon (0.6-0.9 ms here) falls as g_K rises: a target between two scales
    case = hh_tissue(0.05, length=1.0)
    case["run"]["duration"] = 8.0
    ds = calibrate(case, "membrane.scale.g_K", "apd", 0.75, level=90, between=(0.8, 3.0))
    assert float(ds.residual) == pytest.approx(0.0, abs=RERUN_RTOL * 0.75)
    assert ds.attrs["measure"] == "APD90" and ds.value.attrs["units"] == "1"


def test_out_of_reach_is_refused_with_the_range_reached():
    with pytest.raises(UnreachableError, match=r"out of reach .* the runs reached 1\d\.\d+ to 2\d\.\d+ m/s") as exc:
        calibrate(hh_tissue(0.05, length=1.0), "fiber.conductivity", "conduction_velocity", 100.0,
                  between=(20.0, 40.0))
    assert exc.value.runs.sizes["run"] == 2
    assert math.isnan(float(exc.value.runs.value))


@pytest.mark.parametrize("text, message", [
    ("cv=0.6", "not a measure"), ("conduction_velocity", "expected MEASURE=VALUE"),
    ("apd=200", "not a measure"), ("conduction_velocity=-1", "positive"), ("wavelength=abc", "must be a number"),
])
def test_bad_targets(text, message):
    with pytest.raises(cable.CaseError, match=message):
        parse_target(text)


def test_parse_target_levels():
    assert parse_target("apd90=250") == ("apd", 250.0, 90.0)
    assert parse_target("conduction_velocity=0.6") == ("conduction_velocity", 0.6, None)


def test_cli_last_line_is_key_value_unit_and_exit_2_out_of_reach(tmp_path, capsys):
    from cable.case import dumps_toml
    from cable.cli import main

    path = tmp_path / "c.toml"
    path.write_text(dumps_toml(hh_tissue(0.05, length=1.0)))
    assert main(["calibrate", str(path), "--vary", "fiber.conductivity", "--target", "conduction_velocity=15",
                 "-q", "--figure", str(tmp_path / "cal.png"), "-o", str(tmp_path / "cal.nc")]) == 0
    last = capsys.readouterr().out.strip().splitlines()[-1]
    key, value = last.split(" = ")
    assert key == "fiber.conductivity" and value.endswith(" mS/cm")
    assert (tmp_path / "cal.png").stat().st_size > 0
    with cable.open_result(tmp_path / "cal.nc") as ds:
        assert float(ds.value) == pytest.approx(float(value.split()[0]), rel=1e-7)
        assert np.all(np.isfinite(ds.run_measure.values))
    assert main(["calibrate", str(path), "--vary", "fiber.conductivity", "--target", "conduction_velocity=100",
                 "--between", "20", "40", "-q"]) == 2
    assert "out of reach" in capsys.readouterr().err


def test_key_acting_the_other_way_is_bracketed():
    # CV falls as the membrane capacitance rises (D = sigma / (chi C_m) and a slower upstroke;
    # cable theory): the guessed exponent (+1) first steps the wrong way, then the search turns
    case = hh_tissue(0.05, length=1.0)
    ds = calibrate(case, "fiber.capacitance", "conduction_velocity", 15.0)
    assert float(ds.value) > 1.0 and abs(float(ds.residual)) < RERUN_RTOL * TARGET


def test_single_cell_apd_target():
    case = {"membrane": {"model": "hodgkin-huxley-1952", "temperature": 18.5},
            "stimulus": [{"amplitude": 50.0, "duration": 0.5}], "numerics": {"dt": 0.005},
            "run": {"duration": 8.0}, "output": {"every": 0.01}}
    # a single HH cell's APD90 is 0.5-0.73 ms for g_K x 3 to x 0.8 here
    ds = calibrate(case, "membrane.scale.g_K", "apd", 0.6, level=90, between=(0.8, 3.0))
    assert abs(float(ds.residual)) < RERUN_RTOL * 0.6


def test_wavelength_target_rerun_gives_it():
    # the wavelength CV x APD90 (as simulate stores it, wavelength_apd) grows as sqrt(sigma)
    case = hh_tissue(0.05, length=1.0)
    case["run"]["duration"] = 6.0
    target = 1.1  # cm, below the axon's own (about 1.3 cm at this grid, measured here)
    ds = calibrate(case, "fiber.conductivity", "wavelength", target)
    rerun = cable.simulate(cable.load_case(case, [f"fiber.conductivity={float(ds.value)!r}"]))
    assert float(rerun.wavelength_apd[0]) == pytest.approx(target, rel=RERUN_RTOL)
    assert ds.attrs["measure_units"] == "cm"


def test_erp_target_rerun_gives_it_within_the_search_resolution():
    # The ERP of the HH axon lengthens as it cools (the rates' Q10 of 3, Hodgkin & Huxley 1952):
    # 1.79 ms at 18.5 degC, 2.60 at 14 degC on this strand (measured here).
    from cable.protocols.calibrate import ERP_RESOLUTION

    case = hh_axon_case(length=2.0, dx=0.05, dt=0.005, duration=10.0)
    target = 2.2  # ms
    ds = calibrate(case, "membrane.temperature", "erp", target, between=(14.0, 18.5))
    found = float(ds.value)
    assert 14.0 < found < 18.5 and ds.attrs["measure_units"] == "ms"
    erp = float(cable.refractory_period(cable.load_case(case, [f"membrane.temperature={found!r}"]),
                                        tolerance=ERP_RESOLUTION * target).erp)
    # Bound: each ERP is resolved to ERP_RESOLUTION x target by its bisection; brentq's value
    # tolerance (rtol 1e-3 for an ERP target) adds at most |dERP/dT| x rtol x T (the slope
    # read from the bracket's two end runs).
    v, m = ds.run_value.values, ds.run_measure.values
    slope = abs((m[1] - m[0]) / (v[1] - v[0]))
    bound = 2 * ERP_RESOLUTION * target + slope * 1e-3 * found
    assert abs(erp - target) <= bound
    assert abs(float(ds.residual)) <= bound


def test_erp_is_a_target_name():
    assert parse_target("erp=250") == ("erp", 250.0, None)
