"""What the compiler needs to know about a parsed description.

* which states have a derivative linear in themselves, dy/dt = a + b y with a and b free
  of y (found from the equations: the intermediates that depend on y are substituted
  into dy/dt and the derivative with respect to y must not contain y). Those states are
  advanced by the Rush-Larsen update y <- y + (dy/dt) (exp(b dt) - 1)/b, exact when a
  and b are constant over the step (Rush & Larsen 1978, IEEE Trans Biomed Eng 25:389;
  the same form covers gates written with rates or with y_inf and tau);
* the states in rapid equilibrium with a buffer (``Equations.buffers``) are neither: their
  total concentration is advanced by forward Euler and the free one recovered from the
  buffer equilibrium (see :mod:`.description`);
* which intermediates each expression needs, and which depend on the states or on the
  gates (the states advanced by Rush-Larsen; the ionic current is evaluated with the
  updated gates and the other states as they were at the start of the step, so only the
  intermediates that depend on a gate are evaluated twice).
"""

from __future__ import annotations

from dataclasses import dataclass

import sympy

from cable.membrane.equations.description import POTENTIAL, Parsed


@dataclass
class Analysis:
    parsed: Parsed
    linear: dict          # state name -> b (sympy expr over symbols) or None
    state_dependent: set  # intermediate names that depend on a state
    gate_dependent: set   # intermediate names that depend on a state updated before I_ion: a gate
    #                       (a state with a linear derivative), or any state with current_states "all"
    v_only: set           # intermediate names that depend on V (and constants) only

    @property
    def buffered(self) -> dict:
        """State name -> (total buffer, dissociation constant) symbols (``Equations.buffers``)."""
        return self.parsed.buffers

    def integration(self, state: str) -> str:
        """How the kernels advance ``state``: rush-larsen, forward-euler or rapid-buffer."""
        if state in self.parsed.buffers:
            return "rapid-buffer"
        return "rush-larsen" if self.linear[state] is not None else "forward-euler"


def _depends(parsed: Parsed) -> dict:
    """Intermediate name -> set of base names (V, states, parameters) it depends on."""
    deps: dict = {}
    for name, expr in parsed.intermediates.items():
        base = set()
        for s in expr.free_symbols:
            n = str(s)
            base |= deps[n] if n in deps else {n}
        deps[name] = base
    return deps


def needed(parsed: Parsed, exprs) -> list:
    """The intermediates (in dependency order) the expressions ``exprs`` use."""
    want = set()
    todo = [str(s) for e in exprs for s in e.free_symbols]
    while todo:
        n = todo.pop()
        if n in parsed.intermediates and n not in want:
            want.add(n)
            todo.extend(str(s) for s in parsed.intermediates[n].free_symbols)
    return [n for n in parsed.intermediates if n in want]


def _substitute_dependent(parsed: Parsed, expr, y: str, deps: dict):
    """``expr`` with every intermediate that depends on ``y`` written out."""
    inter = parsed.intermediates
    cache: dict = {}

    def expand(e):
        subs = {}
        for s in e.free_symbols:
            n = str(s)
            if n in inter and y in deps[n]:
                if n not in cache:
                    cache[n] = expand(inter[n])
                subs[s] = cache[n]
        return e.xreplace(subs) if subs else e

    return expand(expr)


def free_derivative(an: Analysis, name: str):
    """The derivative of state ``name`` (for a buffered one, that of its free concentration)."""
    f = an.parsed.derivatives[name]
    if name not in an.buffered:
        return f
    buf, k = an.buffered[name]
    y = an.parsed.sym[name]
    return f / (1 + buf * k / (y + k) ** 2)


def update_text(an: Analysis, pr, k: int, name: str, d: str) -> str:
    """The new value of state ``name`` (index k, derivative in ``d``) after a step of forward
    Euler (of the total concentration, for a buffered state)."""
    if name in an.buffered:
        buf, kd = an.buffered[name]
        return f"_vbuffered(y{k}, dt * {d}, {pr.doprint_np(buf)}, {pr.doprint_np(kd)})"
    return f"y{k} + dt * {d}"


def split_states(an: Analysis) -> tuple[list, list]:
    """(states whose derivatives are taken at the start of the step, the others): with
    ``euler_order = "after-gates"`` the states not advanced by Rush-Larsen are the others."""
    m = an.parsed.model
    if m.euler_order == "after-gates":
        rl = [s.name for s in m.states if an.linear[s.name] is not None]
        return rl, [s.name for s in m.states if s.name not in rl]
    return [s.name for s in m.states], []


