"""The one numba wrapper of the package, and kernel specialisation.

``jit`` compiles with ``cache=True`` (compiled code is stored next to the sources, or
under ``NUMBA_CACHE_DIR``) and without fastmath: the results must not depend on the
reordering of floating-point sums.

``specialise`` makes a copy of a template kernel whose global names (the membrane
model's reaction kernel, for instance) are bound to given functions, under a name that
includes a hash of the bound modules' sources. Numba can then cache the generic time
loop once per model, and an edited model never picks up a stale cache entry.
"""

from __future__ import annotations

import hashlib
import inspect
import sys
import types

import numba

jit = numba.njit(cache=True, nogil=True)


def _source_hash(*objects) -> str:
    h = hashlib.sha256()
    for obj in objects:
        mod = sys.modules.get(getattr(obj, "__module__", ""), None)
        try:
            src = inspect.getsource(mod) if mod is not None else repr(obj)
        except (OSError, TypeError):
            src = repr(obj)
        h.update(src.encode())
    return h.hexdigest()[:12]


def specialise(template, tag: str, **bindings):
    """Compile ``template`` with its globals ``bindings`` replaced.

    Parameters
    ----------
    template : function
        A plain Python function written for numba.
    tag : str
        A readable name for the specialisation (the model name).
    **bindings
        Global names of the template to bind (numba dispatchers).
    """
    glb = dict(template.__globals__)
    glb.update(bindings)
    fn = types.FunctionType(template.__code__, glb, template.__name__,
                            template.__defaults__, template.__closure__)
    digest = _source_hash(template, *bindings.values())
    safe = "".join(ch if ch.isalnum() else "_" for ch in tag)
    fn.__qualname__ = f"{template.__qualname__}__{safe}_{digest}"
    fn.__module__ = template.__module__
    fn.__doc__ = template.__doc__
    return numba.njit(cache=True, nogil=True)(fn)
