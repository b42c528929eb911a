"""Sweeps on Dask: exact agreement with single runs, resume, schedulers, failures, trends."""

import hashlib
import os
import socket

import numpy as np
import pytest
import xarray as xr

import cable
from cable.cli import main as cli_main
from cable.sweep import run as sweep_run
from cable.sweep.store import STATUS
from conftest import assert_stored_alike, hh_axon_case

distributed = pytest.importorskip("distributed")

#: attributes that say when a sweep was started: the same only for the same store
WHEN = ("date_created", "history")


def hh_sweep_case():
    case = hh_axon_case(length=1.5, dx=0.02, dt=0.01, duration=4.0)
    # 20 uA/cm^2 for 0.2 ms is far below the HH axon's threshold charge: a no-capture point
    case["sweep"] = {"membrane.scale.g_Na": [1.0, 0.7, 0.4], "stimulus.0.amplitude": [1000.0, 20.0]}
    return case


@pytest.fixture(scope="module")
def client():
    """A small cluster on loopback TCP (one worker thread, in this process), shared by this file's tests."""
    with distributed.LocalCluster(n_workers=1, threads_per_worker=1, processes=False, dashboard_address=None,
                                  protocol="tcp", host="127.0.0.1") as cl, distributed.Client(cl) as c:
        yield c


#: points per task of the uninterrupted sweep: 6 points in 3 chunks on 2 workers, so that
#: some worker runs a second chunk (and must not load the time loop again)
WHOLE_BATCH = 2


@pytest.fixture(scope="module")
def uninterrupted(tmp_path_factory):
    """The HH sweep in one go, on the default local cluster of two worker processes."""
    out = tmp_path_factory.mktemp("whole") / "hh.nc"
    ds = cable.sweep(hh_sweep_case(), output=out, workers=2, progress=False, batch=WHOLE_BATCH)
    return out, ds


def point_files(out):
    """{point index: attributes} of a sweep's point files."""
    attrs = {}
    for f in sorted(out.with_name(out.name + ".points").glob("point-*.nc")):
        with xr.open_dataset(f) as p:
            attrs[int(p.attrs["point_index"])] = dict(p.attrs)
    return attrs


def centre_index(ref):
    x = ref["x"].values
    lo, hi = ref.attrs["cv_window_cm"]
    return int(np.argmin(np.abs(x - 0.5 * (lo + hi))))


def test_values_equal_separate_runs_exactly(uninterrupted):
    out, ds = uninterrupted
    spec = cable.load_case(hh_sweep_case()).extra["sweep"]
    base = {k: v for k, v in hh_sweep_case().items() if k != "sweep"}
    compared = 0
    for k, over in enumerate(spec.points()):
        ref = cable.simulate(cable.load_case(base, over))
        point = ds.isel(dict(zip(spec.dims, np.unravel_index(k, spec.shape))))
        centre = centre_index(ref)
        for name, var in ref.data_vars.items():
            if "t" in var.dims:
                continue
            expect = var.isel(x=centre) if "x" in var.dims else var
            # exact: the same code on the same machine, in a worker process or here
            np.testing.assert_array_equal(point[name].transpose(*expect.dims).values, expect.values, err_msg=name)
            compared += 1
        assert float(point["sample_x"]) == float(ref["x"][centre])
        captured = bool(ref["captured"][0])
        assert int(point["status"]) == (STATUS["ok"] if captured else STATUS["no_capture"])
    assert compared >= 6 * 10
    # the threshold charge of the HH axon lies between 20 and 1000 uA/cm^2 x 0.2 ms
    # (Hodgkin & Huxley 1952; from memory): captured at 1000 with full g_Na, not at 20
    assert int(ds["status"].sel(g_Na=1.0, amplitude=1000.0)) == STATUS["ok"]
    assert int(ds["status"].sel(g_Na=1.0, amplitude=20.0)) == STATUS["no_capture"]
    assert ds["g_Na"].attrs["case_key"] == "membrane.scale.g_Na"


