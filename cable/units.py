"""The canonical internal units, and the one place where conversions happen.

Everything inside the package (kernels, measurements, the stored dataset) works in
these units. Case files may give a bare number, which is read in the canonical unit of
its key, or a string with a unit ("238 um", "35.4 ohm*cm"), which pint converts here,
once, when the case is loaded.

==================  ==============  ==========================================
quantity            canonical unit  note
==================  ==============  ==========================================
length              cm              positions, dx, radius, fibre length
time                ms              dt, durations, activation times
potential           mV              vm, reversal potentials, thresholds
current density     uA/cm^2         per membrane area (stimuli, HH currents)
conductance         mS/cm^2         per membrane area (channel conductances)
conductivity        mS/cm           tissue conductivity sigma
resistivity         ohm*cm          axial (cytoplasmic) resistivity
capacitance         uF/cm^2         membrane capacitance per area
surface_to_volume   1/cm            membrane area per tissue volume (chi)
concentration       mM              ion concentrations
temperature         degC            temperatures
rate                1/ms            phenomenological rate constants
velocity            m/s             reported conduction velocity only
==================  ==============  ==========================================

Derived relations used by the solver (all in the units above):

* axon form: D = a / (2 R_i C_m) * 1e3  [cm^2/ms]  (a in cm, R_i in ohm*cm)
* tissue form: D = sigma / (chi C_m)    [cm^2/ms]  (sigma in mS/cm, chi in 1/cm)
* velocity: 1 cm/ms = 10 m/s.
"""

from __future__ import annotations

import functools

CANONICAL = {
    "length": "cm",
    "time": "ms",
    "potential": "mV",
    "current_density": "uA/cm^2",
    "conductance": "mS/cm^2",
    "conductivity": "mS/cm",
    "resistivity": "ohm*cm",
    "capacitance": "uF/cm^2",
    "surface_to_volume": "1/cm",
    "concentration": "mM",
    "temperature": "degC",
    "rate": "1/ms",
    "conductance_abs": "uS",
    "dimensionless": "1",
}

#: cm/ms -> m/s
CM_PER_MS_TO_M_PER_S = 10.0


@functools.lru_cache(maxsize=1)
def registry():
    """The shared pint unit registry (created on first use; pint is slow to import)."""
    import pint

    try:  # pint keeps its parsed definitions in the user's cache folder: 0.2 s -> 0.01 s
        return pint.UnitRegistry(autoconvert_offset_to_baseunit=True, cache_folder=":auto:")
    except Exception:  # an unwritable cache folder must not stop a run
        return pint.UnitRegistry(autoconvert_offset_to_baseunit=True)


class UnitError(ValueError):
    """A value whose unit cannot be read or has the wrong dimension."""


def to_canonical(value, quantity: str) -> float:
    """Convert a case-file value to the canonical unit of ``quantity``.

    Parameters
    ----------
    value : float, int or str
        A bare number (already in the canonical unit) or a string with a unit.
    quantity : str
        A key of :data:`CANONICAL`.

    Returns
    -------
    float
        The value in the canonical unit.
    """
    return to_unit(value, CANONICAL[quantity], quantity)


def to_unit(value, unit: str, quantity: str | None = None) -> float:
    """Convert a case-file value to ``unit`` (a pint unit expression such as "pA/pF").

    A bare number is taken to be in ``unit`` already; ``quantity`` only names the kind
    in messages. Model parameters use this with their own declared unit, so that every
    parameter accepts the unit it is listed in (and any unit of the same dimension).
    """
    quantity = quantity or unit
    if isinstance(value, bool):
        raise UnitError(f"expected a number, got the boolean {value!r}")
    if isinstance(value, (int, float)):
        return float(value)
    if not isinstance(value, str):
        raise UnitError(f"expected a number or a string with a unit, got {value!r}")
    ureg = registry()
    text = value.strip()
    try:
        q = ureg.Quantity(text)
    except Exception as exc:  # pint raises several unrelated types for bad text
        raise UnitError(f"cannot read {value!r} as a quantity ({exc.__class__.__name__})") from None
    if not hasattr(q, "to"):  # pint returns a plain number for unitless text
        return float(q)
    if q.unitless:
        return float(q.magnitude)
    try:
        return float(q.to(unit).magnitude)
    except Exception:
        raise UnitError(
            f"{value!r} has unit '{q.units:~}', which cannot be converted to {unit} ({quantity})"
        ) from None
