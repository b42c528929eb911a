"""Build a :class:`cable.membrane.base.MembraneModel` from a model's equations.

:func:`build_model` parses and analyses a description, writes the generated module
(:mod:`cable.membrane.equations.codegen`) into the cache folder under a name made from
the hash of its text, imports it and wraps its kernels. The folder is
``$CABLE_CACHE_DIR/generated`` or ``~/.cache/cable/generated``; numba keeps the compiled
kernels beside the module (``cache=True``), so a second run compiles nothing.
:func:`cable.membrane.equations.cache.load_cached` imports a module already written (the CellML import uses it to skip
libcellml and sympy when the file has not changed).
"""

from __future__ import annotations

import json

import sympy

from cable.membrane.equations import analysis, cache, codegen
from cable.membrane.equations.cache import GeneratedModel, model_from_module, write_module
from cable.membrane.equations.description import Equations, EqParameter, EqState, parse


def _compiler_hash() -> str:
    return cache.compiler_hash()


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
        "euler_order": eq.euler_order, "buffers": [list(b) for b in eq.buffers], "old_names": dict(eq.old_names),
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
        parameters=tuple(_parameter(p) for p in d["parameters"]),
        intermediates=tuple((n, expr(e)) for n, e in d["intermediates"]),
        derivatives=tuple((n, expr(e)) for n, e in d["derivatives"]),
        currents=tuple((n, expr(e)) for n, e in d["currents"]),
        current_basis=d["current_basis"], threshold=d["threshold"],
        temperature_parameter=d["temperature_parameter"], capacitance=d["capacitance"],
        notes=tuple(d["notes"]), current_states=d.get("current_states", "gates"),
        euler_order=d.get("euler_order", "start"), buffers=tuple(tuple(b) for b in d.get("buffers", ())),
        old_names=d.get("old_names", {}))


def _parameter(d: dict) -> EqParameter:
    """An EqParameter from its JSON form (lists back to tuples)."""
    d = dict(d)
    if d.get("choices") is not None:
        d["choices"] = tuple(d["choices"])
    if d.get("by_label") is not None:
        d["by_label"] = (d["by_label"][0], dict(d["by_label"][1]))
    return EqParameter(**d)


def generate_source(eq: Equations) -> str:
    """The generated module's text for ``eq``."""
    an = analysis.analyse(parse(eq))
    info = {
        "equations": equations_to_json(eq),
        "integration": [an.integration(s.name) for s in eq.states],
        "compiler": _compiler_hash(),
    }
    return codegen.module_source(an, info)


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
    return model_from_module(cache.import_path(path), name)
