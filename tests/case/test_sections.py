"""The sections other modules own: declared beside their code, found without an import's side effect."""

import subprocess
import sys

import pytest

from cable.case import sections


def test_every_owner_declares_the_section_it_is_listed_for():
    # cable.case.sections.OWNERS names the module; the module's SECTION says what it reads
    declared = sections.owned()
    assert [s.name for s in declared] == list(sections.OWNERS)
    assert {s.name for s in declared if s.is_list} == {"electrode"}  # [[electrode]]; the others are tables
    assert all(callable(s.validate) for s in declared)


def test_a_region_loads_without_importing_its_module_first(tmp_path):
    # before: [region.NAME] was known only once cable.regions had been imported (it registered the
    # section on import); now the loader imports the module that declares it, when a case needs it
    script = (
        "import sys\n"
        "from cable.case.load import from_dict\n"
        "assert 'cable.regions' not in sys.modules, 'imported before it was needed'\n"
        "case = from_dict({'membrane': {'model': 'passive'}, 'run': {'duration': 1.0},\n"
        "                  'fiber': {'length': 1.0, 'dx': 0.1, 'radius': 0.01, 'axial_resistivity': 100.0},\n"
        "                  'region': {'zone': {'start': 0.2, 'end': 0.4, 'coupling': 0.5}}})\n"
        "print(case.extra['region'][0].coupling)\n")
    out = subprocess.run([sys.executable, "-c", script], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "0.5"


def test_an_unknown_section_is_suggested_from_the_owned_ones_too():
    from cable.case import CaseError, load_case

    with pytest.raises(CaseError, match="Did you mean 'region'"):
        load_case({"membrane": {"model": "passive"}, "run": {"duration": 1.0}, "regoin": {}})
