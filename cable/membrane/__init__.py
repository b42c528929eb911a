"""Membrane models, registered by name.

A model is one module of this package that defines ``MODEL`` (a
:class:`cable.membrane.base.MembraneModel`). The registry name is the module name with
``_`` written as ``-`` (``hodgkin_huxley_1952.py`` -> ``hodgkin-huxley-1952``), so adding a
model means adding one file, and the contract tests pick it up by themselves.
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
    return list(_listed_models())


@functools.lru_cache(maxsize=1)
def _listed_models() -> tuple[str, ...]:
    # the package's files do not change while a process runs; listing them costs ~1 ms
    here = str(Path(__file__).parent)
    return tuple(sorted(m.name.replace("_", "-") for m in pkgutil.iter_modules([here])
                        if m.name not in _NOT_MODELS and not m.name.startswith("_")))


class UnknownModelError(KeyError):
    """An unknown model name (the message lists the valid ones)."""

    def __str__(self):
        return self.args[0]


def get_model(name: str) -> MembraneModel:
    """Return the registered model ``name``; an unknown name lists the valid ones.

    A CellML file's path (see :func:`cable.membrane.equations.registry.cellml_model_name`)
    or ``equations:MODULE`` gives a model generated from its equations.
    """
    from cable.membrane.equations.registry import is_generated_name, load

    if is_generated_name(name):
        return load(str(name))
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