def test_values_equal_a_cable_run_of_the_same_point(uninterrupted, tmp_path):
    out, ds = uninterrupted
    case_file = tmp_path / "point.toml"
    base = {k: v for k, v in hh_sweep_case().items() if k != "sweep"}
    case_file.write_text(cable.case.dumps_toml(base))
    single = tmp_path / "single.nc"
    assert cli_main(["run", str(case_file), "-o", str(single), "-q", "--set", "membrane.scale.g_Na=0.7"]) == 0
    with xr.open_dataset(single) as ref:
        point = ds.sel(g_Na=0.7, amplitude=1000.0)
        np.testing.assert_array_equal(point["conduction_velocity"].values, ref["conduction_velocity"].values)
        np.testing.assert_array_equal(point["activation_time"].values,
                                      ref["activation_time"].isel(x=centre_index(ref)).values)


def test_result_returned_is_the_file_without_reading_it(uninterrupted):
    # the sweep returns its result in the stored form (cable.io.netcdf.stored_form), not read
    # back: the same values, dtypes and attribute types as the file (issue 14)
    out, ds = uninterrupted
    assert not ds["status"].encoding and not ds.encoding  # in memory: nothing from a file
    with xr.open_dataset(out) as on_file:
        assert_stored_alike(ds, on_file.load())


def test_jit_once_per_worker_not_per_point(uninterrupted):
    out, _ = uninterrupted
    attrs = point_files(out)
    assert len(attrs) == 6
    flagged, chunks = {}, {}
    for a in attrs.values():
        chunks.setdefault(a["worker"], set()).add(int(a["chunk"]))
        if int(a["first_on_worker"]):
            flagged.setdefault(a["worker"], set()).add(int(a["chunk"]))
        # every point of the sweep shares its grid and loop: batched with its chunk
        assert int(a["batch_size"]) == int(a["chunk_size"]) == WHOLE_BATCH
    assert sum(len(c) for c in chunks.values()) == 3
    for worker, ran in chunks.items():
        # a fresh worker process loads the model's time loop in its first chunk, never again
        # (common practice: compile once per process)
        assert len(flagged.get(worker, ())) == 1, (worker, ran, flagged)


def test_interrupted_sweep_resumes_to_the_same_result(uninterrupted, client, tmp_path):
    whole_path, whole = uninterrupted
    out = tmp_path / "hh.nc"
    partial = cable.sweep(hh_sweep_case(), client=client, output=out, limit=2, progress=False)
    assert int(np.sum(partial["status"].values == STATUS["not_computed"])) == 4
    assert not out.exists()
    folder = out.with_name(out.name + ".points")
    (folder / ".point-000005.nc.999.tmp").write_bytes(b"half a file")  # what a killed writer leaves
    calls = []
    resumed = cable.sweep(hh_sweep_case(), client=client, output=out,
                          progress=lambda done, failed, total: calls.append(done))
    assert calls == [3, 4, 5, 6]  # only the missing points were computed
    assert not list(folder.glob("*.tmp"))
    with xr.open_dataset(out) as on_file, xr.open_dataset(whole_path) as reference:
        xr.testing.assert_identical(on_file.drop_attrs(deep=False).assign_attrs(
            {k: v for k, v in on_file.attrs.items() if k not in WHEN}),
            reference.drop_attrs(deep=False).assign_attrs({k: v for k, v in reference.attrs.items() if k not in WHEN}))
    with xr.open_dataset(out) as on_file:
        assert_stored_alike(resumed, on_file.load())
    digest = hashlib.sha256(out.read_bytes()).hexdigest()
    again = cable.sweep(hh_sweep_case(), client=client, output=out, progress=False)
    assert hashlib.sha256(out.read_bytes()).hexdigest() == digest  # byte for byte
    xr.testing.assert_identical(again, resumed)


