"""The fast path of generated models (cable/membrane/equations/fastpath.py, singular.py):
removable singular points evaluated by their limit, batches bitwise their nodes alone,
the by-state layout against the reaction kernel."""

import numpy as np
import pytest

import cable
from cable.kernels import tables
from conftest import oracle

GENERATED_LR1 = "equations:luo_rudy_1991"
GENERATED_HH = "equations:hodgkin_huxley_1952"


def exact_step(model, v, s, p, dt=0.01, gating=0, table=None, v_lo=0.0, inv_dv=1.0, group=None):
    sT = np.ascontiguousarray(s.T)
    v = v.copy()
    model.fast.kernel(v, sT, p, np.zeros(v.size), dt, 1.0, gating,
                      tables.no_table() if table is None else table, v_lo, inv_dv,
                      tables.one_group(v.size) if group is None else group)
    return v, sT.T


def test_lr1_exact_rates_at_the_removable_singularities():
    # Luo & Rudy 1991 (Circ Res 68:1501): alpha_m = 0.32 (V + 47.13)/(1 - exp(-0.1 (V + 47.13)))
    # is 0/0 at -47.13 mV (limit 3.2 /ms), the I_K factor X_i at -77 mV; the hand-written kernel
    # (tests/membrane/oracles/luo_rudy_1991.py, the test oracle) evaluates both by their limits
    gen, hand = cable.get_model(GENERATED_LR1), oracle("luo-rudy-1991").MODEL
    v = np.array([-47.13, -47.13 + 1e-9, -47.13 - 5e-5, -77.0, -77.0 + 1e-9, -77.0 + 3e-4, -20.0])
    n = v.size
    s = np.tile(hand.initial_states(), (n, 1))
    p = np.tile(hand.default_parameters(), (n, 1))
    for gating in (0, 1):
        a = (v.copy(), s.copy())
        hand.reaction(*a, p, np.zeros(n), 0.01, 1.0, gating)
        b = exact_step(gen, v, s, tables.by_parameter(p), gating=gating)
        assert np.all(np.isfinite(b[0])) and np.all(np.isfinite(b[1]))
        # the series branch is off by ~(0.1 mV^-1 * 1e-4 mV)^2 ~ 1e-10 relative (singular.py);
        # elsewhere rounding
        np.testing.assert_allclose(b[0], a[0], rtol=1e-9)
        np.testing.assert_allclose(b[1], a[1], rtol=1e-9, atol=1e-15)
        # the plain reaction kernel of the description (numerics.rates = "reference") takes the
        # same guarded forms (tests/membrane/equations/test_singular.py): the limit there too
        c = (v.copy(), s.copy())
        gen.reaction(*c, p, np.zeros(n), 0.01, 1.0, gating)
        np.testing.assert_allclose(c[0], a[0], rtol=1e-9)
        np.testing.assert_allclose(c[1], a[1], rtol=1e-9, atol=1e-15)


def test_hh_exact_rates_at_the_removable_singularities():
    # Hodgkin & Huxley 1952 (J Physiol 117:500), alpha_m and alpha_n: x/(exp(x/10) - 1), limit 10 at
    # x = 0 (-40 and -55 mV here); the hand-written kernel guards both (the oracle)
    gen, hand = cable.get_model(GENERATED_HH), oracle("hodgkin-huxley-1952").MODEL
    v = np.array([-40.0, -40.0 + 1e-9, -55.0, -55.0 - 1e-7, 0.0])
    n = v.size
    s = np.tile(hand.initial_states(), (n, 1))
    p = np.tile(hand.default_parameters(), (n, 1))
    a = (v.copy(), s.copy())
    hand.reaction(*a, p, np.zeros(n), 0.01, 1.0, 0)
    b = exact_step(gen, v, s, tables.by_parameter(p))
    np.testing.assert_allclose(b[0], a[0], rtol=1e-9)  # series branch: ~1e-10 (see above)
    np.testing.assert_allclose(b[1], a[1], rtol=1e-9, atol=1e-15)


