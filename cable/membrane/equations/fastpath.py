"""The fast path of a generated model: subexpressions of the potential alone, tabulated.

The intermediates that depend on V and on parameters only (no state) are the candidates;
the table holds those of them that the rest of the equations use directly (the
"frontier": a gate's steady state and time constant rather than their parts), and, for
each Rush-Larsen state whose coefficient b of dy/dt = a + b y depends on V alone, the
factor (exp(b dt) - 1)/(b dt) of the update. Rows are potentials v_lo + j dv; a node
between rows j and j+1 takes the linear interpolation (tabulated rate functions, common
practice in cardiac simulation); a node outside the table, or a run without a table
(``numerics.rates = "exact"``), evaluates the same expressions exactly. The kernel takes
states and parameters by node (``FastPath.by_state = False``).
"""

from __future__ import annotations

from cable.membrane.equations.analysis import Analysis, needed
from cable.membrane.equations.description import POTENTIAL


def plan(an: Analysis) -> dict:
    """Which intermediates are tabulated, and the table's columns."""
    parsed, m = an.parsed, an.parsed.model
    params = {p.name for p in m.parameters}
    inter = parsed.intermediates
    tab = {n for n in inter if n not in an.state_dependent and _uses_v(n, inter)}
    rl = {n: b for n, b in an.linear.items() if b is not None}
    v_only_b = {n for n, b in rl.items() if all(str(s) in tab or str(s) in params or str(s) == POTENTIAL
                                                for s in b.free_symbols) and _mentions_v(b, tab)}
    users = list(parsed.derivatives.values()) + list(parsed.currents.values())
    users += [b for n, b in rl.items() if n not in v_only_b]
    users += [inter[n] for n in inter if n not in tab]
    frontier = [n for n in inter if n in tab and any(n in {str(s) for s in e.free_symbols} for e in users)]
    deps = set()
    for n in needed(parsed, [inter[f] for f in frontier] + [rl[k] for k in v_only_b]):
        deps |= {str(s) for s in inter[n].free_symbols if str(s) in params}
    for k in v_only_b:
        deps |= {str(s) for s in rl[k].free_symbols if str(s) in params}
    for f in frontier:
        deps |= {str(s) for s in inter[f].free_symbols if str(s) in params}
    return {"tabulated": frontier, "factors": [s.name for s in m.states if s.name in v_only_b],
            "parameters": sorted(deps, key=[p.name for p in m.parameters].index)}


def _uses_v(name, inter, _memo=None):
    seen, todo = set(), [name]
    while todo:
        n = todo.pop()
        for s in inter[n].free_symbols:
            k = str(s)
            if k == POTENTIAL:
                return True
            if k in inter and k not in seen:
                seen.add(k)
                todo.append(k)
    return False


def _mentions_v(expr, tab):
    return any(str(s) == POTENTIAL or str(s) in tab for s in expr.free_symbols)