def test_other_sweep_at_same_output_is_refused(uninterrupted, client):
    out, _ = uninterrupted
    other = hh_sweep_case()
    other["sweep"]["membrane.scale.g_Na"] = [1.0, 0.5]
    with pytest.raises(cable.CaseError, match=r"not a result of this sweep.*--overwrite"):
        cable.sweep(other, client=client, output=out, progress=False)


def test_cli_uses_the_scheduler_given_and_draws_progress(client, tmp_path, capsys):
    case_file = tmp_path / "case.toml"
    case_file.write_text(cable.case.dumps_toml(hh_axon_case(length=1.0, dx=0.02, dt=0.01, duration=3.0)))
    out = tmp_path / "cli.nc"
    address = client.scheduler.address
    assert address.startswith("tcp://127.0.0.1:")
    rc = cli_main(["sweep", str(case_file), "-o", str(out), "--scheduler", address,
                   "--over", "membrane.scale.g_Na=[1.0, 0.8]",
                   "--over", "stimulus.S1.duration={start=0.2, stop=0.4, num=2}", "--batch", "2"])
    captured = capsys.readouterr()
    assert rc == 0, captured.err
    assert "4/4 points, 0 failed" in captured.err and "4 points: 4 ok" in captured.out
    here = f"{socket.gethostname()}:{os.getpid()}"  # the test's cluster runs its worker in this process
    for f in out.with_name(out.name + ".points").glob("point-*.nc"):
        with xr.open_dataset(f) as p:
            assert p.attrs["worker"] == here
            assert int(p.attrs["chunk_size"]) == int(p.attrs["batch_size"]) == 2  # --batch 2: two tasks of two
    rc = cli_main(["sweep", str(case_file), "--scheduler", address, "--vary", "membrane.scale.g_Na=[1.0]", "-q",
                   "--batch", "0"])
    assert rc == 2 and "batch = 0: must be a whole number of at least 1" in capsys.readouterr().err
    rc = cli_main(["sweep", str(case_file), "--scheduler", address, "--over", "membrane.scale.gNA=[1.0]", "-q"])
    assert rc == 2 and "Did you mean 'g_Na'" in capsys.readouterr().err


def test_unreachable_scheduler_is_a_case_error(monkeypatch):
    monkeypatch.setattr(sweep_run, "CONNECT_TIMEOUT_S", 1)
    with socket.socket() as s:  # a loopback port nobody listens on
        s.bind(("127.0.0.1", 0))
        port = s.getsockname()[1]
    with pytest.raises(cable.CaseError, match=r"scheduler 'tcp://127\.0\.0\.1:\d+': cannot connect"):
        with sweep_run.connect(scheduler=f"tcp://127.0.0.1:{port}"):
            pass


def test_failed_points_are_recorded_and_fields_kept(client, tmp_path):
    case = hh_axon_case(length=1.0, dx=0.02, dt=0.01, duration=3.0)
    case["output"]["keep_fields"] = True
    case["sweep"] = {"mode": "zip", "fiber.length": [1.0, 0.5, 1.0, 1.0], "fiber.dx": [0.02, 0.6, 0.02, 0.02],
                     # forward-Euler gates at 0.05 ms are unstable for HH (the m gate's time constant is
                     # far shorter; common practice): a NaN point
                     "numerics.gating": ["rush-larsen", "rush-larsen", "forward-euler", "rush-larsen"],
                     "numerics.dt": [0.01, 0.01, 0.05, 0.005]}
    out = tmp_path / "zip.nc"
    ds = cable.sweep(case, client=client, output=out, progress=False)
    assert list(ds["status"].values) == [STATUS["ok"], STATUS["invalid_case"], STATUS["numerical_failure"],
                                         STATUS["ok"]]
    assert "fiber.dx" in str(ds["failure_reason"][1].values)
    assert "NaN" in str(ds["failure_reason"][2].values)
    assert list(ds["captured"].isel(beat=0).values) == [1, -1, -1, 1]
    fields = xr.open_mfdataset(str(out) + ".points/*.nc", combine="by_coords", join="outer", compat="no_conflicts")
    assert fields["vm"].dims == ("point", "t", "x")
    base = {k: v for k, v in case.items() if k != "sweep"}
    ref = cable.simulate(cable.load_case(base, {"numerics.dt": 0.005}))
    # fields are stored as float32 (cable.io.netcdf); the point's vm is the run's, rounded so
    np.testing.assert_array_equal(fields["vm"].sel(point=3).values, ref["vm"].values.astype(np.float32))
    assert np.isnan(fields["vm"].sel(point=1).values).all()
    from cable.sweep import open_points

    with open_points(out) as same:
        np.testing.assert_array_equal(same["vm"].values, fields["vm"].values)
    fields.close()


