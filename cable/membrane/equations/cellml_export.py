"""Write a model described by its equations as a CellML 2.0 file.

One component ``membrane`` holds every variable, in the package's canonical units
(mV, ms, the currents in the model's basis) and a units definition per other unit
string met (declared dimensionless when the string is not a CellML unit: the file's own
units are kept as names, the numbers unchanged). The potential obeys
dV/dt = -(I_ion)/C_m (area basis, C_m in uF/cm^2) or -I_ion (per capacitance) with
I_stim = 0 as its stimulus, so that the file is a complete CellML model; importing it
again recognises V, the stimulus and C_m. The libcellml validator checks the result.

What CellML has no place for (the citation and summary, the activation threshold, each
parameter's unit string, meaning, kind, bounds and whether it is scalable, each state's
unit and meaning, the temperature parameter, ``current_states``, ``euler_order``, the earlier
names, the labels of a labelled parameter and the defaults that follow them, the buffered
states, the stimulus in a state's derivative and the order of the currents) is written as one XML
comment, ``<!-- cable-description: {JSON} -->`` (:data:`METADATA`), which CellML tools
ignore and :mod:`.cellml_import` reads back (:func:`read_metadata`).
"""

from __future__ import annotations

import json
import re

import sympy
from sympy.printing.mathml import MathMLContentPrinter

from cable.membrane.equations.cellml_read import _decimal
from cable.membrane.equations.description import POTENTIAL, STIMULUS, Equations, parse
from cable.membrane.equations.errors import EquationError

_MATHML = "http://www.w3.org/1998/Math/MathML"
_CELLML = "http://www.cellml.org/cellml/2.0#"


class _Printer(MathMLContentPrinter):
    def __init__(self, names):
        super().__init__({"disable_split_super_sub": True})
        self._names = names

    def _print_Symbol(self, sym):
        ci = self.dom.createElement("ci")
        ci.appendChild(self.dom.createTextNode(self._names[str(sym)]))
        return ci

    def _cn(self, text):
        cn = self.dom.createElement("cn")
        cn.setAttribute("cellml:units", "dimensionless")
        cn.appendChild(self.dom.createTextNode(text))
        return cn

    def _print_Float(self, e):
        return self._cn(_decimal(float(e)))

    def _print_Integer(self, e):
        return self._cn(str(int(e)))

    def _print_Rational(self, e):
        return self._print(sympy.Mul(e.p, sympy.Pow(e.q, -1), evaluate=False)) if e.q != 1 else self._cn(str(e.p))

    def _print_Piecewise(self, e):
        pw = self.dom.createElement("piecewise")
        for val, cond in e.args:
            if cond is sympy.true:
                other = self.dom.createElement("otherwise")
                other.appendChild(self._print(val))
                pw.appendChild(other)
            else:
                piece = self.dom.createElement("piece")
                piece.appendChild(self._print(val))
                piece.appendChild(self._print(cond))
                pw.appendChild(piece)
        return pw


def _ident(name: str, taken: set) -> str:
    base = re.sub(r"\W", "_", name)
    if not re.match(r"[A-Za-z_]", base):
        base = "v_" + base
    out, k = base, 1
    while out in taken:
        k += 1
        out = f"{base}_{k}"
    taken.add(out)
    return out


#: the comment holding what CellML cannot say (see the module docstring)
METADATA = "cable-description:"


def _metadata(eq: Equations, ident, extra: dict) -> str:
    """The XML comment of the package's own data of ``eq`` (names as written in the file)."""
    data = {
        "citation": eq.citation, "summary": eq.summary, "threshold": eq.threshold,
        "current_states": eq.current_states, "euler_order": eq.euler_order,
        "old_names": {old: ident(new) for old, new in eq.old_names.items()},
        "temperature_parameter": ident(eq.temperature_parameter) if eq.temperature_parameter else None,
        "states": {ident(s.name): {"units": s.units, "file_units": _units_id(s.units), "meaning": s.meaning}
                   for s in eq.states},
        "parameters": {ident(p.name): {"units": p.units, "file_units": _units_id(p.units), "meaning": p.meaning,
                                       "quantity": p.quantity, "scalable": p.scalable, "minimum": p.minimum,
                                       "maximum": p.maximum, "choices": p.choices,
                                       "by_label": [ident(p.by_label[0]), p.by_label[1]] if p.by_label else None}
                       for p in eq.parameters},
        **extra,
    }
    text = json.dumps(data, sort_keys=True).replace("--", "-\\u002d")  # "--" may not occur in a comment
    return f"<!-- {METADATA} {text} -->"


