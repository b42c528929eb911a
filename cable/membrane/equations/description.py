"""A membrane model written once, as its equations.

A description lists the states, the parameters, the intermediate expressions, the time
derivative of each state and the ionic currents, as plain Python expressions (strings
parsed by sympy, or sympy expressions) over the names it declares and the membrane
potential ``V`` [mV]; time is in ms and the currents are in the model's basis (uA/cm^2
for ``current_basis = "area"``, uA/uF otherwise), inward currents negative. The ionic
current is the sum of the currents. :func:`cable.membrane.equations.compile.build_model`
turns a description into a :class:`cable.membrane.base.MembraneModel`.

Example (a two-state model, units in the strings are for the reader)::

    Equations(
        name="my-model", citation="...", summary="...", resting_potential=-80.0,
        states=(EqState("w", 0.0, "1", "recovery gate"),),
        parameters=(EqParameter("g", 1.0, "mS/cm^2", "conductance", "conductance", scalable=True),),
        intermediates=(("w_inf", "1/(1 + exp(-(V + 40)/5))"),),
        derivatives=(("w", "(w_inf - w)/10"),),
        currents=(("I_w", "g*w*(V + 80)"),),
    )
"""

from __future__ import annotations

from dataclasses import dataclass, field

import sympy

from cable.membrane.equations.errors import EquationError

#: the name of the membrane potential in every description [mV]
POTENTIAL = "V"

#: the name of the applied stimulus in a derivative [mV/ms] (positive depolarises,
#: dV/dt = i_stim - ion_scale I_ion): a balance that carries the stimulus charge (the K+ of
#: ten Tusscher & Panfilov 2006) uses it; the reaction kernels and ``kinetics`` give it the
#: step's stimulus, the reference (whose contract has no stimulus) 0
STIMULUS = "i_stim"

#: the values of ``Equations.current_states``
CURRENT_STATES = ("gates", "all")

#: the values of ``Equations.euler_order``
EULER_ORDERS = ("start", "after-gates")


@dataclass(frozen=True)
class EqState:
    """A state variable: name, initial value, unit and meaning."""

    name: str
    initial: float
    units: str
    meaning: str


@dataclass(frozen=True)
class EqParameter:
    """A parameter: default, unit, meaning, quantity kind (a key of cable.units.CANONICAL)."""

    name: str
    default: float | str
    units: str
    meaning: str
    quantity: str = "dimensionless"
    scalable: bool = False
    minimum: float | None = None
    maximum: float | None = None
    #: labels of a labelled parameter (a cell type): ``default`` is one of them, and the
    #: expressions see the index of the chosen label (0, 1, ...)
    choices: tuple[str, ...] | None = None
    #: (name of a labelled parameter, {label: default}): the default follows that label
    #: (:attr:`cable.membrane.base.Parameter.by_label`)
    by_label: tuple[str, dict] | None = None

    @property
    def value(self) -> float:
        """The default as the expressions see it (a label's index)."""
        return float(self.choices.index(self.default)) if self.choices is not None else float(self.default)


@dataclass(frozen=True)
class Equations:
    """One membrane model as equations (see the module docstring).

    ``intermediates``, ``derivatives`` and ``currents`` are sequences of ``(name, expression)``
    pairs; intermediates may be given in any order (they are sorted by dependency).
    ``notes`` are lines shown by ``cable models NAME`` (what an import recognised).
    ``capacitance`` [uF/cm^2] is the model's own membrane capacitance where it has one
    (used when the case gives none). ``current_states`` says which states the ionic current
    of a step takes at their updated value: ``"gates"`` (the states advanced by Rush-Larsen;
    the others as they were at the start of the step) or ``"all"`` (every state updated
    first, as the hand-written Luo-Rudy 1991 kernel does with Ca_i).

    ``euler_order`` says what the derivatives of the states not advanced by Rush-Larsen see:
    ``"start"`` (every state as it was at the start of the step) or ``"after-gates"`` (the
    Rush-Larsen states already updated, the others as they were: the concentrations of a step
    then take the same currents as the potential, as the hand-written ten Tusscher-Panfilov
    kernel does). ``buffers`` lists ``(state, total buffer, dissociation constant)`` (names of
    parameters) for the concentrations in rapid equilibrium with a buffer:
    the derivative given for such a state is that of its *total* (free + bound)
    concentration; the kernels advance the total by forward Euler and recover the free one
    from the quadratic of the buffer equilibrium (ten Tusscher & Panfilov 2006), the reference
    and ``kinetics`` give the free derivative d[y]/dt = J/(1 + B K/([y] + K)^2), its dt -> 0
    limit. ``old_names`` maps earlier names of states and parameters to the present ones
    (:attr:`cable.membrane.base.MembraneModel.old_names`).
    """

    name: str
    citation: str
    summary: str
    resting_potential: float
    states: tuple[EqState, ...]
    parameters: tuple[EqParameter, ...]
    intermediates: tuple[tuple[str, object], ...]
    derivatives: tuple[tuple[str, object], ...]
    currents: tuple[tuple[str, object], ...]
    current_basis: str = "area"
    threshold: float = -20.0
    temperature_parameter: str | None = None
    capacitance: float | None = None
    notes: tuple[str, ...] = ()
    current_states: str = "gates"
    meanings: dict = field(default_factory=dict)  # intermediate name -> meaning (optional)
    euler_order: str = "start"
    buffers: tuple[tuple[str, str, str], ...] = ()
    old_names: dict = field(default_factory=dict)

    def symbols(self) -> dict[str, sympy.Symbol]:
        """The declared names as sympy symbols (potential, stimulus, states, parameters, intermediates)."""
        names = [POTENTIAL, STIMULUS] + [s.name for s in self.states] + [p.name for p in self.parameters]
        names += [n for n, _ in self.intermediates]
        seen = set()
        for n in names:
            if n in seen:
                raise EquationError(f"model {self.name}: the name '{n}' is declared twice.")
            seen.add(n)
        return {n: sympy.Symbol(n, real=True) for n in names}


