"""Checking one value or one table of a case against its schema: the helpers of every section.

The loader uses these for its own sections, and the modules that own a section of their
own (:mod:`cable.regions`, :mod:`cable.drugs`, :mod:`cable.electrodes`,
:mod:`cable.sweep.spec`) for theirs, so that every value of a case is converted once,
here, to the canonical units of :mod:`cable.units`, with the same messages.
"""

from __future__ import annotations

import math
from dataclasses import replace

from cable import units
from cable.case.schema import Key
from cable.case.validated import CaseError
from cable.suggest import did_you_mean

__all__ = ["Key", "convert", "param_value", "read_section", "resolve_name", "resolved_table", "nearest", "allowed_keys"]

nearest = did_you_mean


def allowed_keys(candidates) -> str:
    return ", ".join(sorted(candidates))


def _fmt(value) -> str:
    return repr(value)


def convert(where: str, value, spec: Key):
    """Validate and convert one value against its :class:`Key` spec."""
    kind = spec.kind
    if kind == "quantity":
        try:
            out = units.to_canonical(value, spec.quantity)
        except units.UnitError as exc:
            raise CaseError(f"{where} = {_fmt(value)}: {exc}. Give a number in "
                            f"{units.CANONICAL[spec.quantity]} or a string with a unit.") from None
        if not math.isfinite(out):
            raise CaseError(f"{where} = {_fmt(value)}: must be a finite number.")
        _check_range(where, value, out, spec)
        return out
    if kind == "int":
        if isinstance(value, bool) or not isinstance(value, int):
            if isinstance(value, float) and value.is_integer():
                value = int(value)
            else:
                raise CaseError(f"{where} = {_fmt(value)}: must be a whole number.")
        _check_range(where, value, value, spec)
        return value
    if kind == "bool":
        if not isinstance(value, bool):
            raise CaseError(f"{where} = {_fmt(value)}: must be true or false.")
        return value
    if kind == "str":
        if not isinstance(value, str):
            raise CaseError(f"{where} = {_fmt(value)}: must be a string.")
        return value
    if kind == "choice":
        if value not in spec.choices:
            raise CaseError(f"{where} = {_fmt(value)}: allowed values are "
                            f"{', '.join(repr(c) for c in spec.choices)}.{nearest(value, spec.choices)}")
        return value
    if kind == "list_str":
        if isinstance(value, str):
            value = [value]
        if not isinstance(value, (list, tuple)) or not all(isinstance(v, str) for v in value):
            raise CaseError(f"{where} = {_fmt(value)}: must be a list of names.")
        return tuple(value)
    if kind == "list_quantity":
        if not isinstance(value, (list, tuple)) or not value:
            raise CaseError(f"{where} = {_fmt(value)}: must be a non-empty list.")
        item = replace(spec, kind="quantity")
        return tuple(convert(f"{where}[{k}]", v, item) for k, v in enumerate(value))
    if kind == "table":
        if not isinstance(value, dict):
            raise CaseError(f"{where} = {_fmt(value)}: must be a table.")
        return value
    raise AssertionError(kind)


def _check_range(where, given, value, spec: Key):
    lo, hi = spec.minimum, spec.maximum
    unit = units.CANONICAL.get(spec.quantity, "")
    unit = "" if unit == "1" else f" {unit}"
    if lo is not None:
        if spec.exclusive_minimum and not value > lo:
            raise CaseError(f"{where} = {_fmt(given)}: must be greater than {lo:g}{unit}.")
        if not value >= lo:
            raise CaseError(f"{where} = {_fmt(given)}: must be at least {lo:g}{unit}.")
    if hi is not None and not value <= hi:
        raise CaseError(f"{where} = {_fmt(given)}: must be at most {hi:g}{unit}.")


def read_section(name: str, table, specs: dict[str, Key]) -> dict:
    if not isinstance(table, dict):
        raise CaseError(f"[{name}] must be a table of keys, got {_fmt(table)}.")
    out = {}
    for key in table:
        if key not in specs:
            raise CaseError(f"unknown key '{name}.{key}'.{nearest(key, specs)} "
                            f"Keys of [{name}]: {allowed_keys(specs)}.")
    for key, spec in specs.items():
        if key in table:
            out[key] = convert(f"{name}.{key}", table[key], spec)
        elif spec.required:
            raise CaseError(f"missing key '{name}.{key}' ({spec.meaning}).")
        else:
            out[key] = spec.default
    return out


def param_value(where, value, par):
    if par.choices is not None:
        if value not in par.choices:
            raise CaseError(f"{where} = {_fmt(value)}: allowed values are "
                            f"{', '.join(repr(c) for c in par.choices)}.{nearest(value, par.choices)}")
        return value
    # converted to the parameter's own declared unit (the model's internal one), so that a
    # value written in the unit `cable models` lists is accepted whatever its quantity kind
    unit = par.units if par.units not in ("", "1") else "1"
    try:
        out = units.to_unit(value, unit, par.quantity)
    except units.UnitError as exc:
        raise CaseError(f"{where} = {_fmt(value)}: {exc}. Give a number in {unit} or a string with a unit.") from None
    if not math.isfinite(out):
        raise CaseError(f"{where} = {_fmt(value)}: must be a finite number.")
    if par.minimum is not None and not out >= par.minimum:
        raise CaseError(f"{where} = {_fmt(value)}: must be at least {par.minimum:g} {unit}.")
    if par.maximum is not None and not out <= par.maximum:
        raise CaseError(f"{where} = {_fmt(value)}: must be at most {par.maximum:g} {unit}.")
    return out


_KINDS = {"conductance": ("a scalable conductance", "Scalable", "conductances"),
          "parameter": ("a parameter", "Parameters", "parameter_names"),
          "state": ("a state", "States", "state_names")}


def resolve_name(model, name, kind: str, where: str, notes: list | None = None) -> str:
    """The model's name for a conductance, parameter or state as a case writes it.

    Accepts what :meth:`cable.membrane.base.MembraneModel.resolve` accepts (``g_Na`` for
    ``G_Na``; an earlier name, whose note is appended to ``notes``); anything else is a
    CaseError naming ``where``, with the nearest name and the list of valid ones.
    """
    found, note = model.resolve(name, kind)
    if found is None:
        what, label, attr = _KINDS[kind]
        valid = getattr(model, attr)
        raise CaseError(f"{where}: '{name}' is not {what} of '{model.name}'.{nearest(name, valid)} "
                        f"{label}: {', '.join(valid) or '(none)'}.")
    if note and notes is not None and note not in notes:
        notes.append(note)
    return found


def resolved_table(table: dict, model, kind: str, section: str, notes=None) -> dict:
    """``{model's name: value}`` of a table keyed by names; a name given twice is refused."""
    out, given = {}, {}
    for name, value in table.items():
        found = resolve_name(model, name, kind, f"{section}.{name}", notes)
        if found in given:
            raise CaseError(f"{section}: '{given[found]}' and '{name}' both name {model.name}'s '{found}'; "
                            f"give it once.")
        given[found] = name
        out[found] = value
    return out