def kernel_lines(an: Analysis, pr, names, fp: dict) -> list:
    """Source lines of ``reaction_fast`` and ``fill_table`` (see the module docstring)."""
    parsed, m = an.parsed, an.parsed.model
    inter = parsed.intermediates
    rl = {n: b for n, b in an.linear.items() if b is not None}
    frontier, factors = fp["tabulated"], fp["factors"]
    sidx = {s.name: k for k, s in enumerate(m.states)}
    ncol = len(frontier) + len(factors)
    all_tab = needed(parsed, [parsed.sym[f] for f in frontier] + [rl[k] for k in factors])
    tabset = set(frontier) | _tab_set(an, fp)
    exact_tab = [n for n in all_tab if n in tabset]
    pre = [n for n in all_tab if n not in tabset]  # parameters only
    out = ["", "", "@jit", "def reaction_fast(v, s, p, i_stim, dt, ion_scale, gating, table, v_lo, inv_dv):",
           "    top = table.shape[0] - 1.0", "    for i in range(v.shape[0]):", "        V = v[i]"]
    out += [f"        y{k} = s[i, {k}]" for k in range(len(m.states))]
    out += [f"        p{k} = p[i, {k}]" for k in range(len(m.parameters))]
    out += [f"        {names[n]} = {pr.doprint_np(inter[n])}" for n in pre]
    out += ["        xg = (V - v_lo) * inv_dv",
            "        if top > 0.0 and xg >= 0.0 and xg < top:",
            "            jr = np.int64(xg)", "            fr = xg - jr"]
    for c, n in enumerate(frontier):
        out.append(f"            {names[n]} = table[jr, {c}] + fr * (table[jr + 1, {c}] - table[jr, {c}])")
    for c, n in enumerate(factors):
        c2 = len(frontier) + c
        out.append(f"            e{sidx[n]} = table[jr, {c2}] + fr * (table[jr + 1, {c2}] - table[jr, {c2}])")
    out.append("        else:")
    out += [f"            {names[n]} = {pr.doprint_np(inter[n])}" for n in exact_tab]
    for n in factors:
        k = sidx[n]
        out.append(f"            b{k} = ({pr.doprint_np(rl[n])}) * dt")
        out.append(f"            e{k} = np.expm1(b{k}) / b{k} if b{k} != 0.0 else 1.0")
    if not exact_tab and not factors:
        out.append("            pass")  # nothing tabulated (a model without rate functions)
    # the rest as in the reaction kernel, with the tabulated names available
    first = [n for n in needed(parsed, list(parsed.derivatives.values()) +
                               [b for n, b in rl.items() if n not in factors]) if n not in tabset and n not in pre]
    out += [f"        {names[n]} = {pr.doprint_np(inter[n])}" for n in first]
    for k, s in enumerate(m.states):
        out.append(f"        d{k} = {pr.doprint_np(parsed.derivatives[s.name])}")
    if rl:
        out.append("        if gating == 0:")
        for k, s in enumerate(m.states):
            if s.name in factors:
                out.append(f"            d{k} = d{k} * e{k}")
            elif s.name in rl:
                out.append(f"            b{k} = ({pr.doprint_np(rl[s.name])}) * dt")
                out.append(f"            d{k} = d{k} * (np.expm1(b{k}) / b{k} if b{k} != 0.0 else 1.0)")
    every = m.current_states == "all"
    for k, s in enumerate(m.states):
        if s.name in rl or every:  # I_ion below takes its new value
            out.append(f"        y{k} = y{k} + dt * d{k}")
            out.append(f"        s[i, {k}] = y{k}")
        else:
            out.append(f"        s[i, {k}] = y{k} + dt * d{k}")
    cur = list(parsed.currents.values())
    after = [n for n in needed(parsed, cur) if n not in tabset and
             (n in an.gate_dependent or (n not in first and n not in pre))]
    out += [f"        {names[n]} = {pr.doprint_np(inter[n])}" for n in after]
    out.append("        ion = " + " + ".join(f"({pr.doprint_np(e)})" for e in cur))
    out.append("        v[i] = V + dt * (i_stim[i] - ion_scale * ion)")
    # the table: row j is the mean of the values at V_j -+ dv/1000 (a removable singularity such
    # as x/(exp(x) - 1) at x = 0 falling on a row would give 0/0, or a wrong finite value when
    # rounding leaves the denominator a few ulps from zero; the mean is off by ~1e-7 dv^2 f'')
    out += ["", "", "@jit", "def table_row(V, prow, dt, gating, row):"]
    out += [f"    p{k} = prow[{k}]" for k in range(len(m.parameters))]
    out += [f"    {names[n]} = {pr.doprint_np(inter[n])}" for n in all_tab]
    for c, n in enumerate(frontier):
        out.append(f"    row[{c}] = {names[n]}")
    for c, n in enumerate(factors):
        k = sidx[n]
        out.append(f"    b{k} = ({pr.doprint_np(rl[n])}) * dt")
        out.append(f"    row[{len(frontier) + c}] = (np.expm1(b{k}) / b{k} if b{k} != 0.0 else 1.0) "
                   f"if gating == 0 else 1.0")
    out.append("    return")
    out += ["", "", "@jit", "def fill_table(table, prow, dt, gating, v_lo, dv):",
            "    side = np.empty(table.shape[1])",
            "    for j in range(table.shape[0]):",
            "        V = v_lo + dv * j",
            "        table_row(V - 1e-3 * dv, prow, dt, gating, side)",
            "        table_row(V + 1e-3 * dv, prow, dt, gating, table[j])",
            "        table[j] = 0.5 * (table[j] + side)"]
    out += ["", "", f"TABLE_COLUMNS = {max(ncol, 1)}", f"TABLE_PARAMETERS = {tuple(fp['parameters'])!r}", "",
            "", "def build_table(p_row, dt, gating, v_lo, v_hi, dv):",
            '    """The table of the tabulated subexpressions (contract: cable.membrane.base.FastPath)."""',
            "    rows = int(round((v_hi - v_lo) / dv)) + 1",
            "    table = np.zeros((rows, TABLE_COLUMNS))",
            "    fill_table(table, np.asarray(p_row, dtype=np.float64), float(dt), int(gating), float(v_lo), float(dv))",
            "    return table"]
    return out


def _tab_set(an, fp):
    """Every V-only intermediate (tabulated ones and those only they use)."""
    parsed = an.parsed
    inter = parsed.intermediates
    rl = {n: b for n, b in an.linear.items() if b is not None}
    inner = needed(parsed, [parsed.sym[f] for f in fp["tabulated"]] + [rl[k] for k in fp["factors"]])
    return {n for n in inner if n not in an.state_dependent and _uses_v(n, inter)}
