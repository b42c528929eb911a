"""[[region]]: validation, per-node arrays, and what injured segments do to conduction."""

import numpy as np
import pytest

import cable
from cable.fiber import build_grid
from cable.regions import Region, apply_regions, coupling_factors
from cable.preparation import prepare

#: CV resolves supernormal conduction when the rise exceeds this fraction; the LR1 strand
#: at dx 50 um repeats CV to ~1e-4, so 1 % is far above numerical noise (common practice)
SUPERNORMAL_MIN_RISE = 0.01
#: "no slowing" below Donaldson's threshold: CV within this fraction of control or faster
#: (the dx 50 um grid and the region border move CV by well under 1 %)
NO_SLOWING = 0.01


def lr1_strand(length=1.0, dx=0.01, duration=40.0, regions=(), window=None, **extra):
    """A Luo & Rudy (1991) strand: radius 11 um, R_i 300 ohm*cm (D = 0.00183 cm^2/ms)."""
    case = {
        "membrane": {"model": "luo-rudy-1991"},
        "fiber": {"length": length, "dx": dx, "radius": "11 um", "axial_resistivity": "300 ohm*cm"},
        "stimulus": [{"amplitude": 100.0, "duration": 1.0, "width": 0.03}],
        "numerics": {"dt": 0.01},
        "run": {"duration": duration},
        "output": {"every": 0.5},
        "region": {f"R{k + 1}": dict(r) for k, r in enumerate(regions)},
    }
    if window is not None:
        case["measure"] = {"cv_window": list(window)}
    case.update(extra)
    if not case["region"]:
        del case["region"]
    return case


# ----------------------------------------------------------------------------- validation
@pytest.mark.parametrize("region, message", [
    ({"start": 0.6, "end": 0.4, "scale": {"G_Na": 0.1}}, r"region\.R1: start = 0\.6 must be less than end = 0\.4"),
    ({"start": 0.4, "end": 1.5, "scale": {"G_Na": 0.1}},
     r"region\.R1\.end = 1\.5: lies outside the fibre \(0 to 1 cm\)"),
    ({"start": -0.1, "end": 0.5, "scale": {"G_Na": 0.1}}, r"region\.R1\.start = -0\.1: must be at least 0"),
    ({"start": 0.4, "end": 0.5, "scale": {"gNa": 0.1}}, r"'gNa' is not a scalable conductance.*Did you mean 'G_Na'"),
    ({"start": 0.4, "end": 0.5, "parameters": {"K_0": 8}}, r"region\.R1\.parameters\.K_0.*Did you mean 'K_o'"),
    ({"start": 0.4, "end": 0.5, "coupling": 0.0}, r"region\.R1\.coupling = 0\.0: must be greater than 0"),
    ({"start": 0.4, "end": 0.5, "coupling": 0.5, "border": -0.1}, r"region\.R1\.border = -0\.1: must be at least 0"),
    ({"start": 0.4, "end": 0.5, "coupling": 0.5, "bordr": 0.1},
     r"unknown key 'region\.R1\.bordr'\. Did you mean 'border'"),
    ({"start": 0.4, "end": 0.5}, r"region\.R1 changes nothing"),
    ({"start": 0.401, "end": 0.404, "coupling": 0.5}, r"holds no node at fiber\.dx = 0\.01 cm"),
    ({"start": 0.4, "end": 0.5, "parameters": {"K_o": "8 mV"}}, r"region\.R1\.parameters\.K_o"),
])
def test_invalid_region_names_key_and_value(region, message):
    with pytest.raises(cable.CaseError, match=message):
        cable.load_case(lr1_strand(regions=[region]))


def test_region_needs_a_fibre():
    case = lr1_strand(regions=[{"start": 0.1, "end": 0.2, "coupling": 0.5}])
    del case["fiber"]
    case["measure"] = {}
    with pytest.raises(cable.CaseError, match=r"\[region\.NAME\] needs a \[fiber\]"):
        cable.load_case(case)


def test_keys_address_region_entries_by_name_and_by_their_old_index():
    case = cable.load_case(lr1_strand(regions=[{"start": 0.1, "end": 0.2, "scale": {"G_Na": 0.5}},
                                               {"start": 0.5, "end": 0.6, "coupling": 0.3}]))
    changed = case.with_overrides({"region.1.coupling": 0.1, "region.0.scale.G_Na": 0.2})
    assert changed.extra["region"][0].scale["G_Na"] == 0.2
    assert changed.extra["region"][1].coupling == 0.1
    assert cable.load_case(case, ["region.0.end=0.3"]).extra["region"][0].end == 0.3
    assert changed == case.with_overrides({"region.R2.coupling": 0.1, "region.R1.scale.G_Na": 0.2})
    with pytest.raises(cable.CaseError, match=r"index 2 is out of range; the case has 2 region entries \(R1, R2\)"):
        case.with_overrides({"region.2.coupling": 0.1})


