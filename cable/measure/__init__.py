"""Measurements of a run, found by listing this package as models and commands are.

:func:`cable.results.measurements` follows each beat through the kernel's probes (the
beats themselves: onset, activation times, capture, block position, upstroke velocity,
resting and peak potential, APD) and then asks every registered measurement for its
outputs. A measurement is a module of this package that defines ``MEASUREMENT``
(a :class:`Measurement`): when it applies, what it computes from :class:`Inputs`
(the run's setup, its beats and probes, and the outputs measured before it), and in
which order (``order``: a measurement that reads another's output comes after it).
Each output it returns is declared once, in :data:`cable.io.schema.VARIABLES`
(``tests/measure/test_registry.py`` checks it).
"""

from __future__ import annotations

import functools
import importlib
import pkgutil
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Callable


@dataclass(frozen=True)
class Inputs:
    """What a measurement reads.

    Attributes
    ----------
    setup : cable.preparation.Setup
        The run's prepared arrays and validated case (``setup.x`` is None for a cell).
    beats : cable.measure.activation.Beats
        The beats, each followed node by node (:func:`~cable.measure.activation.assign_beats`).
    act, nact : ndarray
        The kernel's threshold crossings per node [ms] and their counts.
    tracker : cable.measure.apd.ApdProbe
        The repolarisation probe (``rest``, ``peak``, ``repol``).
    t_end : float or None
        Time computed [ms] (None: the whole run).
    out : dict
        The outputs measured so far, ``{name: (dims, array)}`` (read only).
    """

    setup: Any
    beats: Any
    act: Any
    nact: Any
    tracker: Any
    t_end: float | None
    out: dict


@dataclass(frozen=True)
class Measurement:
    """A measurement of a run.

    Attributes
    ----------
    name : str
        What it measures, for listings.
    outputs : tuple of str
        The variables it may return (each declared in ``cable.io.schema.VARIABLES``).
    compute : callable
        ``compute(inputs) -> {name: (dims, array)}``.
    applies : callable
        ``applies(inputs) -> bool``: whether the run has what it needs (a strand, a ring,
        a case option).
    order : int
        Measurements run by increasing order.
    """

    name: str
    outputs: tuple[str, ...]
    compute: Callable[[Inputs], dict]
    applies: Callable[[Inputs], bool]
    order: int


def on_a_strand(inputs: Inputs) -> bool:
    """``applies`` of the measurements that need a strand (not a single cell)."""
    return inputs.setup.x is not None


@functools.lru_cache(maxsize=1)
def registered() -> tuple[Measurement, ...]:
    """The measurements of the package, by ``order``.

    The package's files do not change while a process runs, so the list is made once."""
    found = []
    for info in pkgutil.iter_modules([str(Path(__file__).parent)]):
        module = importlib.import_module(f"{__name__}.{info.name}")
        measurement = getattr(module, "MEASUREMENT", None)
        if measurement is not None:
            found.append(measurement)
    return tuple(sorted(found, key=lambda m: (m.order, m.name)))


def measure_all(inputs: Inputs, measurements=None) -> dict:
    """Add the outputs of every measurement that applies to ``inputs.out``, in order; returns it."""
    for measurement in registered() if measurements is None else measurements:
        if measurement.applies(inputs):
            inputs.out.update(measurement.compute(inputs))
    return inputs.out
