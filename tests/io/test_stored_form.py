"""The stored form of a Dataset: what writing it and reading it back gives, without the file.

A sweep returns its result in this form instead of reading its file back (issue 14); the
oracle is the file itself, as netCDF4 and xarray read it.
"""

import numpy as np
import pytest
import xarray as xr

import cable
from cable.io import netcdf
from cable.sweep import store
from conftest import assert_stored_alike, hh_axon_case

#: time stamps fixed, so that the stored form and the written file carry the same ones
FIXED = {"history": "2026-01-01T00:00:00Z test", "date_created": "2026-01-01T00:00:00Z"}

#: attributes of every type a caller may give: bools, numpy and Python scalars, sequences,
#: texts, a dict, NaN, a 2-D array (netCDF attributes are 1-D), a length-1 list
TRICKY_ATTRS = {
    "yes": True, "no": np.bool_(False), "whole": 3, "big": 2 ** 40, "i64": np.int64(-5), "f32": np.float32(1.5),
    "f64": 2.5, "u8": np.uint8(7), "nan": float("nan"), "text": "a b", "empty": "", "pair": (1, 2),
    "floats": [1.5, 2], "single": [7], "texts": ["a", "b"], "int8s": np.array([1, 2], dtype=np.int8),
    "one_int16": np.array([3], dtype=np.int16), "matrix": np.array([[1, 2], [3, 4]]), "mapping": {"a": 1},
    "np_texts": np.array(["p", "q"]), "units": "mM",
}


def tricky_dataset() -> xr.Dataset:
    data = {
        "flag": ("a", np.array([True, False])),
        "reason": ("a", np.array(["ok", ""], dtype=object)),
        "fixed_text": ("a", np.array(["ab", "c"])),
        "value": ("a", np.array([np.nan, 1.0])),
        "single": ("a", np.array([1.0, np.nan], dtype=np.float32)),
        "count": ("a", np.array([1, 2])),
        "code": ("a", np.array([-1, 2], dtype=np.int8), {"flag_values": [-1, 2], "flag_meanings": "m n"}),
        "scalar": ((), 3.0),
        "word": ((), "hello"),
        "vm": (("t", "a"), np.full((3, 2), 1.1)),
    }
    ds = xr.Dataset(data, coords={"a": ("a", [0.5, 1.0], {"units": "cm", "n": 2}), "t": [0.0, 0.1, 0.2],
                                  "label": ("a", ["x", "yy"])}, attrs={**TRICKY_ATTRS, **FIXED})
    for name in ("flag", "count", "vm", "scalar"):
        ds[name].attrs.update(TRICKY_ATTRS)
    return ds


def sweep_point(cv: float) -> xr.Dataset:
    """A point as a run gives it in memory: flag values as a list, a Python int, the package's units."""
    data = {
        "captured": (("beat",), np.array([1], dtype=np.int8), {"flag_values": [0, 1], "flag_meanings": "no yes"}),
        "block_side": (("beat",), np.array([0], dtype=np.int8), {"flag_values": [-1, 0, 1, 2],
                                                                  "flag_meanings": "left none right both"}),
        "conduction_velocity": (("beat",), np.array([cv]), {"units": "m/s", "long_name": "CV", "beats_used": 1}),
        "apd": (("beat", "level"), np.array([[cv * 100.0, np.nan]]), {"units": "ms", "long_name": "APD"}),
    }
    coords = {"beat": ("beat", np.arange(1)), "level": ("level", np.array([50.0, 90.0]))}
    return store._with_status(data, coords, "ok", "", 0.5)


def sweep_result() -> xr.Dataset:
    """An assembled sweep result (what cable.sweep assembles) of a computed, a missing and a failed point."""
    case = hh_axon_case(length=1.0, dx=0.02, dt=0.01, duration=4.0)
    case["sweep"] = {"membrane.scale.g_Na": [1.0, 0.5, 0.25]}
    spec = cable.load_case(case).extra["sweep"]
    points = [store.label(sweep_point(0.4), spec, 0), None,
              store.label(store.failed_dataset("numerical_failure", "NaN at t = 3 ms"), spec, 2)]
    return store.assemble(spec, points, {**FIXED, "n_points": 3, "sweep_keys": "membrane.scale.g_Na"})


def written(ds, path):
    netcdf.write_dataset(ds, path)
    with xr.open_dataset(path) as on_file:
        return on_file.load()


@pytest.mark.parametrize("make", [tricky_dataset, sweep_result])
def test_stored_form_is_what_the_file_gives_back(make, tmp_path):
    ds = make()
    before = ds.copy(deep=True)
    mine = netcdf.stored_form(ds)
    assert_stored_alike(mine, written(ds, tmp_path / "a.nc"))
    xr.testing.assert_identical(ds, before)  # the argument is left as it was
    # a fixed point: stored again it stays as it is, and writing it writes the same
    assert_stored_alike(netcdf.stored_form(mine), mine)
    assert_stored_alike(mine, written(mine, tmp_path / "b.nc"))


def test_stored_types_of_tricky_attributes():
    a = netcdf.stored_form(tricky_dataset()).attrs
    # netCDF has no bools (int8 here), no 2-D attributes, no length-1 arrays (read back as a
    # number); Python whole numbers are 64 bits in netCDF-4; a sequence of texts is one text
    assert a["yes"] == 1 and type(a["yes"]) is np.int8 and type(a["no"]) is np.int8
    assert type(a["whole"]) is np.int64 and type(a["f64"]) is np.float64 and type(a["f32"]) is np.float32
    assert type(a["single"]) is np.int64 and type(a["one_int16"]) is np.int16
    assert a["matrix"].shape == (4,) and a["pair"].dtype == np.int64
    assert a["texts"] == "a, b" and a["np_texts"] == "p, q" and a["mapping"] == "a = 1"
    assert np.isnan(a["nan"])
    ds = netcdf.stored_form(tricky_dataset())
    assert ds["reason"].dtype == np.dtype("<U2") and ds["vm"].dtype == np.float32 and ds["t"].dtype == np.float64
    assert ds["code"].attrs["flag_values"].dtype == np.int8
