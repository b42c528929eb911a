"""Python source of a generated model module, from a parsed and analysed description.

The module defines the numba reaction kernel, current function and ``kinetics`` (the
right-hand side the loop's other reaction schemes use) of the
:class:`cable.membrane.base.MembraneModel` contract, a plain per-node Python function of
the same equations (the reference), and ``INFO``, the data the model is built from. The
same printer writes all three, with numpy's scalar functions (numba compiles them to the
same code as ``math``'s).

Every one of them evaluates an intermediate with a removable singular point (a rate
x/(1 - exp(-x/k)) at x = 0, a Goldman-Hodgkin-Katz factor at 0 mV) in the guarded form the
fast path uses (:mod:`cable.membrane.equations.singular`): within ``singular.DELTA`` of the
point, the line through its values on both sides (the limit, to ~1e-10 relative); elsewhere
the formula as written, so that every other potential gives the same bits as without it.
"""

from __future__ import annotations

import json

from sympy.printing.pycode import PythonCodePrinter

from cable.membrane.equations import fastpath, singular
from cable.membrane.equations.analysis import Analysis, free_derivative, needed, split_states, update_text
from cable.membrane.equations.description import POTENTIAL, STIMULUS

#: math functions whose numpy names differ
_NUMPY_NAMES = {"asin": "arcsin", "acos": "arccos", "atan": "arctan", "atan2": "arctan2",
                "asinh": "arcsinh", "acosh": "arccosh", "atanh": "arctanh"}


class _Printer(PythonCodePrinter):
    def __init__(self, names):
        super().__init__({"fully_qualified_modules": True, "standard": "python3"})
        self._names = names

    def _print_Symbol(self, expr):
        return self._names[str(expr)]

    def _print_Float(self, expr):
        return repr(float(expr))

    def _print_Pow(self, expr, rational=False):
        base, exp = expr.as_base_exp()
        k = int(exp) if (exp.is_Integer or (exp.is_Float and float(exp).is_integer())) else None
        if k is not None and 1 < abs(k) <= 4:
            # small integer powers as products (cheaper than pow; one rounding per product)
            b = self.parenthesize(base, 100)
            prod = "(" + "*".join([b] * abs(k)) + ")"
            return prod if k > 0 else f"(1.0/{prod})"
        return super()._print_Pow(expr, rational=rational)

    def doprint_np(self, expr) -> str:
        text = self.doprint(expr)
        for a, b in _NUMPY_NAMES.items():
            text = text.replace(f"math.{a}(", f"np.{b}(")
        return text.replace("math.", "np.")


class _Texts:
    """The text of each intermediate: the guarded form of those with a removable singular
    point (see the module docstring), the formula as written for the others."""

    def __init__(self, an: Analysis, pr):
        parsed = an.parsed
        self.pr, self.parsed = pr, parsed
        v_only, self.const = fastpath.classify(an)
        self.guards = singular.guarded(an, list(parsed.intermediates), v_only)

    def __call__(self, n: str) -> str:
        parsed, pr = self.parsed, self.pr
        plain = pr.doprint_np(parsed.intermediates[n])
        if n not in self.guards:
            return plain
        f, points = self.guards[n]
        # its values beside the point in terms of the parameter-only intermediates it uses
        # (assigned before it in every generated function), not written out again
        mine = self.const.intersection(needed(parsed, [parsed.intermediates[n]]))
        f = f.xreplace(singular.written_out(parsed, mine))
        return singular.text(pr, f, points, plain, parsed.sym[POTENTIAL])


def _names(an: Analysis) -> dict:
    m = an.parsed.model
    names = {POTENTIAL: "V", STIMULUS: "istim"}
    names.update({s.name: f"y{k}" for k, s in enumerate(m.states)})
    names.update({p.name: f"p{k}" for k, p in enumerate(m.parameters)})
    names.update({n: f"x{k}" for k, n in enumerate(an.parsed.intermediates)})
    return names


def _assign(texts, names, which, indent):
    return [f"{indent}{names[n]} = {texts(n)}" for n in which]


