"""[drug.NAME]: conductance block from concentrations by the Hill equation.

Source of the equation: Hill (1910), J Physiol 40:iv-vii; fraction unblocked
1 / (1 + (C/IC50)^h) for channel block is common practice in safety pharmacology.
"""

import numpy as np
import pytest

import cable
from cable.drugs import drug_factors, unblocked
from tests.conftest import hh_axon_case

#: closed-form comparisons of floating-point products: a few ulps
RTOL = 1e-12


def _case(drugs, **extra):
    case = hh_axon_case(length=1.0, dx=0.02, dt=0.01, duration=6.0)
    case["drug"] = drugs
    for k, v in extra.items():
        case.setdefault(k, {}).update(v)
    return case


def test_hill_equation_closed_form():
    # Hill (1910): at C = IC50 exactly half is left, whatever h; at C = 3 IC50, h = 2: 1/10
    assert unblocked(3e-3, 3e-3, 0.7) == 0.5
    assert unblocked(9.0, 3.0, 2.0) == pytest.approx(0.1, rel=RTOL)
    assert unblocked(0.0, 3.0, 1.0) == 1.0


def test_factors_multiply_across_compounds_and_units_convert():
    case = cable.load_case(_case({
        "a": {"concentration": "1 uM", "block": {"g_Na": {"ic50": "3 uM", "hill": 1.0}}},
        "b": {"concentration": "2 uM", "block": {"g_Na": {"ic50": "0.002 mM", "hill": 0.9},
                                                    "g_K": {"ic50": "4 uM"}}},
    }))
    f = drug_factors(case)
    assert f["g_Na"] == pytest.approx(1 / (1 + 1 / 3) * 0.5, rel=RTOL)
    assert f["g_K"] == pytest.approx(1 / (1 + 0.5), rel=RTOL)  # hill defaults to 1


def test_at_ic50_the_run_equals_the_run_with_half_the_conductance():
    # the factor composes with [membrane.scale]: 0.8 x 0.5 = 0.4
    drugged = _case({"a": {"concentration": "3 uM", "block": {"g_Na": {"ic50": "3 uM", "hill": 1.3}}}},
                    membrane={"scale": {"g_Na": 0.8}})
    scaled = hh_axon_case(length=1.0, dx=0.02, dt=0.01, duration=6.0)
    scaled["membrane"]["scale"] = {"g_Na": 0.4}
    a, b = cable.simulate(drugged), cable.simulate(scaled)
    np.testing.assert_array_equal(a.vm.values, b.vm.values)
    assert np.isfinite(a.conduction_velocity.values[0])
    assert "g_Na x 0.5" in a.attrs["drug_block"]


def test_concentration_is_a_case_key():
    case = cable.load_case(_case({"a": {"concentration": "1 uM", "block": {"g_Na": {"ic50": "3 uM"}}}}),
                           ["drug.a.concentration=0.003"])
    assert drug_factors(case)["g_Na"] == 0.5


@pytest.mark.parametrize("drugs, message", [
    ({"a": {"concentration": "-1 uM", "block": {"g_Na": {"ic50": "3 uM"}}}}, "drug.a.concentration"),
    ({"a": {"concentration": "1 uM", "block": {"g_Na": {"hill": 1}}}}, "missing key 'drug.a.block.g_Na.ic50'"),
    ({"a": {"concentration": "1 uM", "block": {"G_Kr": {"ic50": "3 uM"}}}}, "drug.a.block.G_Kr"),
    ({"a": {"concentration": "1 uM", "block": {"g_Na": {"ic50": "3 uM", "hil": 1}}}}, "Did you mean 'hill'"),
    ({"a": {"block": {"g_Na": {"ic50": "3 uM"}}}}, "missing key 'drug.a.concentration'"),
    ({"a": {"concentration": "1 uM", "block": {"g_Na": {"ic50": 0}}}}, "drug.a.block.g_Na.ic50"),
])
def test_bad_input_names_the_key(drugs, message):
    with pytest.raises(cable.CaseError, match=message.replace(".", r"\.").replace("(", r"\(")):
        cable.load_case(_case(drugs))


def test_cli_bad_drug_exits_2(tmp_path, capsys):
    from cable.case import dumps_toml
    from cable.cli import main

    path = tmp_path / "c.toml"
    path.write_text(dumps_toml(_case({"a": {"concentration": "1 uM", "block": {"G_Kr": {"ic50": "3 uM"}}}})))
    assert main(["run", str(path), "-q"]) == 2
    assert "drug.a.block.G_Kr" in capsys.readouterr().err


def test_critical_concentration_is_the_hill_inverse_of_the_critical_scale():
    # The factor is the only way the concentration enters, so the concentration at which the
    # wave fails is where 1 / (1 + (C/IC50)^h) equals the critical g_Na scale s*:
    # C* = IC50 (1/s* - 1)^(1/h) (Hill 1910, inverted). Each bisection returns a bracket; the
    # concentration bracket must overlap the image of the scale bracket.
    ic50, hill = 3e-3, 1.5  # mM
    base = hh_axon_case(length=1.0, dx=0.02, dt=0.01, duration=6.0)
    scale = cable.find_critical(base, "membrane.scale.g_Na", 0.05, 1.0, tolerance=0.002)
    s_pass, s_fail = scale.attrs["passing_value"], scale.attrs["failing_value"]
    drugged = _case({"a": {"concentration": ic50, "block": {"g_Na": {"ic50": ic50, "hill": hill}}}})
    conc = cable.find_critical(drugged, "drug.a.concentration", 1e-4, 1.0, tolerance=0.005, log=True)
    c_pass, c_fail = conc.attrs["passing_value"], conc.attrs["failing_value"]

    def inverse(s):
        return ic50 * (1 / s - 1) ** (1 / hill)

    lo, hi = inverse(s_pass), inverse(s_fail)   # the scale bracket as concentrations
    assert c_pass < c_fail and lo < hi
    assert c_pass <= hi and c_fail >= lo          # the two brackets overlap
