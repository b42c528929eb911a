"""The folder of generated model modules, and the model a generated module describes.

Nothing here imports sympy or libcellml: a process whose models are all in the cache
(the built-in models generated from their descriptions, a CellML file read before) loads
them with numpy and numba alone. A module is written once per content
(:func:`write_module`, named by the hash of its text) and may be filed under a key of its
inputs (:func:`store_keyed`): the hash of a CellML file's bytes or of a description
module's source, with :func:`compiler_hash`, so that a key that is found
(:func:`load_cached`) needs neither the description nor the compiler. The folder is
``$CABLE_CACHE_DIR/generated`` or ``~/.cache/cable/generated``; numba keeps the compiled
kernels beside each module (``cache=True``).
"""

from __future__ import annotations

import functools
import hashlib
import importlib.util
import json
import os
import sys
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from cable.membrane.base import FastPath, MembraneModel, Parameter, State

#: the compiler's modules: their sources make :func:`compiler_hash`
COMPILER = ("description", "analysis", "codegen", "fastpath", "blocks", "singular", "vecmath", "compile", "cache")


@dataclass(frozen=True, repr=False)  # the short repr of MembraneModel, not every field
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
        The description as JSON (``compile.equations_from_json``), for export.
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


@functools.lru_cache(maxsize=1)
def compiler_hash() -> str:
    """Hash of the compiler's sources (read as files, so that sympy is not imported)."""
    here = Path(__file__).parent
    h = hashlib.sha256()
    for name in COMPILER:
        h.update((here / f"{name}.py").read_bytes())
    return h.hexdigest()[:12]


def source_key(*parts: bytes) -> str:
    """The key of a generated module made from ``parts`` (file contents, options) and the compiler."""
    h = hashlib.sha256()
    for part in parts:
        h.update(hashlib.sha256(part).digest())
    h.update(compiler_hash().encode())
    return h.hexdigest()[:24]


def import_path(path: Path):
    """Import the generated module at ``path`` (once per process)."""
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


def load_cached(key: str):
    """The generated module stored under ``key`` (see :func:`store_keyed`), or None."""
    link = cache_dir() / f"k{key}.txt"
    if not link.is_file():
        return None
    path = cache_dir() / link.read_text().strip()
    if not path.is_file():
        return None
    module = import_path(path)
    return module if module.INFO.get("compiler") == compiler_hash() else None


def store_keyed(key: str, source: str):
    """Write ``source`` and remember it under ``key``; return the imported module."""
    path = write_module(source)
    link = cache_dir() / f"k{key}.txt"
    tmp = link.with_suffix(f".{os.getpid()}.tmp")
    tmp.write_text(path.name)
    os.replace(tmp, link)
    return import_path(path)


def _reference(point, nstate):
    def reference(v, s, p):
        v = np.asarray(v, dtype=float)
        ds = np.empty((v.shape[0], nstate))
        ion = np.empty(v.shape[0])
        with np.errstate(all="ignore"):
            for i in range(v.shape[0]):
                d, ion[i] = point(v[i], s[i], p[i])
                ds[i] = d
        return None, ds, ion

    return reference


def model_from_module(module, name: str | None = None) -> GeneratedModel:
    """The model a generated module describes."""
    info = module.INFO
    eq = json.loads(info["equations"])
    states = tuple(State(s["name"], float(s["initial"]), s["units"], s["meaning"]) for s in eq["states"])
    params = tuple(_parameter(p) for p in eq["parameters"])
    return GeneratedModel(
        name=name or eq["name"], citation=eq["citation"], summary=eq["summary"],
        resting_potential=float(eq["resting_potential"]), states=states, parameters=params,
        conductances=tuple(p["name"] for p in eq["parameters"] if p["scalable"]),
        current_basis=eq["current_basis"], threshold=float(eq["threshold"]),
        reaction=module.reaction, reference=_reference(module.point, len(states)), currents=module.currents,
        current_names=tuple(n for n, _ in eq["currents"]),
        temperature_parameter=eq["temperature_parameter"],
        fast=FastPath(kernel=module.reaction_fast, build_table=module.build_table,
                      table_parameters=tuple(module.TABLE_PARAMETERS), v_lo=-150.0, v_hi=100.0, dv=0.05,
                      by_state=getattr(module, "FAST_BY_STATE", False),
                      kinetics=getattr(module, "kinetics_fast", None)),
        kinetics=module.kinetics,
        integration=tuple(info["integration"]), notes=tuple(eq["notes"]),
        capacitance=eq["capacitance"], equations=info["equations"], old_names=dict(eq.get("old_names", {})))


def _parameter(p: dict) -> Parameter:
    """A model parameter from its JSON form (a labelled one keeps its label as default)."""
    choices = tuple(p["choices"]) if p.get("choices") is not None else None
    by_label = (p["by_label"][0], dict(p["by_label"][1])) if p.get("by_label") is not None else None
    default = p["default"] if choices is not None else float(p["default"])
    return Parameter(p["name"], default, p["units"], p["meaning"], p["quantity"], choices=choices,
                     minimum=p["minimum"], maximum=p["maximum"], by_label=by_label)