def test_region_values_accept_units():
    case = cable.load_case(lr1_strand(regions=[{"start": "2 mm", "end": "4 mm", "border": "500 um",
                                                "parameters": {"K_o": "8 mmol/L"}}]))
    r = case.extra["region"][0]
    assert (r.start, r.end, r.border) == pytest.approx((0.2, 0.4, 0.05))
    model = cable.get_model("luo-rudy-1991")
    assert r.parameters["K_o"] == pytest.approx(8.0)
    assert model.parameter("K_o").units == "mM"


# ----------------------------------------------------------------------------- arrays
def test_border_is_a_linear_ramp_outside_the_core():
    x = np.linspace(0.0, 1.0, 101)
    w = Region(start=0.4, end=0.6, border=0.1, coupling=0.5).weight(x)
    assert np.all(w[(x >= 0.4 - 1e-9) & (x <= 0.6 + 1e-9)] == 1.0)
    assert np.all(w[(x <= 0.3 + 1e-9) | (x >= 0.7 - 1e-9)] == 0.0)
    # linear in between (common practice for a border zone: a linear ramp)
    ramp = (x > 0.3) & (x < 0.4)
    np.testing.assert_allclose(w[ramp], (x[ramp] - 0.3) / 0.1, atol=1e-12)


def test_later_regions_win_and_scale_is_relative_to_the_membrane_value():
    model = cable.get_model("luo-rudy-1991")
    case = cable.load_case(lr1_strand(
        membrane={"model": "luo-rudy-1991", "scale": {"G_Na": 0.5}},
        regions=[{"start": 0.2, "end": 0.6, "scale": {"G_Na": 0.4}, "parameters": {"K_o": 10.0}},
                 {"start": 0.5, "end": 0.8, "parameters": {"K_o": 8.0}}]))
    setup = prepare(case)
    x, p = setup.x, setup.p
    j_na, j_k = model.parameter_names.index("G_Na"), model.parameter_names.index("K_o")
    g_na = model.parameter("G_Na").default
    at = {pos: int(np.argmin(np.abs(x - pos))) for pos in (0.1, 0.3, 0.55, 0.7)}
    assert p[at[0.1], j_na] == pytest.approx(0.5 * g_na)        # [membrane] scale alone
    assert p[at[0.3], j_na] == pytest.approx(0.4 * 0.5 * g_na)  # region factor on top of it
    assert p[at[0.3], j_k] == pytest.approx(10.0)
    assert p[at[0.55], j_k] == pytest.approx(8.0)               # overlap: the later entry wins
    assert p[at[0.55], j_na] == pytest.approx(0.4 * 0.5 * g_na)  # ... only for what it sets
    assert p[at[0.7], j_k] == pytest.approx(8.0)
    assert p[at[0.7], j_na] == pytest.approx(0.5 * g_na)


def test_labelled_parameter_takes_the_region_label_where_weight_is_at_least_half():
    model = cable.get_model("ten-tusscher-panfilov-2006")
    labelled = [q for q in model.parameters if q.choices is not None]
    if not labelled:
        pytest.skip("ten-tusscher-panfilov-2006 has no labelled parameter")
    par = labelled[0]
    label = par.choices[-1] if par.default != par.choices[-1] else par.choices[0]
    x = np.linspace(0.0, 1.0, 101)
    p = np.tile(model.default_parameters(), (x.size, 1))
    region = Region(start=0.4, end=0.6, border=0.2, parameters={par.name: par.encode(label)})
    out = apply_regions(p, x, [region], model)
    j = model.parameter_names.index(par.name)
    w = region.weight(x)
    assert set(np.unique(out[:, j])) <= {par.encode(par.default), par.encode(label)}
    np.testing.assert_array_equal(out[:, j] == par.encode(label), w >= 0.5)