def parse(model: Equations) -> "Parsed":
    """Parse every expression of ``model`` into sympy, checking the names it uses."""
    sym = model.symbols()
    if model.current_states not in CURRENT_STATES:
        raise EquationError(f"model {model.name}: current_states = {model.current_states!r}; "
                            f"allowed: {', '.join(CURRENT_STATES)}.")
    if model.euler_order not in EULER_ORDERS:
        raise EquationError(f"model {model.name}: euler_order = {model.euler_order!r}; "
                            f"allowed: {', '.join(EULER_ORDERS)}.")
    _check_labels(model)
    local = dict(sym)
    # sympy would read these names as its own objects (the imaginary unit, a beta function...)
    for name in ("E", "I", "N", "O", "Q", "S", "beta", "gamma", "zeta", "lambda"):
        local.setdefault(name, sympy.Symbol(name, real=True))

    def conv(where, expr):
        if isinstance(expr, (int, float)):
            return sympy.Float(expr)
        if isinstance(expr, str):
            try:
                expr = sympy.sympify(expr, locals=local)
            except (sympy.SympifyError, SyntaxError, TypeError) as exc:
                raise EquationError(f"model {model.name}: {where}: cannot read the expression: {exc}") from None
        unknown = sorted(str(s) for s in expr.free_symbols if str(s) not in sym)
        if unknown:
            raise EquationError(f"model {model.name}: {where} uses unknown names {', '.join(unknown)}; "
                                f"declared: {', '.join(sorted(sym))}.")
        return expr.subs({s: sym[str(s)] for s in expr.free_symbols}) if expr.free_symbols else expr

    inter = {n: conv(f"intermediate '{n}'", e) for n, e in model.intermediates}
    states = [s.name for s in model.states]
    deriv = {}
    for n, e in model.derivatives:
        if n not in states:
            raise EquationError(f"model {model.name}: derivative of '{n}', which is not a state.")
        deriv[n] = conv(f"derivative of '{n}'", e)
    missing = [n for n in states if n not in deriv]
    if missing:
        raise EquationError(f"model {model.name}: no derivative for states {', '.join(missing)}.")
    curr = {n: conv(f"current '{n}'", e) for n, e in model.currents}
    if not curr:
        raise EquationError(f"model {model.name}: no ionic current declared.")
    for where, exprs in (("intermediate", inter), ("current", curr)):
        for n, e in exprs.items():
            if sym[STIMULUS] in e.free_symbols:
                raise EquationError(f"model {model.name}: {where} '{n}' uses the stimulus {STIMULUS}; "
                                    f"only a state's derivative may (a charge balance carrying it).")
    buffers = {}
    for entry in model.buffers:
        state, total, k = entry
        if state not in states or state in buffers:
            raise EquationError(f"model {model.name}: buffer {entry!r}: '{state}' is not a state "
                                f"(or is buffered twice); states: {', '.join(states)}.")
        for n in (total, k):
            if n not in {p.name for p in model.parameters}:
                raise EquationError(f"model {model.name}: buffer {entry!r}: '{n}' is not a parameter.")
        buffers[state] = (sym[total], sym[k])
    return Parsed(model, sym, _sorted(model.name, inter, sym), deriv, curr, buffers)


def _check_labels(model: Equations) -> None:
    """Labelled parameters: a default among the choices; ``by_label`` names one, with every label."""
    params = {p.name: p for p in model.parameters}
    for p in model.parameters:
        if p.choices is not None and p.default not in p.choices:
            raise EquationError(f"model {model.name}: parameter '{p.name}' has the default {p.default!r}; "
                                f"allowed: {', '.join(p.choices)}.")
        if p.by_label is not None:
            label, values = p.by_label
            owner = params.get(label)
            if owner is None or owner.choices is None or set(values) != set(owner.choices):
                raise EquationError(f"model {model.name}: parameter '{p.name}': by_label must name a labelled "
                                    f"parameter and give a default for each of its labels.")


@dataclass
class Parsed:
    model: Equations
    sym: dict
    intermediates: dict  # name -> expr, in dependency order
    derivatives: dict
    currents: dict
    buffers: dict = field(default_factory=dict)  # state -> (total buffer, constant) symbols


def _sorted(model_name: str, inter: dict, sym: dict) -> dict:
    """Intermediates in an order where each comes after those it uses."""
    done: dict = {}
    visiting = set()

    def visit(n):
        if n in done:
            return
        if n in visiting:
            raise EquationError(f"model {model_name}: the variable '{n}' depends on itself "
                                f"(an algebraic loop); only ordinary differential equations with explicit "
                                f"variables can be simulated: write it as a state or solve it by hand.")
        visiting.add(n)
        for s in inter[n].free_symbols:
            if str(s) in inter:
                visit(str(s))
        visiting.discard(n)
        done[n] = inter[n]

    for n in inter:
        visit(n)
    return done
