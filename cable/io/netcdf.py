"""netCDF output: streamed fields, CF attributes, atomic completion, rerun.

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
versions, command line) from which :func:`rerun` repeats the run.
"""

from __future__ import annotations

import math
import os
import sys
import warnings
import weakref
from dataclasses import dataclass, field
from datetime import datetime, timezone
from pathlib import Path

import netCDF4
import numpy as np
import xarray as xr

from cable.case import CaseError
from cable.io import OutputError, schema

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
#: the variables a rerun reports first (it compares every variable either file holds)
COMPARED = ("activation_time", "conduction_velocity", "captured", "blocked", "block_x", "vm")
#: global attributes that change from run to run of one case (time, machine, command
#: line, library versions: the versions are reported apart), not compared by a rerun
VOLATILE_ATTRS = ("history", "date_created", "command", "wall_time_s", "cable_version", "numpy_version",
                  "numba_version", "netcdf4_python_version", "netcdf_library_version", "hdf5_version",
                  "xarray_version", "python_version", "dask_version")


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


def check_target(path, overwrite: bool, inputs=()) -> None:
    """Refuse an output that would lose something; check its folder.

    Refused: an existing file without ``overwrite``; a target that is not a regular
    file (a folder, a FIFO, a device such as /dev/null), even with ``overwrite``; a
    target that is one of ``inputs`` (the case file). Temporaries of this output left
    by runs that died (``.NAME.PID.tmp`` whose process is gone) are removed.
    """
    path = Path(path)
    if path.is_dir():
        raise CaseError(f"output '{path}' is a folder; give a file name such as '{path / 'result.nc'}'.")
    for source in inputs:
        if source is not None and path.exists() and Path(source).exists() and os.path.samefile(path, source):
            raise CaseError(f"output '{path}' is the input file '{source}'; writing the result there would destroy "
                            f"the input. Give another output name, e.g. '{path.with_suffix('.nc')}'"
                            f"{'' if path.suffix != '.nc' else ' in another folder'}.")
    _check_regular(path)
    if path.exists() and not overwrite:
        raise CaseError(f"output '{path}' exists; pass --overwrite (overwrite=True) to replace it.")
    folder = path.parent if str(path.parent) else Path(".")
    if not folder.is_dir():
        above = next((p for p in folder.parents if p.exists()), None) if not folder.exists() else folder
        if above is not None and not above.is_dir():
            raise CaseError(f"output folder '{folder}': '{above}' is a file, not a folder.")
        raise CaseError(f"output folder '{folder}' does not exist.")
    if not os.access(folder, os.W_OK):
        raise CaseError(f"output folder '{folder}' is not writable.")
    remove_stale_temporaries(path)


def _check_regular(path: Path) -> None:
    """Refuse to replace something that is not a regular file (FIFO, device, socket)."""
    if (path.exists() or path.is_symlink()) and not path.is_file():
        raise CaseError(f"output '{path}' exists and is not a regular file (a FIFO, a device or a socket); "
                        f"cable writes results only to regular files. Give a file name.")


def temporary_name(path) -> Path:
    """The name a result is built under before :func:`publish`: ``.NAME.PID.tmp`` beside it."""
    path = Path(path)
    return path.with_name(f".{path.name}.{os.getpid()}.tmp")


def remove_stale_temporaries(path) -> list[Path]:
    """Remove ``.NAME.PID.tmp`` files of ``path`` whose process no longer runs (killed with SIGKILL)."""
    path = Path(path)
    folder = path.parent if str(path.parent) else Path(".")
    removed = []
    for tmp in folder.glob(f".{glob_escape(path.name)}.*.tmp"):
        pid = tmp.name[len(path.name) + 2:-len(".tmp")]
        if not pid.isdigit() or int(pid) == os.getpid() or _alive(int(pid)):
            continue
        tmp.unlink(missing_ok=True)
        removed.append(tmp)
    return removed


def glob_escape(name: str) -> str:
    import glob

    return glob.escape(name)


def _alive(pid: int) -> bool:
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:  # someone else's process: alive
        return True
    return True


