"""The block buffer of a generated fast path, and the generated code that moves nodes
through it (text of the generated module; :mod:`cable.membrane.equations.fastpath`
writes the model-specific parts: the columns and the node loop).

Nodes go in blocks of :data:`BLOCK`. A block's states, table columns, potential and
stimulus, its parameters and the values of parameters alone each take a segment of
``BLOCK`` values of one flat buffer ``B`` (:func:`offsets`), read and written at
constant offsets, so that LLVM vectorises the node loop. The driver
(:func:`driver_lines`) runs a call's nodes block by block:

* ``shared_step``: one parameter column (the same parameters at every node) and one
  table; the node loop takes the parameters as scalars;
* ``by_node_step``: parameters by node (``pT`` with n columns), loaded into the buffer
  and worked out per block; each node interpolates in its table group's table
  (``group_columns``) when there is more than one (cable/kernels/tables.py).

The two are separate functions, not branches of one: with both in ``reaction_fast``
itself, the shared case ran 25% slower on an LR1 strand (36 -> 46 ns per node and step,
measured here; LLVM's inlining of the larger function).
"""

from __future__ import annotations

#: nodes per block: the work array of a block stays in the first-level cache
BLOCK = 32


def offsets(nstate: int, ncol: int, nparam: int, nconst: int) -> dict:
    """Offsets in the block buffer (segments of BLOCK values): states, columns, V, stimulus,
    parameters, parameter-only values (intermediates and Rush-Larsen factors); its size."""
    par = (nstate + ncol + 2) * BLOCK
    return {"col": nstate * BLOCK, "v": (nstate + ncol) * BLOCK, "stim": (nstate + ncol + 1) * BLOCK, "par": par,
            "const": par + nparam * BLOCK, "size": par + (nparam + nconst) * BLOCK}


def parameter_loads(nparam: int, off: dict, indent: str) -> list:
    """Lines loading node w's parameters p0.. from the buffer (unused loads are dropped by the compiler)."""
    return [f"{indent}p{k} = B[{off['par'] + k * BLOCK} + w]" for k in range(nparam)]


def parameters_lines(off: dict, nparam: int) -> list:
    """``block_parameters(B, pT, lo, nb)``: the parameters of nodes lo..lo+nb-1 into the buffer
    (``pT`` with one column: the same for all)."""
    return ["", "", "@jit", "def block_parameters(B, pT, lo, nb):",
            "    one = pT.shape[1] == 1",
            f"    for k in range({nparam}):",
            "        for w in range(nb):",
            f"            B[{off['par']} + {BLOCK} * k + w] = pT[k, 0] if one else pT[k, lo + w]"]


def columns_lines(off: dict, ncol: int, grouped: bool) -> list:
    """``block_columns`` (one table, (nrow, ncol)) or ``group_columns`` (node w of the block in
    table G[w] of (ngroup, nrow, ncol)): the columns of a block interpolated, exact for the
    nodes outside the table, or all exact (a table with no rows; ``exact_columns``)."""
    head = "def group_columns(B, G, dt, gating, table, v_lo, inv_dv, nb):" if grouped else \
        "def block_columns(B, dt, gating, table, v_lo, inv_dv, nb):"
    at = "table[g, j, 2 * c] + f * table[g, j, 2 * c + 1]" if grouped else "table[j, 2 * c] + f * table[j, 2 * c + 1]"
    return ["", "", "@jit", head,
            f"    top = table.shape[{1 if grouped else 0}] - 1.0",
            "    if top <= 0.0:",
            "        exact_columns(B, dt, gating, 0, nb)",
            "        return",
            "    inside = True",
            "    for w in range(nb):",
            f"        x = (B[{off['v']} + w] - v_lo) * inv_dv",
            "        ok = (x >= 0.0) & (x < top)",
            "        inside = inside & ok",
            "        x = x if ok else 0.0  # (a node outside: any valid row, replaced below)",
            "        j = np.int64(x)",
            "        f = x - np.float64(j)"] + (["        g = G[w]"] if grouped else []) + [
            f"        for c in range({ncol}):",
            f"            B[{off['col']} + {BLOCK} * c + w] = {at}",
            "    if not inside:",
            "        for w in range(nb):",
            f"            x = (B[{off['v']} + w] - v_lo) * inv_dv",
            "            if not (x >= 0.0 and x < top):",
            "                exact_columns(B, dt, gating, w, w + 1)"]


