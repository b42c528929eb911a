"""The [sweep] section: values, ranges, point order, names, and the messages for bad input."""

import subprocess
import sys

import numpy as np
import pytest

import cable
from cable.case import CaseError, dumps_toml, load_case
from cable.sweep.spec import point_raw
from conftest import hh_axon_case


def swept(sweep, **extra):
    case = hh_axon_case(length=1.0, dx=0.02, dt=0.01, duration=4.0, **extra)
    case["sweep"] = sweep
    return load_case(case)


def spec_of(sweep, **extra):
    return swept(sweep, **extra).extra["sweep"]


def test_linear_and_log_ranges_follow_numpy_with_exact_ends():
    # common practice: {start, stop, num} means numpy.linspace (both ends included),
    # with log = true numpy.geomspace
    lin = spec_of({"membrane.scale.g_Na": {"start": 1.0, "stop": 0.1, "num": 10}}).axes[0]
    np.testing.assert_allclose(lin.values, np.linspace(1.0, 0.1, 10), rtol=0, atol=1e-15)
    assert (lin.values[0], lin.values[-1]) == (1.0, 0.1)
    log = spec_of({"numerics.dt": {"start": 0.001, "stop": 0.01, "num": 3, "log": True}}).axes[0]
    np.testing.assert_allclose(log.values, [0.001, np.sqrt(0.001 * 0.01), 0.01], rtol=1e-14)
    assert (log.values[0], log.values[-1]) == (0.001, 0.01)


def test_units_in_values_and_ranges_become_canonical_coordinates():
    # 1 um = 1e-4 cm (SI prefixes); the coordinate is in the key's canonical unit, cm
    axis = spec_of({"fiber.radius": ["119 um", "238 um"]}).axes[0]
    np.testing.assert_allclose(axis.coord, [0.0119, 0.0238], rtol=1e-12)
    assert axis.units == "cm" and axis.values == ("119 um", "238 um")
    ranged = spec_of({"fiber.radius": {"start": "100 um", "stop": "0.3 mm", "num": 3}}).axes[0]
    np.testing.assert_allclose(ranged.coord, [0.01, 0.02, 0.03], rtol=1e-12)


def test_grid_is_every_combination_first_key_slowest():
    spec = spec_of({"membrane.scale.g_Na": [1.0, 0.5], "stimulus.0.amplitude": [1000.0, 500.0, 200.0]})
    assert spec.shape == (2, 3) and len(spec) == 6 and spec.dims == ("g_Na", "amplitude")
    points = spec.points()
    # common practice (C order, as numpy.ndindex): the last key varies fastest
    assert [tuple(p.values()) for p in points] == [(a, b) for a in (1.0, 0.5) for b in (1000.0, 500.0, 200.0)]


def test_zip_pairs_lists_entry_by_entry():
    spec = spec_of({"mode": "zip", "membrane.scale.g_Na": [1.0, 0.5, 0.25], "stimulus.0.amplitude": [1000, 600, 400]})
    assert spec.shape == (3,) and spec.dims == ("point",)
    # an old index key is kept under the entry's name (the loader's spelling)
    assert spec.overrides(1) == {"membrane.scale.g_Na": 0.5, "stimulus.S1.amplitude": 600}


def test_nested_tables_mean_the_same_as_quoted_keys():
    # TOML reads an unquoted dotted key as nested tables (TOML 1.0, "Keys")
    quoted = spec_of({"membrane.scale.g_Na": [1.0, 0.5]})
    nested = spec_of({"membrane": {"scale": {"g_Na": [1.0, 0.5]}}})
    assert quoted == nested
    text = dumps_toml(swept({"membrane.scale.g_Na": [1.0, 0.5]}).raw)
    assert load_case(text).extra["sweep"] == quoted


def test_names_are_last_parts_made_unique_and_free():
    spec = spec_of({"stimulus.S1.x": [0.0, 0.1], "stimulus.S1.width": [0.1, 0.2],
                    "membrane.parameters.g_Na": [120.0, 100.0], "membrane.scale.g_Na": [1.0, 0.5]})
    names = [a.name for a in spec.axes]
    # "x" is the fibre's dimension; two keys end in g_Na
    assert names == ["S1_x", "width", "parameters_g_Na", "scale_g_Na"]


def test_point_case_is_the_case_without_sweep_plus_its_values():
    case = swept({"membrane.scale.g_Na": [1.0, 0.5]})
    raw = point_raw(case.raw, case.extra["sweep"].overrides(1))
    assert "sweep" not in raw and raw["membrane"]["scale"] == {"g_Na": 0.5}
    assert load_case(raw).membrane.scale == {"g_Na": 0.5}


