"""The contract every membrane model fulfils.

A membrane model is data plus kernels, declared in one module:

* ``states``: the state variables other than the membrane potential, each with its
  initial (resting) value, unit and meaning;
* ``parameters``: every parameter with default, unit and a one-line meaning; a
  parameter with ``choices`` (such as a cell type) is stored as the index of the
  chosen label;
* ``conductances``: the parameter names a ``[membrane.scale]`` factor multiplies;
* ``current_basis``: ``"area"`` (currents in uA/cm^2, divided by C_m) or
  ``"capacitance"`` (currents in uA/uF = pA/pF, used as they are);
* ``reaction``: a numba kernel that advances all nodes of a strand by one reaction
  step (see :func:`reaction_signature_doc`);
* ``reference``: a plain-numpy function giving the time derivatives and the ionic
  current, used by the contract tests and by scipy cross-checks;
* ``kinetics`` (optional): a numba kernel giving the right-hand side of one node in
  the form the reaction schemes of the time loop need (``numerics.reaction`` other
  than ``"rush-larsen"``; see :mod:`cable.kernels.schemes` and below).

Kernel contract (``reaction``)::

    reaction(v, s, p, i_stim, dt, ion_scale, gating)

    v       float64[n]         membrane potential [mV], updated in place
    s       float64[n, nstate] states, updated in place
    p       float64[n, nparam] parameters per node (already scaled)
    i_stim  float64[n]         stimulus current divided by C_m [mV/ms]
    dt      float              reaction step [ms]
    ion_scale float            1/C_m for area-based models, 1 for per-capacitance
    gating  int                0 = Rush-Larsen gates, 1 = forward Euler for all

Each node: gates advanced over ``dt`` at the old potential (Rush-Larsen or forward
Euler), then ``v += dt * (i_stim - ion_scale * I_ion)`` with I_ion evaluated at the
old potential and the updated gates (the usual Rush-Larsen ordering; Rush & Larsen
1978, IEEE Trans Biomed Eng 25:389).

Kinetics contract (``kinetics``)::

    kinetics(V, y, p, i, istim, a, b) -> i_ion

    V       float              membrane potential of node i [mV] (any stage value)
    y       float64[nstate]    the node's states (any stage value), read only
    p       float64[n, nparam] parameters; row i is the node's
    istim   float              the node's stimulus over the step [mV/ms], for a state whose
                               balance carries the stimulus charge (the K_i of ten Tusscher
                               & Panfilov 2006); models without one ignore it
    a, b    float64[nstate]    filled: dy_k/dt = a_k - b_k y_k, with a_k and b_k not
                               depending on y_k; b_k >= 0 is the gate's rate
                               1/tau_k (a_k = y_inf,k / tau_k), b_k = 0 for a state that
                               is not a gate (a_k is then its whole derivative)
    returns I_ion at (V, y) in the model's basis

so that dV/dt = i_stim - ion_scale * I_ion. It must agree with ``reference`` (the
contract tests check it): a time loop applies Rush-Larsen-type schemes (exponential in
b_k) or Runge-Kutta schemes (derivative a_k - b_k y_k) with it, whatever the model. A
generated model needs only this kernel, ``reference`` and ``reaction`` (which may be
written as one first-order Rush-Larsen step of ``kinetics``).

Reference contract (``reference``)::

    reference(v, s, p) -> (dv_ion, ds, i_ion)

with ``v`` of shape (n,), ``s`` (n, nstate), ``p`` (n, nparam); ``ds`` the state
derivatives [unit/ms] with no stimulus applied, ``i_ion`` in the model's basis and
``dv_ion = -ion_scale*i_ion`` left to the caller (so ``dv_ion`` is returned as ``None``).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Callable

import numpy as np


@dataclass(frozen=True)
class State:
    """A state variable of a membrane model (the potential itself is not one)."""

    name: str
    initial: float
    units: str
    meaning: str


@dataclass(frozen=True)
class Parameter:
    """A model parameter: default value [unit], quantity kind for unit conversion."""

    name: str
    default: float | str
    units: str
    meaning: str
    quantity: str = "dimensionless"  # a key of cable.units.CANONICAL
    choices: tuple[str, ...] | None = None  # for labelled parameters (cell type)
    minimum: float | None = None
    maximum: float | None = None
    #: (name of a labelled parameter, {label: default}): the default depends on that label
    #: (a conductance that differs between cell types); a value given in a case is the value
    #: for the chosen label, used as it is
    by_label: tuple[str, dict] | None = None

    def encode(self, value) -> float:
        """The float stored in the parameter array for ``value``."""
        if self.choices is not None:
            return float(self.choices.index(value))
        return float(value)


@dataclass(frozen=True)
class FastPath:
    """Optional fast kernels of a model (used by ``numerics.rates``; see cable/kernels/tables.py).

    Kernel contract (``kernel``)::

        kernel(v, sT, pT, i_stim, dt, ion_scale, gating, table, v_lo, inv_dv, group)

        sT      float64[nstate, n]  states stored by state (each row contiguous, so
                                    that the node loop vectorises), updated in place
        pT      float64[nparam, n] or float64[nparam, 1] parameters stored by
                                    parameter (one column: the same parameters at
                                    every node)
        table   float64[ngroup, nrow, ncol] gate coefficients on a voltage grid, one
                                    table per table group (see ``table_parameters``);
                                    nrow = 0 means none: the rates are evaluated exactly
        v_lo    float               potential of the tables' first row [mV]
        inv_dv  float               1 / row spacing [1/mV]
        group   int64[n]            the table group of each node: node i uses
                                    table[group[i]]; read only when ngroup > 1
        the other arguments as for ``reaction``.

    With no table the kernel gives the result of ``reaction`` to rounding (it may
    use :func:`cable.kernels.elementary.exp`, accurate to 1 ulp, and algebraically
    equal forms of the rates). With a table, the voltage-dependent coefficients of
    each gate update y <- A(V) + B(V) y are interpolated linearly between rows
    (tabulated rate functions, common practice in cardiac simulation); a node whose
    potential lies outside the table uses the exact rates.

    Attributes
    ----------
    kernel : numba dispatcher
        See above.
    build_table : callable
        ``build_table(p_row, dt, gating, v_lo, v_hi, dv) -> float64[nrow, ncol]``,
        the table for one parameter row [model units], reaction step dt [ms] and
        gating scheme (0 Rush-Larsen, 1 forward Euler).
    table_parameters : tuple of str
        Parameters the table depends on: nodes that differ in them are in different
        table groups, each with its own table (``cable.kernels.tables.plan``).
    v_lo, v_hi, dv : float
        Default range and spacing of the table [mV].
    by_state : bool
        True: ``sT`` and ``pT`` as above. False: the kernel takes the states and
        parameters stored by node, ``s`` float64[n, nstate] and ``p`` float64[n, nparam],
        as ``reaction`` does (for large models whose node loop is scalar anyway).
    kinetics : numba dispatcher or None
        Optional (``by_state`` models only): the model's ``kinetics`` for every node at
        once, for the vectorised loop of the reaction schemes other than
        ``"rush-larsen"`` (:mod:`cable.kernels.schemes`)::

            kinetics(v, sT, pT, i_stim, a, b, ion)

            v       float64[n]          potentials (any stage value) [mV]
            sT, pT                      as for ``kernel`` (sT read only)
            i_stim  float64[n]          the stimulus over the step [mV/ms], as above
            a, b    float64[nstate, n]  filled as ``MembraneModel.kinetics`` fills them
            ion     float64[n]          filled with I_ion

        equal to the per-node kernel to rounding (it may use
        :func:`cable.kernels.elementary.exp`); the arithmetic of a node must not depend
        on whether ``pT`` has one column or n (batches are bitwise their runs alone).
    """

    kernel: Callable
    build_table: Callable | None = None
    table_parameters: tuple[str, ...] = ()
    v_lo: float = -150.0
    v_hi: float = 100.0
    dv: float = 0.05
    by_state: bool = True
    kinetics: Callable | None = None


@dataclass(frozen=True)
class MembraneModel:
    """A published membrane model, ready for the solver.

    Attributes
    ----------
    name : str
        Registry name, e.g. ``"hodgkin-huxley-1952"``.
    citation : str
        Authors, year, journal.
    summary : str
        One line on what it models.
    resting_potential : float
        Initial membrane potential [mV].
    states, parameters : tuple
        See :class:`State`, :class:`Parameter`.
    conductances : tuple of str
        Parameter names scalable by ``[membrane.scale]``.
    current_basis : {"area", "capacitance"}
        How the ionic current is normalised.
    threshold : float
        Default activation level for measurements [mV].
    reaction : numba dispatcher
        Compiled reaction step (see module docstring).
    reference : callable
        Plain-numpy derivatives (see module docstring).
    currents : callable or None
        Optional compiled ``currents(v, s, p, out)`` filling ``out[n, len(current_names)]``
        with each ionic current (same basis as ``I_ion``; inward negative).
    current_names : tuple of str
    temperature_parameter : str or None
        Name of the parameter that ``[membrane] temperature`` sets.
    fast : FastPath or None
        Optional vectorisable and tabulated kernels (see :class:`FastPath`); models
        without one always run ``reaction``.
    kinetics : numba dispatcher or None
        Optional right-hand side per node (see the module docstring) for the reaction
        schemes other than ``"rush-larsen"``; a model without it runs only that one.
    old_names : dict
        Earlier names of states and parameters -> their names now, still read (with a
        note) for one release; see :meth:`resolve`.
    """

    name: str
    citation: str
    summary: str
    resting_potential: float
    states: tuple[State, ...]
    parameters: tuple[Parameter, ...]
    conductances: tuple[str, ...]
    current_basis: str
    threshold: float
    reaction: Callable
    reference: Callable
    currents: Callable | None = None
    current_names: tuple[str, ...] = ()
    temperature_parameter: str | None = None
    fast: FastPath | None = None
    kinetics: Callable | None = None
    old_names: dict = field(default_factory=dict)

    def __post_init__(self):
        if self.current_basis not in ("area", "capacitance"):
            raise ValueError(f"model {self.name}: current_basis must be 'area' or 'capacitance'")
        pnames = self.parameter_names
        for c in self.conductances:
            if c not in pnames:
                raise ValueError(f"model {self.name}: conductance {c!r} is not a parameter")
        if self.temperature_parameter and self.temperature_parameter not in pnames:
            raise ValueError(f"model {self.name}: temperature parameter missing")
        if self.fast is not None:
            for name in self.fast.table_parameters:
                if name not in pnames:
                    raise ValueError(f"model {self.name}: table parameter {name!r} is not a parameter")

    @property
    def state_names(self) -> tuple[str, ...]:
        return tuple(s.name for s in self.states)

    @property
    def parameter_names(self) -> tuple[str, ...]:
        return tuple(p.name for p in self.parameters)

    def parameter(self, name: str) -> Parameter:
        """The parameter ``name`` (any spelling :meth:`resolve` accepts); KeyError if none."""
        for p in self.parameters:
            if p.name == name:
                return p
        found, _ = self.resolve(name, "parameter")
        for p in self.parameters:
            if p.name == found:
                return p
        raise KeyError(name)

    def resolve(self, name: str, kind: str = "parameter") -> tuple[str | None, str | None]:
        """The model's name for ``name`` among its ``kind`` s, and a note on an old name.

        ``kind`` is ``"parameter"``, ``"conductance"`` or ``"state"``. Accepted: the name
        itself; an earlier name (:attr:`old_names`), with a note; a name differing only in
        case (``g_Na`` for ``G_Na``) where exactly one name matches it so. Returns
        ``(None, None)`` when nothing matches.
        """
        names = {"parameter": self.parameter_names, "conductance": self.conductances,
                 "state": self.state_names}[kind]
        name = str(name)
        if name in names:
            return name, None
        new = self.old_names.get(name)
        if new in names:
            return new, (f"deprecated: '{name}' is the earlier name of {self.name}'s {kind} '{new}' "
                         f"(read for this release).")
        folded = [n for n in names if n.casefold() == name.casefold()]
        if not folded:
            folded = [n for old, n in self.old_names.items() if old.casefold() == name.casefold() and n in names]
        return (folded[0], None) if len(folded) == 1 else (None, None)

    def fill_labelled_defaults(self, p: np.ndarray, given=()) -> np.ndarray:
        """Set, in place, the defaults that depend on a label (:attr:`Parameter.by_label`).

        ``p`` has shape (n, nparam) (or (nparam,)); parameters named in ``given`` keep
        their value. Returns ``p``.
        """
        rows = p.reshape(-1, len(self.parameters))
        names = self.parameter_names
        for j, par in enumerate(self.parameters):
            if par.by_label is None or par.name in given:
                continue
            label, values = par.by_label
            choices = self.parameter(label).choices
            table = np.array([values[c] for c in choices], dtype=np.float64)
            rows[:, j] = table[rows[:, names.index(label)].astype(np.int64)]
        return p

    def initial_states(self) -> np.ndarray:
        """Initial state vector, shape (nstate,)."""
        return np.array([s.initial for s in self.states], dtype=np.float64)

    def default_parameters(self) -> np.ndarray:
        """Default parameter vector, shape (nparam,)."""
        return np.array([p.encode(p.default) for p in self.parameters], dtype=np.float64)

    def __repr__(self) -> str:
        from cable.case.describe import model_repr

        return model_repr(self)

    def _repr_html_(self) -> str:
        """States, parameters and currents with their units, as tables (a notebook's display)."""
        from cable.case.describe import model_html

        return model_html(self)

    def ion_scale(self, capacitance: float) -> float:
        """Factor turning I_ion into dV/dt (1/C_m per area, 1 per capacitance)."""
        return 1.0 / capacitance if self.current_basis == "area" else 1.0


def rush_larsen(y, y_inf, tau, dt):
    """Rush & Larsen (1978) update y <- y_inf - (y_inf - y) exp(-dt/tau) (numpy reference)."""
    return y_inf - (y_inf - y) * np.exp(-dt / tau)
