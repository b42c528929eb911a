"""Case loading: units, defaults, overrides, and the messages for bad input."""

import pytest

import cable
from cable.case import CaseError, dumps_toml, load_case

BASE = """
[membrane]
model = "hodgkin-huxley-1952"
temperature = "18.5 degC"

[fiber]
length = "2 cm"
dx = "100 um"
radius = "238 um"
axial_resistivity = "35.4 ohm*cm"

[stimulus.S1]
amplitude = 500
duration = "0.5 ms"

[run]
duration = 5
"""


def test_units_are_converted_once_to_canonical():
    case = load_case(BASE)
    assert case.fiber.dx == pytest.approx(0.01)
    assert case.fiber.radius == pytest.approx(0.0238)
    assert case.membrane.parameters["temperature"] == pytest.approx(18.5)
    # D = a / (2 R_i C_m) = 0.0238 / (2 * 35.4 * 1) S/uF = 0.336 cm^2/ms (cable theory)
    assert case.fiber.diffusivity == pytest.approx(0.0238 / (2 * 35.4) * 1e3)
    assert case.stimuli[0].width == pytest.approx(0.05)  # default 0.5 mm


def test_tissue_form_reproduces_published_diffusion_coefficient():
    # ten Tusscher et al. 2004 (Am J Physiol 286:H1573): rho 162 ohm*cm, S 0.2 /um,
    # C_m 2 uF/cm^2 give D = 0.00154 cm^2/ms
    raw = load_case(BASE).raw
    raw["fiber"] = {"length": 1.0, "conductivity": "0.0061728 S/cm", "surface_to_volume": "0.2 /um",
                    "capacitance": "2 uF/cm^2"}
    case = load_case(raw)
    # the paper gives D to 3 significant figures: half a unit of the last digit is 0.33%
    assert case.fiber.diffusivity == pytest.approx(0.00154, rel=3.3e-3)


def test_set_overrides_any_key_including_list_entries():
    case = load_case(BASE, ["membrane.scale.g_Na=0.5", "stimulus.0.amplitude=700", "fiber.dx='50 um'"])
    assert case.membrane.scale == {"g_Na": 0.5}
    assert case.stimuli[0].amplitude == 700
    assert case.fiber.dx == pytest.approx(0.005)


def test_case_text_round_trips():
    case = load_case(BASE, ["membrane.scale.g_Na=0.5"])
    again = load_case(case.text)
    assert again == case


@pytest.mark.parametrize("override, key", [
    ("fiber.lenght=2", "fiber.lenght"),
    ("fiber.dx='3 mV'", "fiber.dx"),
    ("fiber.dx=-1", "fiber.dx"),
    ("membrane.model='hodgkin-huxley'", "membrane.model"),
    ("membrane.scale.gNa=0.5", "membrane.scale.gNa"),
    ("membrane.parameters.E_Nq=50", "membrane.parameters.E_Nq"),
    ("stimulus.S1.x=5", "stimulus.S1.x"),
    ("stimulus.0.x=5", "stimulus.S1.x"),                        # the old index form names the entry
    ("stimulus.3.x=0", "stimulus.3.x"),
    ("numerics.splitting='strange'", "numerics.splitting"),
    ("output.states=['q']", "output.states"),
    ("measure.cv_window=[0.5, 9]", "measure.cv_window"),
    ("numerics.dt=10", "numerics.dt"),
    ("stimulus.S1.amplitude=1e7", "stimulus.S1.amplitude"),   # a unit slip (100 A/cm^2)
])
def test_bad_input_names_the_key(override, key):
    with pytest.raises(CaseError, match=key.replace(".", r"\.")):
        load_case(BASE, [override])


def test_misspelt_names_get_suggestions():
    with pytest.raises(CaseError, match="Did you mean 'length'"):
        load_case(BASE, ["fiber.lenght=2"])
    with pytest.raises(CaseError, match="Did you mean 'hodgkin-huxley-1952'"):
        load_case(BASE, ["membrane.model='hodgkin-huxley'"])
    with pytest.raises(CaseError, match="Did you mean 'g_Na'"):
        load_case(BASE, ["membrane.scale.gNa=0.5"])


def test_axon_and_tissue_forms_are_not_mixed():
    with pytest.raises(CaseError, match="mixes the axon form"):
        load_case(BASE, ["fiber.conductivity=1.0"])


def test_forward_euler_limit_is_given():
    with pytest.raises(CaseError, match="stability limit"):
        load_case(BASE, ["numerics.diffusion='forward-euler'", "numerics.dt=0.01"])