@pytest.mark.parametrize("name", [GENERATED_LR1, "ten-tusscher-panfilov-2006"])
@pytest.mark.parametrize("rates", ["exact", "tabulated"])
def test_a_batch_gives_each_node_its_result_alone(rates, name):
    # parameters by node (pT with n columns), each node in the table of its group: bit for bit
    # its run alone (FastPath contract); 70 nodes: more than one block of the kernel, and a
    # partial one; TP06: each node its own cell type too (a labelled parameter: the table
    # holds the columns of every label)
    model = cable.get_model(name)
    rng = np.random.default_rng(4)
    n, dt = 70, 0.01
    v = rng.uniform(-90.0, 40.0, n)
    s = np.tile(model.initial_states(), (n, 1)) * rng.uniform(0.8, 1.2, (n, len(model.states)))
    p = np.tile(model.default_parameters(), (n, 1))
    for j, par in enumerate(model.parameters):
        if par.choices:
            p[:, j] = rng.integers(0, len(par.choices), n)
    model.fill_labelled_defaults(p)
    g = model.parameter_names.index(model.conductances[0])
    p[:, g] *= rng.uniform(0.5, 1.5, n)  # a conductance: not a table parameter
    k_o = model.parameter_names.index("K_o")   # a table parameter: three table groups
    p[:, k_o] = rng.choice([5.4, 8.0, 12.0], n)
    plan = tables.plan(model, p, dt, 0, rates)
    assert plan.mode == rates and plan.table.shape[0] == (3 if rates == "tabulated" else 1)
    batch = (v.copy(), np.ascontiguousarray(s.T))
    model.fast.kernel(*batch, np.ascontiguousarray(p.T), np.zeros(n), dt, 1.0, 0, plan.table, plan.v_lo,
                      plan.inv_dv, plan.group)
    own = {}   # each node alone with its own plan (one table), shared by nodes with equal parameters
    for i in range(n):  # but the conductance: K_o and, for TP06, the cell type (a single-node plan fills
        alone = (v[i:i + 1].copy(), np.ascontiguousarray(s[i:i + 1].T))  # the columns of its label only)
        row = tuple(np.delete(p[i], g))
        own[row] = own.get(row) or tables.plan(model, p[i:i + 1], dt, 0, rates)
        model.fast.kernel(*alone, np.ascontiguousarray(p[i:i + 1].T), np.zeros(1), dt, 1.0, 0, own[row].table,
                          plan.v_lo, plan.inv_dv, own[row].group)
        assert alone[0][0] == batch[0][i]
        np.testing.assert_array_equal(alone[1][:, 0], batch[1][:, i])
    # and the same parameters everywhere (one column) as by node
    same = np.tile(model.default_parameters(), (n, 1))
    plan = tables.plan(model, same, dt, 0, rates)
    one, each = (v.copy(), np.ascontiguousarray(s.T)), (v.copy(), np.ascontiguousarray(s.T))
    model.fast.kernel(*one, tables.by_parameter(same), np.zeros(n), dt, 1.0, 0, plan.table, plan.v_lo, plan.inv_dv,
                      plan.group)
    model.fast.kernel(*each, np.ascontiguousarray(same.T), np.zeros(n), dt, 1.0, 0, plan.table, plan.v_lo,
                      plan.inv_dv, plan.group)
    np.testing.assert_array_equal(one[0], each[0])
    np.testing.assert_array_equal(one[1], each[1])


def test_nodes_outside_the_table_take_the_exact_rates():
    model = cable.get_model(GENERATED_LR1)
    n, dt = 5, 0.01
    v = np.array([-160.0, -84.0, 120.0, 0.0, -151.0])  # the table spans -150..100 mV
    s = np.tile(model.initial_states(), (n, 1))
    p = tables.by_parameter(model.default_parameters()[None, :])
    plan = tables.plan(model, model.default_parameters()[None, :], dt, 0, "tabulated")
    t = exact_step(model, v, s, p, dt, table=plan.table, v_lo=plan.v_lo, inv_dv=plan.inv_dv)
    e = exact_step(model, v, s, p, dt)
    out = [0, 2, 4]
    np.testing.assert_array_equal(t[0][out], e[0][out])
    np.testing.assert_array_equal(t[1][out], e[1][out])
