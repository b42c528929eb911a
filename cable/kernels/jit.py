"""The one numba wrapper of the package, and kernel specialisation.

``jit`` compiles with ``cache=True`` (compiled code is stored next to the sources, or
under ``NUMBA_CACHE_DIR``), without fastmath (the results must not depend on the
reordering of floating-point sums) and with numpy's error model: a division by zero
gives inf or NaN (as in numpy) instead of a per-division test that raises, which also
lets LLVM turn a loop into SIMD code.

``jit_inline`` marks the small functions a vectorised loop calls per node: they are
inlined into the caller's numba IR (``inline="always"``), so the loop body is one
piece of code for the vectoriser. (A compiled callee loaded from numba's cache comes
as object code, which LLVM cannot inline: a loop calling it would not vectorise.)

``specialise`` makes a copy of a template kernel whose global names (the membrane
model's reaction kernel, for instance) are bound to given functions, under a name that
includes a hash of the sources involved. Numba can then cache the generic time loop
once per model, and an edited model or kernel never picks up a stale cache entry
(numba itself checks only the time stamp of the file holding the cached function).
"""

from __future__ import annotations

import hashlib
import inspect
import sys
import types

import numba

jit = numba.njit(cache=True, nogil=True, error_model="numpy")


jit_inline = numba.njit(cache=True, nogil=True, error_model="numpy", inline="always")


def _modules(objects) -> list:
    """The modules defining ``objects`` and the compiled kernels their modules import."""
    seen = {}
    todo = [sys.modules.get(getattr(obj, "__module__", ""), None) for obj in objects]
    depth = {id(m): 0 for m in todo if m is not None}
    while todo:
        mod = todo.pop(0)
        if mod is None or mod.__name__ in seen:
            continue
        seen[mod.__name__] = mod
        if depth.get(id(mod), 0) >= 2:
            continue
        for value in vars(mod).values():
            if isinstance(value, numba.core.registry.CPUDispatcher):
                dep = sys.modules.get(value.py_func.__module__)
                if dep is not None and dep.__name__.startswith("cable.") and dep.__name__ not in seen:
                    depth[id(dep)] = depth.get(id(mod), 0) + 1
                    todo.append(dep)
    return [seen[k] for k in sorted(seen)]


def _source_hash(*objects) -> str:
    h = hashlib.sha256()
    for mod in _modules(objects):
        try:
            src = inspect.getsource(mod)
        except (OSError, TypeError):
            src = mod.__name__
        h.update(src.encode())
    return h.hexdigest()[:12]


def specialise(template, tag: str, *, depends=(), **bindings):
    """Compile ``template`` with its globals ``bindings`` replaced.

    Parameters
    ----------
    template : function
        A plain Python function written for numba.
    tag : str
        A readable name for the specialisation (the model name).
    depends : sequence
        Further functions whose modules' sources go into the name's hash (the model
        kernel inside a bound kernel that was itself specialised).
    **bindings
        Global names of the template to bind (numba dispatchers).
    """
    glb = dict(template.__globals__)
    glb.update(bindings)
    fn = types.FunctionType(template.__code__, glb, template.__name__,
                            template.__defaults__, template.__closure__)
    digest = _source_hash(template, *bindings.values(), *depends)
    safe = "".join(ch if ch.isalnum() else "_" for ch in tag)
    fn.__qualname__ = f"{template.__qualname__}__{safe}_{digest}"
    fn.__module__ = template.__module__
    fn.__doc__ = template.__doc__
    return numba.njit(cache=True, nogil=True, error_model="numpy")(fn)


class CompileTimer:
    """Seconds numba spent compiling inside a ``with compile_timer()`` block (``seconds`` None: nothing compiled)."""

    def __init__(self, listener):
        self._listener = listener

    @property
    def seconds(self) -> float | None:
        return self._listener.duration if self._listener.done else None


def compile_timer():
    """A context manager timing numba's compilations inside it (loads from the cache are not compilations).

    Uses numba's event API (``numba.core.event``, the ``"numba:compile"`` event, outermost
    compilation only, so nested compilations count once).
    """
    import contextlib

    from numba.core import event

    @contextlib.contextmanager
    def timed():
        listener = event.TimingListener()
        with event.install_listener("numba:compile", listener):
            yield CompileTimer(listener)

    return timed()
