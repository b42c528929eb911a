"""Regions of the fibre whose membrane or coupling differ: the ``[region.NAME]`` case tables.

A region is a named stretch ``[start, end]`` of the fibre with any of:

* ``scale``: factors on the model's scalable conductances (``g_Na = 0.2``), relative to
  the strand's value set by ``[membrane]`` (its ``parameters`` and ``scale``);
* ``parameters``: model parameters (``K_o = 12``), replacing the ``[membrane]`` value;
  a region giving both for one name applies the value, then the factor;
* ``coupling``: a factor on the conductivity inside the region (for a fibre of
  discrete cells, on the gap-junction conductance only: uncoupling); an edge between
  nodes of different coupling takes the harmonic mean of the two (series
  resistances), so the current is conserved across a border;
* ``border``: a width outside ``[start, end]`` over which the change ramps linearly
  back to the surrounding values, as the border zone of an ischaemic region does;
  ``border = 0`` (the default) is an abrupt change.

The weight of a region at position x is 1 inside ``[start, end]`` and falls linearly to
0 at a distance ``border`` outside it. Regions are applied in the order of the file and
each blends the values left by the earlier ones toward its own: **where regions overlap,
the later entry wins** (its weight-1 core takes its values exactly, its border blends
with whatever lies beneath). A labelled parameter (a cell type) cannot be blended: it
takes the region's label where the weight is at least one half.

The old list form ``[[region]]`` is read for one more release, its entries named R1,
R2, ... (see :mod:`cable.case.names`).

Example::

    [region.ischaemic]         # an ischaemic zone with a 1 mm border
    start = "8 mm"
    end = "12 mm"
    border = "1 mm"
    parameters = {K_o = 12}
    scale = {G_Na = 0.6}
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from cable.case.sections import Section
from cable.case.values import CaseError, Key, convert, param_value, read_section, resolved_table

#: the keys of one [region.NAME] table
REGION_KEYS = {
    "start": Key("quantity", "length", required=True, minimum=0.0, meaning="left end of the region [cm]"),
    "end": Key("quantity", "length", required=True, minimum=0.0, meaning="right end of the region [cm]"),
    "scale": Key("table", meaning="factor per scalable conductance inside the region, e.g. g_Na = 0.2"),
    "parameters": Key("table", meaning="value per model parameter inside the region, e.g. K_o = 12"),
    "coupling": Key("quantity", minimum=0.0, exclusive_minimum=True,
                    meaning="factor (> 0) on the conductivity inside the region (discrete cells: on the "
                            "gap junctions)"),
    "border": Key("quantity", "length", default=0.0, minimum=0.0,
                  meaning="width of the linear ramp outside [start, end] [cm]; 0 = abrupt"),
}

#: positions within this fraction of dx of a region end count as inside (rounding)
EDGE_TOLERANCE = 1e-9


@dataclass(frozen=True)
class Region:
    """One validated region (canonical units; parameter values already encoded)."""

    start: float
    end: float
    border: float = 0.0
    scale: dict = field(default_factory=dict)
    parameters: dict = field(default_factory=dict)
    coupling: float | None = None
    name: str = ""

    def weight(self, x: np.ndarray) -> np.ndarray:
        """Weight of the region at positions ``x`` [cm]: 1 inside, linear ramp over the border, else 0."""
        x = np.asarray(x, dtype=float)
        tol = EDGE_TOLERANCE * max(1.0, float(np.max(np.abs(x))) if x.size else 1.0)
        dist = np.maximum(self.start - x, 0.0) + np.maximum(x - self.end, 0.0)
        dist = np.where(dist <= tol, 0.0, dist)
        if self.border > 0.0:
            return np.clip(1.0 - dist / self.border, 0.0, 1.0)
        return (dist == 0.0).astype(float)


def validate(raw, case) -> tuple[Region, ...]:
    """Validate the ``[region.NAME]`` tables of a case (the loader's validator of :data:`SECTION`).

    Parameters
    ----------
    raw : dict
        The section as read from TOML, in the loader's spelling (named tables; the old
        list form is renamed by :func:`cable.case.names.canonical_raw`).
    case : Case
        The case validated so far (its fibre and membrane model).

    Returns
    -------
    tuple of Region

    Raises
    ------
    CaseError
        Naming the entry and key, the value, what is allowed and the nearest valid name.
    """
    from cable.fiber import node_positions
    from cable.membrane import get_model

    if not isinstance(raw, dict) or not all(isinstance(r, dict) for r in raw.values()):
        raise CaseError("[region] must hold named tables of keys, e.g. [region.zone] with start, end and scale.")
    if raw and case.fiber is None:
        raise CaseError("[region.NAME] needs a [fiber]: a single cell has no regions (use [membrane] "
                        "scale/parameters).")
    model = get_model(case.membrane.model)
    length = case.fiber.length if case.fiber is not None else 0.0
    x = node_positions(case.fiber) if case.fiber is not None else np.zeros(0)
    out = []
    for k, table in raw.items():
        where = f"region.{k}"
        r = read_section(where, table, REGION_KEYS)
        tol = EDGE_TOLERANCE * max(1.0, length)
        if r["end"] > length + tol:
            raise CaseError(f"{where}.end = {table['end']!r}: lies outside the fibre (0 to {length:g} cm).")
        if not r["start"] < r["end"]:
            raise CaseError(f"{where}: start = {table['start']!r} must be less than end = {table['end']!r}.")
        scale = {name: convert(f"{where}.scale.{name}", value, Key("quantity", minimum=0.0)) for name, value
                 in resolved_table(r["scale"] or {}, model, "conductance", f"{where}.scale").items()}
        params = {}
        for name, value in resolved_table(r["parameters"] or {}, model, "parameter", f"{where}.parameters").items():
            par = model.parameter(name)
            params[name] = par.encode(param_value(f"{where}.parameters.{name}", value, par))
        if not scale and not params and r["coupling"] is None:
            raise CaseError(f"{where} changes nothing: give scale (e.g. {{{model.conductances[0]} = 0.5}}), "
                            f"parameters or coupling.")
        region = Region(start=r["start"], end=r["end"], border=r["border"], scale=scale, parameters=params,
                        coupling=r["coupling"], name=str(k))
        if x.size and not np.any(region.weight(x) > 0.0):
            raise CaseError(f"{where}: {r['start']:g} to {r['end']:g} cm holds no node at fiber.dx = "
                            f"{case.fiber.dx:g} cm; widen the region, give it a border, or refine dx.")
        out.append(region)
    return tuple(out)


def regions_of(case) -> tuple[Region, ...]:
    """The validated regions of a case (empty when it has none)."""
    return tuple(case.extra.get("region", ()))


def apply_regions(p: np.ndarray, x: np.ndarray, regions, model, given=(), scale=None) -> np.ndarray:
    """Per-node parameters with the regions applied (later regions win where they overlap).

    Parameters
    ----------
    p : ndarray, shape (n, nparam)
        Parameters of every node as set by ``[membrane]`` (not modified).
    x : ndarray, shape (n,)
        Node positions [cm].
    regions : sequence of Region
    model : MembraneModel
    given : collection of str
        Parameters ``[membrane]`` sets explicitly; the others whose default depends on a
        label (:attr:`cable.membrane.base.Parameter.by_label`) follow a region's label.
    scale : dict, optional
        ``[membrane.scale]``, applied to those label-dependent defaults.

    Returns
    -------
    ndarray, shape (n, nparam)
    """
    out = np.array(p, dtype=np.float64, copy=True)
    base = np.array(p, dtype=np.float64)
    names = model.parameter_names
    scale = scale or {}
    for region in regions:
        w = region.weight(x)
        touched = set(region.parameters) | set(region.scale)
        typed = {}  # label-dependent defaults for the region's own label (G_to of an endo zone)
        if any(model.parameter(n).choices is not None for n in region.parameters):
            row = base[:1].copy()
            for name, value in region.parameters.items():
                row[0, names.index(name)] = value
            model.fill_labelled_defaults(row, given=set(given) | set(region.parameters))
            typed = {par.name: row[0, j] * scale.get(par.name, 1.0) for j, par in enumerate(model.parameters)
                     if par.by_label is not None and par.name not in given and par.name not in region.parameters}
            touched |= set(typed)
        for name in touched:
            j = names.index(name)
            if name in region.parameters:
                target = np.full(x.size, region.parameters[name])
            elif name in typed:
                target = np.full(x.size, typed[name])
            else:
                target = base[:, j].copy()
            target = target * region.scale.get(name, 1.0)
            if model.parameter(name).choices is not None:
                out[:, j] = np.where(w >= 0.5, target, out[:, j])
            else:
                out[:, j] = out[:, j] + w * (target - out[:, j])
    return out


def coupling_factors(x: np.ndarray, regions) -> np.ndarray | None:
    """Per-node factor on the conductivity, or None when no region changes the coupling."""
    if not any(r.coupling is not None for r in regions):
        return None
    f = np.ones(x.size)
    for region in regions:
        if region.coupling is not None:
            f = f + region.weight(x) * (region.coupling - f)
    return f


def node_fields(case, model, x: np.ndarray, p: np.ndarray) -> tuple[np.ndarray, np.ndarray | None]:
    """Parameters per node and coupling factor per node of a case's strand.

    Parameters
    ----------
    case : Case
    model : MembraneModel
    x : ndarray
        Node positions [cm].
    p : ndarray, shape (n, nparam)
        Parameters as set by ``[membrane]``.

    Returns
    -------
    p : ndarray, shape (n, nparam)
    coupling : ndarray, shape (n,), or None
        Factor on the conductivity at each node (None: uniform).
    """
    regions = regions_of(case)
    if not regions:
        return p, None
    return (apply_regions(p, x, regions, model, given=case.membrane.parameters, scale=case.membrane.scale),
            coupling_factors(x, regions))


#: the [region.NAME] section, as the loader reads it (see cable.case.sections)
SECTION = Section("region", is_list=False, validate=validate, keys=REGION_KEYS)
