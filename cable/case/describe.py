"""What a case and a membrane model imply, as a notebook shows them: concise ``repr`` and HTML.

Values are printed in their units at a sensible scale ("50 µm", "5 µs", "6 mm"), never
with float noise (``0.6000000000000001``), and with the derived quantities that are
cheap to compute without a run: nodes and steps, D, the space constant and dx against
it, the stability limit of the chosen diffusion scheme.
"""

from __future__ import annotations

import html
import math

#: rounding of the numbers shown [significant figures]; the float noise of a unit
#: conversion (0.6000000000000001) lies far below it
FIGURES = 4


def number(value: float, figures: int = FIGURES) -> str:
    """``value`` to ``figures`` significant figures, without trailing zeros or noise."""
    if value == 0 or not math.isfinite(value):
        return f"{value:g}"
    return f"{float(f'{value:.{figures}g}'):g}"


def length(cm: float) -> str:
    """A length [cm] in cm, mm or µm, whichever reads best."""
    if abs(cm) >= 1.0 or cm == 0:
        return f"{number(cm)} cm"
    if abs(cm) >= 0.1:
        return f"{number(cm * 10)} mm"
    return f"{number(cm * 1e4)} µm"


def time(ms: float) -> str:
    """A time [ms] in s, ms or µs."""
    if abs(ms) >= 1e4:
        return f"{number(ms / 1e3)} s"
    if abs(ms) >= 0.1 or ms == 0:
        return f"{number(ms)} ms"
    return f"{number(ms * 1e3)} µs"


def space_constant(case, model) -> float | None:
    """The space constant lambda = sqrt(D tau_m) [cm] at rest (None for a single cell).

    tau_m is C_m over the membrane's slope conductance at the resting state with the
    gates held (the instantaneous conductance, by a centred difference of the model's
    numpy reference at +-0.01 mV): the passive cable's length constant of cable theory
    (Hodgkin & Rushton 1946, Proc R Soc B 133:444), cheap and without a run.
    """
    import numpy as np

    from cable.preparation import node_parameters

    if case.fiber is None:
        return None
    v = np.array([model.resting_potential - 0.01, model.resting_potential + 0.01])
    s = np.tile(model.initial_states(), (2, 1))
    p = node_parameters(case, model, 2)
    try:
        _, _, i_ion = model.reference(v, s, p)
    except Exception:     # a model whose reference needs more than this: no lambda shown
        return None
    slope = float(i_ion[1] - i_ion[0]) / 0.02          # [model current / mV]
    rate = slope * model.ion_scale(case.capacitance)     # [1/ms]: g_m / C_m
    if not rate > 0:
        return None
    return math.sqrt(case.fiber.diffusivity / rate)


def case_facts(case) -> list[tuple[str, str]]:
    """(name, value) of what the case sets and implies, in reading order."""
    from cable.membrane import get_model

    model = get_model(case.membrane.model)
    num = case.numerics
    facts = [("model", model.name)]
    if case.membrane.temperature is not None:
        facts.append(("temperature", f"{number(case.membrane.temperature)} °C"))
    changed = [f"{k} × {number(v)}" for k, v in case.membrane.scale.items()]
    changed += [f"{k} = {v if isinstance(v, str) else number(v)}" for k, v in case.membrane.parameters.items()]
    if changed:
        facts.append(("membrane changes", ", ".join(changed)))
    steps = int(round(case.duration / num.dt))
    if case.fiber is not None:
        f = case.fiber
        facts.append(("fibre", f"{length(f.length)}, dx {length(f.dx)}, {f.n_nodes} nodes"))
        facts.append(("D", f"{number(f.diffusivity)} cm²/ms"))
        lam = space_constant(case, model)
        if lam is not None:
            facts.append(("space constant", f"{length(lam)} (dx = {number(f.dx / lam, 2)} λ)"))
        if num.diffusion == "forward-euler":
            from cable.fiber import forward_euler_limit

            facts.append(("stability", f"dt ≤ {time(forward_euler_limit(f, num))} (forward Euler)"))
        else:
            facts.append(("stability", f"{num.diffusion}: no dt limit from diffusion"))
    else:
        facts.append(("fibre", "none (a single cell)"))
    facts.append(("time", f"{time(case.duration)} in {steps:,} steps of {time(num.dt)}, "
                          f"stored every {time(case.output_every)}"))
    for k, s in enumerate(case.stimuli):
        start = "0" if s.x == 0 else length(s.x)
        where = f" at {start}–{length(s.x + s.width)}" if case.fiber is not None else ""
        train = f", {s.count} × every {time(s.cycle_length)}" if s.count > 1 and s.cycle_length else ""
        facts.append((f"stimulus {s.name or k}", f"{number(s.amplitude)} µA/cm² for {time(s.duration)} from "
                                                 f"{time(s.onset)}{where}{train}"))
    regions = case.raw.get("region")
    if regions:
        facts.append(("regions", str(len(regions) if isinstance(regions, (list, dict)) else 1)))
    return facts


def case_repr(case) -> str:
    facts = dict(case_facts(case))
    parts = [facts["model"], facts["fibre"], facts["time"]]
    if "space constant" in facts:
        parts.insert(2, f"λ {facts['space constant']}")
    return "Case(" + "; ".join(parts) + ")"


def html_table(title: str, rows, header=None) -> str:
    """A small HTML table (a notebook's rich display)."""
    esc = html.escape
    out = [f"<table><caption style='text-align:left'><b>{esc(title)}</b></caption>"]
    if header:
        out.append("<tr>" + "".join(f"<th style='text-align:left'>{esc(h)}</th>" for h in header) + "</tr>")
    for row in rows:
        out.append("<tr>" + "".join(f"<td style='text-align:left'>{esc(str(c))}</td>" for c in row) + "</tr>")
    return "".join(out) + "</table>"


def case_html(case) -> str:
    return html_table("Case", case_facts(case))


def _units(text: str) -> str:
    from cable.plot._common import unit_text

    return unit_text(text) or "1"


def model_repr(model) -> str:
    scalable = ", ".join(model.conductances)
    basis = "µA/cm²" if model.current_basis == "area" else "µA/µF"
    currents = f"; currents {', '.join(model.current_names)} [{basis}]" if model.current_names else ""
    return (f"MembraneModel('{model.name}': {len(model.states)} states, {len(model.parameters)} parameters "
            f"(scalable: {scalable}){currents}; rest {number(model.resting_potential)} mV)")


def model_html(model) -> str:
    head = html_table(model.name, [("summary", model.summary), ("reference", model.citation),
                                   ("rest", f"{number(model.resting_potential)} mV"),
                                   ("activation threshold", f"{number(model.threshold)} mV"),
                                   ("currents", ", ".join(model.current_names) or "-")])
    states = html_table("states", [(s.name, number(s.initial, 6), _units(s.units), s.meaning) for s in model.states],
                        ("name", "initial", "unit", "meaning"))
    pars = html_table("parameters (* scalable)",
                      [(("*" if p.name in model.conductances else "") + p.name,
                        p.default if isinstance(p.default, str) else number(p.default, 6),
                        "-" if p.choices else _units(p.units), p.meaning) for p in model.parameters],
                      ("name", "default", "unit", "meaning"))
    return head + states + pars
