"""Models named by a CellML file or by a description module, resolved by ``get_model``.

A CellML model's registry name is the absolute path of its file, followed by the
recognition options that differ from the guess, as ``?key=value&...``
(:func:`cellml_model_name`); the name alone rebuilds the model in any process (the
sweep workers included). ``equations:MODULE`` names the description
``cable.membrane.equations.MODULE.EQUATIONS`` (``equations:hodgkin_huxley_1952``).
The generated module of a CellML file is cached under the hash of the file's content,
the options and the compiler (:func:`cable.membrane.equations.compile.load_cached`), so
a second run reads neither libcellml nor sympy.
"""

from __future__ import annotations

import functools
import hashlib
import importlib
from pathlib import Path
from urllib.parse import parse_qsl, urlencode

from cable.membrane.equations.errors import EquationError

OPTIONS = ("potential", "stimulus_current", "convention")
PREFIX = "equations:"


def is_generated_name(name) -> bool:
    """Whether ``name`` is a CellML path or an ``equations:`` name rather than a built-in model."""
    name = str(name)
    return name.startswith(PREFIX) or name.split("?")[0].lower().endswith(".cellml")


def cellml_model_name(path, **options) -> str:
    """The registry name of the CellML file ``path`` with recognition ``options`` (see OPTIONS)."""
    unknown = set(options) - set(OPTIONS)
    if unknown:
        raise EquationError(f"unknown CellML options {', '.join(sorted(unknown))}; allowed: {', '.join(OPTIONS)}.")
    given = {k: str(v) for k, v in sorted(options.items()) if v is not None}
    text = str(Path(path).expanduser().resolve())
    return text + ("?" + urlencode(given) if given else "")


def split_name(name: str) -> tuple[Path, dict]:
    path, _, query = str(name).partition("?")
    return Path(path), dict(parse_qsl(query))


@functools.lru_cache(maxsize=None)
def load(name: str):
    """The model registered as ``name`` (a CellML name or ``equations:MODULE``)."""
    from cable.membrane.equations import compile as comp

    if name.startswith(PREFIX):
        module = name[len(PREFIX):]
        try:
            eq = importlib.import_module(f"cable.membrane.equations.{module}").EQUATIONS
        except (ImportError, AttributeError):
            raise EquationError(f"'{name}': no description cable/membrane/equations/{module}.py.") from None
        return comp.build_model(eq, name)
    path, options = split_name(name)
    try:
        content = path.read_bytes()
    except OSError as exc:
        raise EquationError(f"CellML file '{path}' cannot be read: {exc.strerror or exc}.") from None
    h = hashlib.sha256(content)
    h.update(repr(sorted(options.items())).encode())
    h.update(comp._compiler_hash().encode())
    key = h.hexdigest()[:24]
    module = comp.load_cached(key)
    if module is None:
        from cable.membrane.equations.cellml_import import build

        eq = build(path, name=path.stem, **options)
        module = comp.store_keyed(key, comp.generate_source(eq))
    return comp.model_from_module(module, name)