def publish(tmp, path, overwrite: bool) -> None:
    """Give the finished temporary file ``tmp`` its name ``path``, atomically.

    Without ``overwrite`` the name is taken exclusively (a hard link, which fails if
    the name exists), so of two runs to one output that both passed
    :func:`check_target`, the second is refused here rather than silently replacing
    the first's result. ``tmp`` is removed in every case.
    """
    tmp, path = Path(tmp), Path(path)
    try:
        if overwrite:
            _check_regular(path)
            os.replace(tmp, path)
            return
        try:
            os.link(tmp, path)
        except FileExistsError:
            raise CaseError(f"output '{path}' was created by another run while this one ran; it is left as that "
                            f"run wrote it and this run's result is not kept. Pass --overwrite (overwrite=True) "
                            f"to replace it, or choose another output.") from None
        except OSError:  # a file system without hard links: create the name exclusively, then fill it
            try:
                fd = os.open(path, os.O_CREAT | os.O_EXCL | os.O_WRONLY)
            except FileExistsError:
                raise CaseError(f"output '{path}' was created by another run while this one ran; this run's "
                                f"result is not kept. Pass --overwrite to replace it.") from None
            os.close(fd)
            os.replace(tmp, path)
    finally:
        tmp.unlink(missing_ok=True)


# ----------------------------------------------------------------------------- attributes
def _encode_attr(value):
    """A netCDF attribute value: bools as int8, sequences as arrays, dicts as text."""
    if isinstance(value, (bool, np.bool_)):
        return np.int8(value)
    if isinstance(value, (list, tuple)):
        arr = np.asarray(value)
        return arr if arr.dtype.kind in "iuf" else ", ".join(str(v) for v in value)
    if isinstance(value, dict):
        return "; ".join(f"{k} = {v}" for k, v in value.items())
    return value


def _global_attrs(attrs: dict) -> dict:
    """The run's attributes plus the writer's own provenance (CF ``history``, library versions)."""
    out = {k: _encode_attr(v) for k, v in attrs.items() if v is not None}
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


# ----------------------------------------------------------------------------- writing
class StreamWriter:
    """Write a run's fields as they are computed, then its measurements."""

    def __init__(self, path, setup, field_names, model, attrs, overwrite: bool = False, growing: bool = False):
        """``growing``: the run may stop before its last sample (``run.stop_when_quiet``):
        the ``t`` dimension is unlimited and holds the samples computed only."""
        from cable.simulate import _field_attrs

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
        try:
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
        except Exception as exc:
            self.abort()
            raise _write_failure(self.path, exc) from None
        except BaseException:
            self.abort()
            raise
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
        """Sample times [ms] of samples a..b-1, computed as :attr:`cable.simulate.Setup.t` does."""
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
        try:
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
                else:
                    var = nc.createVariable(name, "f8", dims, zlib=True, fill_value=np.nan)
                    dtype = "f8"
                var.setncatts(variable_attrs(schema.attrs(name), dtype))
                var[:] = arr
            nc.setncatts(_global_attrs(attrs))
            nc.close()
        except OutputError:
            raise
        except Exception as exc:
            self.abort()
            raise _write_failure(self.path, exc) from None
        except BaseException:
            self.abort()
            raise
        try:
            publish(self.tmp, self.path, self.overwrite)
        finally:
            self._discard.detach()  # the name may be reused by a later run in this process
        return open_result(self.path)

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
    out = ds.copy()
    for name, var in ds.data_vars.items():
        enc = {}
        if var.dtype.kind == "f":
            enc = {"zlib": True, "complevel": 4, "_FillValue": np.nan}
            if var.dims and var.dims[0] == "t" and len(var.dims) <= 2:
                enc["dtype"] = "f4"
                n_x = ds.sizes[var.dims[1]] if len(var.dims) == 2 else None
                enc["chunksizes"] = chunk_shape(ds.sizes["t"], n_x)
        encoding[name] = enc
        out[name].attrs = variable_attrs(var.attrs, np.dtype(enc.get("dtype", var.dtype)))
    for name, coord in ds.coords.items():
        encoding[name] = {"_FillValue": None}
        out[name].attrs = variable_attrs(coord.attrs, coord.dtype)
    out.attrs = _global_attrs(ds.attrs)
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


# ----------------------------------------------------------------------------- rerun
@dataclass
class RerunReport:
    """The outcome of :func:`rerun`.

    Attributes
    ----------
    source : pathlib.Path
        The original result file.
    result : xarray.Dataset
        The new result (partial if the run failed again where the original did).
    compared : dict
        ``{name: (identical, largest absolute difference)}`` for every variable and
        coordinate either file holds (:data:`COMPARED` first); ``identical`` counts
        NaN = NaN; a variable only one holds is ``(False, inf)`` and listed in ``missing``.
    versions : dict
        ``{attribute: (recorded, now)}`` for versions that differ from the original's.
    attributes : dict
        ``{attribute: (original, rerun)}`` for global attributes the run determines
        (all but :data:`VOLATILE_ATTRS`) that differ; None for one a file lacks.
    missing : dict
        ``{variable: "original" or "rerun"}``: the file that lacks it.
    """

    source: Path
    result: xr.Dataset
    compared: dict = field(default_factory=dict)
    versions: dict = field(default_factory=dict)
    attributes: dict = field(default_factory=dict)
    missing: dict = field(default_factory=dict)

    @property
    def identical(self) -> bool:
        """Whether every variable, coordinate and determined attribute is bit-for-bit the same."""
        return bool(self.compared) and all(same for same, _ in self.compared.values()) and not self.attributes


