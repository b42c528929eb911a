"""Batched strands (cable.kernels.batch.simulate_batch) give each case its own result, exactly.

The strands of a batch share one time loop but no coupling (sealed ends), and each is
computed with the floating-point operations of its separate run, in the same order
(common practice: IEEE 754 arithmetic without reassociation or contraction is
deterministic, so the same operations on the same operands give the same bits). So a
batched case must equal ``cable.simulate`` of the same case bit for bit: every data
variable and coordinate compared with exact equality (NaN equal to NaN), no
tolerance.
"""

import numpy as np
import pytest
import xarray as xr

import cable
from cable.kernels import diffusion, tables
from cable.kernels.batch import group_key, loop_key, simulate_batch
from cable.preparation import prepare

#: attributes that may differ: the loop's wall time is shared among the strands, and
#: the batch says how many strands it held
BATCH_ATTRS = {"wall_time_s", "batch_size"}


def _hh(length=1.0, g_na=1.0, amplitude=600.0, dx=0.01, duration=5.0, **numerics):
    # the Hodgkin & Huxley (1952) axon: radius 238 um, 35.4 ohm*cm, 18.5 degC
    return {"membrane": {"model": "hodgkin-huxley-1952", "temperature": 18.5, "scale": {"g_Na": g_na}},
            "fiber": {"length": length, "dx": dx, "radius": "238 um", "axial_resistivity": "35.4 ohm*cm"},
            "stimulus": [{"amplitude": amplitude, "duration": 0.3, "width": 0.05}],
            "numerics": {"dt": 0.005, **numerics}, "run": {"duration": duration}, "output": {"every": 0.05}}


@pytest.mark.parametrize("theta", [0.5, 1.0, 0.0])
def test_batched_solves_are_the_single_solve_bit_for_bit(theta):
    # short strands too (1 to 4 nodes: the two eliminations are empty or meet at once),
    # odd and even lengths, strand counts with and without a vector remainder
    rng = np.random.default_rng(7)
    h = 0.01 if theta else 0.002   # forward Euler within its limit: h (lo + up) < 1 for rates < 250 /ms
    for length in (1, 2, 3, 4, 7, 10):
        for count in (1, 3, 8):
            grids, alone, vs = [], [], []
            for _ in range(count):
                lo, up = rng.uniform(1.0, 250.0, length), rng.uniform(1.0, 250.0, length)
                lo[0], up[-1] = 0.0, 0.0        # sealed ends
                v = rng.normal(-60.0, 30.0, length)
                got = v.copy()
                diffusion.diffuse(got, lo, up, h, theta, *diffusion.factor(lo, up, h, theta), np.zeros(length))
                grids.append((lo, up))
                alone.append(got)
                vs.append(v)
            n = length * count
            v = diffusion.interleave(vs)
            lo, up = (diffusion.interleave([g[k] for g in grids]) for k in (0, 1))
            diffusion.diffuse_interleaved(v, lo, up, h, theta, *diffusion.factor_interleaved(grids, h, theta),
                                          np.zeros(n), count)
            assert np.array_equal(v, diffusion.interleave(alone)), (length, count)
            # the same strands, and a longer one, laid end to end
            extra = rng.normal(-60.0, 30.0, 5)
            lo5, up5 = rng.uniform(1.0, 250.0, 5), rng.uniform(1.0, 250.0, 5)
            lo5[0], up5[-1] = 0.0, 0.0
            got5 = extra.copy()
            diffusion.diffuse(got5, lo5, up5, h, theta, *diffusion.factor(lo5, up5, h, theta), np.zeros(5))
            grids5 = grids + [(lo5, up5)]
            v = np.concatenate(vs + [extra])
            offsets = np.cumsum([0] + [length] * count + [5]).astype(np.int64)
            lo, up = (np.concatenate([g[k] for g in grids5]) for k in (0, 1))
            diffusion.diffuse_segments(v, lo, up, h, theta, *diffusion.factor_segments(grids5, h, theta),
                                       np.zeros(v.size), offsets)
            assert np.array_equal(v, np.concatenate(alone + [got5])), (length, count)


def _identical(batched, alone):
    """Exact equality of every variable, coordinate and attribute but BATCH_ATTRS."""
    assert set(batched.data_vars) == set(alone.data_vars)
    for name in alone.variables:
        assert np.array_equal(batched[name].values, alone[name].values, equal_nan=True), name
        assert batched[name].dims == alone[name].dims, name
    xr.testing.assert_identical(batched.drop_attrs(deep=False), alone.drop_attrs(deep=False))
    differ = {k for k in set(batched.attrs) | set(alone.attrs) if batched.attrs.get(k) != alone.attrs.get(k)}
    assert differ <= BATCH_ATTRS, differ


