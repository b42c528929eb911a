"""The fast paths give the results of the exact ones.

Checked here: the vectorisable exponential against numpy; the two-sided tridiagonal
solve against a dense solve; the block probe against the plain one; every model's
fast kernel (exact rates) against its contract kernel ``reaction``; the tabulated
rates against the exact ones; and, on strands, CV and APD90 of the default
(tabulated) path against the exact path, within the 0.1% the performance issue sets.
"""

from dataclasses import replace
from fractions import Fraction

import numba
import numpy as np
import pytest

import cable
from cable.kernels import diffusion, integrate, loop, tables
from cable.kernels.elementary import exp, exp_nonpositive, fma

#: IEEE 754 double: a correctly rounded result is within 0.5 ulp; the C library's exp
#: and ours are each within 1 ulp of exp(x), so they may differ by 1 ulp (from memory:
#: glibc documents <= 1 ulp for exp)
EXP_ULP = 1.0
#: one reaction step, fast exact kernel against ``reaction``: both evaluate the same
#: rates in algebraically equal forms; rounding of ~40 operations, a few 1e-16 each
STEP_RTOL = 1e-12
#: one tabulated reaction step against the exact one, absolute on a gate in [0, 1]:
#: linear interpolation errs by <= dv^2/8 max|f''| (common practice); measured at the
#: default spacing: 2e-8 (Hodgkin-Huxley), 4e-7 (ten Tusscher-Panfilov Xr1 near +100 mV)
TABLE_STEP_ATOL = 1e-6
#: ... except where a rate is very steep: Luo-Rudy 1991's h gate below -135 mV, where
#: alpha_h = 0.135 exp(-(80 + V)/6.8) exceeds 1000/ms (Luo & Rudy 1991), so the step's
#: coefficients curve strongly over one row: measured here 3.8e-6 at -137..-148 mV (and
#: 2.1e-7, 16x less, on a table 4x finer: the interpolation's second order, checked below)
TABLE_STEP_ATOL_MODEL = {"luo-rudy-1991": 1e-5}
#: ... and within the one table cell that holds a jump of a piecewise rate function (the
#: h and j rates of ten Tusscher & Panfilov 2006 switch formula at -40 mV; from memory),
#: where the interpolation blends the two branches
TABLE_KINK_ATOL = 1e-4
#: the bound the performance issue sets on the fast paths: CV and APD90 within 0.1%
FAST_PATH_BOUND = 1e-3
#: exact fast path against the reference kernel over a whole run: rounding only
#: (1e-15 per step, amplified near threshold over ~1e3 steps)
EXACT_RUN_RTOL = 1e-7

FAST_MODELS = [name for name in cable.model_names() if cable.get_model(name).fast is not None]


@numba.njit(error_model="numpy")
def _exp_all(x, out):
    for i in range(x.size):
        out[i] = exp(x[i])


@numba.njit(error_model="numpy")
def _exp_nonpositive_all(x, out):
    for i in range(x.size):
        out[i] = exp_nonpositive(x[i])


@numba.njit
def _fma_all(a, b, c, out):
    for i in range(a.size):
        out[i] = fma(a[i], b[i], c[i])


def _ulp_error(got, want):
    return np.abs(got - want) / np.spacing(np.abs(want))


def test_exp_within_one_ulp_of_numpy(rng):
    # numpy's exp (the C library's) as the reference, over the whole accepted range and
    # densely on the interval of the reduced argument
    x = np.concatenate([np.linspace(-708.0, 709.0, 400001), rng.uniform(-1.0, 1.0, 200000),
                        rng.uniform(-40.0, 5.0, 200000), [0.0, -0.0, 1.0, -1.0]])
    out = np.empty_like(x)
    _exp_all(x, out)
    assert np.max(_ulp_error(out, np.exp(x))) <= EXP_ULP
    neg = x[x <= 0.0]
    out = np.empty_like(neg)
    _exp_nonpositive_all(neg, out)
    assert np.max(_ulp_error(out, np.exp(neg))) <= EXP_ULP


def test_exp_propagates_nan_and_clamps():
    out = np.empty(3)
    _exp_all(np.array([np.nan, 1e4, -1e4]), out)
    assert np.isnan(out[0])
    assert out[1] == pytest.approx(np.exp(709.0)) and out[2] == pytest.approx(np.exp(-708.0))


