"""A CellML model as a description (:class:`Equations`), recognised and converted.

What is recognised (each decision is a note shown by ``cable models FILE``):

* the membrane potential: the state given by the option ``potential``, else the state in
  voltage units, else (files in dimensionless units) the state named V, v, Vm or V_m,
  preferring one in a component whose name contains "membrane";
* the stimulus current: the option ``stimulus_current``, else the variables that depend
  on time and whose name contains "stim"; it is set to zero in the potential's equation (the
  case's stimuli are used), and replaced by the case's stimulus in any other state's
  derivative that carries it (a charge balance: O'Hara-Rudy 2011's ki).
  Without the option, a constant of value 0 whose name contains "stim" in the potential's
  equation (the ``I_stim = 0`` of a file written by ``cable models NAME --cellml``) is the
  stimulus's place too: it is left out of the potential's equation, so that it is not taken
  for a current, and out of the parameters where nothing else uses it;
* the capacitance: a constant in the potential's equation with units of capacitance per
  area (currents per area, ``current_basis = "area"``; the value is the model's C_m) or
  of capacitance (currents divided by it: per capacitance); with neither, the currents
  are taken per capacitance (uA/uF), as in files written in dimensionless units;
* the sign convention of Hodgkin & Huxley (1952), where V is the displacement from rest
  and depolarisation is negative: an initial potential within 5 mV of 0 and a sodium
  reversal potential (a variable named E_Na or ENa) below -50 mV; the option
  ``convention`` ("modern" or "hodgkin-huxley-1952") decides instead. Such a file is
  read with V_modern = -65 mV - V_file (the rest of the built-in model, common practice).

Units are converted once, here: time to ms, the potential to mV, currents into the
basis; every other variable keeps the file's units (listed by ``cable models``). Every
constant of the file is a parameter named by its variable (``component.variable`` where
the name is not unique); those in units of conductance per area or per capacitance, or
of permeability (length per time), and in dimensionless files those named g..., G... or
P<capital>..., are scalable.

A file written by ``cable models NAME --cellml`` carries the package's own data of the
model in a comment (:mod:`.cellml_export`): where the file's variables still have the
units the export gave them, their unit strings, meanings, kinds, bounds and scalable flags
are taken from it, and so are the citation, summary, threshold, temperature parameter,
``current_states`` and the order of the currents (a note says so).
"""

from __future__ import annotations

import re
from dataclasses import replace
from pathlib import Path

import sympy

from cable.membrane.equations.cellml_read import CellMLCode, equations, initial_values, read
from cable.membrane.equations.description import POTENTIAL, STIMULUS, EqParameter, EqState, Equations
from cable.membrane.equations.errors import EquationError

CONVENTIONS = ("modern", "hodgkin-huxley-1952")
#: V_modern at the 1952 file's rest (V_file = 0) [mV] (the built-in model's rest)
HH1952_REST = -65.0


def _units(model, name):
    import libcellml as L
    u = model.units(name)
    return u if u is not None else L.Units(name)


def _ref(*parts):
    """A libcellml Units object from (unit, prefix, exponent) triples."""
    import libcellml as L
    u = L.Units("ref")
    for unit, prefix, exponent in parts:
        u.addUnit(unit, prefix, float(exponent))
    return u


_REFS = {
    "voltage": (("volt", "milli", 1),),
    "time": (("second", "milli", 1),),
    "capacitance_area": (("farad", "micro", 1), ("metre", "centi", -2)),
    "capacitance": (("farad", "micro", 1),),
    "conductance_area": (("siemens", "milli", 1), ("metre", "centi", -2)),
    "conductance_capacitance": (("siemens", "", 1), ("farad", "", -1)),
    "conductance": (("siemens", "", 1),),
    "permeability": (("metre", "", 1), ("second", "", -1)),
}


def _factor(model, units_name, kind):
    """Canonical units per file unit (e.g. 1000 for volt -> mV), or None if incompatible."""
    import libcellml as L
    if units_name == "dimensionless":
        return None
    u, ref = _units(model, units_name), _ref(*_REFS[kind])
    if not L.Units.compatible(u, ref):
        return None
    f = L.Units.scalingFactor(u, ref)
    return 1.0 / f if f else None


