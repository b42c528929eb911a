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
the points that have no file, and the assembled result is built from the files alone,
so it is the same whether the sweep ran in one go or was interrupted and resumed.
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
from cable.io import schema
from cable.io.netcdf import chunk_shape, variable_attrs, write_dataset
from cable.sweep.spec import SweepSpec

#: status of a point (stored as int8 with CF flag attributes); "blocked" came last, so that the
#: codes of files written before it keep their meaning
STATUS = {"ok": 0, "no_capture": 1, "numerical_failure": 2, "invalid_case": 3, "error": 4, "not_computed": 5,
          "blocked": 6}

#: statuses of a point that ran: outcomes of the model (its measurements are stored), not failures
OUTCOMES = ("ok", "no_capture", "blocked")
#: statuses of a point that has no result because its run failed
FAILURES = ("numerical_failure", "invalid_case", "error")


def is_failure(code: int) -> bool:
    """Whether a status code is a failed run (not an outcome such as no capture or block, nor not computed)."""
    return int(code) in {STATUS[name] for name in FAILURES}

#: int8 value of a flag (captured, blocked) where a point has no result
NO_RESULT = np.int8(-1)

#: attributes of ``failure_reason``
REASON_ATTRS = {"long_name": "why the point failed, did not capture or blocked (empty if ok)"}

PER_POINT = ("status", "failure_reason", "sample_x")

#: the store's record of its sweep (identity, start time) inside the point folder
MARKER = "sweep.json"


def status_of(ds: xr.Dataset) -> int:
    """The status code of a point's Dataset (labelled or not)."""
    return int(np.ravel(ds["status"].values)[0])


def status_attrs() -> dict:
    return {"long_name": "outcome of the sweep point", "flag_values": np.array(list(STATUS.values()), dtype=np.int8),
            "flag_meanings": " ".join(STATUS)}


# ----------------------------------------------------------------------------- one point
def point_dataset(ds: xr.Dataset, keep_fields: bool) -> xr.Dataset:
    """The part of a run's result that a sweep keeps (no swept coordinates yet).

    Every data variable whose dimensions lie within ``(beat, level)`` is kept as it is;
    those that also vary along ``x`` (but not ``t``) are taken at the node nearest the
    centre of the CV window (the node :func:`cable.simulate.measurements` uses for the
    wavelength), and that position is ``sample_x`` [cm]. Variables along ``t`` (the
    fields) are kept only when ``keep_fields``.

    Parameters
    ----------
    ds : xarray.Dataset
        The result of :func:`cable.simulate`.
    keep_fields : bool
        Keep ``vm`` and the stored states.

    Returns
    -------
    xarray.Dataset
        With ``status``, ``failure_reason`` and ``sample_x`` besides the measurements.
    """
    centre = None
    if "x" in ds.dims:
        x = ds["x"].values
        window = ds.attrs.get("cv_window_cm")
        mid = 0.5 * (float(window[0]) + float(window[1])) if window is not None else 0.5 * (x[0] + x[-1])
        centre = int(np.argmin(np.abs(x - mid)))
    data = {}
    for name, var in ds.data_vars.items():
        dims = set(var.dims)
        if "t" in dims:
            if keep_fields:
                data[name] = (var.dims, var.values, var.attrs)
        elif dims <= {"beat", "level"}:
            data[name] = (var.dims, var.values, var.attrs)
        elif "x" in dims and dims - {"x"} <= {"beat", "level"}:
            axis = var.dims.index("x")
            data[name] = (tuple(d for d in var.dims if d != "x"), np.take(var.values, centre, axis=axis),
                          dict(var.attrs, sampled_at="sample_x (node nearest the centre of the CV window)"))
    used = {d for dims, _, _ in data.values() for d in dims}
    coords = {c: ds[c].variable for c in ("beat", "level", "t", "x") if c in used and c in ds.coords}
    captured = ds["captured"].values if "captured" in ds else np.array([])
    blocked = ds["blocked"].values if "blocked" in ds else np.zeros(captured.size)
    if captured.size == 0 or not captured[0]:
        onset = float(ds["beat_onset"][0]) if captured.size else float("nan")
        code, reason = "no_capture", f"the first stimulus (t = {onset:g} ms) did not excite the fibre"
    elif blocked[0]:
        where = float(ds["block_x"][0]) if "block_x" in ds else float("nan")
        code, reason = "blocked", f"the first beat blocked at x = {where:.4g} cm"
    else:
        code, reason = "ok", ""
    return _with_status(data, coords, code, reason, float(ds["x"][centre]) if centre is not None else float("nan"))


