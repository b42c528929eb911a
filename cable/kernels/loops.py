"""Which compiled time loop a run uses, and whether it is compiled already.

One numba dispatcher per (model, reaction scheme): the reference loop
(:func:`cable.kernels.integrate.advance` with the model's ``reaction``) or the fast loop
(:func:`cable.kernels.fused.advance_fast` with the model's fast kernel), specialised by
:func:`cable.kernels.jit.specialise` and remembered for the process.
"""

from __future__ import annotations

import functools
import os

from cable.case import Case
from cable.kernels import fused, integrate, schemes
from cable.kernels.jit import specialise
from cable.membrane import get_model


def _integrator(model_name: str, reaction: str = "rush-larsen"):
    """The reference time loop of the model and reaction scheme (one dispatcher per pair,
    however the arguments are spelled)."""
    return _integrator_for(model_name, reaction)


@functools.lru_cache(maxsize=None)
def _integrator_for(model_name: str, reaction: str):
    model = get_model(model_name)
    if reaction == schemes.DEFAULT:
        return specialise(integrate.advance, model.name, reaction=model.reaction)
    # the reaction scheme applied to the model's kinetics (cable/kernels/schemes.py)
    return specialise(integrate.advance, f"{model.name}_{reaction}", reaction=schemes.kernel(model_name, reaction),
                      depends=(model.kinetics,))


def _fast_integrator(model_name: str, reaction: str = "rush-larsen"):
    """The fast time loop of the model and reaction scheme (one dispatcher per pair)."""
    return _fast_integrator_for(model_name, reaction)


@functools.lru_cache(maxsize=None)
def _fast_integrator_for(model_name: str, reaction: str):
    model = get_model(model_name)
    if reaction == schemes.DEFAULT:
        return specialise(fused.advance_fast, model.name, fast_reaction=model.fast.kernel)
    return specialise(fused.advance_fast, f"{model.name}_{reaction}",
                      fast_reaction=schemes.fast_kernel(model_name, reaction), depends=(model.fast.kinetics,))


def time_loop(model_name: str, rates: str = "tabulated", reaction: str = "rush-larsen"):
    """The compiled time loop (numba dispatcher) that a run of ``model_name`` uses.

    ``rates`` is ``numerics.rates``: models with a fast path
    (:class:`cable.membrane.base.FastPath`) use ``cable.kernels.fused.advance_fast``
    unless it is ``"reference"`` (for a ``reaction``, ``numerics.reaction``, other than
    ``"rush-larsen"``: when the fast path supplies ``kinetics``); the others use
    ``cable.kernels.integrate.advance``.
    Its ``signatures`` are non-empty once it is loaded in this process.
    """
    model = get_model(model_name)
    if rates == "reference" or not schemes.has_fast(model, reaction):
        return _integrator(model_name, reaction)
    return _fast_integrator(model_name, reaction)


def is_compiled(model_name: str, rates: str = "tabulated", reaction: str = "rush-larsen") -> bool:
    """Whether the time loop a run of ``model_name`` uses is in numba's on-disk cache already."""
    return _in_cache(time_loop(model_name, rates, reaction))


def _in_cache(fn) -> bool:
    if fn.signatures:
        return True
    try:
        return os.path.exists(fn._cache._cache_file._index_path)
    except AttributeError:  # numba internals changed: assume not
        return False


def needs_compiling(case: Case) -> bool:
    """Whether a run of ``case`` compiles kernels first (its time loop, or the reference loop
    that settling and pre-pacing use, is not in numba's cache yet)."""
    name = case.membrane.model
    mem = case.membrane
    settles = mem.prepace is not None or mem.temperature is not None or \
        bool(mem.parameters or mem.scale or case.extra.get("region") or case.extra.get("drug"))
    cell_loop = None
    if case.numerics.adaptive and (case.fiber is None or mem.prepace is not None):   # adaptive_cell's loop
        from cable.kernels.adaptive_cell import cell_loop as _cell_loop

        model = get_model(name)
        cell_loop = _cell_loop(model, case.numerics.rates != "reference" and model.fast is not None)
    return not is_compiled(name, case.numerics.rates, case.numerics.reaction) or \
        (settles and not _in_cache(_integrator(name))) or (cell_loop is not None and not _in_cache(cell_loop))
