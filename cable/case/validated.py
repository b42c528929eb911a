"""The validated case: :class:`Case` and its parts, every value in canonical units.

These frozen dataclasses are what the loader (:mod:`cable.case.load`) builds and the
only form of a case that code downstream reads: nothing after loading looks at the raw
case dict (``Case.raw`` is kept to write the case back as TOML, into result files).
"""

from __future__ import annotations

import copy
from dataclasses import dataclass, field


class CaseError(ValueError):
    """A case that cannot be run, with a message written for the user."""



@dataclass(frozen=True)
class Stimulus:
    """A named current pulse train over a zone ``[x, x + width]`` (canonical units)."""

    x: float
    width: float
    amplitude: float
    duration: float
    onset: float = 0.0
    count: int = 1
    cycle_length: float | None = None
    name: str = ""

    @property
    def start(self) -> float:
        """The first pulse's onset [ms] (the old name of :attr:`onset`)."""
        return self.onset

    def onsets(self) -> list[float]:
        """Pulse onset times [ms]."""
        cl = self.cycle_length or 0.0
        return [self.onset + k * cl for k in range(self.count)]


@dataclass(frozen=True)
class Fiber:
    """Fibre geometry and coupling (canonical units)."""

    length: float
    dx: float
    capacitance: float = 1.0
    radius: float | None = None
    axial_resistivity: float | None = None
    conductivity: float | None = None
    surface_to_volume: float | None = None
    cell_length: float | None = None
    gap_junction_conductance: float | None = None
    closed: bool = False      # a ring (periodic ends)
    initial: str = "rest"     # "rest" or "one-way" (a ring's circulating start)

    @property
    def diffusivity(self) -> float:
        """D [cm^2/ms]: a/(2 R_i C_m) (axon form) or sigma/(chi C_m) (tissue form)."""
        if self.radius is not None:
            # a [cm] / (ohm*cm) = S; S / (uF/cm^2) = cm^2 / (ohm*uF) = cm^2/us = 1e3 cm^2/ms
            return self.radius / (2.0 * self.axial_resistivity * self.capacitance) * 1e3
        return self.conductivity / (self.surface_to_volume * self.capacitance)

    @property
    def n_nodes(self) -> int:
        # a ring has no node at x = length: that point is x = 0
        return int(round(self.length / self.dx)) + (0 if self.closed else 1)


@dataclass(frozen=True)
class Membrane:
    model: str
    temperature: float | None = None
    scale: dict = field(default_factory=dict)
    parameters: dict = field(default_factory=dict)
    prepace: dict | None = None
    capacitance: float | None = None  # [uF/cm^2]; as given in [membrane] (see Case.capacitance)


@dataclass(frozen=True)
class Numerics:
    dt: float = 0.01
    splitting: str = "strang"
    diffusion: str = "crank-nicolson"
    gating: str = "rush-larsen"
    merge_half_steps: bool = True
    reaction: str = "rush-larsen"
    rates: str = "tabulated"
    dt_max: float | None = None

    @property
    def adaptive(self) -> bool:
        """Whether the steps are chosen between dt and ``dt_max`` (at least two levels)."""
        return self.dt_max is not None and self.dt_max >= 2.0 * self.dt * (1.0 - 1e-9)


@dataclass(frozen=True)
class Case:
    """A validated case, every value in canonical units.

    ``raw`` keeps the case as given (after ``--set`` overrides) so that it can be
    written back as TOML into result files and rerun from them.
    """

    membrane: Membrane
    fiber: Fiber | None
    stimuli: tuple[Stimulus, ...]
    numerics: Numerics
    duration: float
    output_every: float
    output_states: tuple[str, ...]
    threshold: float | None
    cv_window: tuple[float, float] | None
    apd_levels: tuple[float, ...]
    raw: dict
    notes: tuple[str, ...] = ()
    extra: dict = field(default_factory=dict)  # validated sections owned by other modules
    stop_when_quiet: bool | None = None  # run.stop_when_quiet; None: not given (the caller's default)
    quiet_tolerance: float = 1.0         # run.quiet_tolerance [mV]
    safety_factor: bool = False          # measure.safety_factor
    safety_factor_length: float | None = None  # measure.safety_factor_length [cm]; None: not given
    keep_fields: bool = False            # output.keep_fields (sweeps)

    @property
    def capacitance(self) -> float:
        """Membrane capacitance C_m [uF/cm^2]: the fibre's, or a single cell's (default 1)."""
        if self.fiber is not None:
            return self.fiber.capacitance
        return self.membrane.capacitance if self.membrane.capacitance is not None else 1.0

    @property
    def text(self) -> str:
        """The case as TOML text."""
        from cable.case.toml_text import dumps_toml

        return dumps_toml(self.raw)

    def __repr__(self) -> str:
        from cable.case.describe import case_repr

        return case_repr(self)

    def _repr_html_(self) -> str:
        """The case and what it implies, as a table (a notebook's display)."""
        from cable.case.describe import case_html

        return case_html(self)

    def with_overrides(self, overrides) -> "Case":
        """A new case with ``{"section.key": value}`` overrides applied to the raw case."""
        from cable.case.assign import set_key
        from cable.case.load import from_dict

        raw = copy.deepcopy(self.raw)
        for key, value in dict(overrides).items():
            set_key(raw, key, value)
        return from_dict(raw)