def failed_dataset(code: str, reason: str) -> xr.Dataset:
    """A point without a result: its status and reason only."""
    return _with_status({}, {}, code, reason, float("nan"))


def _with_status(data: dict, coords: dict, code: str, reason: str, sample_x: float) -> xr.Dataset:
    head = {
        "status": ((), np.int8(STATUS[code]), status_attrs()),
        "failure_reason": ((), np.array(reason, dtype=object), REASON_ATTRS),
        "sample_x": ((), sample_x, {"units": "cm", "long_name": "position where x-resolved measurements "
                                                                "were sampled (centre of the CV window)"}),
    }
    return xr.Dataset({**head, **data}, coords=coords)


def label(ds: xr.Dataset, spec: SweepSpec, index: int) -> xr.Dataset:
    """Give a point's Dataset its swept coordinates as length-1 dimensions."""
    labels = spec.labels(index)
    if spec.mode == "zip":
        out = ds.expand_dims(point=[index])
        out = out.assign_coords({name: ("point", _one(value)) for name, value in labels.items()})
    else:
        out = ds.expand_dims({name: _one(value) for name, value in labels.items()})
    for axis in spec.axes:
        out[axis.name].attrs = coord_attrs(axis)
    if spec.mode == "zip":
        out["point"].attrs = {"long_name": "sweep point (keys paired, mode = \"zip\")"}
    return out


def _one(value) -> np.ndarray:
    return np.array([value], dtype=object if isinstance(value, str) else None)


def coord_attrs(axis) -> dict:
    attrs = {"case_key": axis.key, "long_name": f"swept case key {axis.key}"}
    if axis.units is not None:
        attrs["units"] = axis.units
    return attrs


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
                if not fields:
                    ds = ds.drop_vars([v for v in ds.data_vars if "t" in ds[v].dims])
                return ds.load()
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


