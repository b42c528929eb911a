"""S1-S2 refractory periods on short ventricular strands at 1 Hz."""

import numpy as np
import pytest
import xarray as xr
from protocol_cases import cable_cli, cardiac_strand, hh_axon, write_case

import cable

#: search tolerance [ms]
TOL = 1.0
#: ERP within this fraction of APD90 counts as "close" (common practice, from memory: in
#: healthy ventricle at ~1 Hz refractoriness ends within about a tenth of the APD of full
#: repolarisation)
HEALTHY_FRACTION = 0.10
#: how much ERP - APD90 must grow when excitability is reduced [ms]: the search tolerance
#: twice (two ERPs) plus one output interval (APD90 is interpolated between 1 ms samples)
RESOLUTION = 2 * TOL + 1.0


@pytest.fixture(scope="module")
def ms_healthy():
    return cable.refractory_period(cardiac_strand("mitchell-schaeffer-2003"), tolerance=TOL)


@pytest.fixture(scope="module")
def ms_depressed():
    # g_in scales the inward current, the model's stand-in for a sodium-conductance scale
    return cable.refractory_period(cardiac_strand("mitchell-schaeffer-2003", scale={"g_in": 0.5}), tolerance=TOL)


def test_erp_close_to_apd90_in_healthy_strand(ms_healthy):
    # Common practice: post-repolarisation refractoriness is small in healthy tissue, ERP ~ APD90.
    erp, apd = float(ms_healthy["erp"]), float(ms_healthy["apd90_s1"])
    assert abs(erp - apd) < HEALTHY_FRACTION * apd, (erp, apd)


def test_reduced_excitability_adds_post_repolarisation_refractoriness(ms_healthy, ms_depressed):
    # Common practice (post-repolarisation refractoriness): with less inward current the
    # tissue stays inexcitable after it has repolarised, so ERP - APD90 grows.
    grow = float(ms_depressed["erp_minus_apd90"]) - float(ms_healthy["erp_minus_apd90"])
    assert grow > RESOLUTION, grow
    assert float(ms_depressed["erp_minus_apd90"]) > HEALTHY_FRACTION * float(ms_depressed["apd90_s1"])


@pytest.mark.parametrize("which", ["healthy", "depressed"])
def test_search_brackets_are_consistent(which, ms_healthy, ms_depressed):
    # Definition: the ERP is the shortest interval found to propagate, with a non-propagating
    # trial within the tolerance below it; local capture comes no later than propagation.
    ds = {"healthy": ms_healthy, "depressed": ms_depressed}[which]
    ci = ds["coupling_interval"].values
    prop = ds["s2_propagated"].values.astype(bool)
    cap = ds["s2_captured"].values.astype(bool)
    erp, local = float(ds["erp"]), float(ds["local_refractory_period"])
    assert erp == ci[prop].min()
    assert erp - ci[~prop & (ci < erp)].max() <= TOL
    assert local <= erp and local == ci[cap].min()
    assert np.all(prop[ci > erp]) and np.all(cap[prop])
    assert float(ds["vulnerable_window"]) == pytest.approx(erp - local)


def test_stimulus_driven_crossing_is_not_a_local_capture(ms_healthy):
    # Definition used by the protocol: an S2 given early in the S1 repolarisation may push the
    # still-depolarised site over the activation level, but its net ionic current stays
    # outward; the local refractory period must not fall inside the S1 action potential's
    # plateau (here: before 80% of APD90, where the MS gate h is still closed).
    assert float(ms_healthy["local_refractory_period"]) > 0.8 * float(ms_healthy["apd90_s1"])


@pytest.mark.slow
def test_luo_rudy_erp_near_apd90_and_rises_with_reduced_sodium():
    # Same two checks on an ionic model (Luo & Rudy 1991, Circ Res 68:1501): healthy ERP close
    # to APD90 at 1 Hz (common practice), and G_Na x 0.3 adds post-repolarisation
    # refractoriness.
    tol = 2.0
    healthy = cable.refractory_period(cardiac_strand("luo-rudy-1991"), tolerance=tol)
    reduced = cable.refractory_period(cardiac_strand("luo-rudy-1991", scale={"G_Na": 0.3}), tolerance=tol)
    erp, apd = float(healthy["erp"]), float(healthy["apd90_s1"])
    assert abs(erp - apd) < HEALTHY_FRACTION * apd, (erp, apd)
    grow = float(reduced["erp_minus_apd90"]) - float(healthy["erp_minus_apd90"])
    assert grow > 2 * tol + 1.0, grow
    for ds in (healthy, reduced):
        _assert_capture_is_monotone(ds)


