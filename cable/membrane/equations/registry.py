"""Models named by a CellML file or by a description module, resolved by ``get_model``.

A CellML model's registry name is the absolute path of its file, followed by the
recognition options that differ from the guess, as ``?key=value&...``
(:func:`cellml_model_name`); the name alone rebuilds the model in any process (the
sweep workers included). ``equations:MODULE`` names the description
``cable.membrane.equations.MODULE.EQUATIONS`` (``equations:hodgkin_huxley_1952``); the
built-in models without a hand-written module are such descriptions too, under their
registry names (:func:`load_description`). The generated module of a CellML file is cached
under the hash of the file's content, the options, the import's sources (:data:`READERS`) and
the compiler, that of a description
under the hash of the description module's source and the compiler
(:func:`cable.membrane.equations.cache.load_cached`), so a second run reads neither
libcellml nor sympy.
"""

from __future__ import annotations

import functools
import importlib
import json
from pathlib import Path
from urllib.parse import parse_qsl, urlencode

from cable.membrane.equations.errors import EquationError

OPTIONS = ("potential", "stimulus_current", "convention")
PREFIX = "equations:"
#: the modules that make a CellML file's description: an edited import makes a new cache key
READERS = ("cellml_read", "cellml_import", "cellml_export")


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


def description_path(module: str) -> Path:
    """The file of the description ``cable.membrane.equations.MODULE``."""
    return Path(__file__).parent / f"{module}.py"


@functools.lru_cache(maxsize=None)
def load_description(module: str, name: str):
    """The model described by ``cable.membrane.equations.MODULE``, registered as ``name``.

    The generated module is filed under the hash of the description's source and the compiler
    (:func:`cable.membrane.equations.cache.source_key`): found there, neither the description
    nor sympy is imported. A description imports only :mod:`.description` (part of the compiler
    hash), so its own source is all that can change its equations.
    """
    from cable.membrane.equations import cache

    try:
        if not module.isidentifier():
            raise OSError(module)
        source = description_path(module).read_bytes()
    except OSError:
        raise EquationError(f"'{name}': no description cable/membrane/equations/{module}.py.") from None
    key = cache.source_key(b"description", source)
    found = cache.load_cached(key)
    if found is None:
        from cable.membrane.equations import compile as comp

        try:
            eq = importlib.import_module(f"cable.membrane.equations.{module}").EQUATIONS
        except (ImportError, AttributeError):
            raise EquationError(f"'{name}': no description cable/membrane/equations/{module}.py.") from None
        found = cache.store_keyed(key, comp.generate_source(eq))
    model = cache.model_from_module(found, name)
    declared = json.loads(found.INFO["equations"])["name"]
    if not name.startswith(PREFIX) and declared != name:
        raise RuntimeError(f"cable/membrane/equations/{module}.py declares the model name {declared!r}, "
                           f"expected {name!r}")
    return model


@functools.lru_cache(maxsize=None)
def load(name: str):
    """The model registered as ``name`` (a CellML name or ``equations:MODULE``)."""
    from cable.membrane.equations import cache

    if name.startswith(PREFIX):
        return load_description(name[len(PREFIX):], name)
    path, options = split_name(name)
    try:
        content = path.read_bytes()
    except OSError as exc:
        raise EquationError(f"CellML file '{path}' cannot be read: {exc.strerror or exc}.") from None
    key = cache.source_key(content, repr(sorted(options.items())).encode(), _readers_source())
    module = cache.load_cached(key)
    if module is None:
        from cable.membrane.equations import compile as comp
        from cable.membrane.equations.cellml_import import build

        eq = build(path, name=path.stem, **options)
        module = cache.store_keyed(key, comp.generate_source(eq))
    return cache.model_from_module(module, name)


@functools.lru_cache(maxsize=1)
def _readers_source() -> bytes:
    """The sources of :data:`READERS` (read as files: nothing is imported)."""
    here = Path(__file__).parent
    return b"".join((here / f"{m}.py").read_bytes() for m in READERS)
