"""``cable rerun``: repeat a run from its result file alone and compare the two results."""

from __future__ import annotations

import math
import os
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import xarray as xr

from cable.case import CaseError
from cable.io.netcdf import BUFFER_BYTES, encode_attr, open_result

#: the variables a rerun reports first (it compares every variable either file holds)
COMPARED = ("activation_time", "conduction_velocity", "captured", "blocked", "block_x", "vm")
#: global attributes that change from run to run of one case (time, machine, command
#: line, library versions: the versions are reported apart), not compared by a rerun
VOLATILE_ATTRS = ("history", "date_created", "command", "wall_time_s", "cable_version", "numpy_version",
                  "numba_version", "netcdf4_python_version", "netcdf_library_version", "hdf5_version",
                  "xarray_version", "python_version", "dask_version")


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
    from cable.simulate import SimulationError, simulate_streamed

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
            new = simulate_streamed(case, output=output, overwrite=overwrite, command=command, info=info)
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
    stored form (:func:`encode_attr`), so an in-memory result (bools, tuples) compares
    equal to the file it would make. The case text is compared in the loader's spelling
    and the notes without those on old spellings (:mod:`cable.case.names`), so that a file
    written with ``[[stimulus]]`` reruns as identical.
    """
    out = {}
    for name in dict.fromkeys([*original, *new]):
        if name in VOLATILE_ATTRS:
            continue
        a, b = original.get(name), new.get(name)
        ea = None if a is None else np.asarray(encode_attr(_as_compared(name, a)))
        eb = None if b is None else np.asarray(encode_attr(_as_compared(name, b)))
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
