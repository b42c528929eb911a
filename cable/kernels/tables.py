"""Which reaction path a run takes (``numerics.rates``), and the rate tables.

* ``"tabulated"`` (default): the model's :class:`~cable.membrane.base.FastPath` with
  its voltage-dependent gate coefficients tabulated on a fine voltage grid and
  interpolated linearly (common practice in cardiac simulation); the error on CV and
  APD90 against ``"exact"`` is bounded in ``tests/kernels/test_fast_paths.py``.
* ``"exact"``: the fast path with every rate evaluated at every step (exponentials to
  1 ulp, vectorised).
* ``"reference"``: the model's contract kernel ``reaction`` and the original time loop
  (C library exponentials, states stored by node): the slowest, for checks.

A model without a fast path always runs its ``reaction`` kernel; a
``numerics.reaction`` other than ``"rush-larsen"`` runs with exact rates, on the fast
loop where the model's fast path supplies ``kinetics``, else on the reference loop (the
scheme applied to the model's per-node ``kinetics``); a table is used only
when the parameters it depends on (``FastPath.table_parameters``) are the same at every
node, otherwise the rates are evaluated exactly and the run says so.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

RATES = ("tabulated", "exact", "reference")


def no_table() -> np.ndarray:
    """An empty table: the fast kernels then evaluate the rates exactly."""
    return np.zeros((0, 1))


@dataclass(frozen=True)
class Plan:
    """The reaction path of a run.

    Attributes
    ----------
    mode : {"tabulated", "exact", "reference"}
        The path taken (may differ from the one asked for; see ``note``).
    table : ndarray
        Gate coefficients (no rows unless ``mode == "tabulated"``).
    v_lo : float
        Potential of the first row [mV].
    inv_dv : float
        1 / row spacing [1/mV].
    note : str or None
        Why the path differs from the one asked for.
    """

    mode: str
    table: np.ndarray
    v_lo: float = 0.0
    inv_dv: float = 1.0
    note: str | None = None


def uniform_columns(p: np.ndarray, columns) -> bool:
    """Whether the given parameter columns hold one value at every node."""
    p = np.asarray(p)
    return all(bool(np.all(p[:, c] == p[0, c])) for c in columns)


def by_parameter(p: np.ndarray) -> np.ndarray:
    """Parameters stored by parameter: (nparam, 1) when every node has the same row."""
    p = np.asarray(p, dtype=np.float64)
    if p.shape[0] == 1 or bool(np.all(p == p[0])):
        return np.ascontiguousarray(p[:1].T)
    return np.ascontiguousarray(p.T)


def plan(model, p: np.ndarray, dt: float, gating: int, rates: str = "tabulated", *,
         reaction: str = "rush-larsen") -> Plan:
    """Choose the reaction path and build its table.

    Parameters
    ----------
    model : MembraneModel
    p : ndarray
        Parameters per node, shape (n, nparam) or (1, nparam).
    dt : float
        Reaction step [ms].
    gating : int
        0 Rush-Larsen, 1 forward Euler.
    rates : {"tabulated", "exact", "reference"}
        What ``numerics.rates`` asks for.
    reaction : str
        ``numerics.reaction``: the schemes other than ``"rush-larsen"`` run with exact
        rates, vectorised where the model's fast path supplies ``kinetics``, else on the
        reference loop (``cable.kernels.schemes``).
    """
    fast = model.fast
    if rates == "reference":
        return Plan("reference", no_table())
    if reaction != "rush-larsen":
        return Plan("exact", no_table()) if fast is not None and fast.kinetics is not None \
            else Plan("reference", no_table())
    if fast is None:
        # said once per run, so that a speed or accuracy comparison knows what ran
        return Plan("reference", no_table(), note=f"note: numerics.rates = \"{rates}\": {model.name} has no "
                                                  f"fast path; its plain kernel (as rates = \"reference\") is used.")
    if rates == "exact":
        return Plan("exact", no_table())
    if fast.build_table is None:
        return Plan("exact", no_table(), note=f"note: numerics.rates = \"tabulated\": {model.name} has no rate "
                                              f"table; its rates are evaluated exactly.")
    columns = [model.parameter_names.index(name) for name in fast.table_parameters]
    if not uniform_columns(p, columns):
        names = ", ".join(fast.table_parameters)
        return Plan("exact", no_table(), note=f"numerics.rates = \"tabulated\": {names} differ(s) between nodes, "
                                          f"so the rates of {model.name} are evaluated exactly.")
    table = np.ascontiguousarray(fast.build_table(np.asarray(p[0], dtype=np.float64), dt, gating,
                                                  fast.v_lo, fast.v_hi, fast.dv))
    return Plan("tabulated", table, v_lo=float(fast.v_lo), inv_dv=1.0 / fast.dv)