def test_fma_is_correctly_rounded(rng):
    # IEEE 754-2008 fusedMultiplyAdd: the exact a*b+c rounded once (exact rationals as the reference)
    a, b, c = (rng.normal(size=2000) * 10.0 ** rng.integers(-5, 5, 2000) for _ in range(3))
    out = np.empty_like(a)
    _fma_all(a, b, c, out)
    want = np.array([float(Fraction(x) * Fraction(y) + Fraction(z)) for x, y, z in zip(a, b, c)])
    np.testing.assert_array_equal(out, want)


@pytest.mark.parametrize("theta", [0.5, 1.0])
@pytest.mark.parametrize("n", [1, 2, 3, 4, 5, 10, 11, 257])
def test_two_sided_solve_matches_dense_solve(n, theta, rng):
    # the theta scheme (I - theta h L) v' = (I + (1-theta) h L) v, solved densely by numpy
    lo = rng.uniform(1.0, 60.0, n)
    up = rng.uniform(1.0, 60.0, n)
    lo[0] = up[-1] = 0.0
    h = 0.02
    L = np.zeros((n, n))
    for i in range(n):
        if i > 0:
            L[i, i - 1] += lo[i]
            L[i, i] -= lo[i]
        if i < n - 1:
            L[i, i + 1] += up[i]
            L[i, i] -= up[i]
    v = rng.normal(size=n)
    want = np.linalg.solve(np.eye(n) - theta * h * L, v + (1.0 - theta) * h * L @ v)
    got = v.copy()
    diffusion.diffuse(got, lo, up, h, theta, *diffusion.factor(lo, up, h, theta), np.zeros(n))
    np.testing.assert_allclose(got, want, rtol=1e-12, atol=1e-12)


def test_block_probe_equals_plain_probe(rng):
    # common practice: the optimised pass must leave exactly the same probe state
    # (activations, upstrokes, and the repolarisation probe: rest, peak, level crossings)
    from cable.measure.apd import ApdProbe

    n, dt, thr = 300, 0.01, -20.0
    arrays = {}
    for name in ("plain", "block"):
        arrays[name] = dict(vprev=np.full(n, -70.0), act=np.full((n, 4), np.nan), nact=np.zeros(n, np.int64),
                            pre=np.zeros(n), open_up=np.zeros(n, np.int64), ups=np.full((n, 4), np.nan),
                            apd=ApdProbe(np.full(n, -70.0), 4, (90.0, 30.0, 50.0)))
    bounds = loop.probe_bounds(arrays["block"]["open_up"], arrays["block"]["apd"].args())
    dnow = np.empty(n)
    i_stim = np.zeros(n)
    x = np.arange(n)
    grid = (np.r_[0.0, np.full(n - 1, 30.0)], np.r_[np.full(n - 1, 30.0), 0.0], 0.5 * dt, 1)
    for k in range(250):
        # a front moving right and a back following it, with noise: crossings, upstrokes
        # and repolarisation crossings at a few nodes only
        front, back = 40 + k, k - 60
        v = np.where((x < front) & (x >= back), 30.0 - 0.5 * (front - x), -70.0) + rng.normal(0.0, 0.5, n)
        v[front:front + 3] = np.linspace(-10.0, -60.0, 3)
        stim_on = k < 3
        i_stim[:] = 0.0
        i_stim[:30] = 50.0 if stim_on else 0.0   # a stimulated site: the others take the quiet pass
        a = arrays["plain"]
        integrate.probe(v, a["vprev"], k * dt, dt, thr, a["act"], a["nact"], a["pre"], a["open_up"], a["ups"],
                        a["apd"].args(), i_stim, grid)
        a = arrays["block"]
        # the fast loop's dlast is this step's dnow (it swaps the two): here copied
        loop.block_probe(v, a["vprev"], dnow, k * dt, dt, thr, a["act"], a["nact"], a["pre"], a["open_up"],
                          a["ups"], a["apd"].args(), i_stim, grid, stim_on, *bounds)
        a["apd"].dlast[:] = dnow
    assert np.isfinite(arrays["plain"]["apd"].repol).sum() > 100   # the pattern does repolarise
    # the plain probe writes a repolarising beat's running peak every step, the quiet pass
    # only at the node's next event; every run ends with finish(), which stores it (simulate, batch)
    for a in arrays.values():
        a["apd"].finish(a["nact"])
    # the running peak of a node with no level pending is neither read nor kept by the
    # quiet pass (the next upstroke resets it): compared where a level is pending
    pending = arrays["plain"]["apd"].pending < 3
    assert pending.any() and not pending.all()
    np.testing.assert_array_equal(arrays["block"]["apd"].vpeak[pending], arrays["plain"]["apd"].vpeak[pending])
    for key in arrays["plain"]:
        if key == "apd":
            for j, (got, want) in enumerate(zip(arrays["block"][key].args(), arrays["plain"][key].args())):
                if j != 4:  # vpeak, above
                    np.testing.assert_array_equal(got, want)
        else:
            np.testing.assert_array_equal(arrays["plain"][key], arrays["block"][key])


