"""Build a :class:`cable.membrane.base.MembraneModel` from a model's equations.

:func:`build_model` parses and analyses a description, writes the generated module
(:mod:`cable.membrane.equations.codegen`) into the cache folder under a name made from
the hash of its text, imports it and wraps its kernels. The folder is
``$CABLE_CACHE_DIR/generated`` or ``~/.cache/cable/generated``; numba keeps the compiled
kernels beside the module (``cache=True``), so a second run compiles nothing.
:func:`load_cached` imports a module already written (the CellML import uses it to skip
libcellml and sympy when the file has not changed).
"""

from __future__ import annotations

import hashlib
import importlib.util
import inspect
import json
import os
import sys
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import sympy

from cable.membrane.base import FastPath, MembraneModel, Parameter, State
from cable.membrane.equations import analysis, codegen, fastpath
from cable.membrane.equations.description import Equations, EqParameter, EqState, parse


@dataclass(frozen=True)
class GeneratedModel(MembraneModel):
    """A model generated from equations: the contract plus what ``cable models`` shows.

    Attributes
    ----------
    integration : tuple of str
        Per state: ``"rush-larsen"`` (derivative linear in the state) or ``"forward-euler"``.
    notes : tuple of str
        What an import recognised or decided.
    capacitance : float or None
        The model's own membrane capacitance [uF/cm^2], used when the case gives none.
    equations : str
        The description as JSON (:func:`equations_from_json`), for export.
    """

    integration: tuple[str, ...] = ()
    notes: tuple[str, ...] = ()
    capacitance: float | None = None
    equations: str = ""


def cache_dir() -> Path:
    """The folder holding generated modules."""
    root = os.environ.get("CABLE_CACHE_DIR")
    base = Path(root) if root else Path.home() / ".cache" / "cable"
    return base / "generated"


def _compiler_hash() -> str:
    h = hashlib.sha256()
    for mod in (analysis, codegen, fastpath, sys.modules[__name__]):
        h.update(inspect.getsource(mod).encode())
    return h.hexdigest()[:12]


def equations_to_json(eq: Equations) -> str:
    """The description with its expressions as text (sympy's own notation)."""
    parsed = parse(eq)
    inter = parsed.intermediates

    def text(e):
        return sympy.srepr(e)

    return json.dumps({
        "name": eq.name, "citation": eq.citation, "summary": eq.summary,
        "resting_potential": eq.resting_potential, "current_basis": eq.current_basis,
        "threshold": eq.threshold, "temperature_parameter": eq.temperature_parameter,
        "capacitance": eq.capacitance, "notes": list(eq.notes), "current_states": eq.current_states,
        "states": [vars(s) for s in eq.states], "parameters": [vars(p) for p in eq.parameters],
        "intermediates": [[n, text(inter[n])] for n, _ in eq.intermediates],
        "derivatives": [[n, text(parsed.derivatives[n])] for n, _ in eq.derivatives],
        "currents": [[n, text(parsed.currents[n])] for n, _ in eq.currents],
    })


def equations_from_json(text: str) -> Equations:
    """Inverse of :func:`equations_to_json` (expressions come back as sympy objects)."""
    d = json.loads(text)

    def expr(t):
        return sympy.sympify(t)  # srepr text: exact, symbols included

    return Equations(
        name=d["name"], citation=d["citation"], summary=d["summary"],
        resting_potential=d["resting_potential"],
        states=tuple(EqState(**s) for s in d["states"]),
        parameters=tuple(EqParameter(**p) for p in d["parameters"]),
        intermediates=tuple((n, expr(e)) for n, e in d["intermediates"]),
        derivatives=tuple((n, expr(e)) for n, e in d["derivatives"]),
        currents=tuple((n, expr(e)) for n, e in d["currents"]),
        current_basis=d["current_basis"], threshold=d["threshold"],
        temperature_parameter=d["temperature_parameter"], capacitance=d["capacitance"],
        notes=tuple(d["notes"]), current_states=d.get("current_states", "gates"))