def _names(code: CellMLCode) -> dict:
    """(array, index) -> parameter/state/intermediate name (bare where unique)."""
    entries = [(arr, k, e) for arr, lst in code.info.items() for k, e in enumerate(lst)]
    count: dict = {}
    for _, _, e in entries:
        count[e["name"]] = count.get(e["name"], 0) + 1
    # "V" is the description's potential: a file variable of that name keeps its component
    return {(arr, k): (e["name"] if count[e["name"]] == 1 and e["name"] != POTENTIAL
                       else f"{e['component']}.{e['name']}") for arr, k, e in entries}


def _find(names: dict, wanted: str, arrays, key: str, path):
    hits = [k for k, n in names.items() if k[0] in arrays and
            (n == wanted or n.split(".")[-1] == wanted and "." not in wanted)]
    exact = [k for k in hits if names[k] == wanted]
    hits = exact or hits
    if len(hits) != 1:
        cands = sorted(names[k] for k in names if k[0] in arrays)
        from cable.suggest import closest

        near = closest(wanted, cands, n=3)
        raise EquationError(f"membrane.{key} = {wanted!r}: no {'unique ' if hits else ''}variable of that name in "
                            f"'{path}'.{' Nearest: ' + ', '.join(near) + '.' if near else ''}")
    return hits[0]


def _potential(code, names, option):
    path, states = code.path, code.info["states"]
    if option:
        return _find(names, option, ("states",), "potential", path)
    volt = [k for k, s in enumerate(states) if _factor(code.model, s["units"], "voltage")]
    if len(volt) == 1:
        return ("states", volt[0])
    cands = volt or [k for k, s in enumerate(states) if s["name"] in ("V", "v", "Vm", "V_m", "V_ode")]
    memb = [k for k in cands if "membrane" in states[k]["component"].lower()]
    if len(memb) == 1:
        return ("states", memb[0])
    if len(cands) == 1:
        return ("states", cands[0])
    listed = ", ".join(f"{states[k]['component']}.{states[k]['name']}" for k in cands) or "(none)"
    raise EquationError(f"CellML file '{path}': the membrane potential cannot be recognised; candidates "
                        f"(states in voltage units, or named V): {listed}. Choose one with "
                        f"[membrane] potential = \"component.variable\".")