def read_metadata(text: str) -> dict | None:
    """The package's data written by :func:`export` into a CellML file's text, or None."""
    m = re.search(r"<!--\s*" + re.escape(METADATA) + r"\s*(\{.*?\})\s*-->", text, re.S)
    if m is None:
        return None
    try:
        return json.loads(m.group(1))
    except ValueError:
        return None


def _units_id(u: str) -> str:
    return {"1": "dimensionless", "mV": "mV", "ms": "ms"}.get(u, "u_" + re.sub(r"\W", "_", u))


def export(eq: Equations) -> str:
    """CellML 2.0 text of ``eq`` (validated by libcellml; EquationError if refused)."""
    parsed = parse(eq)
    taken: set = set()
    names = {n: _ident(n, taken) for n in parsed.sym}
    t, istim, cm, iion = (_ident(n, taken) for n in ("time", "I_stim", "Cm", "I_ion"))
    cur = {n: _ident(n, taken) for n in parsed.currents}
    per = "uA_per_cm2" if eq.current_basis == "area" else "uA_per_uF"
    units = _base_units()
    variables = _variables(eq, parsed, units, per, t, istim, cm, iion, cur)
    maths = _Maths(_Printer(names), names, t)
    # the stimulus in a derivative (a charge balance): the file's I_stim, in mV/ms
    stim = sympy.Symbol(istim, real=True)
    names[istim] = istim
    if eq.current_basis == "area":
        names[cm] = cm
        stim = stim / sympy.Symbol(cm, real=True)
    deriv = {n: e.xreplace({parsed.sym[STIMULUS]: stim}) for n, e in parsed.derivatives.items()}
    buffers = _buffered(parsed, deriv, maths, variables, taken)
    used = any(parsed.sym[STIMULUS] in e.free_symbols for e in parsed.derivatives.values())
    extra = {"buffers": buffers, "stimulus": istim if used else None,
             "stimulus_capacitance": cm if used and eq.current_basis == "area" else None,
             "currents": [cur[n] for n in parsed.currents]}
    equations = _equations(eq, parsed, deriv, maths, cur, istim, cm, iion)
    text = _document(eq, units, variables, equations, maths.ident, extra)
    _validate(eq, text)
    return text


class _Maths:
    """MathML equations of the export: the printer of expressions, the variables' names, the time."""

    def __init__(self, printer, names: dict, t: str):
        self.printer, self.names, self.t = printer, names, t

    def ident(self, n):
        return self.names.get(n, n)

    def eqn(self, lhs, rhs_expr=None, rhs_xml=None, diff=False):
        body = rhs_xml if rhs_xml is not None else self.printer.doprint(rhs_expr)
        left = (f"<apply><diff/><bvar><ci>{self.t}</ci></bvar><ci>{lhs}</ci></apply>" if diff else f"<ci>{lhs}</ci>")
        return f"<apply><eq/>{left}{body}</apply>"


def _base_units() -> dict:
    """``{units id: [(unit, prefix, exponent)]}`` of the canonical units (the description's join them)."""
    return {"mV": [("volt", "milli", 1)], "ms": [("second", "milli", 1)],
            "uA_per_cm2": [("ampere", "micro", 1), ("metre", "centi", -2)],
            "uA_per_uF": [("ampere", "micro", 1), ("farad", "micro", -1)],
            "uF_per_cm2": [("farad", "micro", 1), ("metre", "centi", -2)]}


def _variables(eq, parsed, units: dict, per: str, t, istim, cm, iion, cur) -> list:
    """``[(name, units id, initial value or None)]`` of the component; adds the description's units to ``units``."""

    def var_units(u):
        uid = _units_id(u)
        if uid not in units and uid != "dimensionless":
            units[uid] = []  # a unit string of the description: a named dimensionless unit
        return uid

    variables = [(POTENTIAL, "mV", eq.resting_potential), (t, "ms", None), (istim, per, 0.0), (iion, per, None)]
    if eq.current_basis == "area":
        variables.append((cm, "uF_per_cm2", eq.capacitance or 1.0))
    variables += [(s.name, var_units(s.units), s.initial) for s in eq.states]
    variables += [(p.name, var_units(p.units), p.value) for p in eq.parameters]
    variables += [(n, "dimensionless", None) for n in parsed.intermediates]
    variables += [(cur[n], per, None) for n in parsed.currents]
    return variables