def _check(cases, sizes):
    batched = simulate_batch(cases)
    assert [ds.attrs["batch_size"] for ds in batched] == sizes
    for case, ds in zip(cases, batched):
        _identical(ds, cable.simulate(case))
    return batched


@pytest.mark.parametrize("rates", ["tabulated", "exact", "reference"])
def test_mixed_batch_of_one_length_equals_separate_runs(rates):
    # different sodium conductances and stimulus amplitudes, one grid: interleaved
    # strands on the fast paths; five strands, so the strand loops have a remainder
    cases = [_hh(1.0, g, a, rates=rates) for g, a in ((1.0, 600.0), (0.8, 600.0), (0.6, 900.0), (1.0, 300.0),
                                                     (0.05, 600.0))]
    batched = _check(cases, [5] * 5)
    assert batched[0].attrs["rates"] == rates
    # the batch holds both outcomes: conduction, and a membrane too weak to be excited at all
    # (g_Na x 0.05: the stimulated zone never reaches the activation level)
    assert bool(batched[0].captured[0]) and bool(batched[0].conducted[0]) and not bool(batched[0].blocked[0])
    assert not bool(batched[4].captured[0]) and not bool(batched[4].conducted[0])


@pytest.mark.parametrize("rates", ["tabulated", "exact", "reference"])
def test_strands_of_different_lengths_equal_separate_runs(rates):
    # different lengths (grids): laid end to end, each solved on its own nodes
    cases = [_hh(1.0, 1.0, rates=rates), _hh(0.7, 0.8, rates=rates), _hh(1.2, 0.6, 900.0, rates=rates)]
    _check(cases, [3] * 3)


@pytest.mark.parametrize("numerics", [{"diffusion": "backward-euler"}, {"splitting": "godunov"},
                                      {"merge_half_steps": False}, {"gating": "forward-euler"},
                                      {"diffusion": "forward-euler", "dt": 0.002}])
def test_every_scheme_is_exact(numerics):
    # dx 0.5 mm keeps forward-Euler diffusion below its stability limit at dt 2 us
    # (D = a / (2 R_i C_m) = 0.336 cm^2/ms: dt 4 D / dx^2 = 0.11 < 1)
    cases = [_hh(1.0, g, dx=0.05, duration=3.0, **numerics) for g in (1.0, 0.7)]
    cases.append(_hh(0.6, 0.9, dx=0.05, duration=3.0, **numerics))
    _check(cases[:2], [2, 2])            # interleaved
    _check(cases, [3, 3, 3])             # laid end to end


def test_regions_in_a_batch_are_exact():
    # regions with different parameters and coupling per strand (per-node parameters,
    # per-edge coupling with borders); the temperature, the table's parameter, is shared
    cases = []
    for scale, coupling, border in ((0.3, 1.0, 0.0), (0.6, 0.4, 0.1), (1.0, 0.2, 0.05)):
        case = _hh(1.0, 1.0)
        case["region"] = [{"start": 0.4, "end": 0.6, "border": border, "scale": {"g_Na": scale},
                           "coupling": coupling}]
        cases.append(case)
    cases.append(_hh(1.0, 1.0))           # no region
    batched = _check(cases, [4] * 4)
    assert batched[0].attrs["rates"] == "tabulated"


def test_strands_with_table_groups_batch_exactly():
    # a cooled zone with a ramped border (the temperature, the table's parameter, differs
    # between nodes: one table per distinct temperature, cable/kernels/tables.py); strands
    # with the same temperatures share a batch, interleaved (one length) or laid end to end
    cases = []
    for length, scale in ((1.0, 1.0), (1.0, 0.7), (1.0, 0.5), (1.2, 0.8)):
        case = _hh(length, scale)
        case["region"] = [{"start": 0.4, "end": 0.6, "border": 0.05, "parameters": {"temperature": 10.0}}]
        cases.append(case)
    setup = prepare(cases[0])
    assert tables.plan(setup.model, setup.p, 0.005, 0, "tabulated").table.shape[0] > 2
    assert _check(cases[:3], [3] * 3)[0].attrs["rates"] == "tabulated"
    _check(cases, [4] * 4)


def test_tables_are_shared_only_between_identical_tables():
    # HH rates scale with temperature (Q10 = 3: Hodgkin & Huxley 1952), so cases at
    # two temperatures have two tables: two batches, each with its own table
    cases = []
    for temperature in (6.3, 18.5, 6.3, 18.5):
        case = _hh(1.0, 1.0)
        case["membrane"]["temperature"] = temperature
        cases.append(case)
    cases[2]["membrane"]["scale"]["g_Na"] = 0.8
    cases[3]["membrane"]["scale"]["g_Na"] = 0.8
    keys = [group_key(prepare(c)) for c in cases]
    assert keys[0] == keys[2] and keys[1] == keys[3] and keys[0] != keys[1]
    _check(cases, [2, 2, 2, 2])


