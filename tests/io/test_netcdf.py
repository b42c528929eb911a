"""Result files: CF attributes any netCDF reader understands, streaming, chunking, provenance, rerun.

CF references: NetCDF Climate and Forecast (CF) Metadata Conventions 1.10 (Eaton et al.
2022): section 2.6.1 (Conventions), 3.1 (units, udunits syntax), 3.2 (long_name),
3.3 (standard_name from the standard name table), 3.5 (flags), 2.6.2 (history).
"""

import math
import shutil

import netCDF4
import numpy as np
import pytest

import cable
from cable.io import netcdf, schema
from conftest import hh_axon_case

#: the standard names this package may use, all in the CF standard name table (from memory)
CF_STANDARD_NAMES = {"time"}


def small_case(**extra):
    """A 1 cm Hodgkin & Huxley (1952) axon, two beats, with h and m stored."""
    case = hh_axon_case(length=1.0, dx=0.02, dt=0.01, duration=14.0)
    case["stimulus"][0].update(count=2, cycle_length=7.0)
    case["output"] = {"every": 0.05, "states": ["h", "m"]}
    for key, value in extra.items():
        case.setdefault(key, {}).update(value)
    return case


@pytest.fixture(scope="module")
def result(tmp_path_factory):
    path = tmp_path_factory.mktemp("nc") / "axon.nc"
    ds = cable.simulate(small_case(), output=path, command="cable run axon.toml -o axon.nc")
    ds.close()
    return path


def all_units(path):
    with netCDF4.Dataset(path) as nc:
        return {name: var.getncattr("units") for name, var in nc.variables.items() if "units" in var.ncattrs()}


def test_file_opens_with_netcdf4_directly(result):
    with netCDF4.Dataset(result) as nc:
        assert nc.getncattr("Conventions").startswith("CF-")      # CF 1.10, 2.6.1
        assert nc.getncattr("history")                            # CF 1.10, 2.6.2
        vm = nc.variables["vm"]
        assert vm.dimensions == ("t", "x")
        assert vm.dtype == np.float32
        assert vm.filters()["zlib"]
        assert vm.chunking() == list(netcdf.chunk_shape(nc.dimensions["t"].size, nc.dimensions["x"].size))
        for name, var in nc.variables.items():
            assert "long_name" in var.ncattrs(), name             # CF 1.10, 3.2
            if "standard_name" in var.ncattrs():                  # CF 1.10, 3.3: only names of the table
                assert var.getncattr("standard_name") in CF_STANDARD_NAMES, name
        for name in schema.FLAGS:                                 # CF 1.10, 3.5: flag_values of the variable's type
            var = nc.variables[name]
            assert var.getncattr("flag_values").dtype == var.dtype
            assert "units" not in var.ncattrs()
        finite = vm[:][np.isfinite(vm[:])]
        assert finite.size == vm.size, "every sample of a complete run is written"


def test_units_parse_with_pint(result):
    ureg = cable.units.registry()
    units = all_units(result)
    assert {"t", "x", "vm", "conduction_velocity", "activation_time"} <= set(units)
    for name, text in units.items():
        ureg.Quantity(1.0, text)          # raises on an unknown unit
    # dimensions as the schema means them (common practice: SI dimensional analysis)
    assert ureg.Quantity(1.0, units["vm"]).to("V").magnitude == pytest.approx(1e-3)
    assert ureg.Quantity(1.0, units["t"]).to("s").magnitude == pytest.approx(1e-3)
    assert ureg.Quantity(1.0, units["conduction_velocity"]).to("m/s").magnitude == pytest.approx(1.0)


def test_units_parse_with_cf_units(result):
    cf_units = pytest.importorskip("cf_units")            # udunits2 (Unidata), the library CF names
    for name, text in all_units(result).items():
        cf_units.Unit(text)
    units = all_units(result)
    assert cf_units.Unit(units["vm"]).convert(1.0, "V") == pytest.approx(1e-3)
    assert cf_units.Unit(units["x"]).convert(1.0, "m") == pytest.approx(1e-2)


