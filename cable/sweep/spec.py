"""The ``[sweep]`` case section: swept case keys -> the list of points.

Each key of ``[sweep]`` is a case key (named entries by name, e.g.
``stimulus.S1.amplitude``); its value is one of

* a list of values, each written as it would be in the case: ``[1.0, 0.5, 0.25]`` or
  ``["100 um", "238 um"]``;
* a linear range ``{start = 1.0, stop = 0.1, num = 10}`` (both ends included, like
  ``numpy.linspace``);
* a logarithmic range ``{start = 0.001, stop = 0.1, num = 5, log = true}``
  (``numpy.geomspace``; start and stop must be positive).

``mode = "grid"`` (the default) runs every combination, the first key varying
slowest; ``mode = "zip"`` pairs the lists entry by entry (they must be equally long)
and the result has one dimension, ``point``, with a coordinate per key.
For example::

    [sweep]
    "membrane.scale.g_Na" = {start = 1.0, stop = 0.1, num = 10}
    "fiber.radius" = ["119 um", "238 um", "476 um"]

The keys may also be written as nested tables (``[sweep.membrane.scale]`` with
``g_Na = [...]``): TOML reads an unquoted dotted key that way, and so does
``--set sweep.membrane.scale.g_Na=[1,0.5]``; both spellings mean the same, and where a
key is given both ways the later one wins. Every value is checked by applying it, on its own, to the case without the
sweep; an invalid key or value is reported with the loader's own message, so a
misspelt key gets its suggestion. A combination that is invalid only together (a
``dx`` longer than a swept ``length``, in either mode) is recorded as a failed point
instead, and the other points run.
"""

from __future__ import annotations

import copy
from cable.suggest import did_you_mean
from dataclasses import dataclass, field

import numpy as np

from cable import units
from cable.case.load import CaseError, from_dict, set_key
from cable.case.sections import Section
from cable.case.names import canonical_key
from cable.io import schema

MODES = ("grid", "zip")
RANGE_KEYS = ("start", "stop", "num", "log")

#: names a swept dimension may not take (dimensions and variables of the result)
RESERVED = {"beat", "level", "x", "t", "point", "status", "failure_reason", "sample_x",
            *schema.COORDS, *schema.VARIABLES}


@dataclass(frozen=True)
class Axis:
    """One swept case key.

    Attributes
    ----------
    key : str
        The dotted case key, e.g. ``membrane.scale.g_Na``.
    name : str
        The dimension (grid) or coordinate (zip) name in the result: the key's last part,
        made longer where two keys share it.
    values : tuple
        The values applied to the case, as written (numbers or strings with units).
    coord : numpy.ndarray
        Their labels: numbers in the key's canonical unit where it is known, else the
        values themselves.
    units : str or None
        Unit of ``coord`` (canonical unit of the key), None where unknown.
    """

    key: str
    name: str
    values: tuple
    coord: np.ndarray = field(compare=False)  # follows from key and values
    units: str | None = None


@dataclass(frozen=True)
class SweepSpec:
    """A validated ``[sweep]`` section: the axes and how they combine."""

    axes: tuple[Axis, ...]
    mode: str = "grid"

    @property
    def shape(self) -> tuple[int, ...]:
        """Shape of the result over the swept dimensions."""
        if self.mode == "zip":
            return (len(self.axes[0].values),)
        return tuple(len(a.values) for a in self.axes)

    @property
    def dims(self) -> tuple[str, ...]:
        """Swept dimensions of the result: the axis names (grid) or ``("point",)`` (zip)."""
        return ("point",) if self.mode == "zip" else tuple(a.name for a in self.axes)

    def __len__(self) -> int:
        return int(np.prod(self.shape))

    def overrides(self, index: int) -> dict:
        """``{case key: value}`` of point ``index`` (flat, C order: last key fastest)."""
        if self.mode == "zip":
            return {a.key: a.values[index] for a in self.axes}
        where = np.unravel_index(index, self.shape)
        return {a.key: a.values[int(k)] for a, k in zip(self.axes, where)}

    def labels(self, index: int) -> dict:
        """``{axis name: coordinate label}`` of point ``index``."""
        if self.mode == "zip":
            return {a.name: a.coord[index] for a in self.axes}
        where = np.unravel_index(index, self.shape)
        return {a.name: a.coord[int(k)] for a, k in zip(self.axes, where)}

    def points(self) -> list[dict]:
        """The overrides of every point, in order."""
        return [self.overrides(k) for k in range(len(self))]


# ----------------------------------------------------------------------------- reading
_nearest = did_you_mean


def base_raw(raw: dict) -> dict:
    """A copy of a raw case without its ``[sweep]`` section (the case every point starts from)."""
    out = copy.deepcopy(raw)
    out.pop("sweep", None)
    return out


def point_raw(raw: dict, overrides: dict) -> dict:
    """The raw case of one point: the case without ``[sweep]``, with ``overrides`` applied."""
    out = base_raw(raw)
    for key, value in overrides.items():
        set_key(out, key, value)
    return out