def build(path, potential: str | None = None, stimulus_current: str | None = None,
          convention: str | None = None, name: str | None = None) -> Equations:
    """The description of the CellML model in ``path`` (see the module docstring)."""
    if convention is not None and convention not in CONVENTIONS:
        raise EquationError(f"membrane.convention = {convention!r}: allowed: {', '.join(CONVENTIONS)}.")
    code = read(path)
    names = _names(code)
    voi = sympy.Symbol("time_of_the_file", real=True)
    sym = {k: sympy.Symbol(n, real=True) for k, n in names.items()}
    eqs = equations(code, sym, voi)
    values = initial_values(code)
    notes = []
    vkey = _potential(code, names, potential)
    vinfo = code.info["states"][vkey[1]]
    notes.append(f"membrane potential: {names[vkey]} [{vinfo['units']}]")
    s_v = _factor(code.model, vinfo["units"], "voltage")
    if s_v is None:
        _check_dimensionless(code, names[vkey], vinfo["units"], "mV")
        s_v = 1.0
        notes.append("  dimensionless units: taken as mV")
    s_t = _factor(code.model, code.voi["units"], "time")
    if s_t is None:
        _check_dimensionless(code, code.voi["name"], code.voi["units"], "ms")
        s_t = 1.0
        notes.append("time: dimensionless units, taken as ms")
    elif s_t != 1.0:
        notes.append(f"time: {code.voi['units']} converted to ms (x {s_t:g})")

    # stimulus: removed (set to zero)
    depends_t = _time_dependent(eqs, voi)
    if stimulus_current:
        stim = [_find(names, stimulus_current, ("algebraic_variables", "computed_constants", "constants"),
                      "stimulus_current", code.path)]
    else:
        stim = [k for k in depends_t if "stim" in names[k].lower()]
    zero = {sym[k]: sympy.Integer(0) for k in stim}
    idle = [] if stimulus_current else _idle_stimulus(names, sym, eqs, values, vkey)
    found = [names[k] for k in stim] + [f"{names[k]} (a constant 0 in the potential's equation)" for k in idle]
    notes.append("stimulus removed (the case's stimuli are used): " + (", ".join(found) if found else "none found"))

    # the sign convention
    v0 = values["states"][vkey[1]] * s_v
    ena = [values[k[0]][k[1]] * s_v for k, n in names.items()
           if n.split(".")[-1] in ("E_Na", "ENa") and k[0] in ("constants", "computed_constants")]
    if convention is None:
        convention = "hodgkin-huxley-1952" if abs(v0) < 5.0 and ena and min(ena) < -50.0 else "modern"
        why = "recognised: initial V near 0, E_Na below -50 mV" if convention != "modern" else "recognised"
    else:
        why = "given by membrane.convention"
    if convention == "modern":
        c0, c1 = 0.0, 1.0 / s_v
        notes.append(f"sign convention: modern ({why})")
    else:
        c0, c1 = HH1952_REST / s_v, -1.0 / s_v
        notes.append(f"sign convention: Hodgkin-Huxley 1952, V the displacement from rest, depolarisation "
                     f"negative ({why}); potentials reported as V = {HH1952_REST:g} mV - V_file")
    V = sympy.Symbol(POTENTIAL, real=True)
    to_file = {sym[vkey]: c0 + c1 * V}
    eq = _assemble(code, names, sym, eqs, values, vkey, (c0, c1, s_t), to_file, (zero, {sym[k] for k in idle}),
                   voi, notes, name)
    return _restore(eq, path) if (s_v, s_t, convention) == (1.0, 1.0, "modern") else eq


def _idle_stimulus(names, sym, eqs, values, vkey) -> list:
    """The constants of value 0 named like a stimulus in the potential's equation (see the
    module docstring)."""
    used = eqs[("rates", vkey[1])].free_symbols
    return [("constants", k) for k, v in enumerate(values["constants"])
            if float(v) == 0.0 and "stim" in names[("constants", k)].lower() and sym[("constants", k)] in used]


def _restore(eq: Equations, path) -> Equations:
    """``eq`` with the package's data of an exported model put back (see the module docstring)."""
    from cable.membrane.equations.cellml_export import read_metadata

    try:
        meta = read_metadata(Path(path).read_text(encoding="utf-8", errors="replace"))
    except OSError:
        meta = None
    if not meta:
        return eq
    pmeta, smeta = meta.get("parameters", {}), meta.get("states", {})

    def same_units(entry, units):  # the variable still has the units the export gave it
        return entry is not None and entry.get("file_units") == units

    params = tuple(replace(p, units=e["units"], meaning=e["meaning"], quantity=e["quantity"], scalable=e["scalable"],
                           minimum=e["minimum"], maximum=e["maximum"])
                   if same_units(e := pmeta.get(p.name), p.units) else p for p in eq.parameters)
    states = tuple(replace(s, units=e["units"], meaning=e["meaning"])
                   if same_units(e := smeta.get(s.name), s.units) else s for s in eq.states)
    names = {p.name for p in params}
    temperature = meta.get("temperature_parameter")
    kept = sum(a is not b for a, b in zip(params + states, eq.parameters + eq.states))
    params = tuple(_labelled(p, pmeta.get(p.name), names) for p in params)
    derivatives, buffers, params = _restore_balances(eq, meta, params)
    state_names = {s.name for s in states}
    old = {k: v for k, v in meta.get("old_names", {}).items() if v in names | state_names}
    currents = dict(eq.currents)
    order = meta.get("currents") or []
    if sorted(order) == sorted(currents):  # the exported model's order (the import's is by name)
        currents = {n: currents[n] for n in order}
    return replace(eq, citation=meta.get("citation", eq.citation), summary=meta.get("summary", eq.summary),
                   threshold=float(meta.get("threshold", eq.threshold)), parameters=params, states=states,
                   temperature_parameter=temperature if temperature in names else None,
                   current_states=meta.get("current_states", eq.current_states),
                   euler_order=meta.get("euler_order", eq.euler_order), derivatives=derivatives,
                   buffers=buffers, old_names=old, currents=tuple(currents.items()),
                   notes=eq.notes + (f"written by cable: the citation, threshold, current_states and the units, "
                                     f"meanings and scalable flags of {kept} variables read from the file's "
                                     f"cable-description comment",))


