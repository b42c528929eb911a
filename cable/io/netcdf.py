"""netCDF output: streamed fields, CF attributes, atomic completion; reading.

Fields (``vm`` and stored states) are written as float32, zlib-compressed, in chunks
of :func:`chunk_shape`: about 256 KiB each, their time extent grown with the number of
samples so that reading one position's trace or one time's profile touches few chunks
(measured in ``tools/bench_chunks.py``). They are written while the run goes, one row
of chunks at a time, so memory does not grow with the simulated duration
(``tools/bench_memory.py``). The file is built under a temporary name in the target's
folder and renamed when complete (or when a partial result is kept, marked
``status = "partial"``), so a reader never sees a half-written file.

CF conventions (CF-1.10): every variable has ``long_name`` and a ``units`` string that
udunits reads (see :func:`cable.io.schema.cf_units`), ``standard_name`` only where CF
defines one, flags carry ``flag_values``/``flag_meanings`` of the variable's type, and
the global attributes carry ``Conventions``, ``history`` and the provenance (case text,
versions, command line) from which :func:`cable.io.rerun.rerun` repeats the run.
The checks of a target and the atomic renaming are :mod:`cable.io.files`; the rerun
and its comparison :mod:`cable.io.rerun` (both importable from here as before).
"""

from __future__ import annotations

import contextlib
import math
import sys
import warnings
import weakref
from datetime import datetime, timezone
from pathlib import Path

import netCDF4
import numpy as np
import xarray as xr

from cable.case import CaseError
from cable.io import OutputError, schema
from cable.io.files import check_target, publish, temporary_name  # check_target: imported from here too

#: elements per chunk (256 KiB of float32): big enough for zlib to work well, small
#: enough that one trace or one profile does not decompress much more than it needs
CHUNK_ELEMENTS = 2 ** 16
#: longest chunk along time [samples]
MAX_T_CHUNK = 1024
#: most bytes the writer buffers per field before writing a row of chunks
BUFFER_BYTES = 8 * 2 ** 20
#: HDF5 chunk cache of each field while it is written [bytes] and its hash slots:
#: nothing needs to stay cached, since the writer sends whole rows of chunks
WRITE_CACHE_BYTES = 0
WRITE_CACHE_SLOTS = 1


