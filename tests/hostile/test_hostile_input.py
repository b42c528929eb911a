"""Nothing misread (issue 19, items 5-8, 11, 16): units, unit expressions, paths, thresholds, nesting, messages."""

import copy
import tomllib

import pytest

import cable
from cable import units
from cable.cli import main
from hostile_cases import small_case

BASE = tomllib.loads(small_case())

#: conversions are exact up to rounding of one division in float64 (pint scales by the
#: unit's factor): 4 ulp of relative error
REL = 1e-15


@pytest.mark.parametrize("text, expected", [
    ("50 %", 0.5),           # 1 % = 1e-2 (BIPM SI Brochure, 9th ed., 2019, 5.4.7)
    ("90 percent", 0.9),
    ("100 ppm", 1e-4),       # 1 ppm = 1e-6 (common practice)
    ("1 cm/mm", 10.0),       # a ratio of lengths: 1 cm = 10 mm
    ("3 m/km", 3e-3),
    ("0.5", 0.5),            # no unit written: the canonical unit (1)
])
def test_dimensionless_units_are_converted_not_dropped(text, expected):
    # item 5: "50 %" was read as 50, "1 cm/mm" as 1
    assert units.to_canonical(text, "dimensionless") == pytest.approx(expected, rel=4 * REL)


def test_a_percentage_key_reads_percent_and_a_scale_reads_the_fraction():
    case = cable.load_case(BASE, {"measure.apd_levels": ["50 %", 90], "membrane.scale.g_Na": "50 %"})
    assert case.apd_levels[0] == pytest.approx(50.0, rel=REL)   # levels are in percent
    assert case.membrane.scale["g_Na"] == pytest.approx(0.5, rel=REL)
    with pytest.raises(cable.CaseError, match="cannot be converted to cm"):
        cable.load_case(BASE, {"fiber.length": "50 %"})       # a unitless unit for a length
    with pytest.raises(cable.CaseError, match="cannot be converted"):
        cable.load_case(BASE, {"membrane.scale.g_Na": "2 cm"})


@pytest.mark.parametrize("text", ["10**10**10 cm", "10^10^10 cm", "2**(2**5) cm", "10**400 cm", "(cm)**2",
                                  "1" + "0" * 200 + " cm", "((((((1)))))) cm"])
def test_unbounded_unit_expressions_are_refused_at_once(text):
    # item 6: "10**10**10 cm" hung the process (pint evaluates the arithmetic)
    with pytest.raises(units.UnitError):
        units.to_canonical(text, "length")


def test_unit_expressions_that_cases_use_still_read():
    assert units.to_canonical("1/(1.5 ohm*cm^2)", "conductance") == pytest.approx(1e3 / 1.5, rel=REL)
    assert units.to_canonical("2 cm^-1", "surface_to_volume") == 2.0
    assert units.to_canonical("1e5 uA/cm**2", "current_density") == 1e5


def test_tower_through_every_door_exits_2(tmp_path, capsys):
    # item 6: also through case files, [sweep] values and a stored case given to rerun
    tower = '"10**10**10 cm"'
    bad = tmp_path / "bad.toml"
    bad.write_text(small_case().replace("length = 0.5", f"length = {tower}"))
    assert main(["run", str(bad), "-q"]) == 2
    swept = tmp_path / "swept.toml"
    swept.write_text(small_case() + f'\n[sweep]\n"fiber.length" = [{tower}]\n')
    assert main(["sweep", str(swept), "-q"]) == 2
    ranged = tmp_path / "ranged.toml"
    ranged.write_text(small_case() + f'\n[sweep]\n"fiber.length" = {{start = {tower}, stop = "1 cm", num = 2}}\n')
    assert main(["sweep", str(ranged), "-q"]) == 2
    err = capsys.readouterr().err
    assert err.count("powers of powers") == 3


def test_rerun_of_a_stored_case_with_a_tower_exits_2(tmp_path, capsys):
    good = tmp_path / "good.toml"
    good.write_text(small_case())
    out = tmp_path / "out.nc"
    assert main(["run", str(good), "-o", str(out), "-q"]) == 0
    import netCDF4

    with netCDF4.Dataset(out, "a") as nc:
        nc.setncattr("case", nc.getncattr("case").replace("length = 0.5", 'length = "10**10**10 cm"'))
    assert main(["rerun", str(out), "-q"]) == 2
    assert "powers of powers" in capsys.readouterr().err
    with netCDF4.Dataset(out, "a") as nc:
        nc.setncattr("case", "garbage")               # item 16: not TOML was "case file ... not found"
    assert main(["rerun", str(out), "-q"]) == 2
    assert "not valid TOML" in capsys.readouterr().err


