"""A sweep loses nothing (issue 19, items 1, 4, 14, 15, 16): a dropped scheduler, --overwrite, damaged files."""

import json
import signal
import subprocess
import sys
import tomllib

import numpy as np
import pytest
import xarray as xr

import cable
from cable.sweep import run as sweep_run
from cable.sweep.store import STATUS
from hostile_cases import ROOT, cable_cmd, env, small_case, wait_for

distributed = pytest.importorskip("distributed")

#: six points, each run alone (--batch 1) on one worker, each long enough (150 ms of a
#: 201-node axon) that the scheduler can be killed while some are still to run
SLOW = small_case(duration=150.0, every=1.0).replace("length = 0.5", "length = 2.0") + \
    '\n[sweep]\n"membrane.scale.g_Na" = [1.0, 0.95, 0.9, 0.85, 0.8, 0.75]\n'


def _spawn(*args, log=None):
    """A process whose output goes to the file ``log`` (a pipe nobody reads would fill and stall it)."""
    out = open(log, "w") if log is not None else subprocess.PIPE
    return subprocess.Popen(list(args), stdout=out, stderr=subprocess.STDOUT if log else subprocess.PIPE, text=True,
                            cwd=ROOT, env=env())


def _statuses(folder):
    out = []
    for f in sorted(folder.glob("point-*.nc")):
        with xr.open_dataset(f) as ds:
            out.append(int(ds["status"].values.ravel()[0]))
    return out


@pytest.mark.slow
def test_lost_scheduler_stores_nothing_false_exits_5_and_resume_finishes(tmp_path):
    # item 1: points cut off by a lost scheduler were stored as finished errors
    # (FutureCancelledError ... scheduler-connection-lost), the sweep exited 0, and a
    # rerun computed nothing. Real processes: a scheduler, a worker, the sweep; the
    # scheduler is killed (SIGKILL) once the first point is stored.
    case = tmp_path / "slow.toml"
    case.write_text(SLOW)
    info = tmp_path / "scheduler.json"
    dask = [sys.executable, "-m", "distributed.cli.dask_scheduler"]
    sched = _spawn(*dask, "--scheduler-file", str(info), "--host", "127.0.0.1", "--port", "0",
                   "--no-dashboard", log=tmp_path / "scheduler.log")
    worker = None
    try:
        wait_for(info.exists, sched, timeout=120, what="the scheduler file")
        address = json.loads(info.read_text())["address"]
        worker = _spawn(sys.executable, "-m", "distributed.cli.dask_worker", address, "--nthreads", "1",
                        "--nworkers", "1", "--no-dashboard", "--death-timeout", "5", log=tmp_path / "worker.log")
        out = tmp_path / "s.nc"
        points = tmp_path / "s.nc.points"
        proc = _spawn(*cable_cmd("sweep", case, "-o", out, "--scheduler", address, "--workers", "1", "--batch", "1"))
        wait_for(lambda: list(points.glob("point-*.nc")), proc, timeout=120, what="the first point file")
        sched.send_signal(signal.SIGKILL)
        sched.wait(timeout=60)
        rc = proc.wait(timeout=120)
        stderr = proc.communicate()[1]
    finally:
        for p in (sched, worker):
            if p is not None and p.poll() is None:
                p.kill()
                p.wait(timeout=60)
    assert rc == 5, stderr
    assert "not stored as results" in stderr and "Traceback" not in stderr
    stored = _statuses(points)
    assert 1 <= len(stored) < 6
    assert set(stored) == {STATUS["ok"]}              # no cluster failure stored as an outcome
    assert not out.exists()
    # the resume computes the rest; its printing meets a closed pipe (item 14: `| head`
    # used to abandon the sweep) and it still finishes and writes the result
    cmd = " ".join(cable_cmd("sweep", case, "-o", out, "--workers", "1"))
    res = subprocess.run(["bash", "-c", f"{cmd} 2>&1 | head -n 1; echo status=${{PIPESTATUS[0]}}"],
                         capture_output=True, text=True, cwd=ROOT, env=env(), timeout=300)
    assert "status=0" in res.stdout, res.stdout + res.stderr
    assert f"{len(stored)} of 6 points already" in res.stdout
    with xr.open_dataset(out) as ds:
        assert (ds["status"].values == STATUS["ok"]).all()


@pytest.fixture(scope="module")
def client():
    """One worker thread in this process on loopback TCP."""
    with distributed.LocalCluster(n_workers=1, threads_per_worker=1, processes=False, dashboard_address=None,
                                  protocol="tcp", host="127.0.0.1") as cl, distributed.Client(cl) as c:
        yield c


