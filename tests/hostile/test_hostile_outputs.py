"""Nothing lost at the output (issue 19, items 2, 3, 9, 12, 14, 17): real processes, signals, a full disk."""

import os
import shutil
import signal
import subprocess

import netCDF4
import pytest

import cable
from cable.cli import main
from cable.io import netcdf
from hostile_cases import ROOT, cable_cmd, env, small_case, start, wait_for


def write(tmp_path, text, name="case.toml"):
    path = tmp_path / name
    path.write_text(text)
    return path


def test_two_runs_to_one_output_one_is_refused(tmp_path):
    # item 2: both used to print "wrote race.nc" and one result vanished; the name is now
    # taken exclusively when the file is complete, so exactly one run writes it
    case = write(tmp_path, small_case(duration=6.0))
    out = tmp_path / "race.nc"
    procs = [start("run", case, "-o", out) for _ in range(2)]
    results = [(p.wait(timeout=180), *p.communicate()) for p in procs]
    codes = sorted(rc for rc, _, _ in results)
    assert codes == [0, 2], results
    assert sum("wrote" in stdout for _, stdout, _ in results) == 1
    loser = next(stderr for rc, _, stderr in results if rc == 2)
    assert "race.nc" in loser and "--overwrite" in loser
    with netCDF4.Dataset(out) as nc:
        assert nc.getncattr("status") == "complete"
    assert not list(tmp_path.glob(".*.tmp"))


def test_publish_refuses_a_name_taken_meanwhile_and_removes_the_temporary(tmp_path):
    # item 2, the rename itself: a target created after the first check is not replaced
    target, tmp = tmp_path / "out.nc", tmp_path / ".out.nc.1.tmp"
    target.write_bytes(b"first")
    tmp.write_bytes(b"second")
    with pytest.raises(cable.CaseError, match="created by another run"):
        netcdf.publish(tmp, target, overwrite=False)
    assert target.read_bytes() == b"first" and not tmp.exists()
    tmp.write_bytes(b"second")
    netcdf.publish(tmp, target, overwrite=True)   # --overwrite replaces knowingly
    assert target.read_bytes() == b"second"


@pytest.mark.parametrize("command", ["run", "sweep", "threshold"])
def test_output_that_is_the_case_file_is_refused(tmp_path, capsys, command):
    # item 3: `-o CASE --overwrite` used to replace the case file
    text = small_case() + ('\n[sweep]\n"membrane.scale.g_Na" = [1.0, 0.5]\n' if command == "sweep" else "")
    case = write(tmp_path, text)
    extra = ["--durations", "0.5"] if command == "threshold" else []
    rc = main([command, str(case), "-o", str(case), "--overwrite", "-q", *extra])
    assert rc == 2
    assert case.read_text() == text
    assert "is the input file" in capsys.readouterr().err


def test_special_file_output_is_refused_even_with_overwrite(tmp_path, capsys):
    # item 3: a FIFO given as -o used to be replaced by a regular file
    case = write(tmp_path, small_case())
    fifo = tmp_path / "pipe.nc"
    os.mkfifo(fifo)
    assert main(["run", str(case), "-o", str(fifo), "--overwrite", "-q"]) == 2
    assert fifo.is_fifo()
    assert "not a regular file" in capsys.readouterr().err
    with pytest.raises(cable.CaseError, match="not a regular file"):
        netcdf.check_target(os.devnull, overwrite=True)


def test_output_under_a_regular_file_says_so(tmp_path, capsys):
    # item 16: `-o FILE/out.nc` used to say the folder "does not exist"
    case = write(tmp_path, small_case())
    assert main(["run", str(case), "-o", str(case / "out.nc"), "-q"]) == 2
    assert "is a file, not a folder" in capsys.readouterr().err


LONG = small_case(duration=1000000.0, every=0.05)


def test_temporary_left_by_sigkill_is_removed_by_the_next_run(tmp_path):
    # item 17: SIGKILL leaves `.OUT.PID.tmp` (nothing can clean up after it); the next
    # run to the same output removes temporaries whose process is gone
    long_case = write(tmp_path, LONG, "long.toml")
    out = tmp_path / "out.nc"
    proc = start("run", long_case, "-o", out)
    wait_for(lambda: list(tmp_path.glob(".out.nc.*.tmp")), proc, what="the run's temporary file")
    proc.send_signal(signal.SIGKILL)
    proc.wait(timeout=60)
    proc.communicate()
    left = list(tmp_path.glob(".out.nc.*.tmp"))
    assert left, "SIGKILL is expected to leave the temporary file"
    alive = tmp_path / f".out.nc.{os.getppid()}.tmp"     # a live process's temporary stays
    alive.write_bytes(b"")
    assert main(["run", str(write(tmp_path, small_case())), "-o", str(out), "-q"]) == 0
    assert not any(p.exists() for p in left) and alive.exists()
    with netCDF4.Dataset(out) as nc:
        assert nc.getncattr("status") == "complete"


