"""The README's case-file tour is a valid case (so the documentation cannot drift)."""

import tomllib
from pathlib import Path

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