def _quick():
    raw = tomllib.loads(small_case(duration=3.0, every=0.5))
    raw["sweep"] = {"membrane.scale.g_Na": [1.0, 0.8, 0.6]}
    return raw


def test_overwrite_on_the_same_sweep_keeps_its_points(client, tmp_path):
    # item 4: --overwrite discarded the finished points of the same sweep, although its
    # help says it discards "a different sweep"
    out = tmp_path / "s.nc"
    cable.sweep(_quick(), client=client, output=out, progress=False, limit=2)
    first = {p.name: p.stat().st_mtime_ns for p in (tmp_path / "s.nc.points").glob("point-*.nc")}
    assert len(first) == 2
    notes = []
    cable.sweep(_quick(), client=client, output=out, progress=False, overwrite=True, info=notes.append)
    assert any("2 of 3 points already" in n for n in notes)
    kept = {p.name: p.stat().st_mtime_ns for p in (tmp_path / "s.nc.points").glob("point-*.nc")}
    assert all(kept[name] == t for name, t in first.items())   # not rewritten
    other = _quick()
    other["sweep"] = {"membrane.scale.g_Na": [1.0, 0.5]}
    with pytest.raises(cable.CaseError, match="not a result of this sweep"):
        cable.sweep(other, client=client, output=out, progress=False)
    cable.sweep(other, client=client, output=out, progress=False, overwrite=True)   # a different sweep: discarded
    assert len(list((tmp_path / "s.nc.points").glob("point-*.nc"))) == 2


def test_damaged_point_file_is_named_and_damaged_record_is_not_a_different_sweep(client, tmp_path):
    # item 16: a corrupt point file gave a bare NetCDF error; a corrupt sweep.json was
    # reported as "a different sweep"
    out = tmp_path / "s.nc"
    cable.sweep(_quick(), client=client, output=out, progress=False, limit=2)
    folder = tmp_path / "s.nc.points"
    (folder / "sweep.json").write_text('{"sweep_id": "ab')          # cut off while written
    notes = []
    cable.sweep(_quick(), client=client, output=out, progress=False, limit=0, info=notes.append)
    assert any("2 of 3 points already" in n for n in notes)          # the point files told whose they are
    assert json.loads((folder / "sweep.json").read_text())["sweep_id"] == sweep_run.sweep_id(cable.load_case(_quick()))
    damaged = folder / "point-000001.nc"
    damaged.write_bytes(damaged.read_bytes()[:100])
    with pytest.raises(cable.CaseError, match=r"point-000001\.nc' is damaged.*delete it.*computed again"):
        cable.sweep(_quick(), client=client, output=out, progress=False)
    damaged.unlink()
    ds = cable.sweep(_quick(), client=client, output=out, progress=False)
    assert (ds["status"].values == STATUS["ok"]).all()


def test_a_sweep_too_large_for_memory_is_refused_before_any_work(monkeypatch, tmp_path):
    # item 15: 10^6 points were accepted and the client loaded each for minutes first;
    # here 10^5 points against 1 GiB of free memory (sysconf stubbed: the check, not the machine)
    raw = _quick()
    raw["sweep"] = {"membrane.scale.g_Na": {"start": 0.5, "stop": 1.0, "num": 1000},
                    "stimulus.0.amplitude": {"start": 900.0, "stop": 1000.0, "num": 100}}
    monkeypatch.setattr(sweep_run, "_compute", lambda *a, **k: pytest.fail("the sweep started"))
    page = 4096
    monkeypatch.setattr(sweep_run.os, "sysconf", lambda name: page if name == "SC_PAGE_SIZE" else 2 ** 18)  # 1 GiB
    with pytest.raises(cable.CaseError, match=r"100000 points.*6.1 GiB, but 1 GiB of memory is free"):
        cable.sweep(raw, output=tmp_path / "big.nc", progress=False)
    assert not (tmp_path / "big.nc.points").exists()


def test_disk_check_counts_the_points_to_compute(tmp_path, monkeypatch):
    case = cable.load_case(_quick())
    import shutil

    monkeypatch.setattr(shutil, "disk_usage", lambda p: shutil._ntuple_diskusage(1, 1, 10 * 2 ** 10))  # 10 KiB free
    with pytest.raises(cable.CaseError, match=r"3 points to compute need up to 48 KiB .* 10 KiB is free"):
        sweep_run.check_sweep_size(case, 3, 3, tmp_path / "s.nc", False)
    sweep_run.check_sweep_size(case, 3, 0, tmp_path / "s.nc", False)     # nothing left to compute: no disk needed
    assert np.isfinite(sweep_run.POINT_MEMORY_BYTES)