def _random_state(model, n, rng, lo=-100.0, hi=60.0):
    v = rng.uniform(lo, hi, n)
    s = np.tile(model.initial_states(), (n, 1))
    s = s * rng.uniform(0.7, 1.3, s.shape)
    p = np.tile(model.default_parameters(), (n, 1))
    return v, s, p


@pytest.mark.parametrize("gating", [0, 1])
@pytest.mark.parametrize("name", FAST_MODELS)
def test_fast_exact_kernel_matches_reaction(name, gating, rng):
    # the fast kernel with no table evaluates the contract kernel's rates (to rounding)
    model = cable.get_model(name)
    n, dt = 500, 0.01
    v, s, p = _random_state(model, n, rng)
    i_stim = rng.uniform(0.0, 5.0, n)
    v_ref, s_ref = v.copy(), s.copy()
    model.reaction(v_ref, s_ref, p, i_stim, dt, 1.0, gating)
    layouts = [(tables.by_parameter(p), True), (np.ascontiguousarray(p.T), True)]   # one column, per node
    if not model.fast.by_state:
        layouts = [(p, False)]
    for pk, by_state in layouts:
        v1, sk = v.copy(), np.array(s.T if by_state else s, order="C")  # a copy: s.T of one state is a view
        model.fast.kernel(v1, sk, pk, i_stim, dt, 1.0, gating, tables.no_table(), 0.0, 1.0, tables.one_group(n))
        np.testing.assert_allclose(v1, v_ref, rtol=STEP_RTOL, atol=1e-12)
        np.testing.assert_allclose(sk.T if by_state else sk, s_ref, rtol=STEP_RTOL, atol=1e-12)


@pytest.mark.parametrize("which, rtol", [
    ("oracle", STEP_RTOL),
    # the generated kernel within 1e-4 mV of a singular point takes the line through both sides:
    # ~1e-10 relative off the limit (cable/membrane/equations/singular.py, its error bound)
    ("generated", 1e-9),
])
def test_hh_fast_kernel_near_the_removable_singularities(which, rtol):
    # a_m and a_n are x/(exp(x/10)-1), with the limit 10 at x = 0 (Hodgkin & Huxley 1952,
    # eqs 20 and 12); compared with the limit-safe numpy form (expm1) of the hand-written table
    # builder (tests/membrane/oracles/hodgkin_huxley_1952.py, the test oracle), for its own fast
    # kernel and for the generated model's (what "hodgkin-huxley-1952" is)
    from conftest import oracle

    hh = oracle("hodgkin-huxley-1952")
    model = hh.MODEL if which == "oracle" else cable.get_model("hodgkin-huxley-1952")
    v = np.array([-40.0, -40.0 + 1e-9, -40.0 - 1e-6, -40.0 + 2e-4, -55.0, -55.0 + 1e-7, -55.0 - 3e-4])
    n, dt = v.size, 0.01
    s = np.tile(model.initial_states(), (n, 1))
    p = np.tile(model.default_parameters(), (n, 1))
    (am, bm), (ah, bh), (an, bn) = hh._rates_numpy(v, 1.0)
    want = np.empty_like(s)
    for g, (a, b) in enumerate(((am, bm), (ah, bh), (an, bn))):
        inf = a / (a + b)
        want[:, g] = inf + (s[:, g] - inf) * np.exp(-dt * (a + b))
    sT = np.ascontiguousarray(s.T)
    model.fast.kernel(v.copy(), sT, tables.by_parameter(p), np.zeros(n), dt, 1.0, 0, tables.no_table(), 0.0, 1.0,
                      tables.one_group(n))
    np.testing.assert_allclose(sT.T, want, rtol=rtol)