def _body(an: Analysis, pr, texts, names, indent, load_state, load_param, store_state):
    """Lines of one node's reaction step (gates, then the other states and the potential)."""
    parsed, m = an.parsed, an.parsed.model
    sidx = {s.name: k for k, s in enumerate(m.states)}
    lines = [f"{indent}{names[s.name]} = {load_state(k)}" for k, s in enumerate(m.states)]
    lines += [f"{indent}p{k} = {load_param(k)}" for k in range(len(m.parameters))]
    rl = {n: b for n, b in an.linear.items() if b is not None}
    early, late = split_states(an)
    first = needed(parsed, [parsed.derivatives[n] for n in early] + list(rl.values()))
    lines += _assign(texts, names, first, indent)
    for n in early:
        lines.append(f"{indent}d{sidx[n]} = {pr.doprint_np(parsed.derivatives[n])}")
    if rl:
        lines.append(f"{indent}if gating == 0:")
        for k, s in enumerate(m.states):
            if s.name in rl:
                lines.append(f"{indent}    b{k} = ({pr.doprint_np(rl[s.name])}) * dt")
                # (exp(b dt) - 1)/(b dt) -> 1 as b dt -> 0 (no gate dynamics at all)
                lines.append(f"{indent}    d{k} = d{k} * (np.expm1(b{k}) / b{k} if b{k} != 0.0 else 1.0)")
    every = m.current_states == "all"
    for n in early:
        k = sidx[n]
        if n in rl or every:  # I_ion (and the late derivatives) below take its new value
            lines.append(f"{indent}y{k} = {update_text(an, pr, k, n, f'd{k}')}")
            lines.append(f"{indent}{store_state(k)} = y{k}")
        else:
            lines.append(f"{indent}{store_state(k)} = {update_text(an, pr, k, n, f'd{k}')}")
    cur = list(parsed.currents.values())
    exprs = [parsed.derivatives[n] for n in late] + cur
    after = [n for n in needed(parsed, exprs) if n in an.gate_dependent or n not in first]
    lines += _assign(texts, names, after, indent)
    for n in late:
        lines.append(f"{indent}d{sidx[n]} = {pr.doprint_np(parsed.derivatives[n])}")
    lines.append(f"{indent}ion = " + " + ".join(f"({pr.doprint_np(e)})" for e in cur))
    for n in late:
        k = sidx[n]
        lines.append(f"{indent}{store_state(k)} = {update_text(an, pr, k, n, f'd{k}')}")
    return lines


def _rate_lines(an: Analysis, pr, b_at, a_at) -> list:
    """The rates of every state, unindented, stored at ``b_at(k)`` and ``a_at(k)``: for a state
    whose derivative is linear in itself, f = A + B y, the rate b = -B and a = f + b y (= A, to
    rounding); for the others b = 0 and a = f (``y{k}`` and the intermediates assigned before)."""
    parsed, m = an.parsed, an.parsed.model
    rl = {n: b for n, b in an.linear.items() if b is not None}
    out = []
    for k, s in enumerate(m.states):
        if s.name in rl:
            out += [f"b{k} = -({pr.doprint_np(rl[s.name])})", f"{b_at(k)} = b{k}",
                    f"{a_at(k)} = {pr.doprint_np(parsed.derivatives[s.name])} + b{k} * y{k}"]
        else:
            out += [f"{b_at(k)} = 0.0", f"{a_at(k)} = {pr.doprint_np(free_derivative(an, s.name))}"]
    return out


def _kinetics(an: Analysis, pr, texts, names) -> list:
    """Lines of ``kinetics(V, y, p, i, istim, a, b)`` (contract: cable.membrane.base): the rates of
    :func:`_rate_lines` and I_ion with every state as given."""
    parsed, m = an.parsed, an.parsed.model
    rl = {n: b for n, b in an.linear.items() if b is not None}
    cur = list(parsed.currents.values())
    out = ["", "", "@jit_inline", "def kinetics(V, y, p, i, istim, a, b):",
           '    """dy_k/dt = a_k - b_k y_k and I_ion of node i at (V, y) with the stimulus istim '
           '(contract: cable.membrane.base)."""']
    out += [f"    y{k} = y[{k}]" for k in range(len(m.states))]
    out += [f"    p{k} = p[i, {k}]" for k in range(len(m.parameters))]
    use = needed(parsed, list(parsed.derivatives.values()) + list(rl.values()) + cur)
    out += _assign(texts, names, use, "    ")
    out += [f"    {line}" for line in _rate_lines(an, pr, lambda k: f"b[{k}]", lambda k: f"a[{k}]")]
    out.append("    return " + " + ".join(f"({pr.doprint_np(e)})" for e in cur))
    return out


