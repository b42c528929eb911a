"""The spellings a case accepts (cable/case/names.py): fibre, named stimuli and regions, onset."""

import tomllib
from dataclasses import replace

import pytest

from cable.case import CaseError, load_case
from cable.case.names import DEPRECATED, canonical_key, entry_parts

NEW = """
[membrane]
model = "hodgkin-huxley-1952"

[fibre]
length = "1 cm"
dx = "100 um"
radius = "238 um"
axial_resistivity = "35.4 ohm*cm"

[stimulus.S1]
amplitude = 500
duration = "0.5 ms"

[stimulus.S2]
amplitude = 500
duration = "0.5 ms"
onset = "3 ms"

[region.slow]
start = "4 mm"
end = "6 mm"
scale = {g_Na = 0.5}

[run]
duration = 5
"""

OLD = """
[membrane]
model = "hodgkin-huxley-1952"

[fiber]
length = "1 cm"
dx = "100 um"
radius = "238 um"
axial_resistivity = "35.4 ohm*cm"

[[stimulus]]
amplitude = 500
duration = "0.5 ms"

[[stimulus]]
amplitude = 500
duration = "0.5 ms"
start = "3 ms"

[[region]]
start = "4 mm"
end = "6 mm"
scale = {g_Na = 0.5}

[run]
duration = 5
"""


def _deprecations(case):
    return [n for n in case.notes if n.startswith(DEPRECATED)]


def test_named_stimuli_regions_and_the_fibre_spelling_load_without_notes():
    case = load_case(text=NEW)
    assert [s.name for s in case.stimuli] == ["S1", "S2"]
    assert case.stimuli[1].onset == pytest.approx(3.0)
    assert case.fiber.length == pytest.approx(1.0)
    assert [r.name for r in case.extra["region"]] == ["slow"]
    assert _deprecations(case) == []
    # stored in the loader's spelling: [fiber], named tables, onset
    stored = tomllib.loads(case.text)
    assert "fiber" in stored and "fibre" not in stored
    assert set(stored["stimulus"]) == {"S1", "S2"} and stored["stimulus"]["S2"]["onset"] == "3 ms"


def test_old_list_form_and_start_are_read_with_a_deprecation_note():
    old, new = load_case(text=OLD), load_case(text=NEW)
    assert old.stimuli == new.stimuli
    assert old.extra["region"][0] == replace(new.extra["region"][0], name="R1")
    notes = " ".join(_deprecations(old))
    assert "[[stimulus]] (a list of tables) is the old form" in notes and "[stimulus.S1], [stimulus.S2]" in notes
    assert "[[region]] (a list of tables) is the old form" in notes and "[region.R1]" in notes
    assert "stimulus.S2.start is the old name of stimulus.S2.onset" in notes
    # the text stored in a result is the new form, and loads again without notes
    assert _deprecations(load_case(text=old.text)) == []


def test_keys_by_name_by_old_index_and_in_the_fibre_spelling():
    case = load_case(text=NEW, overrides=["stimulus.S2.onset=4", "region.slow.scale.g_Na=0.25", "fibre.dx=0.05"])
    assert case.stimuli[1].onset == 4.0 and case.extra["region"][0].scale["g_Na"] == 0.25
    assert case.fiber.dx == pytest.approx(0.05)
    old = load_case(text=NEW, overrides=["stimulus.1.start=4", "region.0.scale.g_Na=0.25"])
    assert old.stimuli == case.stimuli and old.extra["region"] == case.extra["region"]
    notes = " ".join(_deprecations(old))
    assert "stimulus.1.start addresses an entry by its place; its name is stimulus.S2" in notes
    assert "stimulus.S2.start is the old name of stimulus.S2.onset" in notes


def test_canonical_key_and_entry_parts():
    raw = {"stimulus": {"S1": {}, "pace": {}}, "region": {"zone": {}}}
    assert canonical_key("fibre.dx") == "fiber.dx"
    assert canonical_key("stimulus.1.start", raw) == "stimulus.pace.onset"
    assert canonical_key("region.0.scale.G_Na", raw) == "region.zone.scale.G_Na"
    assert canonical_key("region.zone.start", raw) == "region.zone.start"  # a region's start is a position
    assert entry_parts("region.zone.scale.G_Na") == ["region", "scale", "G_Na"]
    with pytest.raises(CaseError, match=r"index 2 is out of range; the case has 2 stimulus entries \(S1, pace\)"):
        canonical_key("stimulus.2.x", raw)


def test_both_spellings_at_once_are_refused():
    with pytest.raises(CaseError, match=r"\[fibre\] and \[fiber\] are the same section"):
        load_case({"membrane": {"model": "passive"}, "fiber": {"length": 1}, "fibre": {"length": 1},
                   "run": {"duration": 1}})
    with pytest.raises(CaseError, match="stimulus.S1: 'start' is the old name of 'onset'; give one of them"):
        load_case({"membrane": {"model": "passive"}, "run": {"duration": 1},
                   "stimulus": {"S1": {"amplitude": 1, "duration": 1, "start": 0, "onset": 0}}})
