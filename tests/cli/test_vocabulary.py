"""One option vocabulary across the commands (issue 16, item 9), and help examples that run.

Common practice for a command line: one name per meaning across commands, defaults said
in the help, the earlier spellings still read.
"""

import argparse
import re
from pathlib import Path

import pytest

from cable.case import load_case
from cable.cli import CAUTION, GROUPS, build_parser, main

ROOT = Path(__file__).resolve().parents[2]
CASES = sorted((ROOT / "cases").glob("*.toml"))


def _commands():
    parser = build_parser()
    sub = next(a for a in parser._actions if isinstance(a, argparse._SubParsersAction))
    return parser, sub.choices


def _visible(sp):
    return [a for a in sp._actions if a.option_strings and a.help != argparse.SUPPRESS
            and not isinstance(a, argparse._HelpAction)]


def test_every_option_taking_a_value_states_its_default():
    _, commands = _commands()
    missing = [(name, a.option_strings[-1]) for name, sp in commands.items() for a in _visible(sp)
               if a.nargs != 0 and not a.required and "default" not in (a.help or "")]
    assert missing == []


def test_the_caution_is_said_once_at_the_top():
    parser, commands = _commands()
    def flat(text):
        return " ".join(text.split())

    assert flat(parser.format_help()).count(CAUTION) == 1
    assert all(CAUTION not in flat(sp.format_help()) for sp in commands.values())
    readme = flat((ROOT / "README.md").read_text())
    assert readme.count(CAUTION) == 1


def test_commands_are_grouped_under_headings():
    parser, commands = _commands()
    text = parser.format_help()
    heads = [text.index(f"\n{g}:\n") for g in GROUPS if any(n in commands for n in GROUPS[g])]
    assert heads == sorted(heads) and len(heads) == 4
    for name in commands:
        assert re.search(rf"^  {re.escape(name)} ", text, re.M), name   # each command listed once


def test_figure_size_and_dpi_have_one_name_in_every_drawing_command():
    _, commands = _commands()
    for name, sp in commands.items():
        options = {o for a in _visible(sp) for o in a.option_strings}
        assert not {"--size", "--dpi"} & options, name
        if {"--figure", "-o"} & options and name in ("map", "traces", "plot-sweep", "threshold", "erp",
                                                     "restitution", "converge", "calibrate"):
            assert {"--figure-size", "--figure-dpi"} <= options, name
    # the plot commands' earlier spellings are still read
    args = build_parser().parse_args(["map", "r.nc", "--size", "8", "6", "--dpi", "150"])
    assert args.size == ["8", "6"] and args.dpi == 150
    args = build_parser().parse_args(["map", "r.nc", "--figure-size", "8", "6", "--figure-dpi", "150"])
    assert args.size == ["8", "6"] and args.dpi == 150


def test_sweep_values_and_a_bisected_key_have_different_names():
    parser = build_parser()
    assert parser.parse_args(["sweep", "c.toml", "--over", "membrane.scale.g_Na=[1,0.5]"]).vary == \
        ["membrane.scale.g_Na=[1,0.5]"]
    assert parser.parse_args(["sweep", "c.toml", "--vary", "membrane.scale.g_Na=[1,0.5]"]).vary_earlier == \
        ["membrane.scale.g_Na=[1,0.5]"]                        # the earlier spelling, hidden
    _, commands = _commands()
    sweep_opts = {o for a in _visible(commands["sweep"]) for o in a.option_strings}
    assert "--over" in sweep_opts and "--vary" not in sweep_opts
    assert parser.parse_args(["critical", "c.toml", "--vary", "fibre.dx", "--between", "0.01", "0.02"]).vary \
        == "fibre.dx"


def test_plot_sweep_names_a_modeller_reads_and_the_earlier_ones():
    parser = build_parser()
    new = parser.parse_args(["plot-sweep", "s.nc", "--y", "cv", "--x", "g_Na", "--curves-by", "temperature",
                             "--fix", "beat=0"])
    old = parser.parse_args(["plot-sweep", "s.nc", "--y", "cv", "--x", "g_Na", "--hue", "temperature",
                             "--sel", "beat=0"])
    assert (new.hue, new.sel) == (old.hue, old.sel) == ("temperature", ["beat=0"])


def test_plot_sweep_x_takes_the_full_case_key():
    import numpy as np
    import xarray as xr

    from cable.cli.plot_sweep import dimension

    ds = xr.Dataset({"conduction_velocity": (("g_Na", "temperature"), np.ones((2, 2)))},
                    coords={"g_Na": ("g_Na", [1.0, 0.5], {"case_key": "membrane.scale.g_Na"}),
                            "temperature": ("temperature", [6.3, 18.5], {"case_key": "membrane.temperature"}),
                            "radius": ((), 0.1, {"case_key": "fiber.radius"})})
    assert dimension(ds, "membrane.scale.g_Na") == "g_Na"
    assert dimension(ds, "g_Na") == "g_Na"
    assert dimension(ds, "fibre.radius") == "radius"        # the case's other spelling
    assert dimension(ds, "nonsense") == "nonsense"          # left for the figure's own message


def _examples(text: str, option: str) -> list[str]:
    """``--option KEY=VALUE`` examples of a help text (quotes removed)."""
    return [m.strip("'") for m in re.findall(rf"{option} ('[^']+'|\S+=\S*[^\s,)])", text)]


@pytest.mark.parametrize("path", CASES, ids=lambda p: p.name)
def test_help_examples_of_set_and_over_load_on_every_example_case(path):
    # issue 16 item 7: the examples in --help work on every case under cases/
    _, commands = _commands()
    sets = _examples(" ".join(a.help for a in _visible(commands["run"]) if "--set" in a.option_strings), "--set")
    sets += _examples(" ".join(a.help for a in _visible(commands["run"]) if "--set" in a.option_strings), "or")
    overs = _examples(" ".join(a.help for a in _visible(commands["sweep"]) if "--over" in a.option_strings),
                      "--over")
    assert len(sets) == 2 and len(overs) == 2, (sets, overs)
    for example in sets:
        load_case(path, [example])
    for example in overs:
        key, value = example.split("=", 1)
        raw = load_case(path).raw
        raw["sweep"] = {key.strip(): __import__("tomllib").loads(f"v = {value}")["v"]}
        load_case(raw)


def test_keys_critical_example_names_work_on_the_zone_case(capsys):
    # the named-table examples of `cable critical --help`, on the case with a region
    case = load_case(ROOT / "cases" / "ischaemic_zone.toml")
    for key in ("region.ischaemic.scale.g_Na", "region.ischaemic.parameters.K_o", "region.ischaemic.coupling",
                "region.ischaemic.end", "membrane.scale.g_Na", "stimulus.S1.amplitude", "fibre.dx"):
        assert case.with_overrides({key: 0.5 if "end" not in key and "dx" not in key else 0.4 if "end" in key
                                    else 0.005}) is not None
    assert main(["keys", "fibre"]) == 0


def test_a_bad_swept_value_names_the_option_given(capsys):
    case = str(ROOT / "cases" / "squid_axon.toml")
    assert main(["sweep", case, "--over", "membrane.scale.g_Na", "-q"]) == 2
    assert "--over 'membrane.scale.g_Na': expected KEY=VALUE" in capsys.readouterr().err
    assert main(["sweep", case, "--vary", "membrane.scale.g_Na", "-q"]) == 2
    assert "--vary 'membrane.scale.g_Na': expected KEY=VALUE" in capsys.readouterr().err
