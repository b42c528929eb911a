"""The quantity and unit of a dotted case key, as the loader converts its value.

One lookup for every caller that must label or convert the values of a key it did not
read itself: sweep coordinates (:mod:`cable.sweep.spec`), the searched key of
:func:`cable.protocols.critical.find_critical` and of the calibration.
"""

from __future__ import annotations

from dataclasses import dataclass

from cable import units
from cable.case.schema import SECTIONS
from cable.case.validated import CaseError


@dataclass(frozen=True)
class KeyUnit:
    """What the loader makes of a key's value.

    Attributes
    ----------
    quantity : str or None
        The quantity kind the value is converted as (:data:`cable.units.CANONICAL`);
        None when the value is not a quantity (a whole number, a choice, a flag) or the
        key is not known.
    unit : str
        The unit of the validated value ("1": dimensionless; "" when not known).
    """

    quantity: str | None = None
    unit: str = ""


def unit_of(key: str, case) -> KeyUnit:
    """The quantity and unit of case key ``key`` (any spelling the loader reads) in ``case``.

    Parameters
    ----------
    key : str
        A dotted case key, e.g. ``membrane.parameters.K_o``, ``region.zone.end``,
        ``stimulus.S2.onset`` (or ``fibre.dx``, ``stimulus.1.start``).
    case : Case
        The case the key belongs to (its model names the parameters).
    """
    from cable.case.names import canonical_key, entry_parts

    try:
        parts = entry_parts(canonical_key(key, case.raw))
    except CaseError:
        return KeyUnit()
    if parts[0] == "region" and len(parts) == 3 and parts[1] in ("scale", "parameters"):
        parts = ["membrane"] + parts[1:]  # region.NAME.scale.X, .parameters.X: as [membrane]'s
    if parts[0] == "membrane" and len(parts) == 3 and parts[1] == "scale":
        return KeyUnit("dimensionless", "1")
    if parts[0] == "membrane" and len(parts) == 3 and parts[1] == "parameters":
        from cable.membrane import get_model

        try:
            par = get_model(case.membrane.model).parameter(parts[2])
        except KeyError:  # unknown parameter: the loader's message comes later
            return KeyUnit()
        return KeyUnit(None if par.choices is not None else par.quantity, par.units)
    spec = None
    if len(parts) == 2 and parts[0] == "region":
        from cable.regions import REGION_KEYS

        spec = REGION_KEYS.get(parts[1])
    elif len(parts) == 2 and parts[0] in SECTIONS:
        spec = SECTIONS[parts[0]].get(parts[1])
    if spec is None or spec.kind not in ("quantity", "int"):
        return KeyUnit()
    return KeyUnit(spec.quantity if spec.kind == "quantity" else None, units.CANONICAL.get(spec.quantity, ""))