def _flatten(table: dict, prefix: str, out: dict) -> None:
    for key, value in table.items():
        dotted = f"{prefix}.{key}" if prefix else str(key)
        if isinstance(value, dict) and not _is_range(dotted, value):
            _flatten(value, dotted, out)
            continue
        out[dotted] = value  # spelt twice (quoted and nested, e.g. by --set): the later one wins


def _is_range(dotted: str, table: dict) -> bool:
    """Whether a table under [sweep] is a range (else it is a nested table of keys)."""
    if not table:
        raise CaseError(f"sweep.{dotted} is an empty table; give a list of values or a range {{start, stop, num}}.")
    if any(isinstance(v, (dict, list)) for v in table.values()):
        return False
    if any(k in ("start", "stop", "num") for k in table):
        return True
    first = next(iter(table), None)
    raise CaseError(f"sweep.{dotted}.{first} = {table.get(first)!r}: a swept key needs a list of values "
                    f"or a range {{start, stop, num}}, not a single value.")


def _range_values(key: str, table: dict, quantity: str | None) -> list:
    """The values of a range; ends with units are converted to the key's canonical unit."""
    where = f"sweep.{key}"
    for name in table:
        if name not in RANGE_KEYS:
            raise CaseError(f"{where}: unknown range key '{name}'.{_nearest(name, RANGE_KEYS)} "
                            f"A range is {{start, stop, num}} with optional log = true.")
    missing = [k for k in ("start", "stop", "num") if k not in table]
    if missing:
        raise CaseError(f"{where} = {table!r}: a range needs start, stop and num; missing {', '.join(missing)}.")
    num, log = table["num"], table.get("log", False)
    if isinstance(num, bool) or not isinstance(num, int) or num < 1:
        raise CaseError(f"{where}.num = {num!r}: must be a whole number of at least 1.")
    if not isinstance(log, bool):
        raise CaseError(f"{where}.log = {log!r}: must be true or false.")
    if quantity is not None:
        start = _canonical(f"{where}.start", table["start"], quantity)
        stop = _canonical(f"{where}.stop", table["stop"], quantity)
        unit = None
    else:
        start, unit = _magnitude(f"{where}.start", table["start"], None)
        stop, _ = _magnitude(f"{where}.stop", table["stop"], unit)
    if log and not (start > 0 and stop > 0):
        raise CaseError(f"{where}: a log range needs start and stop greater than 0, got {table['start']!r} "
                        f"and {table['stop']!r}.")
    grid = np.geomspace(start, stop, num) if log else np.linspace(start, stop, num)
    if num > 1:  # exact ends, whatever the rounding of the spacing
        grid[0], grid[-1] = start, stop
    return [float(v) if unit is None else f"{float(v)!r} {unit}" for v in grid]


def _canonical(where: str, value, quantity: str) -> float:
    try:
        return units.to_canonical(value, quantity)
    except units.UnitError as exc:
        raise CaseError(f"{where} = {value!r}: {exc}. Give a number in {units.CANONICAL[quantity]} "
                        f"or a string with a unit.") from None


def _magnitude(where: str, value, unit):
    """A range end as (number, unit or None); ``unit`` given: converted to it."""
    if isinstance(value, bool) or not isinstance(value, (int, float, str)):
        raise CaseError(f"{where} = {value!r}: must be a number or a string with a unit.")
    if isinstance(value, str):
        try:
            q = units.parse(value)
        except units.UnitError:
            raise CaseError(f"{where} = {value!r}: cannot be read as a quantity (e.g. \"100 um\").") from None
        if unit is None:
            return float(q.magnitude), str(q.units)
        try:
            return float(q.to(unit).magnitude), unit
        except Exception:
            raise CaseError(f"{where} = {value!r}: its unit cannot be converted to the start's unit, {unit}.") from None
    if unit is not None:
        raise CaseError(f"{where} = {value!r}: give it with a unit like the start ({unit}).")
    return float(value), None


def _axis_names(keys: list[str]) -> list[str]:
    """Dimension names: each key's last part, lengthened until names are unique and free."""
    parts = [k.split(".") for k in keys]

    def name(p, depth):
        while depth < len(p) and p[-depth].isdigit():
            depth += 1  # never end a name on a bare index: "stimulus_0_x", not "0_x"
        return "_".join(p[-depth:]), depth

    depths = [1] * len(keys)
    while True:
        names = [name(p, d) for p, d in zip(parts, depths)]
        clash = False
        for i, (nm, d) in enumerate(names):
            others = [n for j, (n, _) in enumerate(names) if j != i]
            if (nm in others or nm in RESERVED) and d < len(parts[i]):
                depths[i] = d + 1
                clash = True
        if not clash:
            return [n for n, _ in names]


def _quantity_of(key: str, case) -> str | None:
    """The quantity kind of a case key where the schema or the model knows it."""
    from cable.case.key_units import unit_of

    return unit_of(key, case).quantity