def test_output_interval_rounded_with_a_note():
    case = load_case(BASE, ["numerics.dt=0.003", "output.every=0.1"])
    assert any("not a multiple" in n for n in case.notes)
    ratio = case.output_every / case.numerics.dt
    assert abs(ratio - round(ratio)) < 1e-9


def test_toml_writer_handles_nested_tables():
    raw = {"membrane": {"model": "passive", "scale": {"g_L": 2.0}}, "run": {"duration": 1.0},
           "stimulus": [{"amplitude": 1.0, "duration": 0.5}, {"amplitude": 2.0, "duration": 0.5, "start": 1.0}]}
    import tomllib

    assert tomllib.loads(dumps_toml(raw)) == raw


def test_simulate_accepts_path_dict_and_case(tmp_path):
    path = tmp_path / "c.toml"
    path.write_text(BASE.replace("duration = 5", "duration = 1"))
    a = cable.simulate(path)
    b = cable.simulate(load_case(path))
    c = cable.simulate(load_case(path).raw)
    assert a.vm.equals(b.vm) and b.vm.equals(c.vm)


def test_temperature_outside_physiological_range_warns():
    case = load_case(BASE, ["membrane.temperature=44"])
    assert any("outside the physiological range" in n for n in case.notes)
    with pytest.raises(CaseError, match="membrane.temperature"):
        load_case(BASE, ["membrane.temperature=80"])   # beyond the model's declared maximum


def test_temperature_in_two_keys_is_refused():
    # issue 13 item 10: one quantity, two keys; neither may win silently
    with pytest.raises(CaseError, match=r"membrane.temperature = .* and membrane.parameters.temperature = 6.3"):
        load_case(BASE, ["membrane.parameters.temperature=6.3"])
    case = load_case(BASE, ["membrane.temperature=6.3"])
    assert case.membrane.parameters["temperature"] == pytest.approx(6.3)


def test_grid_change_is_announced_with_valid_pairs():
    # issue 13 item 23: 3 cm at dx 0.08 cm is 37.5 intervals; the spacing becomes 3/38 cm
    case = load_case(BASE, ["fiber.length=3", "fiber.dx=0.08"])
    assert case.fiber.dx == pytest.approx(3.0 / 38)
    (note,) = [n for n in case.notes if "fiber.dx" in n]
    assert "changed to dx = 0.0789474 cm" in note
    for pair in ("length 3 cm with dx 0.0810811 cm", "length 2.96 cm with dx 0.08 cm",
                 "length 3.04 cm with dx 0.08 cm"):
        assert pair in note
    assert not [n for n in load_case(BASE).notes if "fiber.dx" in n]


def test_prepace_beats_zero_switches_pre_pacing_off():
    # issue 13 item 24
    case = load_case(BASE, ["membrane.prepace.beats=0"])
    assert case.membrane.prepace is None
    assert load_case(BASE, ["membrane.prepace.beats=2"]).membrane.prepace["beats"] == 2
    with pytest.raises(CaseError, match="beats"):
        load_case(BASE, ["membrane.prepace.beats=-1"])


def test_conductance_and_parameter_names_ignore_case_where_unambiguous():
    # g_Na and G_Na (any case) name the one sodium conductance of each model
    tp06 = "cases/sodium_channel_block.toml"       # [membrane.scale] G_Na = 0.4
    import pathlib

    path = pathlib.Path(__file__).resolve().parents[2] / tp06
    case = load_case(path, ["membrane.scale.g_Na=1", "membrane.parameters.k_o=8"])
    assert case.membrane.scale == {"G_Na": 1.0}       # replaced, not a second entry
    assert case.membrane.parameters["K_o"] == 8.0
    axon = load_case(BASE, ["membrane.scale.G_NA=0.5"])
    assert axon.membrane.scale == {"g_Na": 0.5}
    with pytest.raises(CaseError, match=r"membrane.scale: 'G_Na' and 'g_na' both name .*'G_Na'; give it once"):
        load_case(path, ["membrane.scale={G_Na = 0.5, g_na = 0.5}"])


def test_measure_and_output_switches_are_read_into_the_case():
    # downstream code reads these from the validated Case (issue 14, item 5), not from the raw dict:
    # the length arrives converted to cm (1 mm = 0.1 cm), the flags as given or their defaults
    case = load_case(BASE, ["measure.safety_factor=true", "measure.safety_factor_length='1 mm'",
                            "output.keep_fields=true"])
    assert case.safety_factor is True and case.keep_fields is True
    assert case.safety_factor_length == pytest.approx(0.1, rel=1e-12)
    plain = load_case(BASE)
    assert (plain.safety_factor, plain.safety_factor_length, plain.keep_fields) == (False, None, False)
    assert plain.with_overrides({"measure.safety_factor": True}).safety_factor is True
