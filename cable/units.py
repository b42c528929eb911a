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
    "dimensionless": "1",
    "percent": "percent",
}

#: longest quantity text read [characters]
MAX_TEXT = 120
#: largest exponent allowed in a quantity's text (``cm^2``, ``1e-3`` is a number, not an exponent)
MAX_EXPONENT = 12
#: deepest nesting of parentheses in a quantity's text
MAX_PARENS = 4

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
    return _text_to_unit(value, unit, quantity)


@functools.lru_cache(maxsize=4096)
def _text_to_unit(value: str, unit: str, quantity: str) -> float:
    """:func:`to_unit` of a string, remembered: pint takes about 2.7 ms to read one
    (measured here with cProfile on a loaded 2-core machine), and every point of a sweep
    repeats the texts of its case."""
    q = parse(value)
    if not hasattr(q, "to"):  # pint returns a plain number for unitless text
        return float(q)
    if str(q.units) == "dimensionless":  # no unit written ("5", "0.5 dimensionless"): the canonical unit
        return float(q.magnitude)
    try:
        return float(q.to(unit).magnitude)
    except Exception:
        raise UnitError(
            f"{value!r} has unit '{q.units:~}', which cannot be converted to {unit} ({quantity})"
        ) from None


def parse(text: str):
    """A pint Quantity from ``text``, after checking that reading it is bounded.

    pint evaluates the text as arithmetic, and ``10**10**10`` would take the process
    for ever; accepted is a text of at most :data:`MAX_TEXT` characters, parentheses
    nested at most :data:`MAX_PARENS` deep, and exponents (``**`` or ``^``) that are
    plain numbers of at most :data:`MAX_EXPONENT` applied to a unit or a number, not
    to a parenthesis or another power (no towers).

    Raises
    ------
    UnitError
        Text outside those bounds, or that pint cannot read.
    """
    import re

    value = text
    text = text.strip()
    if len(text) > MAX_TEXT:
        raise UnitError(f"{value[:40]!r}... is {len(text)} characters long; a quantity is a number and a unit "
                        f"of at most {MAX_TEXT} characters")
    depth = 0
    for ch in text:
        depth += (ch == "(") - (ch == ")")
        if depth > MAX_PARENS:
            raise UnitError(f"cannot read {value!r}: parentheses nested more than {MAX_PARENS} deep")
    spaced = text.replace("**", "^")
    for m in re.finditer(r"\^", spaced):
        before = spaced[:m.start()].rstrip()
        after = spaced[m.end():].lstrip()
        power = re.match(r"[-+]?\s*(\d+(\.\d*)?|\.\d+)(?![\d.eE])", after)
        if not before or before[-1] in ")^" or power is None:
            raise UnitError(f"cannot read {value!r}: an exponent must be a plain number applied to a unit "
                            f"(e.g. 'cm^2'), not to a parenthesis or another power")
        rest = after[power.end():].lstrip()
        if rest.startswith("^"):
            raise UnitError(f"cannot read {value!r}: powers of powers are not read")
        if abs(float(power.group(0).replace(" ", ""))) > MAX_EXPONENT:
            raise UnitError(f"cannot read {value!r}: exponent {power.group(0).strip()} is larger than "
                            f"{MAX_EXPONENT}; write the number with an e, e.g. '1e20 cm'")
    try:
        return registry().Quantity(text)
    except Exception as exc:  # pint raises several unrelated types for bad text
        raise UnitError(f"cannot read {value!r} as a quantity ({exc.__class__.__name__})") from None


def format_bytes(n: float) -> str:
    """A size in the unit that shows it: ``512 B``, ``3.2 MiB``, ``1.5 GiB``."""
    for unit, size in (("TiB", 2 ** 40), ("GiB", 2 ** 30), ("MiB", 2 ** 20), ("KiB", 2 ** 10)):
        if abs(n) >= size:
            return f"{n / size:.3g} {unit}"
    return f"{int(n)} B"