@pytest.mark.parametrize("name", ["g_Na=0.5.toml", "runs=1/case.toml"])
def test_a_path_with_an_equals_sign_is_a_path(tmp_path, name, capsys):
    # item 7: a path holding "=" was read as TOML text
    path = tmp_path / name
    path.parent.mkdir(exist_ok=True)
    path.write_text(small_case())
    assert cable.load_case(str(path)).fiber.length == 0.5
    assert main(["run", str(path), "-q"]) == 0
    missing = tmp_path / "x=1.toml"
    assert main(["run", str(missing), "-q"]) == 2
    assert "not found" in capsys.readouterr().err
    assert cable.load_case(text=small_case()).fiber.length == 0.5   # text only when told so


def test_a_folder_given_as_the_case_says_it_is_a_folder(tmp_path, capsys):
    # item 16: a folder was "not found"
    assert main(["run", str(tmp_path), "-q"]) == 2
    assert "is a folder" in capsys.readouterr().err


@pytest.mark.parametrize("threshold, match", [(200, None), (-200, "at or below the resting"),
                                               (2000, "beyond")])
def test_a_threshold_no_upstroke_can_cross_is_refused(threshold, match):
    # item 8: a threshold above the peak or below rest said "not captured" though the
    # wave propagated. Below rest (-65 mV for the HH axon, Hodgkin & Huxley 1952) or
    # beyond the runaway bound is refused; between the peak and that bound, a warning.
    case = cable.load_case(BASE, {"measure.threshold": threshold})
    if threshold == 200:
        said = []
        ds = cable.simulate(case, info=said.append)
        assert not bool(ds["captured"].any())
        assert any("no node crossed measure.threshold = 200 mV" in s for s in said)
        return
    with pytest.raises(cable.CaseError, match=match):
        cable.simulate(case)


def test_deeply_nested_toml_is_refused_with_exit_2(tmp_path, capsys):
    # item 11: a list nested 5,000 deep raised RecursionError
    deep = tmp_path / "deep.toml"
    deep.write_text(small_case() + "\n[measure]\napd_levels = " + "[" * 5000 + "]" * 5000 + "\n")
    assert main(["run", str(deep), "-q"]) == 2
    assert "nested too deeply" in capsys.readouterr().err
    good = tmp_path / "good.toml"
    good.write_text(small_case())
    assert main(["run", str(good), "--set", "measure.apd_levels=" + "[" * 5000 + "]" * 5000, "-q"]) == 2
    assert "nested too deeply" in capsys.readouterr().err
    raw = copy.deepcopy(BASE)
    node = raw["measure"] = {}
    for _ in range(5000):
        node["a"] = {}
        node = node["a"]
    with pytest.raises(cable.CaseError, match="nested too deeply"):
        cable.load_case(raw)


def test_messages_name_the_option_and_the_unit(tmp_path, capsys):
    # item 16: --vary errors said --set; sizes are shown in a unit that shows them
    case = tmp_path / "case.toml"
    case.write_text(small_case())
    assert main(["sweep", str(case), "--vary", "membrane.scale.g_Na", "-q"]) == 2
    err = capsys.readouterr().err
    assert "--vary 'membrane.scale.g_Na'" in err and "--set" not in err
    assert units.format_bytes(3 * 2 ** 20) == "3 MiB" and units.format_bytes(512) == "512 B"


def test_no_stable_rest_names_the_parameter_and_a_late_stimulus_is_said():
    # item 16: K_o = 0 got "no stable rest" without naming what caused it; a stimulus
    # starting after the run's end got "(no stimulus)"
    cell = {"membrane": {"model": "luo-rudy-1991", "parameters": {"K_o": 0}},
            "stimulus": [{"amplitude": 50, "duration": 1}], "numerics": {"dt": 0.01}, "run": {"duration": 5},
            "output": {"every": 1}}
    with pytest.raises(cable.CaseError, match=r"no stable rest with K_o = 0 \(default 5.4\)"):
        cable.simulate(cell)
    late = copy.deepcopy(BASE)
    late["stimulus"][0]["start"] = 10.0
    said = []
    ds = cable.simulate(late, info=said.append)
    assert any("no stimulus starts before the run ends (the first at 10 ms" in s for s in said)
    from cable.cli.summary import summarise

    assert "no stimulus starts before the run ends" in summarise(ds)
