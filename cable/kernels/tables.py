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
scheme applied to the model's per-node ``kinetics``).

A table depends on some of the parameters (``FastPath.table_parameters``: the HH
temperature, LR1's K_o and K_i). Where these differ between nodes (an ischaemic zone
with raised K_o, a temperature gradient, a batch of strands) the nodes fall into *table
groups*, one per distinct row of those parameters, and each group has its own table:
``Plan.table`` is (ngroup, nrow, ncol), ``Plan.group`` gives each node's group. A
node's table is the one a run of that node alone builds, bit for bit. Only when the
tables together would exceed :data:`MAX_TABLE_BYTES` are the rates evaluated exactly
(and the run says so).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

RATES = ("tabulated", "exact", "reference")
#: most memory the tables of one run may take [bytes] (an LR1 table is 1.3 MB): a run
#: with more table groups than fit evaluates its rates exactly
MAX_TABLE_BYTES = 256 * 2 ** 20


def no_table() -> np.ndarray:
    """An empty table (one group, no rows): the fast kernels then evaluate the rates exactly."""
    return np.zeros((1, 0, 1))


def one_group(n: int = 1) -> np.ndarray:
    """The group index of ``n`` nodes that share one table (all 0)."""
    return np.zeros(max(int(n), 1), dtype=np.int64)


def table_groups(p: np.ndarray, columns) -> tuple[np.ndarray, np.ndarray]:
    """The distinct rows of the parameter columns ``columns`` and each node's row among them.

    The groups are numbered in the sorted order of their rows, so that two sets of nodes
    with the same distinct rows (the strands of a batch and each strand alone) number
    them alike.

    Parameters
    ----------
    p : ndarray
        Parameters per node, shape (n, nparam) or (1, nparam).
    columns : sequence of int
        The columns the table depends on.

    Returns
    -------
    first : ndarray of int64
        For each group, the first node in it.
    group : ndarray of int64
        The group of each row of ``p``.
    """
    p = np.asarray(p, dtype=np.float64)
    cols = p[:, list(columns)]
    if cols.shape[1] == 0 or p.shape[0] == 1 or bool(np.all(cols == cols[0])):
        return np.zeros(1, dtype=np.int64), np.zeros(p.shape[0], dtype=np.int64)
    _, first, inverse = np.unique(cols, axis=0, return_index=True, return_inverse=True)
    return first.astype(np.int64), inverse.reshape(-1).astype(np.int64)


def node_groups(model, p: np.ndarray) -> np.ndarray:
    """The table group of each row of ``p`` (as :func:`plan` numbers them)."""
    fast = model.fast
    names = fast.table_parameters if fast is not None else ()
    return table_groups(p, [model.parameter_names.index(name) for name in names])[1]


@dataclass(frozen=True)
class Plan:
    """The reaction path of a run.

    Attributes
    ----------
    mode : {"tabulated", "exact", "reference"}
        The path taken (may differ from the one asked for; see ``note``).
    table : ndarray
        Gate coefficients per table group, (ngroup, nrow, ncol) (no rows unless
        ``mode == "tabulated"``).
    v_lo : float
        Potential of the first row [mV].
    inv_dv : float
        1 / row spacing [1/mV].
    note : str or None
        Why the path differs from the one asked for.
    group : ndarray of int64
        The table group of each row of the parameters the plan was made for (all 0
        with one group).
    """

    mode: str
    table: np.ndarray
    v_lo: float = 0.0
    inv_dv: float = 1.0
    note: str | None = None
    group: np.ndarray = field(default_factory=one_group)


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
    first, group = table_groups(p, columns)
    table0 = np.ascontiguousarray(fast.build_table(np.asarray(p[first[0]], dtype=np.float64), dt, gating,
                                                   fast.v_lo, fast.v_hi, fast.dv))
    size = first.size * table0.nbytes
    if size > MAX_TABLE_BYTES:
        names = ", ".join(fast.table_parameters)
        return Plan("exact", no_table(), note=f"numerics.rates = \"tabulated\": {names} take(s) {first.size} "
                                          f"different values between nodes; their {first.size} tables would "
                                          f"take {size / 2 ** 20:.0f} MiB (at most {MAX_TABLE_BYTES // 2 ** 20}), "
                                          f"so the rates of {model.name} are evaluated exactly.")
    table = np.empty((first.size,) + table0.shape)
    table[0] = table0
    for g in range(1, first.size):
        table[g] = fast.build_table(np.asarray(p[first[g]], dtype=np.float64), dt, gating, fast.v_lo, fast.v_hi,
                                    fast.dv)
    return Plan("tabulated", table, v_lo=float(fast.v_lo), inv_dv=1.0 / fast.dv, group=group)
