"""Protocols: the standard experiments on a strand, each a function returning an xarray.Dataset.

A protocol is one module of this package that defines ``PROTOCOL`` (a
:class:`cable.protocols.base.Protocol`); the registry is the list of the package's
modules (``_``-prefixed helpers and ``base`` aside), as for the membrane models, so adding
a protocol means adding one file (see DEVELOPERS.md, "How to add a protocol").
"""

from __future__ import annotations

import importlib
import pkgutil

_NOT_PROTOCOLS = {"base"}


def protocol_names() -> list[str]:
    """The registered protocol names, in their :attr:`~cable.protocols.base.Protocol.order`."""
    return [p.name for p in protocols()]


def _module_names() -> list[str]:
    # listed on every call (about 1 ms): a test may add a folder to this package's __path__
    return sorted({m.name for m in pkgutil.iter_modules(__path__)
                   if m.name not in _NOT_PROTOCOLS and not m.name.startswith("_")})


def protocols() -> list:
    """Every registered :class:`~cable.protocols.base.Protocol`, in order."""
    return sorted((get_protocol(name) for name in _module_names()), key=lambda p: (p.order, p.name))


def get_protocol(name: str):
    """The registered protocol ``name``.

    Raises
    ------
    CaseError
        An unknown name (the message lists the known ones and the nearest).
    """
    from cable.case import CaseError
    from cable.suggest import did_you_mean

    names = _module_names()
    if name not in names:
        raise CaseError(f"unknown protocol {name!r}.{did_you_mean(str(name), names)} Known protocols: "
                        f"{', '.join(names)}.")
    module = importlib.import_module(f"{__name__}.{name}")
    protocol = module.PROTOCOL
    if protocol.name != name:
        raise RuntimeError(f"module {module.__name__} declares PROTOCOL.name {protocol.name!r}, expected {name!r}")
    return protocol


def protocol_of(ds):
    """The protocol whose result ``ds`` is, or None (a plain run, a sweep).

    Read from the result's ``cable_protocol`` attribute. A result written before results
    carried it is recognised by the rule used then (each protocol's ``legacy``), and
    :func:`legacy_note` says so.

    Raises
    ------
    CaseError
        ``cable_protocol`` names no registered protocol.
    """
    from cable.io.schema import PROTOCOL_ATTR

    name = ds.attrs.get(PROTOCOL_ATTR)
    if name is not None:
        return get_protocol(str(name))
    # old files: no cable_protocol attribute; the free-text 'protocol' attribute (or the variables) decide
    return next((p for p in protocols() if p.legacy(ds)), None)


def legacy_note(ds) -> str:
    """The note for a protocol result recognised by the old rule ("" for one that names its protocol)."""
    from cable.io.schema import PROTOCOL_ATTR

    if PROTOCOL_ATTR in ds.attrs:
        return ""
    return (f"deprecated: this result has no '{PROTOCOL_ATTR}' attribute (written before results named their "
            f"protocol); its protocol was recognised from its 'protocol' attribute and variables.")


__all__ = ["get_protocol", "legacy_note", "protocol_names", "protocol_of", "protocols"]