def generate_source(eq: Equations) -> str:
    """The generated module's text for ``eq``."""
    an = analysis.analyse(parse(eq))
    info = {
        "equations": equations_to_json(eq),
        "integration": ["rush-larsen" if an.linear[s.name] is not None else "forward-euler"
                        for s in eq.states],
        "compiler": _compiler_hash(),
    }
    return codegen.module_source(an, info)


def _import(path: Path):
    name = f"cable_generated_{path.stem}"
    if name in sys.modules:
        return sys.modules[name]
    spec = importlib.util.spec_from_file_location(name, path)
    module = importlib.util.module_from_spec(spec)
    sys.modules[name] = module  # before running it: numba and inspect look it up by name
    try:
        spec.loader.exec_module(module)
    except BaseException:
        del sys.modules[name]
        raise
    return module


def write_module(source: str) -> Path:
    """Write ``source`` into the cache folder (once per content) and return its path."""
    folder = cache_dir()
    folder.mkdir(parents=True, exist_ok=True)
    digest = hashlib.sha256(source.encode()).hexdigest()[:20]
    path = folder / f"m{digest}.py"
    if not path.is_file():
        tmp = path.with_suffix(f".{os.getpid()}.tmp")
        tmp.write_text(source, encoding="utf-8")
        os.replace(tmp, path)  # atomic: parallel workers never read half a file
    return path


def model_from_module(module, name: str | None = None) -> GeneratedModel:
    """The model a generated module describes."""
    info = module.INFO
    eq = json.loads(info["equations"])
    states = tuple(State(s["name"], float(s["initial"]), s["units"], s["meaning"]) for s in eq["states"])
    params = tuple(Parameter(p["name"], float(p["default"]), p["units"], p["meaning"], p["quantity"],
                             minimum=p["minimum"], maximum=p["maximum"]) for p in eq["parameters"])
    point = module.point

    def reference(v, s, p):
        v = np.asarray(v, dtype=float)
        ds = np.empty((v.shape[0], len(states)))
        ion = np.empty(v.shape[0])
        with np.errstate(all="ignore"):
            for i in range(v.shape[0]):
                d, ion[i] = point(v[i], s[i], p[i])
                ds[i] = d
        return None, ds, ion

    return GeneratedModel(
        name=name or eq["name"], citation=eq["citation"], summary=eq["summary"],
        resting_potential=float(eq["resting_potential"]), states=states, parameters=params,
        conductances=tuple(p["name"] for p in eq["parameters"] if p["scalable"]),
        current_basis=eq["current_basis"], threshold=float(eq["threshold"]),
        reaction=module.reaction, reference=reference, currents=module.currents,
        current_names=tuple(n for n, _ in eq["currents"]),
        temperature_parameter=eq["temperature_parameter"],
        fast=FastPath(kernel=module.reaction_fast, build_table=module.build_table,
                      table_parameters=tuple(module.TABLE_PARAMETERS), v_lo=-150.0, v_hi=100.0, dv=0.05,
                      by_state=getattr(module, "FAST_BY_STATE", False)),
        integration=tuple(info["integration"]), notes=tuple(eq["notes"]),
        capacitance=eq["capacitance"], equations=info["equations"])


def build_model(eq: Equations, name: str | None = None) -> GeneratedModel:
    """Generate, cache and load the model described by ``eq``.

    Parameters
    ----------
    eq : Equations
    name : str, optional
        The registry name (default ``eq.name``).

    Raises
    ------
    cable.membrane.equations.errors.EquationError
        A description that cannot be compiled (unknown names, an algebraic loop...).
    """
    path = write_module(generate_source(eq))
    return model_from_module(_import(path), name)


def load_cached(key: str):
    """The generated module stored under ``key`` (see :func:`store_keyed`), or None."""
    link = cache_dir() / f"k{key}.txt"
    if not link.is_file():
        return None
    path = cache_dir() / link.read_text().strip()
    if not path.is_file():
        return None
    module = _import(path)
    return module if module.INFO.get("compiler") == _compiler_hash() else None


def store_keyed(key: str, source: str):
    """Write ``source`` and remember it under ``key``; return the imported module."""
    path = write_module(source)
    link = cache_dir() / f"k{key}.txt"
    tmp = link.with_suffix(f".{os.getpid()}.tmp")
    tmp.write_text(path.name)
    os.replace(tmp, link)
    return _import(path)