@pytest.mark.parametrize("gating", [0, 1])
@pytest.mark.parametrize("name", [m for m in FAST_MODELS if cable.get_model(m).fast.build_table is not None])
def test_tabulated_step_close_to_exact_and_exact_outside_the_table(name, gating, rng):
    # linear interpolation of smooth coefficients (see TABLE_STEP_ATOL); nodes outside the
    # table take the exact rates, bit for bit
    model = cable.get_model(name)
    fast = model.fast
    n, dt = 4000, 0.01
    v, s, p = _random_state(model, n, rng, fast.v_lo - 30.0, fast.v_hi + 30.0)
    plan = tables.plan(model, p, dt, gating, "tabulated")
    assert plan.mode == "tabulated"
    pk = tables.by_parameter(p) if fast.by_state else p
    states = (lambda a: np.array(a.T, order="C")) if fast.by_state else (lambda a: a.copy())  # copies
    ve, se = v.copy(), states(s)
    fast.kernel(ve, se, pk, np.zeros(n), dt, 1.0, gating, tables.no_table(), 0.0, 1.0, plan.group)
    vt, st = v.copy(), states(s)
    fast.kernel(vt, st, pk, np.zeros(n), dt, 1.0, gating, plan.table, plan.v_lo, plan.inv_dv, plan.group)
    if not fast.by_state:
        se, st = se.T, st.T
    gates = [k for k, state in enumerate(model.states) if state.units == "1"]
    inside = (v >= fast.v_lo) & (v < fast.v_hi)
    if gating == 0 and gates:  # (the passive membrane has no gates: only the bitwise check below)
        # (forward-Euler gates multiply the coefficients' curvature by dt / their own
        # step; their accuracy is checked through CV and APD90 below)
        err = np.abs(st[gates][:, inside] - se[gates][:, inside])
        assert np.quantile(err, 0.999) < TABLE_STEP_ATOL_MODEL.get(name, TABLE_STEP_ATOL)
        assert err.max() < TABLE_KINK_ATOL
        # second order in the spacing: a table 4x finer is ~16x closer (at least 8x here), where the
        # error is above rounding (1e-12: a table whose columns are linear in V, FitzHugh-Nagumo's u,
        # interpolates exactly, and there is no order to see)
        if np.quantile(err, 0.99) > 1e-12:
            fine = fast.build_table(np.asarray(p[0]), dt, gating, fast.v_lo, fast.v_hi, fast.dv / 4.0)
            vf, sf = v.copy(), states(s)
            fast.kernel(vf, sf, pk, np.zeros(n), dt, 1.0, gating, fine[None], fast.v_lo, 4.0 / fast.dv, plan.group)
            sf = sf if fast.by_state else sf.T
            err_fine = np.abs(sf[gates][:, inside] - se[gates][:, inside])
            assert np.quantile(err_fine, 0.99) < np.quantile(err, 0.99) / 8.0
    np.testing.assert_array_equal(st[:, ~inside], se[:, ~inside])
    np.testing.assert_array_equal(vt[~inside], ve[~inside])


def test_nodes_that_differ_in_table_parameters_get_their_own_table(monkeypatch):
    # one table per distinct row of FastPath.table_parameters (a table group), each the
    # table of a run of that node alone, bit for bit; the parameters the table does not
    # depend on (G_Na) do not split a group
    for name, changes in (("hodgkin-huxley-1952", {"temperature": [6.3, 6.3, 10.0, 6.3, 18.5]}),
                          ("luo-rudy-1991", {"K_o": [5.4, 12.0, 8.0, 12.0, 5.4], "G_Na": [23.0, 7.0, 15.0, 7.0, 9.0]})):
        model = cable.get_model(name)
        p = np.tile(model.default_parameters(), (5, 1))
        for key, values in changes.items():
            p[:, model.parameter_names.index(key)] = values
        plan = tables.plan(model, p, 0.01, 0, "tabulated")
        assert plan.mode == "tabulated" and plan.note is None
        assert plan.table.shape[0] == 3 and plan.group.shape == (5,)
        for i in range(5):
            alone = tables.plan(model, p[i:i + 1], 0.01, 0, "tabulated")
            assert alone.table.shape[0] == 1
            np.testing.assert_array_equal(plan.table[plan.group[i]], alone.table[0])
        key = p[:, [model.parameter_names.index(k) for k in model.fast.table_parameters]]
        for i in range(5):   # one group per distinct row of the table parameters
            assert [plan.group[j] == plan.group[i] for j in range(5)] == [bool(np.all(key[j] == key[i]))
                                                                            for j in range(5)]
    # more groups than MAX_TABLE_BYTES holds: exact rates, and the run says why
    monkeypatch.setattr(tables, "MAX_TABLE_BYTES", 2 * plan.table[0].nbytes)
    small = tables.plan(model, p, 0.01, 0, "tabulated")
    assert small.mode == "exact" and "K_o" in small.note and small.table.shape[1] == 0
    no_fast = replace(cable.get_model("passive"), fast=None)  # (every registered model has a fast path now)
    assert tables.plan(no_fast, p[:, :0], 0.01, 0, "tabulated").mode == "reference"


