"""Tools that check say what they find (issue 19, items 10, 13): rerun's comparison, the critical journal."""

import netCDF4
import numpy as np
import pytest

from cable.cli import main
from cable.protocols._journal import Journal
from hostile_cases import small_case


@pytest.fixture
def original(tmp_path):
    case = tmp_path / "case.toml"
    case.write_text(small_case())
    out = tmp_path / "run.nc"
    assert main(["run", str(case), "-o", str(out), "-q"]) == 0
    return out


def _tamper(path, how):
    with netCDF4.Dataset(path, "a") as nc:
        how(nc)


@pytest.mark.parametrize("name, how", [
    ("apd", lambda nc: nc.variables["apd"].__setitem__(slice(None), nc.variables["apd"][:] * 2)),
    ("wavelength_apd", lambda nc: nc.variables["wavelength_apd"].__setitem__(slice(None), 99.0)),
    ("threshold_mV", lambda nc: nc.setncattr("threshold_mV", 0.0)),
])
def test_rerun_finds_a_changed_variable_or_attribute(original, capsys, name, how):
    # item 13: `cable rerun` said "identical" for a doubled apd or wavelength = 99: it
    # compared six variables only
    _tamper(original, how)
    assert main(["rerun", str(original), "-q"]) == 1
    out = capsys.readouterr().out
    assert name in out and "DIFFERS" in out and "NOT identical" in out


def test_rerun_counts_a_missing_variable_as_a_difference(original, tmp_path, capsys):
    # item 13: a file without vm or activation_time was "identical" (missing ones were skipped)
    import xarray as xr

    with xr.open_dataset(original) as ds:
        ds.load().drop_vars(["vm", "activation_time"]).to_netcdf(tmp_path / "less.nc")
    assert main(["rerun", str(tmp_path / "less.nc"), "-q"]) == 1
    out = capsys.readouterr().out
    assert "vm: MISSING from the original" in out and "activation_time: MISSING from the original" in out


def test_rerun_of_an_untouched_file_is_identical(original, capsys):
    assert main(["rerun", str(original), "-q"]) == 0
    assert "rerun of" in capsys.readouterr().out


def test_a_truncated_journal_entry_is_redone_and_no_entry_replaced(tmp_path):
    # item 10: a truncated entry raised zipfile.BadZipFile on every retry of `cable critical`
    journal = Journal(tmp_path / "c.nc", "search")
    for value in (0.0, 1.0, 0.5):
        journal.put(value, {"conducted": np.int8(value > 0.2)})
    first = tmp_path / "c.nc.runs" / "run-0000.npz"
    first.write_bytes(first.read_bytes()[:40])              # cut off while written
    again = Journal(tmp_path / "c.nc", "search")
    assert sorted(again.done) == [0.5, 1.0] and not first.exists()
    again.put(0.0, {"conducted": np.int8(0)})             # the redone run is added, the others stay
    third = Journal(tmp_path / "c.nc", "search")
    assert sorted(third.done) == [0.0, 0.5, 1.0]