def _private_tmpfs_ok() -> str:
    if shutil.which("unshare") is None or os.geteuid() != 0:
        return "needs root and unshare(1) for a private mount namespace"
    probe = subprocess.run(["unshare", "-m", "sh", "-c", "mount -t tmpfs -o size=64k tmpfs /mnt"],
                           capture_output=True, text=True)
    return "" if probe.returncode == 0 else f"cannot mount a tmpfs in a private namespace: {probe.stderr.strip()}"


def test_disk_full_while_streaming_exits_4_and_says_nothing_was_kept(tmp_path):
    # item 9: a disk that fills while `cable run -o` streams gave `RuntimeError: NetCDF:
    # HDF error`. A tmpfs of 8 MiB in a private mount namespace (so nothing outside sees
    # it) passes the size check (the fields need about 1.6 MiB); it is filled once the
    # run's temporary file exists, so the writer fails on its next write.
    why = _private_tmpfs_ok()
    if why:
        pytest.skip(why)
    case = write(tmp_path, small_case(duration=2000.0, every=2.0).replace("length = 0.5", "length = 2.0"))
    disk = tmp_path / "disk"
    disk.mkdir()
    run = " ".join(cable_cmd("run", case, "-o", disk / "out.nc"))
    script = (f"mount -t tmpfs -o size=8m tmpfs {disk} || exit 99\n"
              f"{run} > {tmp_path}/stdout 2> {tmp_path}/stderr &\n"
              f"pid=$!\n"
              f"while ! ls -a {disk} | grep -q 'tmp$'; do kill -0 $pid 2>/dev/null || break; sleep 0.02; done\n"
              f"dd if=/dev/zero of={disk}/filler bs=64k 2>/dev/null\n"
              f"wait $pid; echo rc=$?\n"
              f"ls -a {disk}\n")
    res = subprocess.run(["unshare", "-m", "sh", "-c", script], capture_output=True, text=True, cwd=ROOT, env=env(),
                         timeout=300)
    stderr = (tmp_path / "stderr").read_text()
    assert "rc=4" in res.stdout, (res.stdout, res.stderr, stderr)
    assert "Traceback" not in stderr
    assert "no result file was kept" in stderr
    listed = res.stdout.split()
    assert "out.nc" not in listed and not any(name.endswith(".tmp") for name in listed)


def test_broken_pipe_does_not_lose_the_run(tmp_path):
    # item 14: `cable run ... -o bp.nc 2>&1 | head -n 0` used to exit 0 without the file:
    # the note on the rounded duration, printed before the run, met the closed pipe
    case = write(tmp_path, small_case(duration=4.05))
    out = tmp_path / "bp.nc"
    cmd = " ".join(cable_cmd("run", case, "-o", out))
    res = subprocess.run(["bash", "-c", f"{cmd} 2>&1 | head -n 0; echo status=${{PIPESTATUS[0]}}"], capture_output=True,
                         text=True, cwd=ROOT, env=env(), timeout=180)
    assert "status=0" in res.stdout, res.stderr
    assert "Traceback" not in res.stderr and "BrokenPipe" not in res.stderr
    with netCDF4.Dataset(out) as nc:
        assert nc.getncattr("status") == "complete"


@pytest.mark.parametrize("call, message", [
    (lambda: cable.simulate(small_case_dict(), output=5), r"simulate\(output=5\): output must be"),
    (lambda: cable.simulate(small_case_dict(), progress=3), r"simulate\(progress=3\): progress must be"),
    (lambda: cable.simulate(None), r"simulate\(case=None\): give a case file path"),
    (lambda: cable.simulate(42), r"simulate\(case=42\): give a case file path"),
    (lambda: cable.load_case(42), r"case = 42: give a path"),
    (lambda: cable.load_case(), r"neither was given"),
    (lambda: netcdf.rerun(None), r"rerun\(path=None\)"),
    (lambda: cable.load_case(text=5), r"text must be a string"),
])
def test_wrong_argument_types_raise_the_packages_error(call, message):
    # item 12: these raised foreign TypeErrors or "not valid TOML"
    with pytest.raises(cable.CaseError, match=message):
        call()


def small_case_dict():
    import tomllib

    return tomllib.loads(small_case())