def test_batch_groups_cases_by_time_loop():
    # a different dt cannot share the loop: two groups, results still per case and in order
    cases = [_hh(1.0, 1.0), _hh(1.0, 0.9, dt=0.0025), _hh(1.0, 0.8), _hh(1.0, 0.7, dt=0.0025)]
    batched = _check(cases, [2, 2, 2, 2])
    assert [ds.attrs["dt_ms"] for ds in batched] == [0.005, 0.0025, 0.005, 0.0025]
    loaded = [cable.load_case(c) for c in cases]
    assert loop_key(loaded[0]) == loop_key(loaded[2]) != loop_key(loaded[1])


@pytest.mark.parametrize("rates", ["tabulated", "reference"])
def test_single_cells_batch_too(rates):
    cells = [{"membrane": {"model": "hodgkin-huxley-1952", "scale": {"g_K": f}},
              "stimulus": [{"amplitude": a, "duration": 0.5}],
              "numerics": {"dt": 0.01, "rates": rates}, "run": {"duration": 12.0}, "output": {"every": 0.1}}
             for f, a in ((1.0, 20.0), (0.8, 20.0), (1.0, 40.0))]
    batched = _check(cells, [3, 3, 3])
    assert "x" not in batched[0].dims
    # a strand (same capacitance, so the same loop) batches with the cells
    strand = _hh(1.0, 1.0, 600.0, dt=0.01, duration=12.0, rates=rates)
    strand["output"]["every"] = 0.1
    strand["membrane"].pop("temperature")
    batched = _check(cells + [strand], [4] * 4)
    assert "x" in batched[3].dims


def test_a_failing_strand_fails_alone():
    # forward-Euler gates at dt = 20 us: stable for a normal stimulus, driven to NaN by a
    # hundredfold one; both share the loop, and the failure is the second case's own
    good = _hh(1.0, 1.0, 600.0, dt=0.02, gating="forward-euler")
    bad = _hh(1.0, 1.0, 60000.0, dt=0.02, gating="forward-euler")
    for case in (good, bad):
        case["output"]["every"] = 0.2
    out = simulate_batch([good, bad, good], errors="return")
    assert isinstance(out[1], cable.SimulationError)
    assert out[1].partial is not None
    _identical(out[0], cable.simulate(good))
    _identical(out[2], cable.simulate(good))
    with pytest.raises(cable.SimulationError):
        simulate_batch([good, bad])
    with pytest.raises(ValueError, match="errors = 'ignore'"):
        simulate_batch([good], errors="ignore")


def test_an_invalid_case_is_returned_in_its_place():
    invalid = _hh(1.0, 1.0)
    invalid["numerics"]["diffusion"] = "crank-nicholson"
    out = simulate_batch([_hh(1.0, 1.0), invalid, _hh(1.0, 0.8)], errors="return")
    assert isinstance(out[1], cable.CaseError)
    assert [ds.attrs["batch_size"] for ds in (out[0], out[2])] == [2, 2]
    with pytest.raises(cable.CaseError, match="crank-nicolson"):
        simulate_batch([_hh(1.0, 1.0), invalid])


@pytest.mark.slow
def test_a_model_stored_by_node_is_exact(oracles_registered):
    # a fast path keeping its states by node (FastPath.by_state = False): the hand-written ten
    # Tusscher & Panfilov (2006) kernel, now a test oracle (tests/membrane/oracles/; the generated
    # model is by state); tissue of ten Tusscher et al. (2004): 6.17 mS/cm, 2000 /cm, 2 uF/cm^2
    def strand(length, g_na, amplitude):
        return {"membrane": {"model": "oracle-ten-tusscher-panfilov-2006", "scale": {"G_Na": g_na}},
                "fiber": {"length": length, "dx": 0.01, "conductivity": 6.17, "surface_to_volume": 2000,
                          "capacitance": 2},
                "stimulus": [{"amplitude": amplitude, "duration": 1.0, "width": 0.03}],
                "numerics": {"dt": 0.02}, "run": {"duration": 10.0}, "output": {"every": 0.5}}
    _check([strand(0.3, 1.0, 100.0), strand(0.3, 0.7, 150.0)], [2, 2])
    _check([strand(0.3, 1.0, 100.0), strand(0.2, 0.7, 150.0)], [2, 2])
