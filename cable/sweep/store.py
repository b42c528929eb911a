"""A sweep's results: one netCDF file per finished point, and the assembled Dataset.

Layout, for ``-o OUT.nc``::

    OUT.nc                    the assembled result (written once every point is stored)
    OUT.nc.points/
        point-000000.nc       one file per point, written (atomically) as it finishes
        point-000001.nc
        ...
        sweep.json            the sweep's identity and the time its first point was started

Each point file holds the point's status, failure reason and scalar measurements (and,
with ``[output] keep_fields = true``, its space-time fields ``vm`` and ``state_*``),
with the swept coordinates as length-1 dimensions, so that the folder reads as one
Dataset::

    xarray.open_mfdataset("OUT.nc.points/*.nc", combine="by_coords", join="outer")

A point file records the identity of its sweep (``sweep_id``, a hash of the case text
with its ``[sweep]``); running the same sweep again with the same output computes only
the points that have no file, and the assembled result is built from the points as their
files hold them (the earlier points read from their files, the new ones kept in memory
after they were written, their attributes in the stored form:
:func:`cable.sweep.assemble.as_stored`), so it is the same, byte for byte, whether the
sweep ran in one go or was interrupted and resumed.
"""

from __future__ import annotations

import contextlib
import json
import os
from datetime import datetime, timezone
from pathlib import Path

import numpy as np
import xarray as xr

from cable.case import CaseError
from cable.io.netcdf import chunk_shape, variable_attrs, write_dataset
# the point Datasets and the assembling have modules of their own; their names import from here too
from cable.sweep.assemble import assemble, no_result_code
from cable.sweep.points import (FAILURES, NO_RESULT, OUTCOMES, PER_POINT, REASON_ATTRS, STATUS,
                                coord_attrs, failed_dataset, is_failure, label, point_dataset, status_attrs,
                                status_of, _with_status)

__all__ = ["MARKER", "PointStore", "open_points", "write_result", "local_io", "without_fields", "point_attrs",
           "stale_temporaries", "remove",
           # re-exported from assemble.py and points.py
           "assemble", "no_result_code", "FAILURES", "NO_RESULT", "OUTCOMES", "PER_POINT", "REASON_ATTRS", "STATUS",
           "coord_attrs", "failed_dataset", "is_failure", "label", "point_dataset", "status_attrs", "status_of",
           "_with_status"]

#: the store's record of its sweep (identity, start time) inside the point folder
MARKER = "sweep.json"

