"""Assembling a sweep's points: "no result" must never read as a measured outcome."""

import numpy as np

import cable
from cable.io import schema
from cable.io.netcdf import variable_attrs
from cable.measure.block import LEFT
from cable.sweep import store
from conftest import hh_axon_case


def two_point_spec():
    case = hh_axon_case(length=1.0, dx=0.02, dt=0.01, duration=4.0)
    case["sweep"] = {"membrane.scale.g_Na": [1.0, 0.5]}
    return cable.load_case(case).extra["sweep"]


def measured_point(block_side):
    """A point with one beat, blocked leftward (block_side -1: cable.measure.block.LEFT)."""
    data = {name: (("beat",), np.array([value], dtype=np.int8), variable_attrs(schema.attrs(name), np.int8))
            for name, value in (("captured", 1), ("blocked", 1), ("block_side", block_side))}
    return store._with_status(data, {"beat": ("beat", [0])}, "ok", "", 0.5)


def test_a_failed_point_is_not_read_as_a_leftward_block():
    # cable.measure.block: block_side -1 means "blocked while travelling left"; a point without a
    # result must get another code, named no_result in the CF flag attributes (CF 1.10, 3.5)
    spec = two_point_spec()
    points = [store.label(measured_point(LEFT), spec, 0),
              store.label(store.failed_dataset("numerical_failure", "NaN"), spec, 1)]
    ds = store.assemble(spec, points, {})
    side = ds["block_side"].isel(beat=0).values
    assert side[0] == LEFT
    assert side[1] != LEFT and side[1] not in schema.CODES["block_side"][0]
    codes = list(ds["block_side"].attrs["flag_values"])
    meanings = ds["block_side"].attrs["flag_meanings"].split()
    assert meanings[codes.index(side[1])] == "no_result"
    assert meanings[codes.index(LEFT)] == "blocked_leftward"
    # the 0/1 flags keep -1 for no result
    assert ds["captured"].isel(beat=0).values.tolist() == [1, store.NO_RESULT]
    assert ds["captured"].attrs["flag_meanings"] == "no_result false true"


def test_no_result_code_lies_outside_the_codes():
    assert store.no_result_code([0, 1]) == store.NO_RESULT
    assert store.no_result_code(None) == store.NO_RESULT
    assert store.no_result_code([-1, 0, 1, 2]) == -2
