"""APD and CV restitution on short ventricular strands (S1-S2 and dynamic pacing)."""

import numpy as np
import pytest
import xarray as xr
from protocol_cases import cable_cli, cardiac_strand, write_case

import cable
from cable.protocols.restitution import max_slope

#: APD90 is interpolated between 1 ms output samples: differences below this are noise [ms]
APD_RESOLUTION = 1.0


def assert_apd_shortens_with_di(ds):
    """APD90 against DI is non-decreasing (to the APD resolution) and clearly shorter at the shortest DI."""
    ok = ds["propagated"].values.astype(bool)
    di, apd = ds["diastolic_interval"].values[ok], ds["apd90"].values[ok]
    order = np.argsort(di)
    assert np.all(np.diff(apd[order]) > -APD_RESOLUTION), (di[order], apd[order])
    assert apd[order][0] < 0.9 * apd[order][-1], (di[order], apd[order])


@pytest.fixture(scope="module")
def ms_s1s2():
    return cable.restitution(cardiac_strand("mitchell-schaeffer-2003"), protocol="s1s2")


def test_mitchell_schaeffer_apd_shortens_with_di(ms_s1s2):
    # Common practice (APD restitution): a premature beat's APD90 is shorter the shorter its DI.
    assert_apd_shortens_with_di(ms_s1s2)


def test_mitchell_schaeffer_restitution_follows_its_map(ms_s1s2):
    # Derived from the model's equations (Mitchell & Schaeffer 2003, Bull Math Biol 65:767;
    # from memory): the gate h recovers during the DI as 1 - (1 - h_min) exp(-DI/tau_open) from
    # h_min = 4 tau_in / tau_out at the end of the previous beat, and the plateau lasts until
    # it has closed back to h_min with tau_close, so APD(DI) - APD(inf) = tau_close ln h(DI).
    # The map neglects the upstroke and the final repolarisation and measures DI at the gate
    # level rather than at APD90, hence MAP_TOLERANCE.
    map_tolerance = 0.25
    tau_in, tau_out, tau_open, tau_close = 0.3, 6.0, 120.0, 150.0
    h_min = 4 * tau_in / tau_out
    ok = ms_s1s2["propagated"].values.astype(bool)
    di, apd = ms_s1s2["diastolic_interval"].values[ok], ms_s1s2["apd90"].values[ok]
    longest = int(np.argmax(di))
    h = lambda d: 1.0 - (1.0 - h_min) * np.exp(-d / tau_open)  # noqa: E731
    predicted = tau_close * (np.log(h(di)) - np.log(h(di[longest])))
    measured = apd - apd[longest]
    big = np.abs(predicted) > 10 * APD_RESOLUTION  # shortening large enough to compare
    assert big.sum() >= 3
    np.testing.assert_allclose(measured[big], predicted[big], rtol=map_tolerance)


def test_mitchell_schaeffer_dynamic_protocol():
    # Common practice: pacing faster shortens APD90; the wavelength CV x APD90 shortens with it.
    ds = cable.restitution(cardiac_strand("mitchell-schaeffer-2003"), [1000, 600, 450, 350, 300],
                           protocol="dynamic", beats=4)
    assert ds["one_to_one"].values.all()
    assert_apd_shortens_with_di(ds)
    cl, wl = ds["interval"].values, ds["wavelength_apd"].values
    assert np.all(np.diff(wl[np.argsort(cl)]) > 0), (cl, wl)
    np.testing.assert_allclose(wl, ds["conduction_velocity"].values / 10 * ds["apd90"].values)


@pytest.mark.slow
@pytest.mark.parametrize("model", ["luo-rudy-1991", "ten-tusscher-panfilov-2006"])
def test_ionic_models_apd_shortens_with_di(model):
    # Common practice (APD restitution) on two ionic ventricular models: Luo & Rudy 1991 (Circ
    # Res 68:1501) and ten Tusscher & Panfilov 2006 (Am J Physiol 291:H1088).
    ds = cable.restitution(cardiac_strand(model), [1000, 600, 480, 420], protocol="s1s2")
    assert ds["propagated"].values.all()
    assert_apd_shortens_with_di(ds)


def test_max_slope_of_a_known_curve():
    # Closed form: APD = 300 - 200 exp(-DI/50) has slope 4 exp(-DI/50); between neighbours the
    # finite-difference slope is the chord, largest for the shortest pair of DIs.
    di = np.array([5.0, 10.0, 20.0, 40.0, 80.0, 160.0])
    apd = 300.0 - 200.0 * np.exp(-di / 50.0)
    slope, where = max_slope(di[::-1], apd[::-1])   # order of the points must not matter
    assert slope == pytest.approx((apd[1] - apd[0]) / (di[1] - di[0]))
    assert where == pytest.approx(7.5)


def test_result_writes_to_netcdf(ms_s1s2, tmp_path):
    from cable.io.netcdf import write_dataset

    path = tmp_path / "rest.nc"
    write_dataset(ms_s1s2, path)
    with xr.open_dataset(path) as back:
        np.testing.assert_allclose(back["apd90"].values, ms_s1s2["apd90"].values)
        assert float(back["max_slope"]) == pytest.approx(float(ms_s1s2["max_slope"]))


def test_bad_options_raise_case_errors():
    with pytest.raises(cable.CaseError, match="protocol = 'dynamc'.*Did you mean 'dynamic'"):
        cable.restitution(cardiac_strand("mitchell-schaeffer-2003"), protocol="dynamc")
    with pytest.raises(cable.CaseError, match="beats"):
        cable.restitution(cardiac_strand("mitchell-schaeffer-2003"), [500], protocol="dynamic", beats=1)
    with pytest.raises(cable.CaseError, match="intervals"):
        cable.restitution(cardiac_strand("mitchell-schaeffer-2003"), [0.5])


def test_cli_restitution(tmp_path):
    case = write_case(tmp_path, cardiac_strand("mitchell-schaeffer-2003", length=0.5))
    out = tmp_path / "rest.nc"
    res = cable_cli("restitution", str(case), "--protocol", "dynamic", "--intervals", "800", "500", "--beats", "2",
                    "-q", "-o", str(out))
    assert res.returncode == 0, res.stderr
    assert "maximal APD restitution slope" in res.stdout and out.exists()