def test_coupling_border_conserves_current():
    """Harmonic-mean edges make the operator conservative: sum_i volume_i (L v)_i = 0 for any v."""
    case = cable.load_case(lr1_strand(regions=[{"start": 0.3, "end": 0.5, "coupling": 0.1, "border": 0.05},
                                               {"start": 0.45, "end": 0.7, "coupling": 3.0}]))
    f = coupling_factors(np.arange(101) * 0.01, case.extra["region"])
    grid = build_grid(case.fiber, coupling_factor=f)
    # series resistances: an edge between factors a and b conducts 2ab/(a+b) (common practice)
    k = 29  # edge between x = 0.29 (weight 0.8 of the border) and x = 0.30 (the core)
    a, b = f[k], f[k + 1]
    base = case.fiber.diffusivity / case.fiber.dx**2
    assert grid.edge[k] == pytest.approx(base * 2 * a * b / (a + b), rel=1e-12)
    rng = np.random.default_rng(4)
    v = rng.normal(size=grid.n)
    total = np.sum(grid.volume * (grid.operator_dense() @ v))
    assert abs(total) < 1e-10 * np.sum(np.abs(grid.operator_dense() @ v))


# ----------------------------------------------------------------------------- conduction
def test_strongly_reduced_sodium_region_blocks_inside_it_and_a_mild_one_passes():
    # Reduced excitability slows conduction and, severe enough, stops it (Shaw & Rudy 1997,
    # Circ Res 81:727, abstract). The wave dies inside the depressed segment.
    start, end = 0.4, 0.6
    severe = cable.simulate(lr1_strand(dx=0.005, regions=[{"start": start, "end": end, "scale": {"G_Na": 0.03}}]))
    mild = cable.simulate(lr1_strand(dx=0.005, window=(0.42, 0.58),
                                     regions=[{"start": start, "end": end, "scale": {"G_Na": 0.5}}]))
    control = cable.simulate(lr1_strand(dx=0.005, window=(0.42, 0.58)))
    assert bool(severe.blocked[0]) and bool(severe.captured[0])
    assert start <= float(severe.block_x[0]) < end
    assert int(severe.block_side[0]) == 1
    assert bool(mild.conducted[0])
    assert float(mild.conduction_velocity[0]) < float(control.conduction_velocity[0])


def test_raised_potassium_is_supernormal_then_depressing_then_blocks():
    # Shaw & Rudy 1997b (Circ Res 80:124, abstract, F): K_o 4.5 -> 14.4 mM gives supernormal,
    # then depressed conduction, then block. Donaldson et al. 1984 (J Physiol 353:393, F):
    # conduction slows only once K_o reaches about 8.8 +/- 1.3 mM. The region's nodes start at
    # their own resting state (settled before the run).
    def cv(k_o):
        ds = cable.simulate(lr1_strand(dx=0.005, window=(0.5, 0.8),
                                       regions=[{"start": 0.3, "end": 1.0, "parameters": {"K_o": k_o}}]))
        return float(ds.conduction_velocity[0]), bool(ds.conducted[0]), float(ds.block_x[0])

    k_values = [5.4, 6.5, 7.5, 8.5, 10.0, 12.0, 13.0, 14.4, 16.0]
    results = {k: cv(k) for k in k_values}
    control = results[5.4][0]
    cvs = np.array([results[k][0] for k in k_values])
    best = int(np.nanargmax(cvs))
    assert 5.4 < k_values[best] <= 10.0
    assert cvs[best] > (1 + SUPERNORMAL_MIN_RISE) * control
    for k in (6.5, 7.5):  # below 8.8 - 1.3 mM: no slowing
        assert results[k][0] >= (1 - NO_SLOWING) * control
    assert results[12.0][0] < control and results[13.0][0] < results[12.0][0]
    assert not results[14.4][1] and not results[16.0][1]
    assert 0.3 <= results[14.4][2] < 1.0  # the wave dies inside the raised-K_o tissue


def test_example_case_shows_block():
    # cases/ischaemic_zone.toml (our scenario): every other beat blocks inside the zone.
    from pathlib import Path

    from cable.measure.block import conduction_pattern

    path = Path(__file__).resolve().parents[1] / "cases" / "ischaemic_zone.toml"
    case = cable.load_case(path, ["stimulus.0.count=4", "run.duration=2000"])
    ds = cable.simulate(case)
    zone = case.extra["region"][0]
    blocked = ds.blocked.values.astype(bool)
    assert conduction_pattern(ds) == "2:1"
    assert blocked.any()
    assert np.all((ds.block_x.values[blocked] >= zone.start - zone.border) &
                  (ds.block_x.values[blocked] <= zone.end + zone.border))
