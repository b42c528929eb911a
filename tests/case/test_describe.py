"""A case's and a model's notebook display: values in their units, no float noise, derived quantities."""

import math

import pytest

import cable
from cable.case.describe import case_facts, length, number, space_constant, time
from conftest import hh_axon_case

#: the slope conductance is a centred difference of a linear current: exact to rounding
ROUNDING = 1e-9


def passive_case(**fiber):
    return {"membrane": {"model": "passive", "parameters": {"g_L": 0.1}},
            "fiber": {"length": "6 mm", "dx": "100 um", "radius": "238 um", "axial_resistivity": "35.4 ohm*cm",
                      **fiber},
            "stimulus": [{"amplitude": 10.0, "duration": 1.0}], "run": {"duration": 10.0}}


def test_values_read_in_their_units_without_float_noise():
    # "6 mm" converts to 0.6000000000000001 cm (binary floating point, common practice): shown as 6 mm
    case = cable.load_case(passive_case())
    assert case.fiber.length != 0.6
    text = repr(case)
    assert "6 mm" in text and "100 µm" in text and "61 nodes" in text
    assert "0000000" not in text and "9999999" not in text
    assert (number(0.6000000000000001), length(0.005), time(0.005), time(2.5e4)) == ("0.6", "50 µm", "5 µs", "25 s")


def test_space_constant_of_a_passive_cable_is_the_closed_form():
    # Jack, Noble & Tsien 1975; Koch 1999 ch. 2: lambda = sqrt(a R_m / (2 R_i)), R_m = 1/g_L
    case = cable.load_case(passive_case())
    model = cable.get_model("passive")
    a, r_i, g_l = 238e-4, 35.4, 0.1e-3                  # cm, ohm*cm, S/cm^2
    expected = math.sqrt(a / (g_l * 2 * r_i))
    assert space_constant(case, model) == pytest.approx(expected, rel=ROUNDING)
    facts = dict(case_facts(case))
    assert facts["space constant"].startswith(length(expected))
    assert f"dx = {number(0.01 / expected, 2)} λ" in facts["space constant"]


def test_stability_limit_of_forward_euler_diffusion_is_shown():
    # explicit diffusion is stable for dt <= dx^2 / (2 D) (common practice; cable/fiber.py)
    case = cable.load_case(hh_axon_case(length=1.0, dx=0.02, dt=0.0005, numerics={"diffusion": "forward-euler"}))
    limit = case.fiber.dx ** 2 / (2 * case.fiber.diffusivity)
    assert dict(case_facts(case))["stability"] == f"dt ≤ {time(limit)} (forward Euler)"
    assert "no dt limit" in dict(case_facts(cable.load_case(hh_axon_case())))["stability"]


def test_html_displays_name_every_fact_and_unit():
    case = cable.load_case(hh_axon_case())
    page = case._repr_html_()
    for name, value in case_facts(case):
        assert name in page
    assert "cm²/ms" in page and "<table>" in page
    model = cable.get_model("hodgkin-huxley-1952")
    assert "mS/cm²" in model._repr_html_() and "I_Na" in model._repr_html_()
    text = repr(model)
    assert text.startswith("MembraneModel('hodgkin-huxley-1952'") and "µA/cm²" in text and len(text) < 200