# ----------------------------------------------------------------------------- assembling
def assemble(spec: SweepSpec, points: list, attrs: dict) -> xr.Dataset:
    """One Dataset over the swept dimensions from the points' Datasets.

    Parameters
    ----------
    spec : SweepSpec
    points : list of xarray.Dataset or None
        In point order; None for a point not computed. Swept coordinates, if present,
        are dropped; fields are ignored.
    attrs : dict
        Global attributes of the result.

    Returns
    -------
    xarray.Dataset
        Dimensions: the swept dimensions, then ``beat`` and ``level`` where used.
        Missing values: NaN (floats), -1 (flags such as ``captured``), -2 for
        ``block_side`` (whose -1 means blocked leftward); each named ``no_result`` in
        the variable's ``flag_meanings`` (see :func:`no_result_code`).
    """
    pts = [None if p is None else _strip(p, spec) for p in points]
    names, template = [], {}
    for p in pts:
        for name in p.data_vars if p is not None else ():
            if name not in template and name not in PER_POINT and "t" not in p[name].dims:
                names.append(name)
                template[name] = p[name]
    nbeat = max([p.sizes.get("beat", 0) for p in pts if p is not None] + [0])
    levels = []
    for p in pts:
        if p is not None and "level" in p.coords:
            levels += [float(v) for v in p["level"].values if float(v) not in levels]
    sizes = {"beat": nbeat, "level": len(levels)}
    shape = spec.shape

    status = np.full(shape, STATUS["not_computed"], dtype=np.int8)
    reason = np.full(shape, "not computed yet", dtype=object)
    sample_x = np.full(shape, np.nan)
    arrays = {}
    fills = {}
    for name in names:
        var = template[name]
        full = shape + tuple(sizes[d] for d in var.dims)
        if var.dtype == np.int8:
            fills[name] = no_result_code(var.attrs.get("flag_values"))
            arrays[name] = np.full(full, fills[name], dtype=np.int8)
        else:
            arrays[name] = np.full(full, np.nan, dtype=np.float64)
    for k, p in enumerate(pts):
        if p is None:
            continue
        where = np.unravel_index(k, shape)
        status[where] = p["status"].values
        reason[where] = str(p["failure_reason"].values)
        sample_x[where] = p["sample_x"].values
        for name in names:
            if name not in p:
                continue
            var = p[name]
            index = []
            for d in var.dims:
                if d == "beat":
                    index.append(np.arange(p.sizes["beat"]))
                else:
                    index.append(np.array([levels.index(float(v)) for v in p["level"].values], dtype=int))
            target = arrays[name][where]
            if index:
                target[np.ix_(*index)] = var.values
            else:
                arrays[name][where] = var.values

    dims = spec.dims
    data = {
        "status": (dims, status, status_attrs()),
        "failure_reason": (dims, reason, REASON_ATTRS),
        "sample_x": (dims, sample_x, _attrs_of(pts, "sample_x")),
    }
    for name in names:
        var = template[name]
        a = dict(var.attrs)
        if var.dtype == np.int8 and "flag_values" in a:
            values = [int(v) for v in np.ravel(a["flag_values"])]
            meanings = str(a.get("flag_meanings", "")).split()
            a.update(flag_values=np.array([int(fills[name])] + values, dtype=np.int8),
                     flag_meanings=" ".join(["no_result"] + meanings))
        data[name] = (dims + var.dims, arrays[name], a)
    coords = {}
    if spec.mode == "zip":
        coords["point"] = ("point", np.arange(len(spec)), {"long_name": "sweep point (keys paired, mode = \"zip\")"})
        for axis in spec.axes:
            coords[axis.name] = ("point", axis.coord, coord_attrs(axis))
    else:
        for axis in spec.axes:
            coords[axis.name] = (axis.name, axis.coord, coord_attrs(axis))
    if nbeat:
        coords["beat"] = ("beat", np.arange(nbeat), schema.attrs("beat"))
    if levels:
        coords["level"] = ("level", np.array(levels), schema.attrs("level"))
    out = xr.Dataset(data, coords=coords, attrs=dict(attrs))
    out.attrs["n_failed"] = int(np.sum(np.isin(status, [STATUS[name] for name in FAILURES])))
    out.attrs["n_no_capture"] = int(np.sum(status == STATUS["no_capture"]))
    out.attrs["n_blocked"] = int(np.sum(status == STATUS["blocked"]))
    out.attrs["n_not_computed"] = int(np.sum(status == STATUS["not_computed"]))
    return out


def no_result_code(flag_values=None) -> np.int8:
    """The int8 value that marks "no result" in a variable with these ``flag_values``.

    :data:`NO_RESULT` (-1) for the 0/1 flags; for a coded variable that uses -1 itself
    (``block_side``: -1 = blocked leftward) the first value below its codes.
    """
    values = [int(v) for v in np.ravel(flag_values)] if flag_values is not None else []
    if int(NO_RESULT) not in values:
        return NO_RESULT
    return np.int8(min(values) - 1)


def _strip(p: xr.Dataset, spec: SweepSpec) -> xr.Dataset:
    swept = [d for d in spec.dims if d in p.dims]
    if swept:
        p = p.isel({d: 0 for d in swept}, drop=True)
    return p.drop_vars([a.name for a in spec.axes if a.name in p.coords])


def _attrs_of(pts, name) -> dict:
    for p in pts:
        if p is not None and name in p:
            return dict(p[name].attrs)
    return {}


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