def test_sweep_and_keep_fields_do_not_change_a_plain_run():
    base = hh_axon_case(length=1.0, dx=0.02, dt=0.01, duration=4.0)
    plain = cable.simulate(base)
    marked = dict(base, sweep={"membrane.scale.g_Na": [0.5]}, output={**base["output"], "keep_fields": True})
    other = cable.simulate(marked)
    np.testing.assert_array_equal(other["vm"].values, plain["vm"].values)  # exact: same arithmetic


@pytest.mark.parametrize("sweep, message", [
    ({"membrane.scale.gNA": [1.0]}, r"membrane\.scale\.gNA.*Did you mean 'g_Na'"),
    ({"membrane.scael.g_Na": [1.0]}, r"unknown key 'membrane\.scael'.*Did you mean 'scale'"),
    ({"fibr.dx": [0.01]}, r"unknown section 'fibr'.*Did you mean 'fiber'"),
    ({"membrane.scale.g_Na": [-1.0]}, r"membrane\.scale\.g_Na = -1.*at least 0"),
    ({"membrane.scale.g_Na": {"start": 1, "stop": 0, "nmu": 3}}, r"unknown range key 'nmu'.*Did you mean 'num'"),
    ({"membrane.scale.g_Na": {"start": 1, "stop": 0}}, r"range needs start, stop and num; missing num"),
    ({"numerics.dt": {"start": 0, "stop": 0.01, "num": 3, "log": True}}, r"log range needs start and stop greater"),
    ({"membrane.scale.g_Na": 0.5}, r"list of values or a range"),
    ({"membrane.scale.g_Na": []}, r"at least one value"),
    ({"mode": "zpi", "membrane.scale.g_Na": [1.0]}, r"sweep\.mode = 'zpi'.*Did you mean 'zip'"),
    ({"mode": "zip", "membrane.scale.g_Na": [1.0, 0.5], "stimulus.0.amplitude": [100]}, r"lengths differ"),
    ({}, r"names no case key"),
    ({"fiber.radius": ["238 um", 0.0238]}, r"'238 um' is given twice"),
])
def test_bad_sweeps_name_the_key_and_suggest(sweep, message):
    with pytest.raises(CaseError, match=message):
        spec_of(sweep)


def test_combinations_are_checked_per_point_not_up_front():
    # each value is valid alone; 0.6 cm > 0.5 cm only together: left to the point
    spec = spec_of({"mode": "zip", "fiber.length": [1.0, 0.5], "fiber.dx": [0.02, 0.6]})
    assert len(spec) == 2


def test_registration_needs_no_sweep_import_and_no_dask():
    code = ("import sys; from cable.case import load_case; "
            "c = load_case({'membrane': {'model': 'passive'}, 'run': {'duration': 1}, "
            "'sweep': {'run.duration': [1, 2]}}); "
            "import cable; assert callable(cable.sweep); "
            "print(len(c.extra['sweep']), 'distributed' in sys.modules)")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=120)
    assert out.returncode == 0, out.stderr
    assert out.stdout.split() == ["2", "False"]


def test_region_keys_get_canonical_coordinates():
    # region.N.start/end/border are lengths (cable.regions.REGION_KEYS), region.N.scale.X a factor,
    # region.N.parameters.X in the model parameter's unit: 1 mm = 0.1 cm (SI prefixes)
    case = hh_axon_case(length=1.0, dx=0.02, dt=0.01, duration=4.0)
    case["region"] = [{"start": 0.2, "end": 0.4, "scale": {"g_Na": 0.5}}]
    case["sweep"] = {"region.R1.end": ["4 mm", "5 mm"], "region.R1.scale.g_Na": [0.5, 0.25],
                     "region.0.parameters.E_K": ["-80 mV", "-70 mV"]}  # old index form: the same entry
    axes = {a.key: a for a in load_case(case).extra["sweep"].axes}
    end = axes["region.R1.end"]
    np.testing.assert_allclose(end.coord, [0.4, 0.5], rtol=1e-12)
    assert end.units == "cm" and end.coord.dtype.kind == "f"
    assert axes["region.R1.scale.g_Na"].units == "1"
    np.testing.assert_allclose(axes["region.R1.parameters.E_K"].coord, [-80.0, -70.0])
    assert axes["region.R1.parameters.E_K"].units == "mV"


def test_a_bad_swept_value_is_named_once():
    # house style: the message names the key and the value (once), and what is allowed
    case = hh_axon_case(length=1.0, dx=0.02, dt=0.01, duration=4.0)
    case["region"] = [{"start": 0.2, "end": 0.4, "scale": {"g_Na": 0.5}}]
    case["sweep"] = {"region.R1.end": ["4 mm", "20 mm"]}
    with pytest.raises(CaseError) as info:
        load_case(case)
    text = str(info.value)
    assert "outside the fibre" in text and text.count("region.R1.end") == 1, text
