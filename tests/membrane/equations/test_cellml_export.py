"""CellML export: a model with equations written as CellML 2.0 (accepted by the libcellml validator,
checked inside the export) and imported again gives the same results (round trip)."""

import json

import numpy as np
import pytest

import cable
from cable.cli import main
from cable.membrane import model_names
from cable.membrane.equations import EquationError
from cable.membrane.equations.cellml_export import equations_of, export
from cable.membrane.equations.registry import cellml_model_name
from cellml_reference import needs_files, path


def axon(model):
    ds = cable.simulate({
        "membrane": {"model": model},
        "fiber": {"length": 2.0, "dx": 0.01, "radius": "238 um", "axial_resistivity": "35.4 ohm*cm"},
        "stimulus": [{"amplitude": 1000.0, "duration": 0.2, "width": 0.1}],
        "numerics": {"dt": 0.01, "rates": "exact"}, "run": {"duration": 8.0}, "output": {"every": 0.05}})
    return float(ds.conduction_velocity[0]), float(ds.apd.values.ravel()[0])


@pytest.mark.slow
def test_round_trip_of_the_hh_description(tmp_path):
    out = tmp_path / "hh.cellml"
    assert main(["models", "hodgkin-huxley-1952", "--cellml", str(out)]) == 0
    back = cable.get_model(cellml_model_name(out))
    gen = cable.get_model("equations:hodgkin_huxley_1952")
    assert back.state_names == gen.state_names
    assert back.current_names == gen.current_names == cable.get_model("hodgkin-huxley-1952").current_names
    np.testing.assert_allclose(back.initial_states(), gen.initial_states(), rtol=1e-15)
    # the same equations, rewritten by libcellml: CV and APD90 to 1e-6 (the bound)
    for a, b in zip(axon(back.name), axon("equations:hodgkin_huxley_1952")):
        assert a == pytest.approx(b, rel=1e-6)


@needs_files
@pytest.mark.parametrize("name", ["noble_1962"])
def test_imported_models_export_and_read_back(tmp_path, name):
    # derivatives at the initial state agree after export and import (1e-12 relative: rounding);
    # names are CellML identifiers in the export (component.variable -> component_variable).
    # (ORd and Fabbri export too, checked by hand with `cable models FILE --cellml OUT`: 40 s each here)
    m = cable.get_model(cellml_model_name(path(name)))
    out = tmp_path / f"{name}.cellml"
    out.write_text(export(equations_of(m)))
    back = cable.get_model(cellml_model_name(out))
    ident = [n.replace(".", "_") for n in m.state_names]
    assert sorted(back.state_names) == sorted(ident) and back.current_basis == m.current_basis
    order = [back.state_names.index(n) for n in ident]  # libcellml orders states its own way
    v = np.array([m.resting_potential])
    given = {n.replace(".", "_"): d for n, d in zip(m.parameter_names, m.default_parameters())}
    p_back = np.array([[given.get(n, d) for n, d in zip(back.parameter_names, back.default_parameters())]])
    _, ds1, ion1 = m.reference(v, m.initial_states()[None, :], m.default_parameters()[None, :])
    _, ds2, ion2 = back.reference(v, back.initial_states()[None, :], p_back)
    np.testing.assert_allclose(back.initial_states()[order], m.initial_states(), rtol=1e-15)
    np.testing.assert_allclose(ds2[:, order], ds1, rtol=1e-12, atol=1e-300)
    np.testing.assert_allclose(ion2, ion1, rtol=1e-12)


@pytest.mark.parametrize("name", ["passive", "fitzhugh-nagumo", "mitchell-schaeffer-2003", "luo-rudy-1991",
                                  "ten-tusscher-panfilov-2006"])
def test_described_builtins_export_and_read_back(tmp_path, name):
    # the built-ins generated from a description (cable/membrane/equations/): exported by the CLI,
    # imported again, the derivatives and I_ion of the built-in's reference at random states to 1e-12
    # (rounding; libcellml rewrites the expressions). Only the plain-Python reference is compared
    # here (no kernel compiled); the strand round trip is tested for HH above and LR1 below.
    out = tmp_path / f"{name}.cellml"
    assert main(["models", name, "--cellml", str(out)]) == 0
    back, hand = cable.get_model(cellml_model_name(out)), cable.get_model(name)
    # what CellML has no place for comes back from the export's cable-description comment
    assert (back.citation, back.summary, back.threshold) == (hand.citation, hand.summary, hand.threshold)
    for key in ("current_states", "euler_order", "buffers"):  # (TP06: buffered calcium, after-gates)
        assert json.loads(back.equations)[key] == json.loads(hand.equations)[key]
    assert back.old_names == hand.old_names
    # the export's I_stim = 0 is the stimulus's place: neither a current (I_other) nor a parameter
    assert back.current_names == hand.current_names
    assert "I_stim" not in back.parameter_names
    assert sorted(back.conductances) == sorted(hand.conductances)
    assert back.temperature_parameter == hand.temperature_parameter
    by_name = {p.name: p for p in back.parameters}
    for p in hand.parameters:
        assert by_name[p.name] == p  # default, unit string, meaning, kind, bounds
    assert {s.name: (s.units, s.meaning) for s in back.states} == {s.name: (s.units, s.meaning) for s in hand.states}
    assert sorted(back.state_names) == sorted(hand.state_names)
    order = [back.state_names.index(n) for n in hand.state_names]
    np.testing.assert_allclose(back.initial_states()[order], hand.initial_states(), rtol=1e-15)
    rng = np.random.default_rng(5)
    n = 20
    v = rng.uniform(-95.0, 45.0, n)
    s = np.array([rng.uniform(0.2, 1.0, n) * (1.0 if st.units == "1" else st.initial) for st in hand.states]).T
    s = s.reshape(n, len(hand.states))
    given = dict(zip(hand.parameter_names, hand.default_parameters()))
    p_back = np.tile([given.get(k, d) for k, d in zip(back.parameter_names, back.default_parameters())], (n, 1))
    s_back = np.empty_like(s)
    s_back[:, order] = s
    _, ds1, ion1 = hand.reference(v, s, np.tile(hand.default_parameters(), (n, 1)))
    _, ds2, ion2 = back.reference(v, s_back, p_back)
    np.testing.assert_allclose(ds2[:, order], ds1, rtol=1e-12, atol=1e-300)
    np.testing.assert_allclose(ion2, ion1, rtol=1e-12, atol=1e-12)