def test_keep_fields_needs_an_output_and_a_sweep_needs_a_section(client):
    case = hh_axon_case(length=1.0, dx=0.02, dt=0.01, duration=3.0)
    with pytest.raises(cable.CaseError, match=r"no \[sweep\] section"):
        cable.sweep(case, client=client, progress=False)
    case["sweep"] = {"membrane.scale.g_Na": [1.0]}
    case["output"]["keep_fields"] = True
    with pytest.raises(cable.CaseError, match=r"output\.keep_fields = true .*give an output file"):
        cable.sweep(case, client=client, progress=False)


def cv_falls(ds, dim):
    cv = ds["conduction_velocity"].isel(beat=0).values
    order = np.argsort(-ds[dim].values)  # from the largest conductance down
    return bool(np.all(ds["status"].values == STATUS["ok"])) and bool(np.all(np.diff(cv[order]) < 0)), cv


def test_cv_falls_with_g_na_in_the_hh_axon(client):
    # Hodgkin & Huxley 1952 (J Physiol 117:500): the propagated AP's speed is set by the
    # sodium current; Shaw & Rudy 1997 (Circ Res 81:727): reduced excitability slows conduction
    case = hh_axon_case(length=1.5, dx=0.02, dt=0.01, duration=4.0)
    case["sweep"] = {"membrane.scale.g_Na": [0.4, 1.0, 0.8, 0.6]}
    ok, cv = cv_falls(cable.sweep(case, client=client, progress=False), "g_Na")
    assert ok, cv


def test_cv_falls_with_g_na_in_a_cardiac_strand(client):
    # Shaw & Rudy 1997 (Circ Res 81:727, abstract): with reduced excitability CV falls
    # (54 -> 17 cm/s before failure, LRd fibre); here the Luo & Rudy 1991 model. Tissue
    # settings of ten Tusscher et al. 2004 (Am J Physiol 286:H1573): sigma = 1000/162 mS/cm,
    # S = 2000 /cm, C_m = 2 uF/cm^2.
    case = {
        "membrane": {"model": "luo-rudy-1991"},
        "fiber": {"length": 1.0, "dx": 0.02, "conductivity": 1000.0 / 162.0, "surface_to_volume": 2000.0,
                  "capacitance": 2.0},
        "stimulus": [{"amplitude": 200.0, "duration": 1.0, "width": 0.1}],
        "numerics": {"dt": 0.01},
        "run": {"duration": 40.0},
        "output": {"every": 1.0},
        "sweep": {"membrane.scale.G_Na": {"start": 1.0, "stop": 0.4, "num": 4}},
    }
    ok, cv = cv_falls(cable.sweep(case, client=client, progress=False), "G_Na")
    assert ok, cv


