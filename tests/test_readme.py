"""The README's case-file tour is a valid case (so the documentation cannot drift)."""

import tomllib
from pathlib import Path

import pytest

import cable

README = Path(__file__).resolve().parents[1] / "README.md"


def test_readme_case_tour_loads_with_its_sweep():
    text = README.read_text()
    block = text.split("## A tour of the case file")[1].split("```toml")[1].split("```")[0]
    case = cable.load_case(tomllib.loads(block))
    assert case.membrane.model == "hodgkin-huxley-1952"
    assert "sweep" in case.extra and "region" in case.extra
    assert abs(case.fiber.radius - 0.0238) < 1e-12   # "238 um" in cm


def test_readme_mentions_every_command():
    from cable.cli import _commands

    text = README.read_text()
    for mod in _commands():
        if mod.NAME != "info" and mod.NAME != "rerun":
            assert f"cable {mod.NAME}" in text, mod.NAME
    assert "cable info" in text and "cable rerun" in text


def test_readme_cellml_case_runs_as_the_builtin_model():
    # cases/cellml_axon.toml (the README's CellML example): the CellML encoding of Hodgkin &
    # Huxley (1952) in the 1952 sign convention, against the built-in model at the file's
    # 6.3 degC on the same grid. Same equations and grid: the CellML issue's bound, 0.1%.
    case = Path(__file__).resolve().parents[1] / "cases" / "cellml_axon.toml"
    from_file = cable.simulate(cable.load_case(case, ["run.duration=47", "output.every=0.5"]))
    builtin = cable.simulate(cable.load_case(case, ["run.duration=47", "output.every=0.5",
                                                    "membrane.model=hodgkin-huxley-1952",
                                                    "membrane.temperature=6.3"]))
    assert float(from_file.conduction_velocity[0]) > 10.0   # it conducts (12.5 m/s, measured here)
    assert float(from_file.conduction_velocity[0]) == pytest.approx(float(builtin.conduction_velocity[0]), rel=1e-3)
