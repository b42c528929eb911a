"""netCDF output: streamed fields, CF attributes, atomic completion.

Fields (``vm`` and stored states) are written as float32, zlib-compressed, in chunks
of ``(T_CHUNK, X_CHUNK)``: reading one position's trace or one time's profile touches
few chunks. They are written while the run goes, in blocks of ``BLOCK`` samples, so
memory does not grow with the simulated duration. The file is built under a temporary
name in the target's folder and renamed when complete (or when a partial result is
kept, marked ``status = "partial"``), so a reader never sees a half-written file.
"""

from __future__ import annotations

import os
from pathlib import Path

import netCDF4
import numpy as np
import xarray as xr

from cable.case import CaseError
from cable.io import schema

#: samples buffered in memory before a write
BLOCK = 256
T_CHUNK = 256
X_CHUNK = 256


def check_target(path, overwrite: bool) -> None:
    """Refuse to overwrite an existing result without ``overwrite``; check the folder."""
    path = Path(path)
    if path.exists() and not overwrite:
        raise CaseError(f"output '{path}' exists; pass --overwrite (overwrite=True) to replace it.")
    folder = path.parent if str(path.parent) else Path(".")
    if not folder.is_dir():
        raise CaseError(f"output folder '{folder}' does not exist.")
    if not os.access(folder, os.W_OK):
        raise CaseError(f"output folder '{folder}' is not writable.")


def _encode_attr(value):
    if isinstance(value, bool):
        return np.int8(value)
    if isinstance(value, (list, tuple)):
        return np.array(value)
    return value


class StreamWriter:
    """Write a run's fields as they are computed, then its measurements."""

    def __init__(self, path, setup, field_names, model, attrs):
        self.path = Path(path)
        self.tmp = self.path.with_name(f".{self.path.name}.{os.getpid()}.tmp")
        self.setup = setup
        self.names = list(field_names)
        self.model = model
        self.single = setup.x is None
        nc = netCDF4.Dataset(self.tmp, "w", format="NETCDF4")
        self.nc = nc
        nc.createDimension("t", setup.n_samples)
        tv = nc.createVariable("t", "f8", ("t",))
        tv.setncatts(schema.attrs("t"))
        tv[:] = setup.t
        fdims = ("t",) if self.single else ("t", "x")
        if not self.single:
            nc.createDimension("x", setup.n)
            xv = nc.createVariable("x", "f8", ("x",))
            xv.setncatts(schema.attrs("x"))
            xv[:] = setup.x
        chunks = (min(T_CHUNK, setup.n_samples),) if self.single else \
            (min(T_CHUNK, setup.n_samples), min(X_CHUNK, setup.n))
        from cable.simulate import _field_attrs

        for name in self.names:
            var = nc.createVariable(name, "f4", fdims, zlib=True, complevel=4, chunksizes=chunks,
                                    fill_value=np.float32(np.nan))
            var.setncatts(_field_attrs(name, model))
        nc.setncatts({k: _encode_attr(v) for k, v in attrs.items()})
        nc.setncattr("status", "running")
        nc.sync()
        self.buffer = {name: np.empty((BLOCK, setup.n), dtype=np.float32) for name in self.names}
        self.buffered = 0
        self.start = 0
        self.filled = 0

    def write(self, k, values):
        for name, arr in values.items():
            self.buffer[name][self.buffered] = arr
        self.buffered += 1
        self.filled = k + 1
        if self.buffered == BLOCK:
            self.flush()

    def flush(self):
        if self.buffered == 0:
            return
        sl = slice(self.start, self.start + self.buffered)
        for name in self.names:
            block = self.buffer[name][: self.buffered]
            self.nc.variables[name][sl] = block[:, 0] if self.single else block
        self.start += self.buffered
        self.buffered = 0

    def finish(self, meas: dict, attrs: dict, n_done: int) -> xr.Dataset:
        """Write the measurements and attributes, close, rename; return the opened file."""
        self.flush()
        nc = self.nc
        nb = len(meas["beat_onset"][1])
        nc.createDimension("beat", nb)
        bv = nc.createVariable("beat", "i4", ("beat",))
        bv.setncatts(schema.attrs("beat"))
        bv[:] = np.arange(nb)
        nc.createDimension("level", len(self.setup.case.apd_levels))
        lv = nc.createVariable("level", "f8", ("level",))
        lv.setncatts(schema.attrs("level"))
        lv[:] = np.array(self.setup.case.apd_levels)
        for name, (dims, arr) in meas.items():
            arr = np.asarray(arr)
            if self.single and "x" in dims:
                axis = dims.index("x")
                arr = np.take(arr, 0, axis=axis)
                dims = tuple(d for d in dims if d != "x")
            if arr.dtype == np.int8:
                var = nc.createVariable(name, "i1", dims)
            else:
                var = nc.createVariable(name, "f8", dims, zlib=True, fill_value=np.nan)
            var.setncatts(schema.attrs(name))
            var[:] = arr
        nc.setncatts({k: _encode_attr(v) for k, v in attrs.items()})
        nc.close()
        os.replace(self.tmp, self.path)
        return xr.open_dataset(self.path)

    def abort(self):
        try:
            self.nc.close()
        finally:
            self.tmp.unlink(missing_ok=True)


def open_result(path) -> xr.Dataset:
    """Open a result file written by cable (lazily)."""
    path = Path(path)
    if not path.is_file():
        raise CaseError(f"result file '{path}' not found.")
    try:
        return xr.open_dataset(path)
    except Exception as exc:  # netCDF4/HDF5 raise OSError, ValueError... for foreign files
        raise CaseError(f"'{path}' is not a readable netCDF file ({exc.__class__.__name__}: {exc}).") from None


def write_dataset(ds: xr.Dataset, path, overwrite: bool = False) -> None:
    """Write an in-memory result with the package's encoding, atomically."""
    check_target(path, overwrite)
    path = Path(path)
    tmp = path.with_name(f".{path.name}.{os.getpid()}.tmp")
    encoding = {}
    for name, var in ds.data_vars.items():
        if var.dtype.kind == "f":
            enc = {"zlib": True, "complevel": 4, "_FillValue": np.nan}
            if "t" in var.dims:
                enc["dtype"] = "f4"
                enc["chunksizes"] = tuple(min(T_CHUNK if d == "t" else X_CHUNK, ds.sizes[d]) for d in var.dims)
            encoding[name] = enc
    attrs = {k: _encode_attr(v) for k, v in ds.attrs.items()}
    out = ds.copy()
    out.attrs = attrs
    try:
        out.to_netcdf(tmp, engine="netcdf4", encoding=encoding)
        os.replace(tmp, path)
    finally:
        if tmp.exists():
            tmp.unlink()
