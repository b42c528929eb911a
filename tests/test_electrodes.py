"""The pseudo-ECG of a strand ([[electrode]]): the line-source integral and its beat measures.

Formula: phi_e = (a^2 sigma_i / 4 sigma_e) * integral (-dV/dx) d/dx(1/r) dx (Plonsey & Barr,
Bioelectricity; Gima & Rudy 2002, Circ Res 90:889).
"""

import numpy as np
import pytest

import cable
from cable.electrodes import Electrode, weights

SIGMA_I, SIGMA_E, A = 6.0, 20.0, 0.001  # mS/cm, mS/cm, cm
K = A ** 2 * SIGMA_I / (4 * SIGMA_E)
DV = 100.0  # mV, depolarised behind the front
ROUNDING = 1e-12


def _phi(x, v, electrode):
    return float(weights(x, [electrode], SIGMA_I)[0] @ v)


@pytest.mark.parametrize("distance", [0.0, 0.4])
def test_linear_front_equals_the_closed_form(distance):
    # Derivation. A front V = V_r + DV behind it, falling linearly to V_r over [x1, x2]:
    # -dV/dx = DV / (x2 - x1) on [x1, x2], 0 elsewhere, so
    #   phi = K DV / (x2 - x1) * [1/r(x2) - 1/r(x1)],  r(x) = sqrt((x - x_e)^2 + d^2).
    # The ramp is piecewise linear on the nodes, which the discretisation integrates exactly.
    x = np.linspace(0.0, 2.0, 201)
    e = Electrode(x=2.5, distance=distance, radius=A, extracellular_conductivity=SIGMA_E)
    r = lambda p: np.hypot(p - e.x, distance)  # noqa: E731
    for i1, i2 in [(10, 20), (100, 130), (150, 151)]:
        v = np.where(x <= x[i1], DV, np.where(x >= x[i2], 0.0, DV * (x[i2] - x) / (x[i2] - x[i1]))) - 85.0
        expected = K * DV / (x[i2] - x[i1]) * (1 / r(x[i2]) - 1 / r(x[i1]))
        assert _phi(x, v, e) == pytest.approx(expected, rel=ROUNDING)


def test_step_front_tends_to_the_dipole_field():
    # A step front at x_f (the limit of a thin ramp) is a dipole: phi = K DV (1/r)'(x_f) =
    # K DV / (x_e - x_f)^2 on the axis. The grid spreads it over one edge, whose mean of
    # 1/(x_e - x)^2 differs from the midpoint value by at most dx^2 / (4 d^2) relatively
    # (the midpoint rule's error term, f''/24 dx^2 with f'' = 6/d^4).
    x = np.linspace(0.0, 2.0, 101)
    dx = x[1] - x[0]
    e = Electrode(x=3.0, distance=0.0, radius=A, extracellular_conductivity=SIGMA_E)
    for k in range(0, 100, 7):
        v = np.where(np.arange(x.size) <= k, DV, 0.0)
        mid = x[k] + dx / 2
        d = e.x - x[k + 1]
        assert _phi(x, v, e) == pytest.approx(K * DV / (e.x - mid) ** 2, rel=1.01 * dx ** 2 / (4 * d ** 2))


def test_uniform_potential_gives_no_signal():
    x = np.linspace(0.0, 1.0, 51)
    e = Electrode(x=0.5, distance=0.3, radius=A, extracellular_conductivity=SIGMA_E)
    assert abs(_phi(x, np.full(x.size, -85.0), e)) < ROUNDING * K * 85


def transmural(heterogeneous: bool, every: float = 1.0):
    case = {
        "membrane": {"model": "ten-tusscher-panfilov-2006", "parameters": {"cell_type": "endo"}},
        "fiber": {"length": "1.5 cm", "dx": "200 um", "conductivity": "6.17 mS/cm", "surface_to_volume": "0.2 /um",
                  "capacitance": "2 uF/cm^2"},
        "stimulus": [{"x": 0, "width": "0.4 mm", "amplitude": 100.0, "duration": 2.0}],
        "numerics": {"dt": 0.02}, "run": {"duration": 450.0}, "output": {"every": every},
        "electrode": [{"x": "3.5 cm", "radius": "11 um"}],   # 2 cm beyond the epicardial end, on the axis
    }
    if heterogeneous:  # endo, M and epi thirds (Gima & Rudy 2002)
        case["region"] = [{"start": "0.5 cm", "end": "1.0 cm", "parameters": {"cell_type": "mid"}},
                          {"start": "1.0 cm", "end": "1.5 cm", "parameters": {"cell_type": "epi"}}]
    return cable.simulate(case)