def test_lr1_strand_with_a_raised_potassium_zone_cv_and_apd90_tabulated_against_exact():
    # a zone of raised K_o (12 mM, normal 5.4; our scenario as in cases/ischaemic_zone.toml,
    # one beat): its nodes, and those of its ramped border, are table groups of their own; the
    # issue's bound (0.1%) for the tabulated path against the exact one, upstream of the zone
    # (CV) and inside it (APD90)
    def run(rates):
        return cable.simulate({
            "membrane": {"model": "luo-rudy-1991"},
            "fiber": {"length": 0.6, "dx": 0.01, "radius": "11 um", "axial_resistivity": "300 ohm*cm"},
            "region": {"zone": {"start": 0.2, "end": 0.4, "border": 0.05, "parameters": {"K_o": 12.0},
                                "scale": {"G_Na": 0.6}}},
            "stimulus": [{"amplitude": 100.0, "duration": 1.0, "width": 0.03}],
            "numerics": {"dt": 0.02, "rates": rates}, "run": {"duration": 400.0}, "output": {"every": 0.5},
            "measure": {"cv_window": [0.05, 0.15]}})

    tab, exact = run("tabulated"), run("exact")
    assert tab.attrs["rates"] == "tabulated" and exact.attrs["rates"] == "exact"
    for ds in (tab, exact):
        assert bool(ds.conducted[0])
    cv_t, cv_e = float(tab.conduction_velocity[0]), float(exact.conduction_velocity[0])
    assert abs(cv_t - cv_e) / cv_e < FAST_PATH_BOUND
    for x in (0.1, 0.3):   # normal tissue, and the zone
        apd_t = float(tab.apd.sel(level=90.0).isel(beat=0).sel(x=x, method="nearest"))
        apd_e = float(exact.apd.sel(level=90.0).isel(beat=0).sel(x=x, method="nearest"))
        assert 100.0 < apd_e < 500.0     # a full action potential (sanity of the run)
        assert abs(apd_t - apd_e) / apd_e < FAST_PATH_BOUND


@pytest.fixture
def passive_without_fast_path(monkeypatch):
    """The registry name ``passive-no-fast``: the passive membrane without its fast path (every
    registered model has one since the built-ins are generated, issue 12)."""
    import sys

    import cable.membrane

    real = cable.membrane.get_model
    model = replace(real("passive"), fast=None, name="passive-no-fast")

    def get_model(name):
        return model if str(name) == "passive-no-fast" else real(name)

    for module in (cable.membrane, sys.modules["cable.preparation"], sys.modules["cable.kernels.loops"], cable):
        monkeypatch.setattr(module, "get_model", get_model)
    return "passive-no-fast"


def _hh_strand(rates, **numerics):
    # the Hodgkin & Huxley (1952) axon (radius 238 um, 35.4 ohm*cm, 18.5 degC), 2 cm
    return {"membrane": {"model": "hodgkin-huxley-1952", "temperature": 18.5},
            "fiber": {"length": 2.0, "dx": 0.01, "radius": "238 um", "axial_resistivity": "35.4 ohm*cm"},
            "stimulus": [{"amplitude": 800.0, "duration": 0.3, "width": 0.05}],
            "numerics": {"dt": 0.005, "rates": rates, **numerics},
            "run": {"duration": 6.0}, "output": {"every": 0.01}}


