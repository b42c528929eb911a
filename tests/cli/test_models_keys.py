"""`cable models NAME` and `cable keys`: aligned columns, the model's currents, TOML defaults with units."""

import tomllib

import pytest

from cable.case.schema import SECTIONS
from cable.cli import main
from cable.membrane import get_model, model_names


def output(capsys, *args):
    assert main(list(args)) == 0
    return capsys.readouterr().out


def column_starts(line, cells):
    return [line.index(c) for c in cells]


@pytest.mark.parametrize("name", model_names())
def test_models_name_lists_every_current_the_traces_command_accepts(capsys, name):
    # `cable traces --currents` promises that `cable models MODEL` lists them (its help says so)
    model = get_model(name)
    out = output(capsys, "models", name)
    assert "currents (" in out
    for current in model.current_names:
        assert current in out.split("currents (")[1]


def test_models_columns_are_aligned_and_choices_shown_once(capsys):
    out = output(capsys, "models", "ten-tusscher-panfilov-2006")
    lines = out.splitlines()
    block = lines[lines.index("  parameters (* scalable in [membrane.scale])") + 1:]
    block = block[:block.index("")]
    header = block[0]
    starts = column_starts(header, ["default", "unit", "meaning"])
    model = get_model("ten-tusscher-panfilov-2006")
    for line, par in zip(block[1:], model.parameters):
        # every row's unit starts under the header's "unit" (aligned columns)
        assert line[starts[1]:].startswith((par.units or "1") if not par.choices else "-"), line
    assert out.count("epi, endo or mid") == 1 and "one of epi" not in out    # the cell types once


def test_keys_header_and_toml_defaults_with_units(capsys):
    out = output(capsys, "keys")
    lines = out.splitlines()
    assert lines[1].split() == ["key", "type", "unit", "default", "meaning"]
    row, section = {}, None
    for ln in lines:
        if ln.startswith("["):
            section = ln.strip("[]").replace(".NAME", "")  # [stimulus.NAME]: the named tables
        elif ln.startswith("  ") and ln.split():
            row[(section, ln.split()[0])] = ln
    # each shown default reads back as a TOML value (what a case file may hold)
    start = lines[1].index("default")
    end = lines[1].index("meaning")
    for section, keys in SECTIONS.items():
        for key, spec in keys.items():
            if spec.default is None or spec.required:
                continue
            text = row[(section, key)][start:end].strip()
            tomllib.loads(f"v = {text}")
    assert '"0.01 cm"' in row[("fiber", "dx")] and '"strang"' in row[("numerics", "splitting")]
    assert "True" not in out and "(90.0,)" not in out           # no Python literals
    apd = row[("measure", "apd_levels")].split()
    assert apd[1:4] == ["list", "%", "[90]"]                      # percent, not a bare number


def test_keys_sweep_is_plain_text(capsys):
    out = output(capsys, "keys", "sweep")
    assert "``" not in out and "::" not in out and ":func:" not in out
    assert '"membrane.scale.g_Na" = {start = 1.0, stop = 0.1, num = 10}' in out


def test_keys_of_the_fibre_spelling_and_of_named_tables(capsys):
    from cable.cli import main

    assert main(["keys", "fibre"]) == 0
    out = capsys.readouterr().out
    assert out.startswith("[fiber]\n(also spelt [fibre])") and "axial_resistivity" in out
    assert main(["keys", "stimulus"]) == 0
    out = capsys.readouterr().out
    assert out.startswith("[stimulus.NAME]") and "onset" in out and "\n  start " not in out