#: QT vs longest APD + activation time: the T wave's end is read where the signal is back
#: within 5% of its peak, before the last cell has fully repolarised: allow 5%
QT_RTOL = 0.05


def test_transmural_strand_upright_t_wave_and_qt():
    # Gima & Rudy (2002): with endo -> epi activation and the M region's longer APD, the T wave
    # beyond the epicardial end is upright and QT is about the longest APD plus the
    # transmural activation time
    ds = transmural(True)
    assert float(ds.t_amplitude[0, 0]) > 0
    act = ds.activation_time.values[0]
    longest = np.nanmax(ds.apd.sel(level=90).values[0])
    expected = longest + (np.nanmax(act) - np.nanmin(act))
    assert float(ds.qt_interval[0, 0]) == pytest.approx(expected, rel=QT_RTOL)
    assert float(ds.qrs_onset[0, 0]) == pytest.approx(np.nanmin(act))
    # a homogeneous (all endo) strand repolarises in the order it activated: its T wave is
    # inverted (concordant repolarisation; Plonsey & Barr)
    homo = transmural(False)
    assert float(homo.t_amplitude[0, 0]) < 0
    assert homo.pseudo_ecg.dims == ("electrode", "t") and homo.pseudo_ecg.sizes["t"] == homo.vm.sizes["t"]


def test_beat_measures_come_from_every_step_not_the_samples():
    # the issue: the pseudo-ECG is computed from every step's profile, so QRS onset, T peak and
    # QT do not depend on output.every (here 1 ms against 25 ms: the T peak would otherwise
    # move to a sample, up to 12.5 ms away); allowed: one step (0.02 ms), the resolution
    fine, coarse = transmural(True, every=1.0), transmural(True, every=25.0)
    for name in ("qrs_onset", "t_peak", "qt_interval"):
        assert float(coarse[name][0, 0]) == pytest.approx(float(fine[name][0, 0]), abs=0.02), name
    assert coarse.attrs["merge_half_steps"] == 0   # the loop returns every step: unmerged


@pytest.mark.parametrize("entry, message", [
    ({"x": "0.5 cm"}, "within dx"),
    ({"x": "2 cm", "distance": "-1 cm"}, "electrode.0.distance"),
    ({"distance": "1 cm"}, "missing key 'electrode.0.x'"),
    ({"x": "2 cm", "radius": 0}, "electrode.0.radius"),
])
def test_bad_electrodes(entry, message):
    from tests.conftest import hh_axon_case

    case = hh_axon_case(length=1.0, dx=0.05)
    case["electrode"] = [entry]
    with pytest.raises(cable.CaseError, match=message):
        cable.load_case(case)


def test_tissue_form_needs_a_radius_and_stream_writes_it(tmp_path):
    from tests.conftest import hh_axon_case

    case = hh_axon_case(length=1.0, dx=0.05, duration=4.0)
    case["fiber"] = {"length": 1.0, "dx": 0.05, "conductivity": 28.25, "surface_to_volume": 84.0}
    case["electrode"] = [{"x": "2 cm"}]
    with pytest.raises(cable.CaseError, match="electrode.0.radius is needed"):
        cable.load_case(case)
    case["electrode"] = [{"x": "2 cm", "radius": "238 um"}, {"x": "0.5 cm", "distance": "1 cm", "radius": "238 um"}]
    mem = cable.simulate(case)
    disk = cable.simulate(case, output=tmp_path / "e.nc")
    np.testing.assert_allclose(disk.pseudo_ecg.values, mem.pseudo_ecg.values, rtol=1e-12)
    assert disk.sizes["electrode"] == 2 and np.isfinite(mem.pseudo_ecg.values).all()


def test_adaptive_steps_with_electrodes_are_refused_naming_the_key():
    case = {"membrane": {"model": "hodgkin-huxley-1952"},
            "fiber": {"length": 1.0, "dx": 0.02, "radius": "238 um", "axial_resistivity": "35.4 ohm*cm"},
            "stimulus": [{"amplitude": 1000.0, "duration": 0.2, "width": 0.1}],
            "numerics": {"dt": 0.01, "dt_max": 0.04}, "run": {"duration": 2.0},
            "electrode": [{"x": "2 cm"}]}
    with pytest.raises(cable.CaseError, match=r"numerics.dt_max .* \[\[electrode\]\]"):
        cable.simulate(case)