@pytest.mark.parametrize("name", model_names())
def test_every_builtin_keeps_its_currents_through_the_export(tmp_path, name):
    # exported by the CLI and read back as a description (no kernel generated): the same currents,
    # in the same order, and no I_other (the export's I_stim = 0 taken for one)
    from cable.membrane.equations.cellml_import import build

    out = tmp_path / f"{name}.cellml"
    assert main(["models", name, "--cellml", str(out)]) == 0
    back = build(out)
    assert tuple(n for n, _ in back.currents) == cable.get_model(name).current_names
    assert "I_stim" not in [p.name for p in back.parameters]
    assert any("I_stim (a constant 0" in note for note in back.notes)


@pytest.mark.slow
def test_round_trip_of_lr1_in_a_strand(tmp_path):
    # the round trip for the built-in LR1 (its kernel takes the updated Ca_i,
    # current_states = "all", carried by the export's comment): exported, imported, the same CV and
    # APD90 in a strand to 1e-6 relative (exact rates in both: the import's hoisting of
    # subexpressions differs, so its table does too)
    out = tmp_path / "lr1.cellml"
    assert main(["models", "luo-rudy-1991", "--cellml", str(out)]) == 0

    def run(model):
        ds = cable.simulate({
            "membrane": {"model": model},
            "fiber": {"length": 0.6, "dx": 0.02, "conductivity": 1000.0 / 162.0, "surface_to_volume": 4000.0},
            "stimulus": [{"amplitude": 100.0, "duration": 1.0, "width": 0.06}],
            "numerics": {"dt": 0.02, "rates": "exact"}, "run": {"duration": 420.0}, "output": {"every": 1.0}})
        return float(ds.conduction_velocity[0]), float(np.nanmean(ds.apd.values))

    back, built_in = run(cellml_model_name(out)), run("luo-rudy-1991")
    assert np.isfinite(built_in).all() and built_in[1] > 300.0
    for a, b in zip(back, built_in):
        assert a == pytest.approx(b, rel=1e-6)


@pytest.mark.slow
def test_round_trip_of_tp06_in_a_strand(tmp_path):
    # the round trip for TP06 (buffered calcium, the stimulus in the K_i balance, the cell type's
    # labels, all carried by the export's comment), for the M cell (its labelled defaults of G_Ks and
    # the s gate): the same CV and APD90 in a strand to 1e-6 relative, on the plain reaction kernels
    # (rates = "reference": the imported model's fast path is not compiled, 64 s cold here against
    # 155 s with exact rates; the generated fast path equals the reaction kernel in
    # test_equations_builtins.py)
    out = tmp_path / "tp06.cellml"
    assert main(["models", "ten-tusscher-panfilov-2006", "--cellml", str(out)]) == 0

    def run(model):
        ds = cable.simulate({
            "membrane": {"model": model, "parameters": {"cell_type": "mid"}},
            "fiber": {"length": 0.6, "dx": 0.02, "conductivity": 1000.0 / 162.0, "surface_to_volume": 4000.0},
            "stimulus": [{"amplitude": 100.0, "duration": 1.0, "width": 0.06}],
            "numerics": {"dt": 0.02, "rates": "reference"}, "run": {"duration": 460.0}, "output": {"every": 1.0}})
        return float(ds.conduction_velocity[0]), float(np.nanmean(ds.apd.values))

    back, built_in = run(cellml_model_name(out)), run("ten-tusscher-panfilov-2006")
    assert np.isfinite(built_in).all() and built_in[1] > 300.0
    for a, b in zip(back, built_in):
        assert a == pytest.approx(b, rel=1e-6)


def test_model_without_equations_is_refused():
    # a hand-written model with no description (the TP06 oracle, renamed): nothing to export
    from dataclasses import replace

    from conftest import oracle

    with pytest.raises(EquationError, match="no description as equations"):
        equations_of(replace(oracle("ten-tusscher-panfilov-2006").MODEL, name="hand-written-only"))
