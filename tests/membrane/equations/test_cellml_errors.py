"""Bad CellML input is refused with the package's error (exit status 2) and a message that says why."""

import pytest

import cable
from cable.case import CaseError
from cable.cli import main
from cable.membrane.equations.registry import cellml_model_name
from cellml_reference import needs_files, path

MINIMAL = """<?xml version="1.0" encoding="UTF-8"?>
<model xmlns="http://www.cellml.org/cellml/2.0#" xmlns:cellml="http://www.cellml.org/cellml/2.0#" name="m">
  <units name="ms"><unit units="second" prefix="milli"/></units>
  <units name="mV"><unit units="volt" prefix="milli"/></units>
  <units name="per_ms"><unit units="second" prefix="milli" exponent="-1"/></units>
  <component name="membrane">
    <variable name="t" units="ms"/>
    <variable name="V" units="{vunits}" initial_value="-80"/>
    {extra_vars}
    <math xmlns="http://www.w3.org/1998/Math/MathML">
      <apply><eq/><apply><diff/><bvar><ci>t</ci></bvar><ci>V</ci></apply>{rhs}</apply>
      {extra_math}
    </math>
  </component>
</model>
"""
DECAY = "<apply><times/><cn cellml:units=\"per_ms\">-0.1</cn><apply><plus/><ci>V</ci><cn cellml:units=\"mV\">80</cn></apply></apply>"


def write(tmp_path, text, name="m.cellml"):
    f = tmp_path / name
    f.write_text(text)
    return f


def run_models(f, capsys):
    code = main(["models", str(f)])
    return code, capsys.readouterr().err


def test_not_cellml(tmp_path, capsys):
    code, err = run_models(write(tmp_path, "just some text\n"), capsys)
    assert code == 2 and "is not a CellML file" in err and "m.cellml" in err


def test_invalid_cellml_lists_libcellml_messages(tmp_path, capsys):
    # a variable in units that are not defined: the validator refuses it
    text = MINIMAL.format(vunits="millivolt_undefined", extra_vars="", rhs=DECAY, extra_math="")
    code, err = run_models(write(tmp_path, text), capsys)
    assert code == 2 and "libcellml validator finds it invalid" in err and "millivolt_undefined" in err


def test_algebraic_loop_is_refused_in_a_sentence(tmp_path, capsys):
    # x = 1 - x*x (a nonlinear algebraic equation): libcellml classes the model as "nla"
    extra_vars = '<variable name="x" units="dimensionless"/>'
    extra_math = ('<apply><eq/><ci>x</ci><apply><minus/><cn cellml:units="dimensionless">1</cn>'
                  '<apply><times/><ci>x</ci><ci>x</ci></apply></apply></apply>')
    rhs = f"<apply><times/><ci>x</ci>{DECAY}</apply>"
    text = MINIMAL.format(vunits="mV", extra_vars=extra_vars, rhs=rhs, extra_math=extra_math)
    code, err = run_models(write(tmp_path, text), capsys)
    # (libcellml 0.7 classes this one as an ODE model; the package finds the loop itself)
    assert code == 2 and "algebraic loop" in err and "ordinary differential equations" in err


def test_potential_in_units_that_do_not_convert(tmp_path, capsys):
    text = MINIMAL.format(vunits="ms", extra_vars="", rhs="<cn cellml:units=\"dimensionless\">0</cn>",
                          extra_math="")
    f = write(tmp_path, text)
    with pytest.raises(CaseError, match=r"variable .*V is in units 'ms', which cannot be converted to mV"):
        cable.get_model(cellml_model_name(f, potential="V"))


@needs_files
def test_unknown_potential_names_the_nearest(capsys):
    with pytest.raises(CaseError, match=r"membrane.potential = 'membrane.Vx'.*Nearest: .*membrane.V"):
        cable.load_case({"membrane": {"cellml": path("noble_1962"), "potential": "membrane.Vx"},
                         "run": {"duration": 1.0}})


@needs_files
def test_recognition_keys_only_for_cellml():
    with pytest.raises(CaseError, match="applies to CellML models only"):
        cable.load_case({"membrane": {"model": "hodgkin-huxley-1952", "potential": "membrane.V"},
                         "run": {"duration": 1.0}})
    with pytest.raises(CaseError, match="both given"):
        cable.load_case({"membrane": {"model": "hodgkin-huxley-1952", "cellml": path("noble_1962")},
                         "run": {"duration": 1.0}})


@needs_files
def test_case_file_path_is_relative_to_the_case(tmp_path):
    import os
    rel = os.path.relpath(path("noble_1962"), tmp_path)
    case = tmp_path / "c.toml"
    case.write_text(f'[membrane]\ncellml = "{rel}"\n[run]\nduration = 1.0\n')
    c = cable.load_case(str(case))
    assert c.membrane.model == cellml_model_name(path("noble_1962"))
    assert c.capacitance == pytest.approx(12.0)  # Noble 1962's own C_m (12 uF/cm^2 in the file)