def _buffered(parsed, deriv: dict, maths: _Maths, variables: list, taken: set) -> list:
    """Rewrite the derivatives of rapidly buffered states in ``deriv``; their metadata entries.

    A buffered state: the derivative of its total is a variable of its own, the free one's
    follows from the rapid equilibrium, d[y]/dt = J/(1 + B K/([y] + K)^2).
    """
    buffers = []
    for y, (buf, k) in parsed.buffers.items():
        flux = _ident(f"{y}_total_flux", taken)
        variables.append((flux, "dimensionless", None))
        maths.names[flux] = flux
        maths_flux = maths.eqn(flux, deriv[y])
        ysym = parsed.sym[y]
        deriv[y] = (maths_flux, sympy.Symbol(flux, real=True) / (1 + buf * k / (ysym + k) ** 2))
        buffers.append([maths.ident(y), maths.ident(str(buf)), maths.ident(str(k)), flux])
    return buffers


def _equations(eq, parsed, deriv: dict, maths: _Maths, cur: dict, istim, cm, iion) -> list:
    """The MathML equations: intermediates, currents, derivatives, I_ion and the potential's."""
    out = [maths.eqn(maths.ident(n), e) for n, e in parsed.intermediates.items()]
    out += [maths.eqn(cur[n], e) for n, e in parsed.currents.items()]
    for n, e in deriv.items():
        if isinstance(e, tuple):  # a buffered state: its total flux first
            out.append(e[0])
            e = e[1]
        out.append(maths.eqn(maths.ident(n), e, diff=True))
    total = "".join(f"<ci>{cur[n]}</ci>" for n in parsed.currents)
    out.append(maths.eqn(iion, rhs_xml=f"<apply><plus/>{total}</apply>" if len(parsed.currents) > 1 else total))
    net = f"<apply><minus/><ci>{istim}</ci><ci>{iion}</ci></apply>"
    dv = f"<apply><divide/>{net}<ci>{cm}</ci></apply>" if eq.current_basis == "area" else net
    out.append(maths.eqn(POTENTIAL, rhs_xml=dv, diff=True))
    return out


def _document(eq, units: dict, variables: list, equations: list, ident, extra: dict) -> str:
    """The CellML 2.0 file: units, one component ``membrane`` with its variables and maths, metadata."""
    out = ['<?xml version="1.0" encoding="UTF-8"?>',
           f'<model xmlns="{_CELLML}" xmlns:cellml="{_CELLML}" name="{_ident(eq.name, set())}">']
    for uid, parts in units.items():
        if not parts:
            out.append(f'  <units name="{uid}"><unit units="dimensionless"/></units>')
            continue
        inner = "".join(f'<unit units="{u}"' + (f' prefix="{p}"' if p else "") +
                        (f' exponent="{x}"' if x != 1 else "") + "/>" for u, p, x in parts)
        out.append(f'  <units name="{uid}">{inner}</units>')
    out.append('  <component name="membrane">')
    for n, u, init in variables:
        iv = f' initial_value="{_decimal(float(init))}"' if init is not None else ""
        out.append(f'    <variable name="{ident(n)}" units="{u}"{iv}/>')
    out.append(f'    <math xmlns="{_MATHML}">')
    out += ["      " + m for m in equations]
    out += ["    </math>", "  </component>", "</model>", ""]
    out.insert(1, _metadata(eq, ident, extra))  # after the XML declaration
    return "\n".join(out)


def _validate(eq, text: str) -> None:
    """Raise EquationError when libcellml's validator refuses the file (its first three reasons)."""
    import libcellml as L

    model = L.Parser().parseModel(text)
    v = L.Validator()
    v.validateModel(model)
    if v.errorCount():
        msgs = [v.error(i).description() for i in range(min(3, v.errorCount()))]
        raise EquationError(f"model {eq.name}: the CellML export is refused by the libcellml validator: "
                            + "; ".join(msgs))


def equations_of(model) -> Equations:
    """The description of a model: a generated one's own, or a built-in's equation form."""
    import importlib

    from cable.membrane.equations.compile import equations_from_json

    if getattr(model, "equations", ""):
        return equations_from_json(model.equations)
    try:
        module = importlib.import_module(f"cable.membrane.equations.{model.name.replace('-', '_')}")
        return module.EQUATIONS
    except (ImportError, AttributeError):
        raise EquationError(f"model '{model.name}' has no description as equations yet (no file "
                            f"cable/membrane/equations/{model.name.replace('-', '_')}.py), so it cannot be "
                            f"exported to CellML.") from None
