"""The protocol contract: what one module of :mod:`cable.protocols` declares about itself.

A protocol is one module ``cable/protocols/<name>.py`` that defines ``PROTOCOL``, a
:class:`Protocol`: its name (the module's), the function that runs it (whose keyword
arguments are its options), its outputs (a table of :mod:`cable.io.schema`), the text
``cable info`` prints for its result, and the figure ``--figure`` and
:func:`cable.plot.protocol_figure` draw. Results name their protocol in the global
attribute :data:`cable.io.schema.PROTOCOL_ATTR`; :func:`cable.protocols.protocol_of` reads
it back, so nothing downstream recognises a result by its variables or its free text.
"""

from __future__ import annotations

import inspect
from dataclasses import dataclass
from typing import Callable

#: parameters of a protocol's function that are not options of the experiment
NOT_OPTIONS = ("case", "info")


@dataclass(frozen=True)
class Protocol:
    """One protocol.

    Parameters
    ----------
    name : str
        The registry name: the module's name (``refractory`` for ``refractory.py``); the
        value of the result's ``cable_protocol`` attribute.
    title : str
        What the protocol is called in messages ("refractory period").
    run : callable
        The public function that runs it (:func:`cable.refractory_period`); its keyword
        arguments, documented in its docstring, are the protocol's options.
    summary : callable
        ``summary(ds) -> str``: the text its command and ``cable info`` print.
    figure : callable or None
        ``figure(ds, fig)``: draws the result into a matplotlib Figure (None: no figure).
    command : str or None
        The ``cable`` command that runs it (``cable/cli/<command>.py``), if any.
    legacy : callable
        ``legacy(ds) -> bool``: recognises a result written before results named their
        protocol (no ``cable_protocol`` attribute), by the rule used then: its free-text
        ``protocol`` attribute (and, for figures, its variables). Only for reading old files.
    order : int
        Place in listings and messages (smaller first).
    table : cable.io.schema.Table, optional
        The outputs, for a protocol outside the package; default its table in
        :data:`cable.io.schema.PROTOCOLS`.
    """

    name: str
    title: str
    run: Callable
    summary: Callable
    figure: Callable | None = None
    command: str | None = None
    legacy: Callable = lambda ds: False
    order: int = 50
    table: object = None

    @property
    def outputs(self):
        """The protocol's :class:`cable.io.schema.Table`."""
        from cable.io import schema

        return self.table if self.table is not None else schema.PROTOCOLS[self.name]

    @property
    def options(self) -> tuple[str, ...]:
        """The keyword options of :attr:`run` (its parameters other than the case and ``info``)."""
        params = inspect.signature(self.run).parameters.values()
        return tuple(p.name for p in params if p.name not in NOT_OPTIONS
                     and p.kind in (p.POSITIONAL_OR_KEYWORD, p.KEYWORD_ONLY))

    def complete(self, ds) -> bool:
        """Whether ``ds`` holds every output the protocol always writes (its optional ones aside)."""
        table = self.outputs
        return all(name in ds.variables for name, var in table.variables.items() if not var.optional)