def _cv_apd(ds):
    apd = ds.apd.sel(level=90.0).isel(beat=0)
    return float(ds.conduction_velocity[0]), float(apd.isel(x=apd.sizes["x"] // 2))


@pytest.mark.parametrize("numerics", [{}, {"splitting": "godunov"}, {"gating": "forward-euler", "dt": 0.002},
                                      {"merge_half_steps": False, "diffusion": "backward-euler"}])
def test_hh_strand_cv_and_apd90_of_the_fast_paths(numerics):
    # the bound (0.1%) for the tabulated path against the exact one; the exact fast
    # path against the reference kernel to rounding
    runs = {rates: cable.simulate(_hh_strand(rates, **numerics)) for rates in tables.RATES}
    assert runs["tabulated"].attrs["rates"] == "tabulated"
    cv_t, apd_t = _cv_apd(runs["tabulated"])
    cv_e, apd_e = _cv_apd(runs["exact"])
    cv_r, apd_r = _cv_apd(runs["reference"])
    assert np.isfinite([cv_t, apd_t]).all()
    assert abs(cv_t - cv_e) / cv_e < FAST_PATH_BOUND
    assert abs(apd_t - apd_e) / apd_e < FAST_PATH_BOUND
    assert abs(cv_e - cv_r) / cv_r < EXACT_RUN_RTOL
    assert abs(apd_e - apd_r) / apd_r < EXACT_RUN_RTOL
    np.testing.assert_allclose(runs["exact"].vm, runs["reference"].vm, atol=1e-6)


def test_hh_strand_with_a_region_takes_the_per_node_path():
    # a region of reduced sodium conductance (g_Na differs between nodes, the temperature
    # does not: the table is still used); the bound against the reference kernel
    case = _hh_strand("tabulated")
    case["region"] = [{"start": 0.8, "end": 1.2, "border": 0.1, "scale": {"g_Na": 0.7}}]
    tab = cable.simulate(case)
    ref = cable.simulate(dict(case, numerics=dict(case["numerics"], rates="reference")))
    assert tab.attrs["rates"] == "tabulated"
    cv_t, apd_t = _cv_apd(tab)
    cv_r, apd_r = _cv_apd(ref)
    assert abs(cv_t - cv_r) / cv_r < FAST_PATH_BOUND and abs(apd_t - apd_r) / apd_r < FAST_PATH_BOUND


def _tp06_strand(rates, cell="epi"):
    # ten Tusscher et al. 2004 tissue settings (rho 162 ohm*cm, S 0.2 /um, C_m 2 uF/cm^2)
    return {"membrane": {"model": "ten-tusscher-panfilov-2006", "parameters": {"cell_type": cell}},
            "fiber": {"length": 1.0, "dx": 0.01, "conductivity": 1000.0 / 162.0, "surface_to_volume": 2000.0,
                      "capacitance": 2.0},
            "stimulus": [{"amplitude": 200.0, "duration": 1.0, "width": 0.1}],
            "numerics": {"dt": 0.02, "rates": rates}, "run": {"duration": 360.0}, "output": {"every": 0.5}}


@pytest.mark.parametrize("cell", ["epi", "endo"])
def test_tp06_strand_cv_and_apd90_tabulated_against_exact(cell):
    # the bound (0.1%); the exact path of this model is its reference kernel
    tab = cable.simulate(_tp06_strand("tabulated", cell))
    exact = cable.simulate(_tp06_strand("exact", cell))
    assert tab.attrs["rates"] == "tabulated" and exact.attrs["rates"] == "exact"
    cv_t, apd_t = _cv_apd(tab)
    cv_e, apd_e = _cv_apd(exact)
    assert 200.0 < apd_e < 400.0          # a full ventricular action potential (sanity of the run)
    assert abs(cv_t - cv_e) / cv_e < FAST_PATH_BOUND
    assert abs(apd_t - apd_e) / apd_e < FAST_PATH_BOUND


def test_rates_key_is_validated_and_recorded(passive_without_fast_path):
    case = _hh_strand("tabulate")
    with pytest.raises(cable.CaseError, match=r"numerics\.rates.*Did you mean 'tabulated'"):
        cable.load_case(case)
    assert cable.load_case(_hh_strand("exact")).numerics.rates == "exact"
    default = _hh_strand("exact")
    del default["numerics"]["rates"]
    assert cable.load_case(default).numerics.rates == "tabulated"
    # a model without a fast path runs its reference kernel whatever is asked
    passive = {"membrane": {"model": passive_without_fast_path}, "stimulus": [{"amplitude": 1.0, "duration": 1.0}],
               "numerics": {"dt": 0.01, "rates": "tabulated"}, "run": {"duration": 2.0}}
    assert cable.simulate(passive).attrs["rates"] == "reference"


def test_tabulated_fallback_is_said_once(passive_without_fast_path):
    # issue 13 item 13: a model without a fast path runs its plain kernel under the default
    # rates = "tabulated"; the run says so, once
    case = {"membrane": {"model": passive_without_fast_path}, "run": {"duration": 2.0},
            "numerics": {"dt": 0.01}, "output": {"every": 0.5}}
    said = []
    cable.simulate(case, info=said.append)
    assert sum("has no fast path" in line for line in said) == 1
    said.clear()
    cable.simulate(dict(case, numerics={"dt": 0.01, "rates": "reference"}), info=said.append)
    assert not any("fast path" in line for line in said)
