"""Membrane models, registered by name.

A model is one file: a module of this package that defines ``MODEL`` (a
:class:`cable.membrane.base.MembraneModel`, written by hand), or a description in
``cable/membrane/equations/`` that defines ``EQUATIONS`` (an
:class:`cable.membrane.equations.Equations`; its kernels are generated and cached, see
:func:`cable.membrane.equations.registry.load_description`). The registry name is the
module name with ``_`` written as ``-`` (``luo_rudy_1991.py`` -> ``luo-rudy-1991``); where a
name has both, the hand-written module is the model (its description stays reachable as
``equations:MODULE``). Every built-in model is now a description (the hand-written kernels
they replaced are test oracles, tests/membrane/oracles/). Adding a model means adding one
file, and the contract tests pick it up by themselves.
"""

from __future__ import annotations

from cable.suggest import did_you_mean
import functools
import importlib
import pkgutil
from pathlib import Path

from cable.membrane.base import MembraneModel, Parameter, State

_NOT_MODELS = {"base", "equations"}


def model_names() -> list[str]:
    """The registered model names, sorted."""
    return sorted(_hand_written() + tuple(_described()))


@functools.lru_cache(maxsize=1)
def _hand_written() -> tuple[str, ...]:
    # the package's files do not change while a process runs; listing them costs ~1 ms
    here = str(Path(__file__).parent)
    return tuple(sorted(m.name.replace("_", "-") for m in pkgutil.iter_modules([here])
                        if m.name not in _NOT_MODELS and not m.name.startswith("_")))


@functools.lru_cache(maxsize=1)
def _described() -> dict[str, str]:
    """Registry name -> description module, for the descriptions without a hand-written module.

    A description is a file of ``equations/`` with a line starting ``EQUATIONS = `` (read as
    text: importing it would import sympy)."""
    here = Path(__file__).parent / "equations"
    hand = set(_hand_written())
    found = {}
    for path in sorted(here.glob("[a-z]*.py")):
        name = path.stem.replace("_", "-")
        if name not in hand and "\nEQUATIONS = " in path.read_text(encoding="utf-8"):
            found[name] = path.stem
    return found


class UnknownModelError(KeyError):
    """An unknown model name (the message lists the valid ones)."""

    def __str__(self):
        return self.args[0]


def get_model(name: str) -> MembraneModel:
    """Return the registered model ``name``; an unknown name lists the valid ones.

    A CellML file's path (see :func:`cable.membrane.equations.registry.cellml_model_name`)
    or ``equations:MODULE`` gives a model generated from its equations.
    """
    from cable.membrane.equations.registry import is_generated_name, load, load_description

    if is_generated_name(name):
        return load(str(name))
    described = _described()
    if name in described:
        return load_description(described[name], name)
    names = model_names()
    if name not in names:
        hint = did_you_mean(name, names)
        raise UnknownModelError(
            f"unknown membrane model '{name}'.{hint} Known models: {', '.join(names)}."
        )
    module = importlib.import_module(f"cable.membrane.{name.replace('-', '_')}")
    model = module.MODEL
    if model.name != name:
        raise RuntimeError(f"module {module.__name__} declares MODEL.name {model.name!r}, expected {name!r}")
    return model


__all__ = ["MembraneModel", "Parameter", "State", "get_model", "model_names"]