def _kinetics_fast(an: Analysis, pr, names) -> list:
    """Lines of ``kinetics_fast(v, sT, pT, i_stim, a, b, ion)`` (contract:
    cable.membrane.base.FastPath.kinetics): :func:`_kinetics` at every node, states and
    parameters stored by state and by parameter, with the vectorisable functions of the fast
    path (``pr``, :func:`fastpath.fast_printer`) so that the node loop is SIMD code. One body
    for shared parameters (loaded once) and per-node ones: a node's arithmetic is the same."""
    parsed, m = an.parsed, an.parsed.model
    texts = _Texts(an, pr)
    rl = {n: b for n, b in an.linear.items() if b is not None}
    cur = list(parsed.currents.values())
    nparam = len(m.parameters)
    body = ["V = v[i]", "istim = i_stim[i]"] + [f"y{k} = sT[{k}, i]" for k in range(len(m.states))]
    use = needed(parsed, list(parsed.derivatives.values()) + list(rl.values()) + cur)
    body += [line.strip() for line in _assign(texts, names, use, "")]
    body += _rate_lines(an, pr, lambda k: f"b[{k}, i]", lambda k: f"a[{k}, i]")
    body.append("ion[i] = " + " + ".join(f"({pr.doprint_np(e)})" for e in cur))
    out = ["", "", "@jit", "def kinetics_fast(v, sT, pT, i_stim, a, b, ion):",
           '    """a, b (nstate, n) and I_ion (n) of every node (contract: '
           'cable.membrane.base.FastPath.kinetics)."""',
           "    if pT.shape[1] == 1:"]
    out += [f"        p{k} = pT[{k}, 0]" for k in range(nparam)]
    out += ["        for i in range(v.shape[0]):"] + [f"            {line}" for line in body]
    out += ["        return", "    for i in range(v.shape[0]):"]
    out += [f"        p{k} = pT[{k}, i]" for k in range(nparam)]
    out += [f"        {line}" for line in body]
    return out


def module_source(an: Analysis, info: dict) -> str:
    """The generated module's text."""
    parsed, m = an.parsed, an.parsed.model
    names = _names(an)
    pr = _Printer(names)
    texts = _Texts(an, pr)
    nstate, nparam = len(m.states), len(m.parameters)
    out = [f'"""Generated by cable.membrane.equations for the model {m.name!r}; do not edit."""', "",
           "import numpy as np", "", "from cable.kernels.jit import jit, jit_inline",
           "from cable.membrane.equations.vecmath import buffered as _vbuffered", "",
           f"INFO = json.loads({json.dumps(json.dumps(info))})".replace("json.loads", "_json.loads"),
           "", "", "@jit", "def reaction(v, s, p, i_stim, dt, ion_scale, gating):",
           "    for i in range(v.shape[0]):", "        V = v[i]", "        istim = i_stim[i]"]
    out += _body(an, pr, texts, names, "        ", lambda k: f"s[i, {k}]", lambda k: f"p[i, {k}]",
                 lambda k: f"s[i, {k}]")
    out += ["        v[i] = V + dt * (i_stim[i] - ion_scale * ion)", ""]
    cur = list(parsed.currents.values())
    use = needed(parsed, cur)
    out += ["", "@jit", "def currents(v, s, p, out):", "    for i in range(v.shape[0]):", "        V = v[i]"]
    out += [f"        y{k} = s[i, {k}]" for k in range(nstate)]
    out += [f"        p{k} = p[i, {k}]" for k in range(nparam)]
    out += _assign(texts, names, use, "        ")
    out += [f"        out[i, {j}] = {pr.doprint_np(e)}" for j, e in enumerate(cur)]
    out += ["", "", "def point(V, y, p, istim=0.0):",
            '    """State derivatives [unit/ms] and I_ion at one node with the stimulus istim [mV/ms] '
            '(plain Python)."""']
    out += [f"    y{k} = y[{k}]" for k in range(nstate)]
    out += [f"    p{k} = p[{k}]" for k in range(nparam)]
    out += _assign(texts, names, needed(parsed, list(parsed.derivatives.values()) + cur), "    ")
    out.append("    ds = [" + ", ".join(pr.doprint_np(free_derivative(an, s.name)) for s in m.states) + "]")
    out.append("    return ds, " + " + ".join(f"({pr.doprint_np(e)})" for e in cur))
    out += _kinetics(an, pr, texts, names)
    out += fastpath.kernel_lines(an, pr, names, fastpath.plan(an))
    # the vectorised right-hand side of the loop's other reaction schemes, for the models whose
    # whole-strand steps are generated (the same limit on compile time, fastpath.ARRAY_STATES)
    if nstate <= fastpath.ARRAY_STATES:
        out += _kinetics_fast(an, fastpath.fast_printer(pr), names)
    text = "\n".join(out) + "\n"
    return text.replace('"""\n\nimport numpy', '"""\n\nimport json as _json\n\nimport numpy', 1)