def test_concentration_units_get_the_udunits_spelling():
    # udunits has no molar symbol, pint does; mmol/L is the same quantity (from memory: udunits2 database)
    assert schema.cf_units("mM") == "mmol/L"
    ureg = cable.units.registry()
    assert ureg.Quantity(1.0, "mM").to(schema.cf_units("mM")).magnitude == pytest.approx(1.0)
    cf_units = pytest.importorskip("cf_units")
    assert cf_units.Unit(schema.cf_units("mM")).convert(1.0, "mol/m3") == pytest.approx(1.0)


def test_provenance_attributes(result):
    # the provenance list; the case text must load back to the same case (common practice)
    import numba

    with netCDF4.Dataset(result) as nc:
        attrs = {k: nc.getncattr(k) for k in nc.ncattrs()}
    assert attrs["cable_version"] == cable.__version__
    assert attrs["numpy_version"] == np.__version__
    assert attrs["numba_version"] == numba.__version__
    assert attrs["command"] == "cable run axon.toml -o axon.nc"
    assert attrs["status"] == "complete"
    reloaded = cable.load_case(attrs["case"])
    original = cable.load_case(small_case())
    assert reloaded.fiber == original.fiber and reloaded.stimuli == original.stimuli
    assert reloaded.numerics == original.numerics and reloaded.duration == original.duration


def test_streamed_field_equals_the_in_memory_run(result):
    # the same case run in memory: the file holds the same samples, rounded to float32 (common practice)
    memory = cable.simulate(small_case())
    with cable.open_result(result) as ds:
        assert np.array_equal(ds["t"].values, memory["t"].values)
        assert np.array_equal(ds["vm"].values, memory["vm"].values.astype(np.float32))
        assert np.array_equal(ds["state_h"].values, memory["state_h"].values.astype(np.float32))
        assert np.array_equal(ds["activation_time"].values, memory["activation_time"].values, equal_nan=True)


def test_rerun_reproduces_activation_time_exactly(result, tmp_path):
    # common practice: the same case, code and libraries give the same bits (no randomness, no threads)
    report = cable.rerun(result, tmp_path / "again.nc")
    assert report.compared["activation_time"] == (True, 0.0)
    assert report.identical
    with cable.open_result(result) as a, cable.open_result(tmp_path / "again.nc") as b:
        assert np.array_equal(a["activation_time"].values, b["activation_time"].values, equal_nan=True)
        assert np.isfinite(a["activation_time"].values).sum() > 0


def test_rerun_reports_a_difference(result, tmp_path):
    tampered = tmp_path / "tampered.nc"
    shutil.copy(result, tampered)
    with netCDF4.Dataset(tampered, "a") as nc:      # common practice: a comparison must see one changed value
        nc.variables["activation_time"][0, 10] += 1e-9
    report = cable.rerun(tampered)
    same, diff = report.compared["activation_time"]
    assert not same and diff == pytest.approx(1e-9, rel=1e-3)
    assert not report.identical


def test_rerun_needs_the_case_attribute(result, tmp_path):
    bare = tmp_path / "bare.nc"
    shutil.copy(result, bare)
    with netCDF4.Dataset(bare, "a") as nc:
        nc.delncattr("case")
    with pytest.raises(cable.CaseError, match="no 'case' attribute"):
        cable.rerun(bare)
    with pytest.raises(cable.CaseError, match="is the original file"):
        cable.rerun(result, result)


def test_open_result_errors_name_the_problem(tmp_path):
    # house style (STYLE.md, point 9): the message says what is wrong with which file
    with pytest.raises(cable.CaseError, match="not found"):
        cable.open_result(tmp_path / "missing.nc")
    with pytest.raises(cable.CaseError, match="is a folder"):
        cable.open_result(tmp_path)
    junk = tmp_path / "junk.nc"
    junk.write_text("not a netCDF file\n")
    with pytest.raises(cable.CaseError, match="not a readable netCDF file"):
        cable.open_result(junk)