def _assert_capture_is_monotone(ds):
    # Definition (issue 13 item 7): refractoriness ends once; every trial shorter than the local
    # refractory period failed to capture and every longer one captured, and the search began
    # after the S1 upstroke (an S2 inside it would be read as part of the S1 beat)
    ci = ds["coupling_interval"].values
    cap = ds["s2_captured"].values.astype(bool)
    local = float(ds["local_refractory_period"])
    assert np.all(cap[ci >= local]) and not np.any(cap[ci < local]), list(zip(ci, cap))
    assert ci.min() >= ds.attrs["search_start_ms"] > 0.0


def test_hh_local_refractory_period_is_a_response_not_the_s1_tail():
    # Hodgkin & Huxley (1952) axon paced twice at 15 ms: an S2 0.67 ms after the last S1 falls on
    # the S1's own repolarisation (the site is still above -30 mV; its ionic drive is two orders
    # below an upstroke's) and must not count as a local response; the local refractory period
    # follows the S1 action potential (APD90 at the site), and capture is monotone in the interval.
    case = hh_axon(length=1.0, duration=10.0)
    case["stimulus"][0].update(count=2, cycle_length=15.0)
    case["output"]["every"] = 0.05
    ds = cable.refractory_period(case, tolerance=0.1)
    _assert_capture_is_monotone(ds)
    assert float(ds["local_refractory_period"]) > float(ds["apd90_s1"])
    assert 0.0 <= float(ds["vulnerable_window"]) < float(ds["erp"])


def test_result_writes_to_netcdf(ms_healthy, tmp_path):
    from cable.io.netcdf import write_dataset

    path = tmp_path / "erp.nc"
    write_dataset(ms_healthy, path)
    with xr.open_dataset(path) as back:
        assert float(back["erp"]) == pytest.approx(float(ms_healthy["erp"]))
        assert back["erp"].attrs["units"] == "ms"


def test_bad_options_raise_case_errors():
    case = cardiac_strand("mitchell-schaeffer-2003", count=1)
    del case["stimulus"][0]["cycle_length"]
    with pytest.raises(cable.CaseError, match="cycle_length"):
        cable.refractory_period(case, s1_count=3)
    with pytest.raises(cable.CaseError, match="s1_count"):
        cable.refractory_period(cardiac_strand("mitchell-schaeffer-2003"), s1_count=0)
    cell = cardiac_strand("mitchell-schaeffer-2003")
    del cell["fiber"]
    with pytest.raises(cable.CaseError, match="needs a \\[fiber\\]"):
        cable.refractory_period(cell)


def test_cli_erp(tmp_path):
    single = cardiac_strand("mitchell-schaeffer-2003", length=0.5, count=1, duration=400.0)
    del single["stimulus"][0]["cycle_length"]
    case = write_case(tmp_path, single)
    out = tmp_path / "erp.nc"
    res = cable_cli("erp", str(case), "--tolerance", "4", "-q", "-o", str(out))
    assert res.returncode == 0, res.stderr
    assert "ERP" in res.stdout and out.exists()
    bad = cable_cli("erp", str(case), "--s1-count", "2")
    assert bad.returncode == 2 and "cycle_length" in bad.stderr


def test_rounds_agree_with_one_interval_per_round_within_the_tolerance(ms_healthy):
    # the fixture searches with the default rounds (cable/protocols/_rounds.py); one interval
    # per round is the search as it was. Both brackets are at most TOL wide around the same
    # transitions, so the intervals found differ by at most TOL (definition of bracketing).
    plain = cable.refractory_period(cardiac_strand("mitchell-schaeffer-2003"), tolerance=TOL, points=1, workers=1)
    for name in ("erp", "local_refractory_period"):
        assert abs(float(plain[name]) - float(ms_healthy[name])) <= TOL, name
    assert float(plain["apd90_s1"]) == float(ms_healthy["apd90_s1"])