# ----------------------------------------------------------------------------- the store
class PointStore:
    """The folder of point files next to a sweep's output.

    Parameters
    ----------
    output : str or pathlib.Path
        The sweep's result file; points go to ``<output>.points/``.
    sweep_id : str
        Identity of the sweep (hash of its case text).
    n_points : int
        Number of points of the sweep.
    overwrite : bool
        Discard the result and the point files of a different sweep at the same path.

    Raises
    ------
    CaseError
        When ``output`` or its folder holds another sweep's results and not ``overwrite``.
    """

    def __init__(self, output, sweep_id: str, n_points: int, overwrite: bool = False):
        self.output = Path(output)
        self.folder = self.output.with_name(self.output.name + ".points")
        self.sweep_id = sweep_id
        self.n_points = n_points
        parent = self.output.parent if str(self.output.parent) else Path(".")
        if not parent.is_dir():
            raise CaseError(f"output folder '{parent}' does not exist.")
        foreign = self._foreign()
        if foreign and not overwrite:
            raise CaseError(foreign)
        if foreign:  # overwrite: only another sweep's files go; this sweep's points are kept and reused
            self._clear()
        self.folder.mkdir(exist_ok=True)
        marker = self.folder / MARKER
        if not _marker_id(marker):
            stamp = datetime.now(timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ")
            tmp = marker.with_name(f".{MARKER}.{os.getpid()}.tmp")
            tmp.write_text(json.dumps({"sweep_id": sweep_id, "created": stamp, "n_points": n_points}))
            os.replace(tmp, marker)
        #: when this sweep's store was started (UTC, ISO 8601): the result's date_created
        self.created = json.loads(marker.read_text())["created"]

    def path(self, index: int) -> Path:
        return self.folder / f"point-{index:06d}.nc"

    def _files(self):
        return sorted(self.folder.glob("point-*.nc")) if self.folder.is_dir() else []

    def _clear(self) -> None:
        for f in self._files():
            f.unlink()
        (self.folder / MARKER).unlink(missing_ok=True)
        for f in self.folder.glob(".point-*.tmp") if self.folder.is_dir() else []:
            f.unlink()
        if self.output.exists():
            self.output.unlink()

    def _foreign(self) -> str:
        """Why the output or the point folder holds another sweep ("" when they hold this one or nothing).

        A damaged ``sweep.json`` (cut off, not JSON) is not taken for another sweep: the
        point files record their sweep themselves, and when they are this sweep's the
        record is written again.
        """
        if self.output.exists() and _sweep_id_of(self.output) != self.sweep_id:
            return (f"output '{self.output}' exists and is not a result of this sweep; pass --overwrite "
                    f"(overwrite=True) to replace it, or choose another output.")
        marker = self.folder / MARKER
        theirs = _marker_id(marker)
        files = self._files()
        if theirs is None and files:  # no record, or a damaged one: ask the point files
            theirs = _sweep_id_of(files[0])
            if theirs == self.sweep_id:
                marker.unlink(missing_ok=True)  # rewritten by __init__
                return ""
        if (marker.exists() or files) and theirs != self.sweep_id:
            if theirs is None and marker.exists() and not files:
                return (f"'{marker}' is damaged (not a sweep record) and the folder holds no point files; delete "
                        f"'{marker}' and run again.")
            return (f"'{self.folder}' holds points of a different sweep (the case or its [sweep] changed); pass "
                    f"--overwrite (overwrite=True) to discard them, or choose another output.")
        return ""

    def done(self) -> set[int]:
        """Indices of the points stored already."""
        out = set()
        for f in self._files():
            try:
                k = int(f.stem.split("-")[1])
            except (IndexError, ValueError):
                continue
            if k < self.n_points:
                out.add(k)
        return out

    def write(self, index: int, ds: xr.Dataset, attrs: dict) -> None:
        """Store one labelled point (atomically: a killed run leaves no half file).

        A point with fields is written as netCDF-4, its fields float32, compressed and
        chunked as :func:`cable.io.netcdf.chunk_shape` (as ``cable run`` writes them); one
        with scalars only as classic netCDF (about 5 kB instead of 60 kB of HDF5
        metadata per point), which ``open_mfdataset`` reads alongside.
        """
        ds = ds.copy()
        ds.attrs = {k: v for k, v in {**attrs, "sweep_id": self.sweep_id, "point_index": index}.items()
                    if isinstance(v, (str, int, float, np.number))}
        encoding = {}
        for name in list(ds.data_vars) + list(ds.coords):
            var = ds[name]
            dtype = np.dtype("f4") if "t" in var.dims and var.dtype.kind == "f" else var.dtype
            ds[name].attrs = variable_attrs(var.attrs, dtype)
            if "t" in var.dims:
                lead = tuple(1 for d in var.dims if d not in ("t", "x"))
                chunks = chunk_shape(ds.sizes["t"], ds.sizes["x"] if "x" in var.dims else None)
                encoding[name] = {"dtype": "f4", "zlib": True, "complevel": 4, "chunksizes": lead + chunks,
                                  "_FillValue": np.float32(np.nan)}
        fields = bool(encoding)
        path = self.path(index)
        tmp = path.with_name(f".{path.name}.{os.getpid()}.tmp")
        try:
            with local_io():
                ds.to_netcdf(tmp, format="NETCDF4" if fields else "NETCDF3_64BIT", engine="netcdf4",
                             encoding=encoding)
            os.replace(tmp, path)
        finally:
            tmp.unlink(missing_ok=True)

    def read(self, index: int, fields: bool = False) -> xr.Dataset:
        """One stored point, loaded (without its fields unless asked).

        Raises
        ------
        CaseError
            The point file is damaged: the message names it, to be deleted and redone.
        """
        path = self.path(index)
        try:
            with xr.open_dataset(path) as ds:
                return (ds if fields else without_fields(ds)).load()
        except Exception as exc:  # netCDF4/HDF5 raise OSError, ValueError, RuntimeError... for a damaged file
            raise CaseError(f"point file '{path}' is damaged ({exc.__class__.__name__}: {exc}); delete it and run "
                            f"the sweep again with the same output: that point will be computed again, the others "
                            f"are kept.") from None


def open_points(output, **kwargs) -> xr.Dataset:
    """A sweep's point files as one Dataset, fields included (lazily, through Dask).

    Parameters
    ----------
    output : str or pathlib.Path
        The sweep's result file (its points are in ``<output>.points/``).
    **kwargs
        Passed to ``xarray.open_mfdataset``.
    """
    folder = Path(output).with_name(Path(output).name + ".points")
    files = sorted(folder.glob("point-*.nc"))
    if not files:
        raise CaseError(f"'{folder}' holds no point files; run the sweep with -o {output} first.")
    opts = dict(combine="by_coords", join="outer", compat="no_conflicts", combine_attrs="drop_conflicts")
    return xr.open_mfdataset(files, **{**opts, **kwargs})


def _marker_id(marker: Path) -> str | None:
    """The sweep id a ``sweep.json`` records; None when missing or damaged."""
    try:
        record = json.loads(marker.read_text())
        return str(record["sweep_id"]) if isinstance(record, dict) and "created" in record else None
    except (ValueError, OSError, KeyError, TypeError):
        return None


def _sweep_id_of(path: Path) -> str | None:
    try:
        with xr.open_dataset(path) as ds:
            return ds.attrs.get("sweep_id")
    except Exception:  # not readable netCDF: certainly not ours
        return None


def write_result(ds: xr.Dataset, output) -> None:
    """Write the assembled result (atomically, replacing an earlier one of the same sweep)."""
    with local_io():
        write_dataset(ds, output, overwrite=True)


@contextlib.contextmanager
def local_io():
    """File writes in the client process take a thread lock, not a Dask-cluster-wide one.

    With a distributed client active, xarray guards each netCDF write with a lock held
    by the scheduler (a network round trip per variable: about 30 ms per point file,
    measured with ``tools/bench_sweep.py``); the files written here are the client's own.
    """
    import dask

    with dask.config.set(scheduler="synchronous"):
        yield


def without_fields(ds: xr.Dataset) -> xr.Dataset:
    """A point without its space-time fields (what :meth:`PointStore.read` gives by default)."""
    return ds.drop_vars([v for v in ds.data_vars if "t" in ds[v].dims])


def point_attrs(meta: dict) -> dict:
    """Attributes of a point file from the worker's record of the run."""
    out = {k: v for k, v in meta.items() if k != "overrides"}
    out["overrides"] = json.dumps(meta.get("overrides", {}))
    out["first_on_worker"] = int(bool(out.get("first_on_worker", False)))
    return out


def stale_temporaries(store: PointStore) -> list[Path]:
    """Temporary files a killed run left in the point folder (``.point-*.tmp``)."""
    return sorted(store.folder.glob(".point-*.tmp"))


def remove(paths) -> None:
    for p in paths:
        try:
            os.unlink(p)
        except FileNotFoundError:
            pass