@pytest.mark.parametrize("size", [1, 2])
def test_first_on_worker_tracks_the_loop_the_run_uses(size):
    # At the model's own 6.3 degC nothing is settled before the run, so only the loop the run
    # uses gets loaded (the HH model's fast path); in a fresh process every point of the first
    # chunk (here of one point, then of two batched strands) reports the load and those of
    # the second do not (common practice: compile once per process).
    import json
    import subprocess
    import sys
    from pathlib import Path

    script = (
        "import json, sys\n"
        "sys.path.insert(0, sys.argv[1])\n"
        "from conftest import hh_axon_case\n"
        "from cable.sweep.run import run_chunk\n"
        "case = hh_axon_case(length=1.0, dx=0.02, dt=0.01, duration=3.0)\n"
        "case['membrane']['temperature'] = 6.3\n"
        "print(json.dumps([[[m['first_on_worker'], m['batch_size']] for _, m in run_chunk([case] * int(sys.argv[2]),"
        " False)] for _ in range(2)]))\n")
    tests = Path(__file__).resolve().parents[1]
    out = subprocess.run([sys.executable, "-c", script, str(tests), str(size)], capture_output=True, text=True,
                         timeout=300)
    assert out.returncode == 0, out.stderr
    assert json.loads(out.stdout.strip().splitlines()[-1]) == [[[True, size]] * size, [[False, size]] * size]


# ----------------------------------------------------------------------------- batched points
def assert_point_equals_run(point, ref, fields=None):
    """Every variable of a sweep point equals the separate run's, exactly (NaN equal to NaN).

    ``point`` holds the scalars (x-resolved ones at ``sample_x``); ``fields``, where given,
    the point's ``vm`` and ``state_*``. Returns the number of variables compared.
    """
    centre = centre_index(ref)
    compared = 0
    for name, var in ref.data_vars.items():
        if "t" in var.dims:
            if fields is None:
                continue
            got, expect = fields[name], var
        else:
            got, expect = point[name], var.isel(x=centre) if "x" in var.dims else var
        # exact: each strand of a batch is computed with its separate run's operations, in
        # the same order (cable/kernels/batch.py; common practice: IEEE 754 is deterministic)
        assert np.array_equal(np.asarray(got.transpose(*expect.dims).values, dtype=expect.dtype), expect.values,
                              equal_nan=expect.dtype.kind == "f"), name
        compared += 1
    assert float(point["sample_x"]) == float(ref["x"][centre])
    return compared


def mixed_length_case():
    """Strands of two lengths and three sodium conductances: one loop, strands end to end."""
    case = hh_axon_case(length=1.0, dx=0.02, dt=0.01, duration=3.0)
    case["sweep"] = {"fiber.length": [1.0, 1.2], "membrane.scale.g_Na": [1.0, 0.8, 0.6]}
    return case


def test_batched_sweep_equals_separate_simulate_runs_exactly(client, tmp_path):
    case = mixed_length_case()
    case["output"]["keep_fields"] = True
    out = tmp_path / "mixed.nc"
    ds = cable.sweep(case, client=client, output=out, progress=False, batch=16)
    spec = cable.load_case(case).extra["sweep"]
    base = {k: v for k, v in case.items() if k != "sweep"}
    attrs = point_files(out)
    compared = 0
    for k, over in enumerate(spec.points()):
        assert int(attrs[k]["batch_size"]) == len(spec) == 6  # all six strands in one kernel call
        ref = cable.simulate(cable.load_case(base, over))
        point = ds.isel(dict(zip(spec.dims, np.unravel_index(k, spec.shape))))
        assert int(point["status"]) == STATUS["ok"]
        compared += assert_point_equals_run(point, ref)
        # the point file's fields are float32 (as cable run writes them): the run's, rounded so
        with xr.open_dataset(out.with_name(out.name + ".points") / f"point-{k:06d}.nc") as stored:
            fields = stored.squeeze(drop=True).load()
        np.testing.assert_array_equal(fields["vm"].values, ref["vm"].values.astype(np.float32))
    assert compared >= 6 * 10
    # the same chunk on the worker side, fields in full precision: every variable equal
    chunk = sweep_run.run_chunk([sweep_run.point_raw(base, over) for over in spec.points()], True)
    for (data, meta), over in zip(chunk, spec.points()):
        assert meta["batch_size"] == 6 and meta["chunk_size"] == 6
        ref = cable.simulate(cable.load_case(base, over))
        assert assert_point_equals_run(data, ref, fields=data) == len(ref.data_vars)


