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


def test_no_capture_and_block_are_outcomes_counted_apart_from_failures():
    # issue 16, item 4: a point whose stimulus did not capture, or whose wave blocked, ran and has
    # its measurements; only a point whose run failed counts as failed
    from cable.cli.sweep import counts_line, summarise

    base = hh_axon_case(length=2.0, dx=0.02, dt=0.01, duration=4.0)
    # g_Na removed beyond 0.8 cm: an inexcitable segment the wave cannot cross (Hodgkin & Huxley 1952)
    blocked_case = dict(base, region=[{"start": 0.8, "end": 2.0, "scale": {"g_Na": 0.0}}])
    # 20 uA/cm^2 for 0.2 ms lies far below the HH axon's threshold charge (tests/sweep/test_run.py)
    quiet_case = dict(base, stimulus=[{"amplitude": 20.0, "duration": 0.2, "width": 0.1}])
    runs = [cable.simulate(c) for c in (base, blocked_case, quiet_case)]
    case = dict(base, sweep={"membrane.scale.g_Na": [1.0, 0.9, 0.8, 0.7]})
    spec = cable.load_case(case).extra["sweep"]
    points = [store.label(store.point_dataset(ds, False), spec, k) for k, ds in enumerate(runs)]
    points.append(store.label(store.failed_dataset("numerical_failure", "NaN at t = 1 ms"), spec, 3))
    ds = store.assemble(spec, points, {})
    assert list(ds["status"].values) == [store.STATUS[s] for s in ("ok", "blocked", "no_capture",
                                                                      "numerical_failure")]
    block_x = float(ds["block_x"].isel(beat=0).values[1])
    # the passive segment carries the depolarisation on for less than its space constant (0.70 cm at
    # rest, measured here by `cable check`), so the last node above threshold lies within 0.8-1.5 cm
    assert 0.8 <= block_x < 1.5 and f"blocked at x = {block_x:.4g} cm" in str(ds["failure_reason"].values[1])
    assert (ds.attrs["n_failed"], ds.attrs["n_blocked"], ds.attrs["n_no_capture"]) == (1, 1, 1)
    assert [store.is_failure(c) for c in ds["status"].values] == [False, False, False, True]
    assert counts_line(ds["status"].values) == ("4 points: 1 ok, 1 no_capture, 1 blocked; "
                                                "1 failed (1 numerical_failure)")
    table = summarise(ds).splitlines()
    assert table[1].split()[:4] == ["g_Na", "scale", "CV", "[m/s]"]
    blocked_row = table[3].split()
    assert blocked_row[1] == "-" and blocked_row[2] == "blocked:"
