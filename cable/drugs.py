"""Conductance block by drugs from their concentrations: the ``[drug.NAME]`` case section.

Each compound has a concentration and, per blocked conductance, an IC50 and a Hill
coefficient h. The fraction of the conductance left unblocked is the Hill equation
(Hill 1910, J Physiol 40:iv-vii; its use for channel block is common practice in
safety pharmacology)::

    f = 1 / (1 + (C / IC50)^h)

Several compounds multiply their factors (independent binding, common practice), and
the product multiplies the conductance as set by ``[membrane]`` (its ``parameters`` and
``scale``), before any ``[region.NAME]``. Example::

    [drug.compound_a]
    concentration = "1 uM"
    block = {G_Na = {ic50 = "3 uM", hill = 1.0}, G_Kr = {ic50 = "0.5 uM", hill = 0.9}}

``drug.compound_a.concentration`` is a case key like any other (``--set``, ``[sweep]``,
``cable critical``, ``cable calibrate``), in the canonical unit mM.
"""

from __future__ import annotations

from dataclasses import dataclass

from cable.case.sections import Section
from cable.case.values import CaseError, Key, read_section, resolved_table

#: the keys of one [drug.NAME] entry
DRUG_KEYS = {
    "concentration": Key("quantity", "concentration", required=True, minimum=0.0,
                         meaning="concentration of the compound [mM] (e.g. \"1 uM\")"),
    "block": Key("table", required=True,
                 meaning="per conductance: {ic50 = \"3 uM\", hill = 1.0} (Hill equation of block)"),
}

#: the keys of one conductance's block
BLOCK_KEYS = {
    "ic50": Key("quantity", "concentration", required=True, minimum=0.0, exclusive_minimum=True,
                meaning="concentration of half block [mM]"),
    "hill": Key("quantity", default=1.0, minimum=0.0, exclusive_minimum=True, maximum=10.0,
                meaning="Hill coefficient (default 1)"),
}


@dataclass(frozen=True)
class Drug:
    """One compound: its concentration [mM] and ``{conductance: (ic50 [mM], hill)}``."""

    name: str
    concentration: float
    block: dict

    def factors(self) -> dict:
        """Fraction unblocked per conductance at this concentration."""
        return {g: unblocked(self.concentration, ic50, hill) for g, (ic50, hill) in self.block.items()}


def unblocked(concentration: float, ic50: float, hill: float) -> float:
    """The Hill equation: fraction of a conductance left at ``concentration`` (same unit as ic50)."""
    return 1.0 / (1.0 + (concentration / ic50) ** hill)


def validate(raw, case) -> tuple[Drug, ...]:
    """Check a ``[drug]`` section against the case's model; returns the compounds."""
    from cable.membrane import get_model

    if not isinstance(raw, dict) or not raw:
        raise CaseError(f"[drug] must hold one table per compound, e.g. [drug.compound_a], got {raw!r}.")
    if "concentration" in raw or "block" in raw:
        raise CaseError("[drug] holds one table per compound: write [drug.NAME] (e.g. [drug.compound_a]) "
                        "with concentration and block inside it.")
    model = get_model(case.membrane.model)
    drugs = []
    for name, table in raw.items():
        if not isinstance(table, dict):
            raise CaseError(f"drug.{name} = {table!r}: must be a table with concentration and block.")
        d = read_section(f"drug.{name}", table, DRUG_KEYS)
        if not d["block"]:
            raise CaseError(f"drug.{name}.block is empty; give at least one conductance, e.g. "
                            f"{{{model.conductances[0]} = {{ic50 = \"1 uM\", hill = 1}}}}.")
        block = {}
        for g, spec in resolved_table(d["block"], model, "conductance", f"drug.{name}.block").items():
            where = f"drug.{name}.block.{g}"
            if not isinstance(spec, dict):
                raise CaseError(f"{where} = {spec!r}: must be a table {{ic50 = ..., hill = ...}}.")
            b = read_section(where, spec, BLOCK_KEYS)
            block[g] = (b["ic50"], b["hill"])
        drugs.append(Drug(name, d["concentration"], block))
    return tuple(drugs)


def drug_factors(case) -> dict:
    """Product of every compound's unblocked fraction per conductance (empty without drugs)."""
    out: dict = {}
    for drug in case.extra.get("drug", ()):
        for g, f in drug.factors().items():
            out[g] = out.get(g, 1.0) * f
    return out


def describe(case) -> str:
    """One line per conductance: the factor applied and the compounds behind it ("" without drugs)."""
    drugs = case.extra.get("drug", ())
    if not drugs:
        return ""
    lines = []
    for g, f in drug_factors(case).items():
        who = ", ".join(f"{d.name} {d.concentration * 1e3:.4g} uM" for d in drugs if g in d.block)
        lines.append(f"drug block: {g} x {f:.4g} ({who})")
    return "\n".join(lines)


def key_unit(key: str) -> str | None:
    """The canonical unit of a ``drug.*`` key, or None when the key is not one."""
    parts = key.split(".")
    if parts[0] != "drug":
        return None
    if parts[-1] in ("concentration", "ic50"):
        return "mM"
    return "1"


#: the [drug.NAME] section, as the loader reads it (see cable.case.sections)
SECTION = Section("drug", is_list=False, validate=validate, keys=DRUG_KEYS)