def test_a_chunk_with_an_invalid_and_a_nan_point_among_good_ones(client, tmp_path):
    # One loop key for all five points (same numerics and output times), so one chunk: the
    # cv_window holds 2 nodes at dx = 0.05 cm (refused when the case is prepared, not when
    # loaded), and the largest stimulus allowed, 1e5 uA/cm^2, drives the potential far past
    # the runaway bound of the time loop (1000 mV) within a step.
    case = hh_axon_case(length=1.0, dx=0.02, dt=0.01, duration=3.0)
    case["measure"] = {"cv_window": [0.4, 0.45]}
    case["sweep"] = {"mode": "zip", "fiber.dx": [0.02, 0.05, 0.02, 0.02, 0.02],
                     "stimulus.0.amplitude": [1000.0, 1000.0, 1000.0, 1e5, 1000.0],
                     "membrane.scale.g_Na": [1.0, 1.0, 0.8, 1.0, 0.6]}
    out = tmp_path / "mixed.nc"
    ds = cable.sweep(case, client=client, output=out, progress=False, batch=16)
    assert list(ds["status"].values) == [STATUS["ok"], STATUS["invalid_case"], STATUS["ok"],
                                         STATUS["numerical_failure"], STATUS["ok"]]
    attrs = point_files(out)
    assert {int(a["chunk"]) for a in attrs.values()} == {0} and {int(a["chunk_size"]) for a in attrs.values()} == {5}
    spec = cable.load_case(case).extra["sweep"]
    base = {k: v for k, v in case.items() if k != "sweep"}
    for k, over in enumerate(spec.points()):
        point = ds.isel(point=k)
        if k == 1:
            with pytest.raises(cable.CaseError) as err:
                cable.simulate(cable.load_case(base, over))
        elif k == 3:
            with pytest.raises(cable.SimulationError) as err:
                cable.simulate(cable.load_case(base, over))
        else:
            assert str(point["failure_reason"].values) == ""
            assert_point_equals_run(point, cable.simulate(cable.load_case(base, over)))
            continue
        # the reason is the one the point's own run gives
        assert str(point["failure_reason"].values) == str(err.value)
    assert "cv_window" in str(ds["failure_reason"][1].values)
    assert "left +/-1000 mV" in str(ds["failure_reason"][3].values)
    # the batch with a failing strand is rerun strand by strand (cable.kernels.batch), the
    # invalid point never ran
    assert [int(attrs[k]["batch_size"]) for k in range(5)] == [1, 0, 1, 1, 1]


def test_interrupted_batched_sweep_resumes_to_the_same_result(uninterrupted, client, tmp_path):
    whole_path, _ = uninterrupted
    out = tmp_path / "hh.nc"

    def interrupt(done, failed, total):
        if done == 2:  # the first chunk (2 points) stored: stop, as Ctrl-C would
            raise KeyboardInterrupt

    with pytest.raises(KeyboardInterrupt):
        cable.sweep(hh_sweep_case(), client=client, output=out, progress=interrupt, batch=2)
    folder = out.with_name(out.name + ".points")
    assert len(list(folder.glob("point-*.nc"))) == 2 and not out.exists()
    calls = []
    cable.sweep(hh_sweep_case(), client=client, output=out, batch=4,
                progress=lambda done, failed, total: calls.append(done))
    assert calls == [3, 4, 5, 6]  # only the missing points, in one chunk of four
    assert {int(a["chunk_size"]) for a in point_files(out).values()} == {2, 4}
    with xr.open_dataset(out) as on_file, xr.open_dataset(whole_path) as reference:
        # the result file is built from the point files alone: chunking leaves no trace
        xr.testing.assert_identical(on_file.drop_attrs(deep=False).assign_attrs(
            {k: v for k, v in on_file.attrs.items() if k not in WHEN}),
            reference.drop_attrs(deep=False).assign_attrs({k: v for k, v in reference.attrs.items() if k not in WHEN}))


