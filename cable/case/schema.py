"""The case file's sections and keys: their kind, unit, default and allowed range.

This table is the single description of what a case file may contain; the loader
validates against it, the error messages and suggestions come from it, and
``cable keys`` prints it.
"""

from __future__ import annotations

from dataclasses import dataclass


@dataclass(frozen=True)
class Key:
    """One case-file key.

    kind: "quantity" (number or string with unit), "int", "str", "bool", "choice",
    "list_quantity" (list of numbers with units), "list_str", "table" (free table,
    validated elsewhere, e.g. against the membrane model).
    """

    kind: str
    quantity: str = "dimensionless"
    default: object = None
    required: bool = False
    minimum: float | None = None
    maximum: float | None = None
    exclusive_minimum: bool = False
    choices: tuple[str, ...] = ()
    meaning: str = ""


def _q(quantity, default=None, *, minimum=None, maximum=None, positive=False, meaning="", required=False):
    return Key("quantity", quantity, default, required, 0.0 if positive else minimum, maximum,
               positive, (), meaning)


SECTIONS: dict[str, dict[str, Key]] = {
    "membrane": {
        "model": Key("str", meaning="registered membrane model name (see `cable models`), or a CellML file (path ending .cellml, relative to the case file)"),
        "cellml": Key("str", meaning="a CellML file to run instead of a registered model (path relative to the case file)"),
        "potential": Key("str", meaning="CellML only: the membrane-potential variable, component.variable (overrides the recognition)"),
        "stimulus_current": Key("str", meaning="CellML only: the file's stimulus-current variable, removed (overrides the recognition)"),
        "convention": Key("choice", choices=("modern", "hodgkin-huxley-1952"), meaning="CellML only: sign convention of the file's potential (default: recognised)"),
        "temperature": _q("temperature", meaning="temperature, for models with a temperature parameter [degC]"),
        "scale": Key("table", meaning="factor per scalable conductance, e.g. g_Na = 0.5"),
        "parameters": Key("table", meaning="value per model parameter, e.g. K_o = 8"),
        "capacitance": _q("capacitance", positive=True, meaning="membrane capacitance C_m [uF/cm^2]; a single cell's (default 1), or the same as fiber.capacitance"),
        "prepace": Key("table", meaning="single-cell pacing to steady state before the run (beats, cycle_length, amplitude, duration)"),
    },
    "fiber": {
        "length": _q("length", required=True, positive=True, meaning="fibre length [cm]"),
        "dx": _q("length", 0.01, positive=True, meaning="grid spacing [cm]"),
        "radius": _q("length", positive=True, meaning="axon radius (axon form) [cm]"),
        "axial_resistivity": _q("resistivity", positive=True, meaning="cytoplasmic resistivity (axon form) [ohm*cm]"),
        "conductivity": _q("conductivity", positive=True, meaning="tissue conductivity sigma (tissue form) [mS/cm]"),
        "surface_to_volume": _q("surface_to_volume", positive=True, meaning="membrane area per volume chi (tissue form) [1/cm]"),
        "capacitance": _q("capacitance", 1.0, positive=True, meaning="membrane capacitance C_m [uF/cm^2]"),
        "cell_length": _q("length", positive=True, meaning="cell length for discrete cell-by-cell coupling [cm]"),
        "closed": Key("bool", default=False, meaning="a ring: the last node couples to the first (periodic ends; "
                                                     "no node at x = length, which is x = 0)"),
        "initial": Key("choice", default="rest", choices=("rest", "one-way"),
                       meaning="start of a ring: \"rest\", or \"one-way\": the state of an open strand whose wave "
                               "(started by the first stimulus) has just reached its far end, so that it circulates one way"),
        "gap_junction_conductance": _q("conductance", positive=True, meaning="gap-junction conductance per unit cross-section of the fibre (axon form) or tissue (tissue form) [mS/cm^2]; a junction resistance R_j [ohm*cm^2] is \"1/(R_j ohm*cm^2)\"; G [uS] per junction is G/(pi a^2); see cable/fiber.py"),
    },
    "stimulus": {
        "x": _q("length", 0.0, minimum=0.0, meaning="left edge of the stimulated zone [cm]"),
        "width": _q("length", 0.05, positive=True, meaning="width of the zone [cm]; at least one node"),
        # at most 1e5 uA/cm^2 (100 mA/cm^2, some 50x the strongest pulses in use): beyond is a unit
        # slip, and the potential it drives can blow up and recover between the runaway checks
        "amplitude": _q("current_density", required=True, positive=True, maximum=1e5, meaning="depolarising current per membrane area [uA/cm^2]"),
        "duration": _q("time", required=True, positive=True, meaning="pulse duration [ms]"),
        "onset": _q("time", 0.0, minimum=0.0, meaning="first pulse onset [ms] (read from 'start', its old name, "
                                                      "for this release)"),
        "count": Key("int", default=1, minimum=1, maximum=100000, meaning="number of pulses"),
        "cycle_length": _q("time", positive=True, meaning="interval between pulse onsets [ms] (needed when count > 1)"),
    },
    "numerics": {
        "dt": _q("time", 0.01, positive=True, meaning="time step [ms]"),
        "dt_max": _q("time", positive=True, meaning="adaptive time steps: the longest step [ms]; steps dt x 2^k up to it, the fine step dt kept through stimuli, upstrokes and arriving waves (off when absent or equal to dt); see cable/kernels/adaptive.py"),
        "splitting": Key("choice", default="strang", choices=("strang", "godunov"), meaning="operator splitting"),
        "diffusion": Key("choice", default="crank-nicolson", choices=("crank-nicolson", "backward-euler", "forward-euler"), meaning="diffusion step"),
        "gating": Key("choice", default="rush-larsen", choices=("rush-larsen", "forward-euler"), meaning="gate update of the reaction step"),
        "reaction": Key("choice", default="rush-larsen", choices=("rush-larsen", "rush-larsen-2", "heun", "rk4"), meaning="integrator of the membrane equations in the reaction step: Rush-Larsen (first order), second-order Rush-Larsen, Heun or classical Runge-Kutta (orders 2, 4; second order in a strand with strang and crank-nicolson, first with godunov); the last three use exact rates; see cable/kernels/schemes.py"),
        "merge_half_steps": Key("bool", default=True, meaning="Strang: join the two diffusion half steps between outputs into one (same order, half the solves)"),
        "rates": Key("choice", default="tabulated", choices=("tabulated", "exact", "reference"), meaning="reaction kernel: gate rates tabulated in V (fast; CV and APD90 within 0.1% of exact), evaluated exactly (vectorised), or the model's reference kernel; see cable/kernels/tables.py"),
    },
    "run": {
        "duration": _q("time", required=True, positive=True, meaning="simulated time [ms]"),
        "stop_when_quiet": Key("bool", meaning="end the run once every stimulus was given, every wave ended and the strand is back within quiet_tolerance of rest (the beats' measurements unchanged; the t axis is shorter); default false for `cable run`, true for the protocols and `cable critical`; see cable/quiet.py"),
        "quiet_tolerance": _q("potential", 1.0, positive=True, meaning="stop_when_quiet: how close to its resting potential every node must be [mV]"),
    },
    "output": {
        "every": _q("time", 0.1, positive=True, meaning="sampling interval of stored fields [ms]"),
        "states": Key("list_str", default=(), meaning="extra state variables to store, e.g. [\"h\"]"),
        "keep_fields": Key("bool", default=False, meaning="sweeps: keep each point's space-time fields in OUT.nc.points/ (a plain run ignores it)"),
    },
    "measure": {
        "threshold": _q("potential", meaning="activation level [mV]; default: the model's"),
        "cv_window": Key("list_quantity", quantity="length", meaning="two positions [cm]; default: the middle half of the fibre"),
        "apd_levels": Key("list_quantity", quantity="percent", default=(90.0,), meaning="repolarisation levels [%] for APD; 90 is always measured (wavelength = CV x APD90)"),
        "safety_factor": Key("bool", default=False, meaning="compute the safety factor of conduction per beat and node (Shaw & Rudy 1997); needs a fine output.every, see cable/measure/safety.py"),
        "safety_factor_length": _q("length", positive=True, meaning="length of the control volume of the safety factor [cm]; default: fiber.cell_length, else 0.01 cm"),
    },
}

#: sections that are lists of tables in TOML ([[name]]); stimuli and regions are named
#: tables ([stimulus.S1], see cable.case.names)
LIST_SECTIONS: set[str] = set()
#: sections of named tables, as `cable keys` shows them
NAMED_SECTIONS = {"stimulus": "stimulus.NAME", "region": "region.NAME"}