def _coordinate(key: str, values: list, case) -> tuple[np.ndarray, str | None]:
    quantity = _quantity_of(key, case)
    if quantity is not None:
        try:
            coord = np.array([units.to_canonical(v, quantity) for v in values], dtype=float)
        except units.UnitError:
            coord = None
        if coord is not None:
            return coord, units.CANONICAL[quantity]
    if all(isinstance(v, bool) for v in values):
        return np.array(values, dtype=np.int8), None
    if all(isinstance(v, (int, float)) and not isinstance(v, bool) for v in values):
        return np.array(values), None
    return np.array([str(v) for v in values], dtype=object), None


def _repeated(values, coord):
    """A value whose label repeats another's (numbers: to 1e-12 relative), or None."""
    if coord.dtype.kind in "fi":
        order = np.argsort(coord, kind="stable")
        c = coord[order].astype(float)
        same = np.abs(np.diff(c)) <= 1e-12 * np.maximum(np.abs(c[1:]), np.abs(c[:-1]))
        return values[int(order[int(np.argmax(same))])] if same.any() else None
    seen = set()
    for v, c in zip(values, coord):
        if c in seen:
            return v
        seen.add(c)
    return None


def read_sweep(table, case) -> SweepSpec:
    """Validate a raw ``[sweep]`` table against ``case`` (the case it belongs to).

    Parameters
    ----------
    table : dict
        The ``[sweep]`` section as read from TOML.
    case : Case
        The case being loaded (its ``raw`` still holds the section).

    Returns
    -------
    SweepSpec

    Raises
    ------
    CaseError
        Naming the swept key, the value and what is allowed.
    """
    if not isinstance(table, dict):
        raise CaseError(f"[sweep] must be a table of case keys, got {table!r}.")
    table = dict(table)
    mode = table.pop("mode", "grid")
    if mode not in MODES:
        raise CaseError(f"sweep.mode = {mode!r}: allowed values are 'grid', 'zip'.{_nearest(mode, MODES)}")
    flat: dict = {}
    _flatten(table, "", flat)
    if not flat:
        raise CaseError("[sweep] names no case key; add one, e.g. \"membrane.scale.g_Na\" = [1.0, 0.5].")
    keys, lists = [], []
    for key, value in flat.items():
        if key.split(".")[0] == "sweep":
            raise CaseError(f"sweep: key '{key}' sweeps the sweep itself; name a case key.")
        key = canonical_key(key, case.raw)  # fibre.dx, stimulus.0.start: the loader's spelling
        if isinstance(value, dict):
            values = _range_values(key, value, _quantity_of(key, case))
        elif isinstance(value, list):
            values = list(value)
        else:
            raise CaseError(f"sweep.{key} = {value!r}: give a list of values or a range {{start, stop, num}}.")
        if not values:
            raise CaseError(f"sweep.{key} = []: give at least one value.")
        if any(isinstance(v, (dict, list)) for v in values):
            raise CaseError(f"sweep.{key} = {value!r}: each value must be a number, a string or a boolean.")
        keys.append(key)
        lists.append(values)
    if mode == "zip" and len({len(v) for v in lists}) > 1:
        sizes = ", ".join(f"{k} ({len(v)})" for k, v in zip(keys, lists))
        raise CaseError(f"sweep.mode = \"zip\" pairs the lists entry by entry, but their lengths differ: {sizes}.")
    base = base_raw(case.raw)
    _check_values(base, keys, lists)
    names = _axis_names(keys)
    axes = []
    for key, name, values in zip(keys, names, lists):
        coord, unit = _coordinate(key, values, case)
        twice = _repeated(values, coord) if mode == "grid" else None
        if twice is not None:
            raise CaseError(f"sweep.{key} = {values!r}: {twice!r} is given twice; each value labels one row of "
                            f"the result (use mode = \"zip\" to repeat values).")
        axes.append(Axis(key=key, name=name, values=tuple(values), coord=coord, units=unit))
    return SweepSpec(axes=tuple(axes), mode=mode)


def _check_values(base: dict, keys: list, lists: list) -> None:
    """Apply each distinct value of each key, alone, to the base case."""
    trials = []
    for key, values in zip(keys, lists):
        seen = set()
        for v in values:
            if repr(v) not in seen:
                seen.add(repr(v))
                trials.append({key: v})
    for over in trials:
        raw = copy.deepcopy(base)
        try:
            for key, value in over.items():
                set_key(raw, key, value)
            from_dict(raw)
        except CaseError as exc:
            shown = ", ".join(f"{k} = {v!r}" for k, v in over.items())
            text = str(exc)
            # the loader's message usually names the key and value already: do not say them twice
            head = "" if text.startswith(shown) else f"{shown}: "
            raise CaseError(f"[sweep] {head}{text} (each swept value must give a valid case on its own)") from None


def _validate(table, case):
    return read_sweep(table, case)


#: the [sweep] section, as the loader reads it (see cable.case.sections)
SECTION = Section("sweep", is_list=False, validate=_validate)

