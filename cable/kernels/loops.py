"""Which compiled time loop a run uses, and whether it is compiled already.

One template (:func:`cable.kernels.loop.advance`) and one numba dispatcher per (model,
reaction scheme, path, layout): the reaction bound on the reference path is the model's
``reaction`` (or a scheme of :mod:`cable.kernels.schemes` applied to its ``kinetics``),
on the fast path its ``FastPath.kernel`` (or the scheme's vectorised kernel); the layout
is one strand or strands stored interleaved (``"strands"``), or strands laid end to
end (``"segments"``, batches of strands of different lengths). Each is specialised by
:func:`cable.kernels.jit.specialise` and remembered for the process.
"""

from __future__ import annotations

import functools
import os

from cable.case import Case
from cable.kernels import loop as template
from cable.kernels import schemes
from cable.kernels.jit import specialise
from cable.membrane import get_model

#: the layouts of the strands in the node arrays: the diffusion and the probe's neighbour
#: distance bound for each
LAYOUTS = {"strands": (template.diffuse_strands, template.strands_stride),
           "segments": (template.diffuse_end_to_end, template.segments_stride)}


def loop(model_name: str, reaction: str = schemes.DEFAULT, fast: bool = False, layout: str = "strands"):
    """The compiled time loop (numba dispatcher of :func:`cable.kernels.loop.advance`).

    Parameters
    ----------
    model_name : str
        Registered membrane model.
    reaction : str
        ``numerics.reaction``.
    fast : bool
        The fast path (``FastPath.kernel``, states by state where the model says so) or
        the reference path (``reaction``, states by node).
    layout : {"strands", "segments"}
        See the module docstring.
    """
    return _loop_for(model_name, reaction, bool(fast), layout)


@functools.lru_cache(maxsize=None)
def _loop_for(model_name: str, reaction: str, fast: bool, layout: str):
    model = get_model(model_name)
    tag = model.name if reaction == schemes.DEFAULT else f"{model.name}_{reaction}"
    if fast:
        kernel = model.fast.kernel if reaction == schemes.DEFAULT else schemes.fast_kernel(model_name, reaction)
        depends = (model.fast.kernel,) if reaction == schemes.DEFAULT else (model.fast.kinetics,)
        react = specialise(template.react_fast, tag, fast_reaction=kernel, depends=depends)
    else:
        kernel = model.reaction if reaction == schemes.DEFAULT else schemes.kernel(model_name, reaction)
        depends = (model.reaction,) if reaction == schemes.DEFAULT else (model.kinetics,)
        react = specialise(template.react_reference, tag, reaction=kernel, depends=depends)
    diffuse, stride = LAYOUTS[layout]
    tag = f"{tag}_{'fast' if fast else 'reference'}_{layout}"
    return specialise(template.advance, tag, react=react, diffuse_layout=diffuse, stride_of=stride,
                      depends=(react.py_func,) + depends)


def time_loop(model_name: str, rates: str = "tabulated", reaction: str = schemes.DEFAULT):
    """The compiled time loop (numba dispatcher) that a run of one strand of ``model_name`` uses.

    ``rates`` is ``numerics.rates``: models with a fast path
    (:class:`cable.membrane.base.FastPath`) use it unless it is ``"reference"`` (for a
    ``reaction``, ``numerics.reaction``, other than ``"rush-larsen"``: when the fast path
    supplies ``kinetics``); the others use the reference path.
    Its ``signatures`` are non-empty once it is loaded in this process.
    """
    return loop(model_name, reaction, uses_fast(get_model(model_name), rates, reaction))


def uses_fast(model, rates: str, reaction: str = schemes.DEFAULT) -> bool:
    """Whether a run with ``numerics.rates`` and ``numerics.reaction`` takes the fast path."""
    return rates != "reference" and schemes.has_fast(model, reaction)


def is_compiled(model_name: str, rates: str = "tabulated", reaction: str = schemes.DEFAULT) -> bool:
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
    """Whether a run of ``case`` compiles kernels first (its time loop, or the single-cell loop
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
    # settling takes the Rush-Larsen reference loop, pre-pacing the case's reaction scheme
    cell_loops = ([loop(name)] if settles else []) + \
        ([loop(name, case.numerics.reaction)] if mem.prepace is not None else [])
    return not is_compiled(name, case.numerics.rates, case.numerics.reaction) or \
        any(not _in_cache(fn) for fn in cell_loops) or (cell_loop is not None and not _in_cache(cell_loop))
