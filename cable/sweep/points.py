"""One sweep point as a Dataset: its status, failure reason and kept measurements.

A point's Dataset holds ``status`` (int8 with CF flags, :data:`STATUS`),
``failure_reason``, ``sample_x`` and the per-beat measurements of its run
(:func:`point_dataset`), or the status alone for a point that has no result
(:func:`failed_dataset`); :func:`label` gives it its swept coordinates.
"""

from __future__ import annotations

import numpy as np
import xarray as xr

from cable.io import schema
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



def status_of(ds: xr.Dataset) -> int:
    """The status code of a point's Dataset (labelled or not)."""
    return int(np.ravel(ds["status"].values)[0])


def status_attrs() -> dict:
    return {"long_name": "outcome of the sweep point", "flag_values": np.array(list(STATUS.values()), dtype=np.int8),
            "flag_meanings": " ".join(STATUS)}


def point_dataset(ds: xr.Dataset, keep_fields: bool) -> xr.Dataset:
    """The part of a run's result that a sweep keeps (no swept coordinates yet).

    Every data variable whose dimensions lie within ``(beat, level)`` is kept as it is;
    those that also vary along ``x`` (but not ``t``) are taken at the node nearest the
    centre of the CV window (the node :func:`cable.results.measurements` uses for the
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
        if name in schema.PARAMETER_TABLE:
            continue  # how the nodes ran, not a measurement
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