def driver_lines(off: dict, nstate: int, array: bool = True) -> list:
    """``shared_step``, ``by_node_step`` and ``reaction_fast`` (module docstring); they call
    ``block_parameters``, ``block_constants``, the columns functions, ``block_step`` (parameters
    from the buffer) and ``block_step_shared`` (parameters as scalars); with ``array``, the
    shared case first tries ``array_exact`` / ``array_step`` (cable/membrane/equations/fastpath.py)."""
    copy_in = [f"        for k in range({nstate}):",
               "            for w in range(nb):",
               f"                B[{BLOCK} * k + w] = sT[k, lo + w]",
               "        for w in range(nb):",
               f"            B[{off['v']} + w] = v[lo + w]",
               f"            B[{off['stim']} + w] = i_stim[lo + w]"]
    copy_out = [f"        for k in range({nstate}):",
                "            for w in range(nb):",
                f"                sT[k, lo + w] = B[{BLOCK} * k + w]",
                "        for w in range(nb):",
                f"            v[lo + w] = B[{off['v']} + w]"]
    # the same parameters at every node (one column): in the buffer once (for exact_columns)
    out = ["", "", "@jit", "def shared_step(v, sT, pT, i_stim, dt, ion_scale, gating, table, v_lo, inv_dv, B):",
           "    n = v.shape[0]",
           "    block_parameters(B, pT, 0, min(FAST_BLOCK, n))",
           "    for lo in range(0, n, FAST_BLOCK):",
           "        nb = min(FAST_BLOCK, n - lo)"] + copy_in + [
           "        block_columns(B, dt, gating, table, v_lo, inv_dv, nb)",
           "        block_step_shared(B, pT, dt, ion_scale, gating, nb)"] + copy_out
    # parameters by node: loaded and worked out per block; each node in its group's table
    out += ["", "", "@jit",
            "def by_node_step(v, sT, pT, i_stim, dt, ion_scale, gating, table, v_lo, inv_dv, group, B):",
            "    n = v.shape[0]",
            "    G = np.zeros(FAST_BLOCK, dtype=np.int64)",
            "    for lo in range(0, n, FAST_BLOCK):",
            "        nb = min(FAST_BLOCK, n - lo)",
            "        block_parameters(B, pT, lo, nb)",
            "        block_constants(B, dt, gating, nb)"] + copy_in + [
            "        if table.shape[0] == 1:",
            "            block_columns(B, dt, gating, table[0], v_lo, inv_dv, nb)",
            "        else:",
            "            for w in range(nb):",
            "                G[w] = group[lo + w]",
            "            group_columns(B, G, dt, gating, table, v_lo, inv_dv, nb)",
            "        block_step(B, dt, ion_scale, gating, nb)"] + copy_out
    out += ["", "", "@jit", "def reaction_fast(v, sT, pT, i_stim, dt, ion_scale, gating, table, v_lo, inv_dv, group):",
            '    """Fast reaction step (contract: cable.membrane.base.FastPath, by state)."""',
            "    B = np.empty(FAST_BUFFER)",
            "    if pT.shape[1] == 1:",
            ] + ([
            "        if table.shape[1] <= 1:",
            "            array_exact(v, sT, pT, i_stim, dt, ion_scale, gating)",
            "            return"] if array else []) + [
            "        g = 0 if table.shape[0] == 1 else group[0]"] + ([
            "        if array_step(v, sT, pT, i_stim, dt, ion_scale, gating, table[g], v_lo, inv_dv):",
            "            return"] if array else []) + [
            "        shared_step(v, sT, pT, i_stim, dt, ion_scale, gating, table[g], v_lo, inv_dv, B)",
            "    else:",
            "        by_node_step(v, sT, pT, i_stim, dt, ion_scale, gating, table, v_lo, inv_dv, group, B)"]
    return out
