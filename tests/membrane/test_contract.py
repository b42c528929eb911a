"""The contract every registered membrane model fulfils (runs over the whole registry)."""

import numpy as np
import pytest

import cable
from cable.units import CANONICAL

MODELS = cable.model_names()


@pytest.mark.parametrize("name", MODELS)
def test_declarations(name):
    model = cable.get_model(name)
    assert model.citation and model.summary
    assert model.current_basis in ("area", "capacitance")
    for p in model.parameters:
        assert p.quantity in CANONICAL, f"{name}.{p.name}: unknown quantity {p.quantity}"
        assert p.units and p.meaning
    for s in model.states:
        assert s.units and s.meaning and np.isfinite(s.initial)
    assert set(model.conductances) <= set(model.parameter_names)
    assert len(set(model.state_names)) == len(model.states)


@pytest.mark.parametrize("name", MODELS)
def test_kernel_matches_numpy_reference(name):
    # one forward-Euler step of the compiled kernel equals the numpy derivatives
    # (dt 1e-8 ms: the kernel evaluates I_ion with the updated gates, which differ from the old
    # ones by ~dt/tau; fast gates away from rest (TP06 d gate at +10 mV) need a step this small)
    model = cable.get_model(name)
    n = 3
    v = np.array([model.resting_potential, -40.0, 10.0])
    s = np.tile(model.initial_states(), (n, 1)).reshape(n, len(model.states))
    p = np.tile(model.default_parameters(), (n, 1))
    _, ds_ref, ion = model.reference(v, s, p)
    dt = 1e-8
    v1, s1 = v.copy(), s.copy()
    model.reaction(v1, s1, p, np.zeros(n), dt, 1.0, 1)
    np.testing.assert_allclose((v1 - v) / dt, -ion, rtol=1e-5, atol=1e-6)
    if s.shape[1]:
        # round-off of s + dt*ds: a few ulps of |s| divided by dt
        roundoff = 8 * np.finfo(float).eps * (np.abs(s) + 1e-300) / dt
        assert np.all(np.abs((s1 - s) / dt - ds_ref) <= 1e-4 * np.abs(ds_ref) + roundoff + 1e-12)


@pytest.mark.parametrize("name", MODELS)
def test_resting_state_is_stable(name):
    # no stimulus for 200 ms: the potential stays at rest (drift below 1 mV: common practice)
    model = cable.get_model(name)
    ds = cable.simulate({"membrane": {"model": name}, "run": {"duration": 200.0},
                         "numerics": {"dt": 0.01}, "output": {"every": 1.0}})
    drift = np.abs(ds.vm.values - ds.vm.values[0]).max()
    assert drift < 1.0, f"{name} drifts {drift:.3g} mV at rest"
    assert ds.sizes["beat"] == 0
    # the declared resting state is (close to) a fixed point of the model's own equations:
    # |dV/dt| below 0.01 mV/ms, i.e. under 1 mV per 100 ms (common practice for a resting state)
    v = np.array([model.resting_potential])
    _, _, ion = model.reference(v, model.initial_states().reshape(1, -1), model.default_parameters().reshape(1, -1))
    assert abs(float(ion[0]) * model.ion_scale(1.0)) < 1e-2


def _unit_cases():
    for name in MODELS:
        for par in cable.get_model(name).parameters:
            if par.choices is None:
                yield name, par.name


@pytest.mark.parametrize("name, parameter", list(_unit_cases()))
def test_every_parameter_accepts_its_declared_unit(name, parameter):
    # issue 13 item 11: a value written in the unit `cable models` lists, and the same value
    # in SI base units (pint's conversion), both load as the default (to rounding, 1e-12)
    from cable.units import registry

    par = cable.get_model(name).parameter(parameter)
    if par.units in ("1", ""):
        texts = [repr(par.default)]
    else:
        q = registry().Quantity(par.default, par.units).to_base_units()
        texts = [f"{par.default!r} {par.units}", f"{q.magnitude!r} {q.units}"]
    for text in texts:
        case = cable.load_case({"membrane": {"model": name, "parameters": {parameter: text}},
                                "run": {"duration": 1.0}})
        assert case.membrane.parameters[parameter] == pytest.approx(par.default, rel=1e-12, abs=0.0), text


@pytest.mark.parametrize("name", MODELS)
def test_currents_sum_to_ionic_current(name):
    model = cable.get_model(name)
    if model.currents is None:
        pytest.skip(f"{name} declares no individual currents")
    n = 2
    v = np.array([model.resting_potential, 0.0])
    s = np.tile(model.initial_states(), (n, 1)).reshape(n, len(model.states))
    p = np.tile(model.default_parameters(), (n, 1))
    out = np.zeros((n, len(model.current_names)))
    model.currents(v, s, p, out)
    _, _, ion = model.reference(v, s, p)
    np.testing.assert_allclose(out.sum(axis=1), ion, rtol=1e-9, atol=1e-9)


@pytest.mark.parametrize("name", MODELS)
def test_names_are_resolved_in_any_case_where_unambiguous(name):
    # a case may write g_Na for G_Na (issue 16); a name two entries share when case is ignored stays exact
    m = cable.get_model(name)
    for kind, names in (("conductance", m.conductances), ("parameter", m.parameter_names),
                        ("state", m.state_names)):
        for n in names:
            unique = sum(o.casefold() == n.casefold() for o in names) == 1
            for spelt in (n, n.upper(), n.lower(), n.swapcase()):
                found, note = m.resolve(spelt, kind)
                assert note is None
                if spelt in names:
                    assert found == spelt
                else:
                    assert found == (n if unique else None)
        assert m.resolve("no_such_name", kind) == (None, None)