def _difference(a: np.ndarray, b: np.ndarray) -> tuple[bool, float]:
    if a.shape != b.shape:
        return False, math.inf
    if a.dtype.kind in "iub" and b.dtype.kind in "iub":
        same = bool(np.array_equal(a, b))
        return same, float(np.max(np.abs(a.astype(np.int64) - b.astype(np.int64)), initial=0))
    a, b = a.astype(np.float64), b.astype(np.float64)
    nan_a, nan_b = np.isnan(a), np.isnan(b)
    if not np.array_equal(nan_a, nan_b):
        return False, math.inf
    ok = ~nan_a
    diff = float(np.max(np.abs(a[ok] - b[ok]), initial=0.0))
    return bool(np.array_equal(a[ok], b[ok])), diff


def compare(original: xr.Dataset, new: xr.Dataset, names=None) -> dict:
    """``{name: (identical, largest absolute difference)}``.

    ``names`` None: every variable and coordinate either holds (:data:`COMPARED` first);
    one that only one of them holds is a difference, ``(False, inf)``. Fields with a
    ``t`` dimension are compared as float32 (as stored) in blocks of samples, so a long
    result is not loaded whole.
    """
    if names is None:
        every = list(dict.fromkeys([*original.variables, *new.variables]))
        names = [n for n in COMPARED if n in every] + [n for n in every if n not in COMPARED]
    out = {}
    for name in names:
        if name not in original.variables or name not in new.variables:
            out[name] = (False, math.inf)
            continue
        a, b = original[name], new[name]
        if name == "t" and a.sizes["t"] != b.sizes["t"]:
            # a partial file keeps every sample time; a rerun stopped at the same step holds
            # only those computed: the common times must agree, and the fields (compared
            # below) must be NaN past them
            n = min(a.sizes["t"], b.sizes["t"])
            out[name] = _difference(a.values[:n], b.values[:n])
            continue
        if a.dtype.kind in "OSU" or b.dtype.kind in "OSU":
            out[name] = (bool(np.array_equal(a.values.astype(str), b.values.astype(str))), math.nan)
            continue
        if "t" in a.dims:
            if a.dims != b.dims or any(a.sizes[d] != b.sizes[d] for d in a.dims if d != "t"):
                out[name] = (False, math.inf)
                continue
            step = max(1, BUFFER_BYTES // (4 * max(1, a.size // a.sizes["t"])))
            n = min(a.sizes["t"], b.sizes["t"])
            # a partial run's file keeps every sample time, NaN past the end of the run; the
            # rerun stopped at the same point holds only the samples computed
            longer = a if a.sizes["t"] > n else b
            if not all(np.all(np.isnan(longer.isel(t=slice(k, k + step)).values))
                       for k in range(n, longer.sizes["t"], step)):
                out[name] = (False, math.inf)
                continue
            same, diff = True, 0.0
            for k in range(0, n, step):
                sl = {"t": slice(k, min(k + step, n))}
                s, d = _difference(a.isel(sl).values.astype(np.float32), b.isel(sl).values.astype(np.float32))
                same, diff = same and s, max(diff, d)
            out[name] = (same, diff)
        else:
            out[name] = _difference(a.values, b.values)
    return out


def rerun(path, output=None, *, overwrite: bool = False, command: str | None = None, info=None) -> RerunReport:
    """Repeat a run from its result file alone and compare the new result with it.

    The case is read from the file's ``case`` attribute (the TOML text of the case as
    run, after any ``--set`` overrides); nothing else is needed.

    Parameters
    ----------
    path : str or pathlib.Path
        A result file written by ``cable run`` or :func:`cable.simulate`.
    output : str or pathlib.Path, optional
        Where to write the new result (not the original's path); kept in memory if omitted.
    overwrite : bool
        Replace an existing ``output``.
    command : str, optional
        The command line, recorded in the new file.
    info : callable, optional
        Receives one-line notes, as in :func:`cable.simulate`.

    Returns
    -------
    RerunReport
        ``report.identical`` tells whether ``activation_time`` and the other compared
        variables match the original exactly.

    Raises
    ------
    CaseError
        The file is not readable, holds no case, or its case no longer loads.
    """
    from cable.case import load_case
    from cable.simulate import SimulationError, simulate

    from cable.arguments import check_call

    if not isinstance(path, (str, os.PathLike)):
        raise CaseError(f"rerun(path={path!r}): path must be a result file (str or pathlib.Path), not "
                        f"{type(path).__name__}.")
    check_call("rerun", output=output, overwrite=overwrite, command=command, info=info)
    path = Path(path)
    if output is not None and Path(output).resolve() == path.resolve():
        raise CaseError(f"rerun output '{output}' is the original file; give another name, e.g. "
                        f"'{path.with_name(path.stem + '.rerun' + path.suffix)}'.")
    with open_result(path) as original:
        text = original.attrs.get("case")
        what = _not_a_run(original)
        if what:
            raise CaseError(f"'{path}' is {what}, not the result of one run; `cable rerun` repeats runs made by "
                            f"`cable run` or cable.simulate(output=...). Repeat it with the command that made it "
                            f"(its case is in the file's 'case' attribute).")
        if not text:
            raise CaseError(f"'{path}' has no 'case' attribute, so the run cannot be repeated from it; "
                            "only files written by `cable run` or cable.simulate(output=...) can.")
        try:
            case = load_case(text=str(text))
        except CaseError as exc:
            raise CaseError(f"the case stored in '{path}' no longer loads: {exc}") from None
        import numba

        now = {"cable_version": _package_version(), "numpy_version": np.__version__,
               "numba_version": numba.__version__}
        versions = {k: (str(original.attrs[k]), v) for k, v in now.items()
                    if k in original.attrs and str(original.attrs[k]) != v}
        try:
            new = simulate(case, output=output, overwrite=overwrite, command=command, info=info)
        except SimulationError as exc:
            if exc.partial is None:
                raise
            new = exc.partial
        compared = compare(original, new)
        missing = {n: ("original" if n not in original.variables else "rerun")
                   for n in compared if n not in original.variables or n not in new.variables}
        attributes = compare_attrs(original.attrs, new.attrs)
    return RerunReport(source=path, result=new, compared=compared, versions=versions, attributes=attributes,
                       missing=missing)


def compare_attrs(original: dict, new: dict) -> dict:
    """``{name: (original, new)}`` for the global attributes that differ, as they would be stored.

    Compared: every attribute but :data:`VOLATILE_ATTRS`; values are compared in their
    stored form (:func:`_encode_attr`), so an in-memory result (bools, tuples) compares
    equal to the file it would make. The case text is compared in the loader's spelling
    and the notes without those on old spellings (:mod:`cable.case.names`), so that a file
    written with ``[[stimulus]]`` reruns as identical.
    """
    out = {}
    for name in dict.fromkeys([*original, *new]):
        if name in VOLATILE_ATTRS:
            continue
        a, b = original.get(name), new.get(name)
        ea = None if a is None else np.asarray(_encode_attr(_as_compared(name, a)))
        eb = None if b is None else np.asarray(_encode_attr(_as_compared(name, b)))
        if ea is None or eb is None:
            same = ea is None and eb is None
        elif ea.dtype.kind in "OSU" or eb.dtype.kind in "OSU":
            same = ea.shape == eb.shape and bool(np.all(ea.astype(str) == eb.astype(str)))
        else:
            same = ea.shape == eb.shape and bool(np.array_equal(ea.astype(np.float64), eb.astype(np.float64)))
        if not same:
            out[name] = (a, b)
    return out


def _as_compared(name: str, value):
    """An attribute as a rerun compares it: the case in the loader's spelling, notes without deprecations."""
    from cable.case import names

    if name == "notes" and isinstance(value, str):
        return names.without_deprecations(value)
    if name == "case" and isinstance(value, str):
        import tomllib

        from cable.case.load import dumps_toml

        try:
            raw = tomllib.loads(value)
            names.canonical_raw(raw)
            return dumps_toml(raw)
        except (tomllib.TOMLDecodeError, ValueError, TypeError):
            return value
    return value


def _not_a_run(ds: xr.Dataset) -> str:
    """What a result file is when it is not one run's result ("" when it is one)."""
    attrs = ds.attrs
    if "sweep_id" in attrs:
        return "a sweep result (or one of its point files)"
    if attrs.get("protocol"):
        return f"a {attrs['protocol']} protocol result"
    if "t" not in ds.dims or "beat_onset" not in ds.variables:
        return "a file without the 't' dimension and 'beat_onset' of a run"
    return ""


def _package_version() -> str:
    from cable import __version__

    return __version__
