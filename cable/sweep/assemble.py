"""A sweep's result: one Dataset over the swept dimensions from its points' Datasets."""

from __future__ import annotations

import numpy as np
import xarray as xr

from cable.io import schema
from cable.io.netcdf import stored_attr, variable_attrs
from cable.sweep.points import FAILURES, NO_RESULT, PER_POINT, REASON_ATTRS, STATUS, coord_attrs, status_attrs
from cable.sweep.spec import SweepSpec


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
    template = _template(pts)
    nbeat = max([p.sizes.get("beat", 0) for p in pts if p is not None] + [0])
    levels = []
    for p in pts:
        if p is not None and "level" in p.coords:
            levels += [float(v) for v in p["level"].values if float(v) not in levels]
    per_point, arrays, fills = _fill(spec, pts, template, {"beat": nbeat, "level": len(levels)}, levels)
    status, reason, sample_x = per_point

    dims = spec.dims
    data = {
        "status": (dims, status, status_attrs()),
        "failure_reason": (dims, reason, REASON_ATTRS),
        "sample_x": (dims, sample_x, _attrs_of(pts, "sample_x")),
    }
    for name, var in template.items():
        a = dict(var.attrs)
        if var.dtype == np.int8 and "flag_values" in a:
            values = [int(v) for v in np.ravel(a["flag_values"])]
            meanings = str(a.get("flag_meanings", "")).split()
            a.update(flag_values=np.array([int(fills[name])] + values, dtype=np.int8),
                     flag_meanings=" ".join(["no_result"] + meanings))
        data[name] = (dims + var.dims, arrays[name], a)
    out = xr.Dataset(data, coords=_coords(spec, nbeat, levels), attrs=dict(attrs))
    out.attrs["n_failed"] = int(np.sum(np.isin(status, [STATUS[name] for name in FAILURES])))
    out.attrs["n_no_capture"] = int(np.sum(status == STATUS["no_capture"]))
    out.attrs["n_blocked"] = int(np.sum(status == STATUS["blocked"]))
    out.attrs["n_not_computed"] = int(np.sum(status == STATUS["not_computed"]))
    return out


def _template(pts: list) -> dict:
    """``{name: the first point's variable}`` of every measurement a point holds, in order of appearance."""
    template = {}
    for p in pts:
        for name in p.data_vars if p is not None else ():
            if name not in template and name not in PER_POINT and "t" not in p[name].dims:
                template[name] = p[name]
    return template


def _fill(spec: SweepSpec, pts: list, template: dict, sizes: dict, levels: list):
    """The per-point arrays (status, reason, sample_x), each measurement's array and its no-result value."""
    shape = spec.shape
    status = np.full(shape, STATUS["not_computed"], dtype=np.int8)
    reason = np.full(shape, "not computed yet", dtype=object)
    sample_x = np.full(shape, np.nan)
    arrays, fills = {}, {}
    for name, var in template.items():
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
        for name in template:
            if name in p:
                _put(arrays[name], where, p, p[name], levels)
    return (status, reason, sample_x), arrays, fills


def _put(array: np.ndarray, where: tuple, p: xr.Dataset, var: xr.DataArray, levels: list) -> None:
    """One point's values of a measurement into the sweep's array (its beats and levels in place)."""
    index = []
    for d in var.dims:
        if d == "beat":
            index.append(np.arange(p.sizes["beat"]))
        else:
            index.append(np.array([levels.index(float(v)) for v in p["level"].values], dtype=int))
    if index:
        array[where][np.ix_(*index)] = var.values
    else:
        array[where] = var.values


def _coords(spec: SweepSpec, nbeat: int, levels: list) -> dict:
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
    return coords


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
    """A point without its swept coordinates, its attributes in the form its point file holds them."""
    swept = [d for d in spec.dims if d in p.dims]
    if swept:
        p = p.isel({d: 0 for d in swept}, drop=True)
    p = p.drop_vars([a.name for a in spec.axes if a.name in p.coords]).copy(deep=False)
    for var in p.variables.values():
        var.attrs = as_stored(var.attrs, var.dtype)
    return p


def as_stored(attrs: dict, dtype) -> dict:
    """A variable's attributes as a point file gives them back (:meth:`PointStore.write`).

    A point kept in memory after it was written (a sweep does not read its new points
    back) and the same point read from its file then give the result the same
    attributes, so a result is the same, byte for byte, whether its points were
    computed in this call or in an earlier one: CF spelling of units and flag values of
    the variable's type (:func:`cable.io.netcdf.variable_attrs`), every value in the type
    a classic netCDF file gives back (:func:`cable.io.netcdf.stored_attr`: whole numbers
    in 32 bits).
    """
    return {k: stored_attr(v, classic=True) for k, v in variable_attrs(attrs, dtype).items()}


def _attrs_of(pts, name) -> dict:
    for p in pts:
        if p is not None and name in p:
            return dict(p[name].attrs)
    return {}