def chunk_shape(n_t: int, n_x: int | None) -> tuple[int, ...]:
    """Chunk shape of a field ``(t, x)`` (or ``(t,)`` for a single cell).

    A trace (one position, all times) reads ``n_t / c_t`` chunks and a profile (one
    time, all positions) ``n_x / c_x``; with ``c_t * c_x`` fixed, both cost the same
    when ``c_t / c_x = n_t / n_x``. ``c_t`` is that balance rounded to a power of two,
    at most :data:`MAX_T_CHUNK` and at most what :data:`BUFFER_BYTES` holds.

    Parameters
    ----------
    n_t : int
        Number of samples.
    n_x : int or None
        Number of nodes (None for a single cell).
    """
    n_t = max(1, int(n_t))
    if n_x is None:
        return (min(n_t, CHUNK_ELEMENTS),)
    n_x = max(1, int(n_x))
    ideal = math.sqrt(CHUNK_ELEMENTS * n_t / n_x)
    c_t = 2 ** int(round(math.log2(max(ideal, 1.0))))
    c_t = max(1, min(c_t, MAX_T_CHUNK, n_t, BUFFER_BYTES // (4 * n_x)))
    c_x = max(1, min(n_x, CHUNK_ELEMENTS // c_t))
    return (c_t, c_x)


# ----------------------------------------------------------------------------- attributes
def encode_attr(value):
    """A netCDF attribute value: bools as int8, sequences of numbers as arrays, other
    sequences (texts) and dicts as one text."""
    if isinstance(value, (bool, np.bool_)):
        return np.int8(value)
    if isinstance(value, (list, tuple)) or (isinstance(value, np.ndarray) and value.dtype.kind in "USO"):
        arr = np.asarray(value)
        return arr if arr.dtype.kind in "iuf" else ", ".join(str(v) for v in np.ravel(arr).tolist())
    if isinstance(value, dict):
        return "; ".join(f"{k} = {v}" for k, v in value.items())
    return value


def _global_attrs(attrs: dict) -> dict:
    """The run's attributes plus the writer's own provenance (CF ``history``, library versions)."""
    out = {k: encode_attr(v) for k, v in attrs.items() if v is not None}
    stamp = datetime.now(timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ")
    command = attrs.get("command") or ("python " + " ".join(sys.argv)).strip() + " (cable Python API)"
    out.setdefault("history", f"{stamp} {command}")
    out.setdefault("date_created", stamp)
    out.setdefault("netcdf4_python_version", netCDF4.__version__)
    out.setdefault("netcdf_library_version", netCDF4.getlibversion().split()[0])
    out.setdefault("hdf5_version", netCDF4.__hdf5libversion__)
    out.setdefault("xarray_version", xr.__version__)
    out.setdefault("python_version", sys.version.split()[0])
    return out


def variable_attrs(attrs: dict, dtype) -> dict:
    """CF attributes of one variable: udunits spelling, flag values of the variable's type."""
    out = dict(attrs)
    if "units" in out:
        out["units"] = schema.cf_units(str(out["units"]))
    if "flag_values" in out:
        out["flag_values"] = np.asarray(out["flag_values"], dtype=dtype)
    return out


def stored_attr(value, classic: bool = False):
    """An attribute as netCDF-4 stores it and reads it back (after :func:`encode_attr`).

    Text stays ``str`` (a sequence of texts becomes one, see :func:`encode_attr`);
    numbers become numpy scalars of their type (a Python ``int`` 64 bits, a ``float`` 64
    bits); arrays are flattened and one of a single element reads back as that element;
    bools are int8. ``classic``: as a classic (netCDF-3) file stores it, which has no
    64-bit integers: whole numbers that fit in 32 bits are 32 bits.
    """
    value = encode_attr(value)
    if isinstance(value, bytes):
        return value.decode()
    if isinstance(value, str):
        return str(value)
    arr = np.asarray(value).ravel()
    if arr.dtype.kind == "b":
        arr = arr.astype(np.int8)
    if classic and arr.dtype.kind in "iu" and arr.dtype.itemsize > 4 and arr.size \
            and np.iinfo(np.int32).min <= arr.min() and arr.max() <= np.iinfo(np.int32).max:
        arr = arr.astype(np.int32)
    if arr.size == 1:
        return arr[0]
    return arr


def _is_field(ds: xr.Dataset, name) -> bool:
    """A float data variable over ``t`` (and at most one more dimension): float32 on disk."""
    var = ds[name]
    return name in ds.data_vars and var.dtype.kind == "f" and bool(var.dims) and var.dims[0] == "t" \
        and var.ndim <= 2


def stored_form(ds: xr.Dataset) -> xr.Dataset:
    """The Dataset :func:`write_dataset` stores, as ``xarray.open_dataset`` gives it back.

    What writing and reading back would change, done in memory: the writer's global
    attributes (``history``, ``date_created``, library versions; kept where given), CF
    attributes of each variable (:func:`variable_attrs`), every attribute in its stored
    type (:func:`stored_attr`), fields in float32, text in fixed-width unicode (netCDF-4
    variable-length strings read back so). Applying it twice changes nothing, and
    :func:`write_dataset` writes its result unchanged, so a caller that returns it
    returns what the file holds without reading the file.

    Parameters
    ----------
    ds : xarray.Dataset

    Returns
    -------
    xarray.Dataset
        A new Dataset; ``ds`` is not changed.
    """
    out = ds.copy(deep=False)
    for name, var in ds.variables.items():
        dtype = np.dtype("f4") if _is_field(ds, name) else var.dtype
        data = var.data
        if var.dtype.kind == "O" or var.dtype.kind == "U":
            data = np.asarray(var.values).astype(str)  # max length, at least 1 (as the reader gives)
        elif dtype != var.dtype:
            data = var.data.astype(dtype)
        attrs = {k: stored_attr(v) for k, v in variable_attrs(var.attrs, dtype).items() if v is not None}
        out[name] = xr.Variable(var.dims, data, attrs)
    out.attrs = {k: stored_attr(v) for k, v in _global_attrs(ds.attrs).items()}
    return out


# ----------------------------------------------------------------------------- writing
class StreamWriter:
    """Write a run's fields as they are computed, then its measurements."""

    def __init__(self, path, setup, field_names, model, attrs, overwrite: bool = False, growing: bool = False):
        """``growing``: the run may stop before its last sample (``run.stop_when_quiet``):
        the ``t`` dimension is unlimited and holds the samples computed only."""
        from cable.results import _field_attrs

        self.path = Path(path)
        self.overwrite = overwrite
        self.tmp = temporary_name(self.path)
        self.setup = setup
        self.names = list(field_names)
        self.single = setup.x is None
        self.chunks = chunk_shape(setup.n_samples, None if self.single else setup.n)
        try:
            nc = netCDF4.Dataset(self.tmp, "w", format="NETCDF4")
        except OSError as exc:
            self.tmp.unlink(missing_ok=True)
            raise _write_failure(self.path, exc) from None
        self.nc = nc
        # whatever stops the run before finish() or abort() (an interrupt or an error
        # outside the caller's handlers), the temporary file goes when this writer does,
        # or at the latest when the interpreter exits
        self._discard = weakref.finalize(self, _discard, self.tmp, nc)
        with self._removed_on_error():
            nc.createDimension("t", None if growing else setup.n_samples)
            tv = nc.createVariable("t", "f8", ("t",))
            tv.setncatts(variable_attrs(schema.attrs("t"), "f8"))
            # the times are written with the samples (flush, finish): no n_samples array up front
            fdims = ("t",) if self.single else ("t", "x")
            if not self.single:
                nc.createDimension("x", setup.n)
                xv = nc.createVariable("x", "f8", ("x",))
                xv.setncatts(variable_attrs(schema.attrs("x"), "f8"))
                xv[:] = setup.x
            for name in self.names:
                var = nc.createVariable(name, "f4", fdims, zlib=True, complevel=4, shuffle=True,
                                        chunksizes=self.chunks, fill_value=np.float32(np.nan))
                var.setncatts(variable_attrs(_field_attrs(name, model), "f4"))
            nc.setncatts(_global_attrs(attrs))
            nc.setncattr("status", "running")
            nc.sync()
            for name in self.names:
                # whole chunks are written once: caching them (64 MiB per variable by default)
                # would only make memory grow with the duration, up to that size. Set after
                # leaving define mode (sync), where the HDF5 dataset's cache is created.
                nc.variables[name].set_var_chunk_cache(size=WRITE_CACHE_BYTES, nelems=WRITE_CACHE_SLOTS,
                                                       preemption=1.0)
        #: samples held before a write: one row of chunks, or a multiple of it
        rows = self.chunks[0]
        self.block = max(rows, (min(BUFFER_BYTES // (4 * setup.n), MAX_T_CHUNK) // rows) * rows)
        self.block = min(self.block, setup.n_samples)
        self.buffer = {name: np.empty((self.block, setup.n), dtype=np.float32) for name in self.names}
        self.buffered = 0
        self.start = 0
        self.filled = 0

    def write(self, k, values):
        for name, arr in values.items():
            self.buffer[name][self.buffered] = arr
        self.buffered += 1
        self.filled = k + 1
        if self.buffered == self.block:
            self.flush()

    def _times(self, a: int, b: int) -> np.ndarray:
        """Sample times [ms] of samples a..b-1, computed as :attr:`cable.preparation.Setup.t` does."""
        return np.arange(a, b) * self.setup.steps_per_sample * self.setup.case.numerics.dt

    def flush(self):
        if self.buffered == 0:
            return
        sl = slice(self.start, self.start + self.buffered)
        try:
            self.nc.variables["t"][sl] = self._times(sl.start, sl.stop)
            for name in self.names:
                block = self.buffer[name][: self.buffered]
                self.nc.variables[name][sl] = block[:, 0] if self.single else block
        except Exception as exc:  # the library's error (RuntimeError: NetCDF: HDF error) for a full disk
            self.abort()
            raise _write_failure(self.path, exc) from None
        self.start += self.buffered
        self.buffered = 0

    def finish(self, meas: dict, attrs: dict, n_done: int) -> xr.Dataset:
        """Write the measurements and attributes, close, rename; return the opened file."""
        with self._removed_on_error():
            self.flush()
            nc = self.nc
            step = max(1, BUFFER_BYTES // 8)
            end = self.start if nc.dimensions["t"].isunlimited() else self.setup.n_samples
            for a in range(self.start, end, step):   # times of samples not run (partial)
                b = min(a + step, self.setup.n_samples)
                nc.variables["t"][a:b] = self._times(a, b)
            nb = len(meas["beat_onset"][1])
            nc.createDimension("beat", nb)
            bv = nc.createVariable("beat", "i4", ("beat",))
            bv.setncatts(variable_attrs(schema.attrs("beat"), "i4"))
            bv[:] = np.arange(nb)
            nc.createDimension("level", len(self.setup.case.apd_levels))
            lv = nc.createVariable("level", "f8", ("level",))
            lv.setncatts(variable_attrs(schema.attrs("level"), "f8"))
            lv[:] = np.array(self.setup.case.apd_levels)
            for name, (dims, arr) in meas.items():
                arr = np.asarray(arr)
                for d, size in zip(dims, arr.shape):  # dimensions of the studies (revolution, electrode)
                    if d not in nc.dimensions:
                        nc.createDimension(d, size)
                if self.single and "x" in dims:
                    arr = np.take(arr, 0, axis=dims.index("x"))
                    dims = tuple(d for d in dims if d != "x")
                if arr.dtype == np.int8:
                    var = nc.createVariable(name, "i1", dims)
                    dtype = "i1"
                elif arr.dtype.kind in "iu":
                    var = nc.createVariable(name, "i4", dims)
                    dtype = "i4"
                elif arr.dtype.kind in "OU":  # names (parameter_name)
                    var = nc.createVariable(name, str, dims)
                    dtype = None
                else:
                    var = nc.createVariable(name, "f8", dims, zlib=True, fill_value=np.nan)
                    dtype = "f8"
                var.setncatts(variable_attrs(schema.attrs(name), dtype) if dtype else schema.attrs(name))
                var[:] = arr if dtype else arr.astype(object)
            nc.setncatts(_global_attrs(attrs))
            nc.close()
        try:
            publish(self.tmp, self.path, self.overwrite)
        finally:
            self._discard.detach()  # the name may be reused by a later run in this process
        return open_result(self.path)

    @contextlib.contextmanager
    def _removed_on_error(self):
        """Any error inside removes the temporary file (:meth:`abort`); a library's error is
        raised as the write failure it is (OutputError: a full disk, exit 4)."""
        try:
            yield
        except OutputError:
            raise          # said and cleaned up already (flush)
        except Exception as exc:
            self.abort()
            raise _write_failure(self.path, exc) from None
        except BaseException:
            self.abort()
            raise

    def abort(self):
        """Close and remove the temporary file (after an error)."""
        if hasattr(self, "_discard"):
            self._discard.detach()
        try:
            if self.nc.isopen():
                self.nc.close()
        except Exception:  # noqa: BLE001 -- closing a file whose writes failed (a full disk) fails too
            pass
        finally:
            self.tmp.unlink(missing_ok=True)


def _write_failure(path: Path, exc: Exception) -> OutputError:
    """The error for a writer that failed: what happened, and that nothing was kept."""
    import shutil

    from cable.units import format_bytes

    folder = path.parent if str(path.parent) else Path(".")
    try:
        free = f"; {format_bytes(shutil.disk_usage(folder).free)} is free there now"
    except OSError:
        free = ""
    err = OutputError(f"writing '{path}' failed ({exc.__class__.__name__}: {exc}); the disk may be full or the "
                      f"file system failing{free}. The unfinished temporary file was removed, so no result file "
                      f"was kept; free space (or choose another output) and run again.")
    return err


def _discard(tmp: Path, nc) -> None:
    """Close ``nc`` and remove the unfinished file ``tmp`` (a finalizer of :class:`StreamWriter`)."""
    try:
        if nc.isopen():
            nc.close()
    except Exception:  # closing a file whose run failed: removing it matters more
        pass
    tmp.unlink(missing_ok=True)


def write_dataset(ds: xr.Dataset, path, overwrite: bool = False) -> None:
    """Write an in-memory result with the package's encoding, atomically.

    Float fields with a ``t`` dimension become float32 chunked as :func:`chunk_shape`;
    every float is zlib-compressed; coordinates get no fill value (CF).
    """
    check_target(path, overwrite)
    path = Path(path)
    tmp = temporary_name(path)
    encoding = {}
    out = stored_form(ds)
    for name, var in out.data_vars.items():
        enc = {}
        if var.dtype.kind == "f":
            enc = {"zlib": True, "complevel": 4, "_FillValue": np.nan}
            if _is_field(out, name):
                enc["dtype"] = "f4"
                n_x = ds.sizes[var.dims[1]] if len(var.dims) == 2 else None
                enc["chunksizes"] = chunk_shape(ds.sizes["t"], n_x)
        encoding[name] = enc
    for name in out.coords:
        encoding[name] = {"_FillValue": None}
    try:
        try:
            out.to_netcdf(tmp, engine="netcdf4", encoding=encoding)
        except (OSError, RuntimeError) as exc:
            raise _write_failure(path, exc) from None
        publish(tmp, path, overwrite)
    finally:
        tmp.unlink(missing_ok=True)


# ----------------------------------------------------------------------------- reading
def open_result(path, *, chunks=None) -> xr.Dataset:
    """Open a netCDF file written by cable (lazily; nothing but coordinates is read).

    Parameters
    ----------
    path : str or pathlib.Path
        The file.
    chunks : dict, optional
        Passed to :func:`xarray.open_dataset` to get dask arrays.

    Returns
    -------
    xarray.Dataset
        Times stay plain numbers [ms] (no calendar or timedelta decoding).

    Raises
    ------
    CaseError
        The path is missing, a folder, or not a readable netCDF file.
    """
    path = Path(path)
    if path.is_dir():
        raise CaseError(f"result file '{path}' is a folder; give the .nc file inside it.")
    if not path.is_file():
        near = sorted(p.name for p in path.parent.glob("*.nc")) if path.parent.is_dir() else []
        hint = f" netCDF files there: {', '.join(near[:5])}." if near else ""
        raise CaseError(f"result file '{path}' not found.{hint}")
    try:
        ds = xr.open_dataset(path, engine="netcdf4", decode_times=False, decode_timedelta=False, chunks=chunks)
    except Exception as exc:  # netCDF4/HDF5 raise OSError, ValueError... for foreign files
        raise CaseError(f"'{path}' is not a readable netCDF file ({exc.__class__.__name__}: {exc}).") from None
    if ds.attrs.get("status") == "running":
        warnings.warn(f"'{path}' is marked status = 'running': its run had not finished or was killed; "
                      "fields past the last write are missing (NaN).", stacklevel=2)
    return ds


def require(ds: xr.Dataset, names, path, purpose: str) -> None:
    """Raise :class:`CaseError` naming what ``purpose`` needs and ``ds`` lacks."""
    missing = [n for n in names if n not in ds.variables]
    if missing:
        have = ", ".join(sorted(str(v) for v in ds.data_vars)) or "(none)"
        raise CaseError(f"'{path}' has no {', '.join(repr(m) for m in missing)}, needed to {purpose}. "
                        f"Its variables: {have}.")


#: names of :mod:`cable.io.rerun` that callers import from here, where they were first
_RERUN_NAMES = ("COMPARED", "VOLATILE_ATTRS", "RerunReport", "compare", "compare_attrs", "rerun")


def __getattr__(name):
    # imported on first use: cable.io.rerun imports this module
    if name in _RERUN_NAMES:
        from cable.io import rerun as _rerun

        return getattr(_rerun, name)
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