def analyse(parsed: Parsed) -> Analysis:
    linear = _linear(parsed, _depends(parsed))
    _hoist_v_only(parsed, linear)
    deps = _depends(parsed)
    states = {s.name for s in parsed.model.states}
    state_dep = {n for n, d in deps.items() if d & states}
    v_only = {n for n, d in deps.items() if POTENTIAL in d and not (d & states)
              and not (d & {p.name for p in parsed.model.parameters})}
    gates = {n for n, b in linear.items() if b is not None}
    if parsed.model.current_states == "all":
        gates = states
    gate_dep = {n for n, d in deps.items() if d & gates}
    return Analysis(parsed, linear, state_dep, gate_dep, v_only)


def _linear(parsed: Parsed, deps: dict) -> dict:
    """State name -> b of dy/dt = a + b y (b free of y), or None."""
    linear = {}
    for name, f in parsed.derivatives.items():
        if name in parsed.buffers:  # the total's derivative: advanced by the buffer update
            linear[name] = None
            continue
        y = parsed.sym[name]
        full = _substitute_dependent(parsed, f, name, deps)
        if y not in full.free_symbols:
            linear[name] = None  # dy/dt does not depend on y: forward Euler
            continue
        b = sympy.diff(full, y)
        if y in b.free_symbols or b.has(sympy.Derivative, sympy.DiracDelta):
            linear[name] = None
        else:
            linear[name] = b
    return linear


def _costly(e) -> bool:
    """Whether evaluating ``e`` takes a function call or a division (worth a table column)."""
    for a in sympy.preorder_traversal(e):
        if isinstance(a, (sympy.Function, sympy.Piecewise)):
            return True
        if a.is_Pow and not (a.exp.is_Integer and a.exp > 0):
            return True
    return False


def _hoist_v_only(parsed: Parsed, linear: dict) -> None:
    """Subexpressions of the potential alone (and parameters) inside expressions that depend on
    states become intermediates of their own, so that the fast path can tabulate them; the same
    subexpression met twice becomes one intermediate (in place: ``parsed`` and ``linear``)."""
    deps = _depends(parsed)
    params = {p.name for p in parsed.model.parameters}
    states = {s.name for s in parsed.model.states}
    v_dep = {POTENTIAL} | {n for n, d in deps.items() if POTENTIAL in d and not (d & states)}
    allowed = v_dep | params | {n for n, d in deps.items() if not (d & states)}
    found: dict = {}

    def v_only(e):
        fs = {str(s) for s in e.free_symbols}
        return bool(fs) and fs <= allowed and bool(fs & v_dep)

    def name_of(e):
        if e not in found:
            found[e] = sympy.Symbol(f"_v{len(found)}", real=True)
        return found[e]

    def constant(e):  # parameters only: hoisted too, so that a repeated division is done once
        fs = {str(s) for s in e.free_symbols}
        return bool(fs) and fs <= allowed and not (fs & v_dep)

    def hoist(e):
        if e.is_Atom or not isinstance(e, sympy.Expr):
            return e.func(*[hoist(a) for a in e.args]) if e.args else e
        if v_only(e) or constant(e):
            return name_of(e) if _costly(e) else e
        if e.is_Mul or e.is_Add:
            for kind in (v_only, constant):
                group = [a for a in e.args if isinstance(a, sympy.Expr) and kind(a)]
                if group and _costly(e.func(*group)):
                    rest = [a for a in e.args if a not in group]
                    return e.func(name_of(e.func(*group)), *[hoist(a) for a in rest])
        return e.func(*[hoist(a) for a in e.args])

    inter = parsed.intermediates
    for n in list(inter):
        if deps[n] & states:
            inter[n] = hoist(inter[n])
    for n in parsed.derivatives:
        parsed.derivatives[n] = hoist(parsed.derivatives[n])
    for n in parsed.currents:
        parsed.currents[n] = hoist(parsed.currents[n])
    for n, b in linear.items():
        if b is not None:
            linear[n] = hoist(b)
    if found:
        for e, sym in found.items():
            inter[str(sym)] = e
            parsed.sym[str(sym)] = sym
        from cable.membrane.equations.description import _sorted
        parsed.intermediates = _sorted(parsed.model.name, inter, parsed.sym)
