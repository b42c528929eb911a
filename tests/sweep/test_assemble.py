"""A sweep's result is the same whether its points were kept in memory or read from their files.

A sweep writes each new point's file and keeps the point in memory rather than reading it
back (issue 14, item 6); the points of an earlier, interrupted call are read from their
files. The result must not tell the two apart, byte for byte (the guarantee of resumed
sweeps, cable/sweep/store.py).
"""

import hashlib

import numpy as np

import cable
from cable.sweep import store
from conftest import hh_axon_case

#: the result's time stamps, fixed so that two writes can be compared byte for byte
FIXED = {"history": "2026-01-01T00:00:00Z test", "date_created": "2026-01-01T00:00:00Z"}


def spec_of(values):
    case = hh_axon_case(length=1.0, dx=0.02, dt=0.01, duration=4.0)
    case["sweep"] = {"membrane.scale.g_Na": values}
    return cable.load_case(case).extra["sweep"]


def point(cv: float, levels=(50.0, 90.0)):
    # attributes as a run may give them in memory: a list of flag values, a whole number (64 bits in
    # Python), units in the package's spelling (a point file stores them in CF's)
    data = {
        "captured": (("beat",), np.array([1], dtype=np.int8), {"flag_values": [0, 1], "flag_meanings": "no yes"}),
        "conduction_velocity": (("beat",), np.array([cv]), {"units": "m/s", "long_name": "CV", "beats_used": 1}),
        "apd": (("beat", "level"), np.array([[cv * 100.0, cv * 200.0]]), {"units": "ms", "long_name": "APD"}),
        "excitation_charge": ((), 2.5, {"units": "uA/cm^2*ms"}),
    }
    coords = {"beat": ("beat", np.arange(1)), "level": ("level", np.array(levels))}
    return store._with_status(data, coords, "ok", "", 0.5)


def result_bytes(spec, points, path):
    store.write_result(store.assemble(spec, points, dict(FIXED)), path)
    return hashlib.sha256(path.read_bytes()).hexdigest()


def test_points_kept_in_memory_give_the_result_their_files_give(tmp_path):
    spec = spec_of([1.0, 0.5, 0.25])
    fresh = [store.label(point(0.4), spec, 0), store.label(point(0.3), spec, 1),
             store.label(store.failed_dataset("numerical_failure", "NaN at t = 3 ms"), spec, 2)]
    points = store.PointStore(tmp_path / "out.nc", "test", len(spec))
    for k, p in enumerate(fresh):
        points.write(k, p, {"worker": "here"})
    read = [points.read(k) for k in range(len(spec))]
    kept = [store.without_fields(p) for p in fresh]
    whole = result_bytes(spec, read, tmp_path / "read.nc")               # every point from its file
    assert result_bytes(spec, kept, tmp_path / "kept.nc") == whole       # every point kept in memory
    assert result_bytes(spec, [read[0], kept[1], kept[2]], tmp_path / "mixed.nc") == whole  # resumed


def test_stored_form_of_the_attributes():
    # what a classic netCDF point file gives back: CF units, flag values of the variable's type,
    # whole numbers in 32 bits (netCDF-3 has no 64-bit integers)
    from cable.sweep.assemble import as_stored

    attrs = as_stored({"flag_values": [0, 1], "beats_used": 1, "units": "m/s", "name": "x"}, np.dtype(np.int8))
    assert attrs["flag_values"].dtype == np.int8 and attrs["beats_used"].dtype == np.int32
    assert attrs["units"] == cable.io.schema.cf_units("m/s") and attrs["name"] == "x"