def _labelled(p: EqParameter, entry, names) -> EqParameter:
    """``p`` with the labels (and the defaults that follow a label) the export recorded."""
    if not entry:
        return p
    choices = entry.get("choices")
    by_label = entry.get("by_label")
    if choices and float(p.default).is_integer() and 0 <= int(p.default) < len(choices):
        p = replace(p, default=choices[int(p.default)], choices=tuple(choices), minimum=None, maximum=None)
    if by_label and by_label[0] in names:
        p = replace(p, by_label=(by_label[0], dict(by_label[1])))
    return p


def _restore_balances(eq: Equations, meta: dict, params):
    """The derivatives, buffers and parameters of an exported model with its buffered states (the
    total's derivative, a variable of the file) and its stimulus in a derivative put back."""
    inter = {n for n, _ in eq.intermediates}
    pnames = {p.name for p in params}
    deriv = dict(eq.derivatives)
    buffers = []
    for y, buf, k, flux in meta.get("buffers", []):
        if y in deriv and flux in inter and buf in pnames and k in pnames:
            deriv[y] = sympy.Symbol(flux, real=True)
            buffers.append((y, buf, k))
    stim = meta.get("stimulus")
    if stim in pnames:
        sym = sympy.Symbol(stim, real=True)
        cap = meta.get("stimulus_capacitance")  # area basis: the file's I_stim = i_stim C_m
        value = sympy.Symbol(STIMULUS, real=True) * (sympy.Symbol(cap, real=True) if cap in pnames else 1)
        deriv = {n: e.xreplace({sym: value}) if isinstance(e, sympy.Basic) else e for n, e in deriv.items()}
        used = [e for _, e in eq.intermediates + eq.currents if isinstance(e, sympy.Basic) and sym in e.free_symbols]
        if not used:
            params = tuple(p for p in params if p.name != stim)
    return tuple((n, deriv[n]) for n, _ in eq.derivatives), tuple(buffers), params


def _check_dimensionless(code, variable, units, canonical):
    if units != "dimensionless":
        raise EquationError(f"CellML file '{code.path}': variable {variable} is in units '{units}', which "
                            f"cannot be converted to {canonical}.")


def _time_dependent(inter: dict, voi) -> set:
    """Names of the intermediates that depend on time (directly or through others)."""
    dep: dict = {}
    for n, e in inter.items():  # in libcellml's order: a variable after those it uses
        dep[n] = voi in e.free_symbols or any(dep.get(str(s), False) for s in e.free_symbols)
    # a second pass for variables defined before those they use (computed in other functions)
    for n, e in inter.items():
        dep[n] = dep[n] or any(dep.get(str(s), False) for s in e.free_symbols)
    return {n for n, d in dep.items() if d}


def _fold_switches(expr, defaults: dict):
    """Piecewise expressions whose conditions involve constants only, at the constants' defaults."""
    def foldable(e):
        return isinstance(e, sympy.Piecewise) and all(
            {str(s) for s in c.free_symbols} <= defaults.keys() for _, c in e.args)

    def fold(e):
        for val, cond in e.args:
            if bool(cond.xreplace({sympy.Symbol(n, real=True): v for n, v in defaults.items()})):
                return val
        return sympy.nan

    return expr.replace(foldable, fold)