def test_open_result_keeps_times_as_numbers(result):
    # simulated time has no calendar (CF 1.10, 4.4 reference times do not apply): plain ms, not timedelta
    with cable.open_result(result) as ds:
        assert ds["t"].dtype.kind == "f"
        assert ds["t"].attrs["units"] == "ms"


@pytest.mark.parametrize("n_t, n_x", [(201, 601), (20000, 601), (4000, 4001), (100000, 201), (50, 5000)])
def test_chunks_balance_trace_and_profile_reads(n_t, n_x):
    # common practice: a trace reads n_t/c_t chunks, a profile n_x/c_x; both stay few
    c_t, c_x = netcdf.chunk_shape(n_t, n_x)
    assert c_t * c_x <= netcdf.CHUNK_ELEMENTS
    trace, profile = math.ceil(n_t / c_t), math.ceil(n_x / c_x)
    balance = max(trace, profile) / min(trace, profile)
    # within a factor 4: power-of-two rounding gives up to 2, the caps on c_t the rest
    assert balance <= 4 or c_t == min(netcdf.MAX_T_CHUNK, n_t), (c_t, c_x, trace, profile)
    assert 4 * c_t * n_x <= max(netcdf.BUFFER_BYTES, 4 * n_x)     # the writer's buffer stays bounded


def test_single_cell_result(tmp_path):
    case = {"membrane": {"model": "hodgkin-huxley-1952", "temperature": 6.3},
            "stimulus": [{"amplitude": 20.0, "duration": 0.5}], "numerics": {"dt": 0.01},
            "run": {"duration": 10.0}, "output": {"every": 0.1}}
    cable.simulate(case, output=tmp_path / "cell.nc").close()
    # a single cell has no x dimension (cable.io.schema); its rerun is exact too (common practice)
    with netCDF4.Dataset(tmp_path / "cell.nc") as nc:
        assert nc.variables["vm"].dimensions == ("t",)
    assert cable.rerun(tmp_path / "cell.nc").identical


def test_write_dataset_of_an_in_memory_result(tmp_path):
    # the same encoding as a streamed file: float32 fields, typed flags; no silent overwrite (house style)
    ds = cable.simulate(small_case())
    netcdf.write_dataset(ds, tmp_path / "mem.nc")
    with netCDF4.Dataset(tmp_path / "mem.nc") as nc:
        assert nc.variables["vm"].dtype == np.float32
        assert "_FillValue" not in nc.variables["x"].ncattrs()     # CF 1.10, 2.5.1: no missing coordinates
        assert nc.variables["blocked"].getncattr("flag_values").dtype == nc.variables["blocked"].dtype
    with pytest.raises(cable.CaseError, match="exists"):
        netcdf.write_dataset(ds, tmp_path / "mem.nc")


def test_open_result_warns_about_an_unfinished_file(result, tmp_path):
    # a file still marked running was cut off (killed run): say so rather than show NaN silently (house style)
    cut = tmp_path / "cut.nc"
    shutil.copy(result, cut)
    with netCDF4.Dataset(cut, "a") as nc:
        nc.setncattr("status", "running")
    with pytest.warns(UserWarning, match="status = 'running'"):
        cable.open_result(cut).close()


def test_rerun_of_a_file_written_in_the_old_stimulus_form_is_identical(result, tmp_path):
    # files written before named stimuli hold [[stimulus]] with 'start'; they must rerun as identical
    import tomllib

    from cable.case.load import dumps_toml

    old = tmp_path / "old.nc"
    shutil.copy(result, old)
    with netCDF4.Dataset(old, "a") as nc:
        raw = tomllib.loads(nc.getncattr("case"))
        raw["stimulus"] = [dict(s, start=s.get("onset", 0.0)) for s in raw["stimulus"].values()]
        text = dumps_toml(raw)
        assert "[[stimulus]]" in text and "start = " in text
        nc.setncattr("case", text)
    report = cable.rerun(old)
    assert report.attributes == {} and report.identical