def test_chunks_keep_loop_groups_apart_and_feed_every_worker():
    keys = [(0, "a"), (1, "b"), (2, "a"), (3, "a"), (4, "b"), (5, "a"), (6, "a")]
    # common practice (task partitioning): never mix keys, at most `batch` per task
    assert sweep_run.chunks(keys, batch=2, workers=1) == [[0, 2], [3, 5], [6], [1, 4]]
    # one worker, batch 16: one task per group
    assert sweep_run.chunks(keys, batch=16, workers=1) == [[0, 2, 3, 5, 6], [1, 4]]
    # two workers: a group of five is cut in two, of nearly equal size
    assert sweep_run.chunks(keys, batch=16, workers=2) == [[0, 2, 3], [5, 6], [1], [4]]
    assert sweep_run.chunks(keys, batch=1, workers=2) == [[k] for k in (0, 2, 3, 5, 6, 1, 4)]


def test_points_with_different_rate_tables_go_to_different_chunks(client, tmp_path):
    # the HH rate table depends on the temperature (Hodgkin & Huxley 1952: Q10 = 3), so
    # strands at two temperatures cannot share a tabulated loop (cable.kernels.batch.group_key);
    # grid order alternates the temperatures, so chunking by loop alone would batch nothing
    case = hh_axon_case(length=1.0, dx=0.02, dt=0.01, duration=3.0)
    case["sweep"] = {"membrane.scale.g_Na": [1.0, 0.8], "membrane.temperature": [6.3, 18.5]}
    out = tmp_path / "temperature.nc"
    ds = cable.sweep(case, client=client, output=out, progress=False, batch=2)
    assert bool(np.all(ds["status"].values == STATUS["ok"]))
    attrs = point_files(out)
    assert sorted(int(a["chunk"]) for a in attrs.values()) == [0, 0, 1, 1]  # by temperature: {0, 2}, {1, 3}
    assert [int(a["batch_size"]) for a in attrs.values()] == [2] * 4
    loaded = [cable.load_case({k: v for k, v in case.items() if k != "sweep"}, {"numerics.rates": rates,
                                                                                 "membrane.temperature": t})
              for rates in ("tabulated", "exact") for t in (6.3, 18.5)]
    keys = [sweep_run.chunk_key(c) for c in loaded]
    assert keys[0] != keys[1] and keys[2] == keys[3]  # exact rates: no table, one loop


def test_batch_must_be_a_whole_number(client):
    with pytest.raises(cable.CaseError, match=r"batch = 0: must be a whole number of at least 1"):
        cable.sweep(hh_sweep_case(), client=client, progress=False, batch=0)


def test_blocked_and_uncaptured_points_are_not_failures(client):
    # issue 16, item 4: block and no capture are outcomes; the progress and the counts say failed
    # only for a run that failed (forward-Euler gates at 0.1 ms: NaN near 0.5 ms, found here)
    case = hh_axon_case(length=2.0, dx=0.02, dt=0.01, duration=4.0)
    case["region"] = [{"start": 0.8, "end": 2.0, "scale": {"g_Na": 1.0}}]
    case["sweep"] = {"mode": "zip", "region.0.scale.g_Na": [1.0, 0.0, 1.0, 1.0],
                     "stimulus.0.amplitude": [1000.0, 1000.0, 20.0, 1000.0],
                     "numerics.gating": ["rush-larsen", "rush-larsen", "rush-larsen", "forward-euler"],
                     "numerics.dt": [0.01, 0.01, 0.01, 0.1]}
    calls = []
    ds = cable.sweep(case, client=client, progress=lambda done, failed, total: calls.append((done, failed)))
    assert list(ds["status"].values) == [STATUS["ok"], STATUS["blocked"], STATUS["no_capture"],
                                         STATUS["numerical_failure"]]
    assert calls[-1] == (4, 1)
    assert (ds.attrs["n_failed"], ds.attrs["n_blocked"], ds.attrs["n_no_capture"]) == (1, 1, 1)