def _current_terms(dvdt, inter: dict, algebraic: set):
    """The algebraic variables dV/dt is a linear combination of, sums written out."""
    expanded = dvdt
    for _ in range(4):
        subs = {}
        single = len([s for s in expanded.free_symbols if str(s) in algebraic]) == 1
        for s in expanded.free_symbols:
            d = inter.get(str(s))
            # the total as another name of the one current (I_ion = I_L); a current named as a
            # term of the total keeps that name (I_CaL = i_CaL)
            alias = single and isinstance(d, sympy.Symbol) and str(d) in algebraic
            if str(s) in algebraic and (alias or isinstance(d, sympy.Add) and all(
                    any(str(f) in algebraic for f in t.free_symbols) and len(t.free_symbols) == 1
                    for t in d.args)):
                subs[s] = d
        if not subs:
            break
        expanded = expanded.xreplace(subs)
    terms = [s for s in expanded.free_symbols if str(s) in algebraic]
    return expanded, sorted(terms, key=str)


def _carried_stimulus(rates, zero, v_index, v_scale, notes, names, constant) -> dict:
    """The case's stimulus in place of the file's in the other states' derivatives (a charge
    balance carrying it, O'Hara et al. 2011's K_i): the file's stimulus variable s enters the
    potential's derivative as c s, c = d(dV/dt)/ds (mV/ms per file unit; it carries the sign
    and C_m); the case's stimulus i_stim [mV/ms] is that term, so s = i_stim / c there. Where
    c is not a nonzero expression of the file's constants (``constant``: their symbols), the
    variable stays 0 there too (as in the potential's equation) and a note says so."""
    stim = sympy.Symbol(STIMULUS, real=True)
    dvdt = rates[v_index] / v_scale
    out = {}
    for s in zero:
        users = [names[("states", k)] for k, e in rates.items() if k != v_index and s in e.free_symbols]
        if not users:
            continue
        c = sympy.diff(dvdt, s)
        if c == 0 or not c.free_symbols <= constant:
            notes.append(f"stimulus: {s} set to 0 in the derivative of {', '.join(sorted(users))} too (its "
                         f"factor in dV/dt is not a constant)")
            continue
        out[s] = stim / c
        notes.append(f"stimulus: the case's stimulus enters the derivative of {', '.join(sorted(users))} in "
                     f"place of {s} (the charge it carries)")
    return out


def _assemble(code, names, sym, eqs, values, vkey, scales, to_file, stimulus, voi, notes, name):
    c0, c1, s_t = scales
    zero, idle = stimulus  # the stimulus variables (zero everywhere); the constants 0 in its place
    path, info = code.path, code.info
    inter = {names[k]: e for k, e in eqs.items() if k[0] in ("computed_constants", "algebraic_variables")}
    for s in zero:
        inter[str(s)] = sympy.Integer(0)
    consts = {names[("constants", k)]: float(v) for k, v in enumerate(values["constants"])}
    timed = _time_dependent(inter, voi)
    if timed:
        folded = []
        for n in sorted(timed):
            new = _fold_switches(inter[n], consts)
            if new != inter[n]:
                folded.append(n)
            inter[n] = new
        if folded:
            notes.append("time-dependent branches switched off by their constants' defaults: " + ", ".join(folded))
    rates = {k[1]: e for k, e in eqs.items() if k[0] == "rates"}
    still = _time_dependent(inter, voi)
    used = {str(s) for e in rates.values() for s in e.free_symbols}
    if voi in {s for e in rates.values() for s in e.free_symbols} or (still & used):
        raise EquationError(f"CellML file '{path}': its equations depend on time other than through the "
                            f"stimulus ({', '.join(sorted(still & used)) or 'a rate'}); name the stimulus "
                            f"with [membrane] stimulus_current = \"component.variable\".")
    sub = dict(to_file)
    sub.update(zero)
    constant = {sym[k] for k in sym if k[0] in ("constants", "computed_constants")}
    carried = _carried_stimulus(rates, zero, vkey[1], c1 * s_t, notes, names, constant)
    inter = {n: e.xreplace(sub) for n, e in inter.items() if n not in still}
    rates = {k: e.xreplace(carried if k != vkey[1] else {}).xreplace(sub) for k, e in rates.items()}

    states, deriv = [], []
    for k, st in enumerate(info["states"]):
        if k == vkey[1]:
            continue
        n = names[("states", k)]
        states.append(EqState(n, float(values["states"][k]), st["units"], f"state of {st['component']}"))
        deriv.append((n, rates[k] / s_t))
    dvdt = rates[vkey[1]] / (c1 * s_t)  # mV/ms

    basis, k_ion, capacitance = _capacitance(code, names, rates[vkey[1]], consts, notes)
    algebraic = {names[("algebraic_variables", k)] for k in range(len(info["algebraic_variables"]))}
    currents = _currents(dvdt.xreplace({s: sympy.Integer(0) for s in idle}), inter,
                         algebraic - {str(s) for s in zero}, k_ion)
    others = list(inter.values()) + [e for _, e in deriv]
    unused = {str(s) for s in idle if not any(s in e.free_symbols for e in others)}

    params = []
    for k, c in enumerate(info["constants"]):
        n = names[("constants", k)]
        if n not in unused:
            params.append(EqParameter(n, consts[n], c["units"], f"constant of {c['component']}",
                                      scalable=_scalable(code.model, c, n)))
    v0 = (values["states"][vkey[1]] - c0) / c1
    return Equations(
        name=name or Path(path).stem, citation=f"CellML model '{code.model.name()}' ({Path(path).name})",
        summary=f"imported from the CellML file {Path(path).name}", resting_potential=float(v0),
        states=tuple(states), parameters=tuple(params), intermediates=tuple(inter.items()),
        derivatives=tuple(deriv), currents=tuple(currents), current_basis=basis, threshold=-20.0,
        capacitance=capacitance, notes=tuple(notes))


