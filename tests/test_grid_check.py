"""The coarse-grid warning given before a strand runs (issue 13 item 9)."""

import math

import cable
from cable import grid_check
from cable.preparation import node_parameters, prepare


def _note(path, *sets):
    case = cable.load_case(path, list(sets))
    model = cable.get_model(case.membrane.model)
    return grid_check.coarse_grid_note(case, model, node_parameters(case, model, 1)[0])


def test_sodium_block_case_on_a_coarse_grid_is_warned_about():
    # measured here (cable run cases/sodium_channel_block.toml --set run.duration=100): CV 0.4405
    # m/s at dx 500 um, 0.5348 at 200 um, 0.5553 at 100 um; 500 um is 21% slow, and the
    # warning must say so before the run, with a dx that would do and the hint to converge
    note = _note("cases/sodium_channel_block.toml", "fiber.dx=0.05")
    assert note is not None and "fiber.dx = 0.05 cm is coarse" in note and "cable converge" in note
    recommended = float(note.split("dx <= ")[1].split(" cm")[0])
    assert recommended < 0.02   # 200 um is still 3.7% slow
    assert _note("cases/sodium_channel_block.toml") is None       # its own 100 um: 0.4% from 50 um


def test_fine_cases_are_not_warned_about():
    # the squid axon's error is the time step's (cable converge: space error 0.02%)
    assert _note("cases/squid_axon.toml") is None
    assert _note("cases/ischaemic_zone.toml") is None


def test_the_warning_is_among_the_notes_before_the_run():
    # Hodgkin & Huxley axon: upstroke ~0.3 ms, D 0.336 cm^2/ms, so it spans sqrt(D t_up) ~ 0.31 cm;
    # a 0.3 cm grid puts one node on it
    setup = prepare(cable.load_case("cases/squid_axon.toml", ["fiber.dx=0.3"]))
    assert any("fiber.dx = 0.3 cm is coarse" in n for n in setup.notes)


def test_upstroke_time_of_the_hodgkin_huxley_membrane():
    # Hodgkin & Huxley 1952 at 18.5 degC: a ~100 mV upstroke at a few hundred V/s, so t_up of
    # a few tenths of a millisecond (order of magnitude, from memory); a passive membrane has none
    case = cable.load_case("cases/squid_axon.toml")
    model = cable.get_model(case.membrane.model)
    t_up = grid_check.upstroke_time(model, node_parameters(case, model, 1)[0], 1.0, 500.0, 0.5)
    assert 0.1 < t_up < 0.6
    passive = cable.get_model("passive")
    assert math.isnan(grid_check.upstroke_time(passive, passive.default_parameters(), 1.0, 50.0, 0.5))