def _capacitance(code, names, dv_rate, consts, notes):
    """(current basis, factor from -dV/dt to the ionic current, C_m [uF/cm^2] or None) from the
    capacitance among the constants of the potential's equation (per area, absolute or none)."""
    info = code.info
    cap = [s for s in dv_rate.free_symbols if str(s) in consts]
    area = [(s, f) for s in cap for f in [_factor(code.model, _unit_of(info, names, str(s)), "capacitance_area")] if f]
    absolute = [s for s in cap if _factor(code.model, _unit_of(info, names, str(s)), "capacitance")]
    if area:
        s, f = area[0]
        capacitance = consts[str(s)] * f
        notes.append(f"capacitance: {s} = {capacitance:g} uF/cm^2 (the model's C_m: used when the case gives "
                     f"none; currents per membrane area, uA/cm^2)")
        return "area", s * f, capacitance
    what = (f"{absolute[0]} (a capacitance, not per area): currents divided by it" if absolute
            else "none in the potential's equation")
    notes.append(f"capacitance: {what}; currents per capacitance, uA/uF")
    return "capacitance", sympy.Integer(1), None


def _currents(dvdt, inter, algebraic, k_ion):
    """The ionic currents (name, expression): the algebraic terms of dV/dt that enter it
    linearly, the rest as I_other; one I_ion when the terms do not separate."""
    expanded, terms = _current_terms(dvdt, inter, algebraic)
    currents = []
    total = -k_ion * dvdt
    for t in terms:
        coef = sympy.diff(expanded, t)
        if coef.free_symbols & set(terms):
            currents = []
            break
        currents.append((str(t), -k_ion * coef * t))
    rest = sympy.expand(-k_ion * expanded - sum(e for _, e in currents)) if currents else total
    if not currents:
        currents = [("I_ion", total)]
    elif rest != 0:
        currents.append(("I_other", rest))
    return currents


def _unit_of(info, names, n):
    for arr, lst in info.items():
        for k, e in enumerate(lst):
            if names[(arr, k)] == n:
                return e["units"]
    return "dimensionless"


_SCALABLE_NAME = re.compile(r"^(g|G)(_|[A-Za-z])|^P[A-Z]")


def _scalable(model, c, name):
    if c["units"] == "dimensionless":
        return bool(_SCALABLE_NAME.match(name.split(".")[-1]))
    if any(_factor(model, c["units"], kind) for kind in ("conductance_area", "conductance", "permeability")):
        return True
    # S/F is 1/s dimensionally: only units that say siemens
    return bool(_factor(model, c["units"], "conductance_capacitance")) and "S" in c["units"]
