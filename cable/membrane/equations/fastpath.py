"""The fast path of a generated model: subexpressions of the potential alone, tabulated.

What is done once, and what per node:

* parameter-only intermediates (and the Rush-Larsen factors of states whose coefficient b
  depends on parameters only) are computed once per call, before the node loop;
* every intermediate of V and parameters alone (no state) that the rest of the equations
  use directly (the "frontier": a gate's steady state rather than its parts) is a column
  of the table; so are the coefficients of each *pure gate*, a Rush-Larsen state whose
  derivative a + b y has a and b of V alone: the update is y <- A + B y with
  A = a (exp(b dt) - 1)/b, B = exp(b dt) (forward Euler: A = a dt, B = 1 + b dt), and the
  gate costs two columns and one multiply-add per node; and, for a Rush-Larsen state whose
  b depends on V alone but whose a does not, the factor (exp(b dt) - 1)/(b dt);
* the rest (state-dependent expressions) per node.

Rows are potentials v_lo + j dv; a node between rows j and j+1 takes the linear
interpolation (tabulated rate functions, common practice in cardiac simulation); a node
outside the table, or a run without a table (``numerics.rates = "exact"``), evaluates the
same columns exactly, with removable singularities (x/(exp(x) - 1) at x = 0) replaced by
their series near the point (:mod:`cable.membrane.equations.singular`).

Layout (``FastPath.by_state = True``): states by state, parameters by parameter. The
columns of a block of nodes are written into a work array (interpolated, or exact), then
one node loop of plain arithmetic reads them: every function in it is vectorisable
(:mod:`cable.kernels.elementary`, :mod:`cable.membrane.equations.vecmath`; float powers
as exp(e log x), integer powers as products), so LLVM turns it into SIMD code. When the
parameters differ between nodes (``pT`` with n columns) they are copied into the work array
too and read per node by a second form of the same loop, in which the parameter-only values
are computed per node with the same arithmetic: a batch gives each strand its result alone,
bit for bit (without fastmath, a SIMD lane rounds as the scalar code does).

A labelled parameter (``EqParameter.choices``: a cell type) takes only its labels' indices,
so the columns that depend on it are tabulated once per label (every column, once per
combination of labels): the table does not depend on it, and each node interpolates the
columns of its own label (a transmural strand keeps its table).
"""

from __future__ import annotations

import hashlib
import inspect

import sympy

from cable.membrane.equations import singular, vecmath
from cable.membrane.equations.analysis import Analysis, needed, split_states, update_text
from cable.membrane.equations.description import POTENTIAL

#: nodes per block: the work array of a block stays in the first-level cache
BLOCK = 32


def _power_text(b: str, k: int) -> str:
    if k == 1:
        return b
    if k % 2 == 0:
        h = _power_text(b, k // 2)
        return f"({h}*{h})"
    return f"({_power_text(b, k - 1)}*{b})"


def fast_printer(base):
    """A printer of ``base``'s class whose functions are the vectorisable ones."""

    class _Fast(type(base)):
        def _print_Pow(self, expr, rational=False):
            b, e = expr.as_base_exp()
            k = int(e) if (e.is_Integer or (e.is_Float and float(e).is_integer())) else None
            if k is not None and 1 < abs(k) <= 64:
                # integer powers as products (pow() with a float exponent is a library call)
                text = _power_text(self.parenthesize(b, 100), abs(k))
                return text if k > 0 else f"(1.0/{text})"
            if k is None and not (e.is_number and float(e) in (0.5, -0.5)):
                ex = repr(float(e)) if e.is_number else self._print(e)
                return f"_vpow({self._print(b)}, {ex})"
            return super()._print_Pow(expr, rational=rational)

        def doprint_np(self, expr) -> str:
            text = super().doprint_np(expr)
            return text.replace("np.exp(", "_vexp(").replace("np.log(", "_vlog(")

    return _Fast(base._names)


def _closure(name, inter):
    """The base names (V, states, parameters) intermediate ``name`` depends on."""
    seen, todo, out = set(), [name], set()
    while todo:
        n = todo.pop()
        for s in inter[n].free_symbols:
            k = str(s)
            if k in inter:
                if k not in seen:
                    seen.add(k)
                    todo.append(k)
            else:
                out.add(k)
    return out


def _classify(an: Analysis):
    """(V-only intermediates, parameter-only intermediates)."""
    inter = an.parsed.intermediates
    states = {s.name for s in an.parsed.model.states}
    v_only, const = set(), set()
    for n in inter:
        base = _closure(n, inter)
        if base & states:
            continue
        (v_only if POTENTIAL in base else const).add(n)
    return v_only, const


def plan(an: Analysis) -> dict:
    """What is tabulated: columns (frontier intermediates, pure gates, factors), the rest."""
    parsed, m = an.parsed, an.parsed.model
    params = {p.name for p in m.parameters}
    inter = parsed.intermediates
    v_only, const = _classify(an)
    free = v_only | const | params | {POTENTIAL}
    rl = {n: b for n, b in an.linear.items() if b is not None}

    def names(e):
        return {str(s) for s in e.free_symbols}

    def v_dep(e):
        return POTENTIAL in names(e) or bool(names(e) & v_only)

    gates, factors, const_factors = [], [], []
    for s in m.states:
        if s.name not in rl:
            continue
        b, f = rl[s.name], parsed.derivatives[s.name]
        if names(b) <= free and names(f) <= free | {s.name} and v_dep(f):
            gates.append(s.name)
        elif names(b) <= free:
            (factors if v_dep(b) else const_factors).append(s.name)
    users = [parsed.derivatives[s.name] for s in m.states if s.name not in gates]
    users += list(parsed.currents.values())
    users += [rl[n] for n in rl if n not in gates and n not in factors and n not in const_factors]
    users += [inter[n] for n in inter if n not in v_only and n not in const]
    frontier = [n for n in inter if n in v_only and any(n in names(e) for e in users)]
    col_exprs = [parsed.sym[f] for f in frontier] + [rl[k] for k in factors]
    col_exprs += [parsed.derivatives[k] for k in gates] + [rl[k] for k in gates]
    deps = set()
    for n in needed(parsed, col_exprs):
        deps |= names(inter[n]) & params
    for e in col_exprs:
        deps |= names(e) & params
    order = [p.name for p in m.parameters]
    labelled = {p.name for p in m.parameters if p.choices is not None}
    # a labelled parameter (a cell type) takes a few values: the columns are tabulated once per
    # label, and each node reads those of its own label, so the table does not depend on it
    return {"tabulated": frontier, "gates": gates, "factors": factors, "const_factors": const_factors,
            "v_only": v_only, "const": const,
            "parameters": sorted(deps - labelled, key=order.index),
            "labels": sorted(deps & labelled, key=order.index)}


def _helpers_hash() -> str:
    # the generated text carries the helpers' sources: an edited helper makes a new module
    # (numba checks a cached function against its own file only)
    from cable.kernels import elementary
    h = hashlib.sha256()
    for mod in (elementary, vecmath, singular):
        h.update(inspect.getsource(mod).encode())
    return h.hexdigest()[:12]


def _column_lines(an, pr, names, fp, indent, store) -> list:
    """Exact values of the table's columns at one node (V and p0.. set): ``store(c, text)``."""
    parsed, m = an.parsed, an.parsed.model
    inter = parsed.intermediates
    rl = {n: b for n, b in an.linear.items() if b is not None}
    sidx = {s.name: k for k, s in enumerate(m.states)}
    frontier, gates, factors = fp["tabulated"], fp["gates"], fp["factors"]
    want = [parsed.sym[f] for f in frontier] + [rl[k] for k in factors + gates]
    want += [parsed.derivatives[k] for k in gates]
    out = []
    use = needed(parsed, want)
    guards = singular.guarded(an, use, fp["v_only"])
    for n in use:
        text = pr.doprint_np(inter[n])
        if n in guards:
            text = singular.text(pr, *guards[n], text, parsed.sym[POTENTIAL])
        out.append(f"{indent}{names[n]} = {text}")
    c = 0
    for n in frontier:
        out.append(store(c, names[n]))
        c += 1
    for n in factors:
        k = sidx[n]
        out.append(f"{indent}e{k} = _vexpm1r(({pr.doprint_np(rl[n])}) * dt) if gating == 0 else 1.0")
        out.append(store(c, f"e{k}"))
        c += 1
    for n in gates:
        k = sidx[n]
        y = parsed.sym[n]
        a = parsed.derivatives[n].xreplace({y: sympy.Integer(0)})
        out.append(f"{indent}b{k} = ({pr.doprint_np(rl[n])}) * dt")
        out.append(f"{indent}e{k} = _vexpm1r(b{k}) if gating == 0 else 1.0")
        out.append(store(c, f"({pr.doprint_np(a)}) * dt * e{k}"))
        out.append(store(c + 1, f"1.0 + b{k} * e{k}"))
        c += 2
    return out


def _offsets(m, ncol):
    """Offsets in the block buffer (segments of BLOCK values): states, columns, V, stimulus,
    parameters (filled when they differ between nodes)."""
    ns = len(m.states)
    npar = len(m.parameters)
    return {"col": ns * BLOCK, "v": (ns + ncol) * BLOCK, "stim": (ns + ncol + 1) * BLOCK,
            "par": (ns + ncol + 2) * BLOCK, "size": (ns + ncol + 2 + npar) * BLOCK}


def _main_lines(an, pr, names, fp, cols, off) -> list:
    """The node loop of a block: every value in the buffer B at a constant offset, so that
    the loop's memory accesses are provably independent and LLVM vectorises it."""
    parsed, m = an.parsed, an.parsed.model
    inter = parsed.intermediates
    rl = {n: b for n, b in an.linear.items() if b is not None}
    sidx = {s.name: k for k, s in enumerate(m.states)}
    frontier, gates, factors = fp["tabulated"], fp["gates"], fp["factors"]
    pre = set(fp["v_only"]) | set(fp["const"])
    ind = "        "

    def col(c):
        return f"B[{off['col'] + c * BLOCK} + w]"

    out = ["    for w in range(nb):", f"{ind}V = B[{off['v']} + w]", f"{ind}istim = B[{off['stim']} + w]"]
    out += [f"{ind}y{k} = B[{k * BLOCK} + w]" for k in range(len(m.states))]
    out += [f"{ind}{names[n]} = {col(c)}" for c, n in enumerate(frontier)]
    c = len(frontier)
    for n in factors:
        out.append(f"{ind}e{sidx[n]} = {col(c)}")
        c += 1
    per_node = [n for n in rl if n not in gates and n not in factors and n not in fp["const_factors"]]
    early, late = split_states(an)
    rest = [n for n in early if n not in gates]
    first = [n for n in needed(parsed, [parsed.derivatives[k] for k in rest] + [rl[k] for k in per_node])
             if n not in pre]
    one = _Reciprocals(pr, names, "r", ind, [inter[n] for n in first] + [parsed.derivatives[k] for k in rest]
                       + [rl[k] for k in per_node])
    for n in first:
        out += one.line(names[n], inter[n])
    for k in rest:
        j = sidx[k]
        out += one.line(f"d{j}", parsed.derivatives[k])
        if k in per_node:
            out += one.line(f"b{j}", rl[k])
            out.append(f"{ind}d{j} = d{j} * (_vexpm1r(b{j} * dt) if gating == 0 else 1.0)")
        elif k in rl:
            out.append(f"{ind}d{j} = d{j} * e{j}")
    every = m.current_states == "all"
    for name in early:
        k = sidx[name]
        slot = f"B[{k * BLOCK} + w]"
        if name in gates:
            out.append(f"{ind}y{k} = {col(cols[name])} + {col(cols[name] + 1)} * y{k}")
            out.append(f"{ind}{slot} = y{k}")
        elif name in rl or every:  # I_ion (and the late derivatives) below take its new value
            out.append(f"{ind}y{k} = {update_text(an, pr, k, name, f'd{k}')}")
            out.append(f"{ind}{slot} = y{k}")
        else:
            out.append(f"{ind}{slot} = {update_text(an, pr, k, name, f'd{k}')}")
    cur = list(parsed.currents.values())
    late_d = [parsed.derivatives[k] for k in late]
    after = [n for n in needed(parsed, late_d + cur) if n not in pre and (n in an.gate_dependent or n not in first)]
    two = _Reciprocals(pr, names, "q", ind, [inter[n] for n in after] + late_d + cur)
    for n in after:
        out += two.line(names[n], inter[n])
    for k in late:
        out += two.line(f"d{sidx[k]}", parsed.derivatives[k])
    out += two.sum_line("ion", cur)
    for name in late:
        k = sidx[name]
        out.append(f"{ind}B[{k * BLOCK} + w] = {update_text(an, pr, k, name, f'd{k}')}")
    out.append(f"{ind}B[{off['v']} + w] = V + dt * (B[{off['stim']} + w] - ion_scale * ion)")
    return out


class _Reciprocals:
    """Lines of a sequence of assignments in which a denominator met more than once is
    divided once: r = 1/d, then a*r, b*r (a/d and b/d would each be a division, the
    slowest arithmetic of the node loop; LLVM may not make the change itself without
    fastmath). The product differs from the quotient by rounding only."""

    def __init__(self, pr, names, prefix, indent, exprs):
        count: dict = {}
        for e in exprs:
            for a in sympy.preorder_traversal(e):
                if a.is_Pow and a.exp == -1 and not a.base.is_number:
                    count[a] = count.get(a, 0) + 1
        shared = [a for a, c in count.items() if c > 1]
        self.map = {a: sympy.Symbol(f"_{prefix}{k}", real=True) for k, a in enumerate(shared)}
        for a, sym in self.map.items():
            names[str(sym)] = f"{prefix}{len(names)}"
        self.pr, self.indent, self.done = pr, indent, set()

    def _need(self, expr, out):
        for a in sympy.preorder_traversal(expr):
            if a in self.map and a not in self.done:
                self.done.add(a)
                self._need(a.base, out)  # a shared denominator inside this one first
                base = a.base.xreplace(self.map)
                out.append(f"{self.indent}{self.pr.doprint_np(self.map[a])} = 1.0/({self.pr.doprint_np(base)})")

    def line(self, target, expr) -> list:
        out: list = []
        self._need(expr, out)
        out.append(f"{self.indent}{target} = {self.pr.doprint_np(expr.xreplace(self.map))}")
        return out

    def sum_line(self, target, exprs) -> list:
        """``target`` = the sum of ``exprs``, in their order."""
        out: list = []
        for e in exprs:
            self._need(e, out)
        terms = " + ".join(f"({self.pr.doprint_np(e.xreplace(self.map))})" for e in exprs)
        return out + [f"{self.indent}{target} = {terms}"]


def kernel_lines(an: Analysis, base_printer, names, fp: dict) -> list:
    """Source lines of ``reaction_fast``, ``build_table`` and their helpers (module docstring)."""
    parsed, m = an.parsed, an.parsed.model
    pr = fast_printer(base_printer)
    rl = {n: b for n, b in an.linear.items() if b is not None}
    sidx = {s.name: k for k, s in enumerate(m.states)}
    nstate, nparam = len(m.states), len(m.parameters)
    frontier, gates, factors = fp["tabulated"], fp["gates"], fp["factors"]
    ncol = len(frontier) + len(factors) + 2 * len(gates)
    cols, c = {}, len(frontier) + len(factors)
    for n in gates:
        cols[n] = c
        c += 2
    off = _offsets(m, ncol)
    loads = [f"    p{k} = pT[{k}, 0]" for k in range(nparam)]
    own = [f"        p{k} = B[{off['par'] + k * BLOCK} + w]" for k in range(nparam)]  # per node
    pidx = {p.name: k for k, p in enumerate(m.parameters)}
    labels = [(pidx[n], len(m.parameters[pidx[n]].choices)) for n in fp["labels"]]
    ncombo = 1
    for _, size in labels:
        ncombo *= size
    out = ["", "", f"# fast path (helpers {_helpers_hash()})",
           "from cable.kernels.elementary import exp as _vexp",
           "from cable.membrane.equations.vecmath import expm1_ratio as _vexpm1r, log as _vlog, power as _vpow",
           "from cable.membrane.equations.vecmath import buffered as _vbuffered",
           "", f"TABLE_COLUMNS = {max(ncol, 1)}", f"TABLE_PARAMETERS = {tuple(fp['parameters'])!r}",
           f"TABLE_LABELS = {tuple(fp['labels'])!r}", f"TABLE_COMBINATIONS = {ncombo}",
           "FAST_BY_STATE = True", f"FAST_BLOCK = {BLOCK}", f"FAST_BUFFER = {off['size']}"]
    store = lambda c, t: f"        B[{off['col'] + c * BLOCK} + w] = {t}"  # noqa: E731
    # exact columns of the buffer's nodes w0..w1-1 (a run without a table, or nodes outside it):
    # the parameters the same at every node (pT), or each node's own (in the buffer)
    out += ["", "", "@jit", "def exact_columns(B, pT, dt, gating, w0, w1):"]
    out += loads
    out += ["    for w in range(w0, w1):", f"        V = B[{off['v']} + w]"]
    out += _column_lines(an, pr, names, fp, "        ", store)
    out += ["", "", "@jit", "def exact_columns_own(B, dt, gating, w0, w1):"]
    out += ["    for w in range(w0, w1):"] + own + [f"        V = B[{off['v']} + w]"]
    out += _column_lines(an, pr, names, fp, "        ", store)
    # the table: row j is the mean of the values at V_j -+ dv/1000 (a removable singularity
    # falling on a row then needs no special case; the mean is off by ~1e-7 dv^2 f'')
    out += ["", "", "@jit", "def table_row(V, pT, dt, gating, row):"]
    out += loads
    out += _column_lines(an, pr, names, fp, "    ", lambda c, t: f"    row[{c}] = {t}")
    out.append("    return")
    # the table holds each column's value and its slope to the next row (one multiply-add to
    # interpolate); the last row's slopes are 0; one set of columns per combination of labels
    # (combination l0 + n0 (l1 + n1 (...)), l the label index of each labelled parameter)
    out += ["", "", "@jit", "def fill_table(table, pT, dt, gating, v_lo, dv):",
            "    nc = TABLE_COLUMNS",
            "    side = np.zeros(nc)",
            "    here = np.zeros(nc)",
            "    q = pT.copy()",
            "    for combo in range(TABLE_COMBINATIONS):",
            "        rest = combo"]
    for k, size in labels:
        out += [f"        q[{k}, 0] = np.float64(rest % {size})", f"        rest = rest // {size}"]
    out += ["        base = 2 * nc * combo",
            "        for j in range(table.shape[0]):",
            "            V = v_lo + dv * j",
            "            table_row(V - 1e-3 * dv, q, dt, gating, side)",
            "            table_row(V + 1e-3 * dv, q, dt, gating, here)",
            "            for c in range(nc):",
            "                table[j, base + 2 * c] = 0.5 * (here[c] + side[c])",
            "                table[j, base + 2 * c + 1] = 0.0",
            "                if j > 0:",
            "                    table[j - 1, base + 2 * c + 1] = table[j, base + 2 * c] - table[j - 1, base + 2 * c]"]
    out += ["", "", "def build_table(p_row, dt, gating, v_lo, v_hi, dv):",
            '    """The table of the tabulated subexpressions (contract: cable.membrane.base.FastPath):',
            '    per row, each column\'s value and its difference to the next row, per combination of labels."""',
            "    rows = int(round((v_hi - v_lo) / dv)) + 1",
            "    table = np.zeros((rows, 2 * TABLE_COLUMNS * TABLE_COMBINATIONS))",
            "    pT = np.ascontiguousarray(np.asarray(p_row, dtype=np.float64).reshape(-1, 1))",
            "    fill_table(table, pT, float(dt), int(gating), float(v_lo), float(dv))",
            "    return table"]
    # the columns of a block: interpolated, exact for the nodes outside the table, or all exact

    def combo(source):
        terms, mult = [], 1
        for k, size in labels:
            terms.append(f"{mult} * np.int64({source(k)})")
            mult *= size
        return " + ".join(terms) if terms else "0"

    out += ["", "", "@jit", "def block_columns(B, pT, dt, gating, table, v_lo, inv_dv, nb, own):",
            "    top = table.shape[0] - 1.0",
            "    if top <= 0.0:",
            "        if own:",
            "            exact_columns_own(B, dt, gating, 0, nb)",
            "        else:",
            "            exact_columns(B, pT, dt, gating, 0, nb)",
            "        return",
            f"    base0 = 2 * TABLE_COLUMNS * ({combo(lambda k: f'pT[{k}, 0]')})",
            "    inside = True",
            "    for w in range(nb):",
            f"        x = (B[{off['v']} + w] - v_lo) * inv_dv",
            "        ok = (x >= 0.0) & (x < top)",
            "        inside = inside & ok",
            "        x = x if ok else 0.0  # (a node outside: any valid row, replaced below)",
            "        j = np.int64(x)",
            "        f = x - np.float64(j)"]
    if labels:
        poff = off["par"]
        own_combo = combo(lambda k: f"B[{poff + k * BLOCK} + w]")
        out.append(f"        base = 2 * TABLE_COLUMNS * ({own_combo}) if own else base0")
    else:
        out.append("        base = base0")
    out += [f"        for c in range({ncol}):",
            f"            B[{off['col']} + {BLOCK} * c + w] = table[j, base + 2 * c] + f * table[j, base + 2 * c + 1]",
            "    if not inside:",
            "        for w in range(nb):",
            f"            x = (B[{off['v']} + w] - v_lo) * inv_dv",
            "            if not (x >= 0.0 and x < top):",
            "                if own:",
            "                    exact_columns_own(B, dt, gating, w, w + 1)",
            "                else:",
            "                    exact_columns(B, pT, dt, gating, w, w + 1)"]
    # the node loop of a block: parameter-only values once per call (the same parameters at every
    # node), or per node from the buffer (the same arithmetic, so a node's result does not depend
    # on which of the two ran: a batch is bitwise its runs alone)
    const_needed = _const_needed(an, fp)

    def constants(indent):
        lines = [f"{indent}{names[n]} = {pr.doprint_np(parsed.intermediates[n])}" for n in const_needed]
        for n in fp["const_factors"]:
            k = sidx[n]
            lines.append(f"{indent}e{k} = _vexpm1r(({pr.doprint_np(rl[n])}) * dt) if gating == 0 else 1.0")
        return lines

    main = _main_lines(an, pr, names, fp, cols, off)
    out += ["", "", "@jit", "def block_step(B, pT, dt, ion_scale, gating, nb):"]
    out += loads + constants("    ") + main
    out += ["", "", "@jit", "def block_step_own(B, dt, ion_scale, gating, nb):"]
    out += main[:1] + own + constants("        ") + main[1:]
    out += ["", "", "@jit", "def reaction_fast(v, sT, pT, i_stim, dt, ion_scale, gating, table, v_lo, inv_dv):",
            '    """Fast reaction step (contract: cable.membrane.base.FastPath, by state)."""',
            "    B = np.empty(FAST_BUFFER)",
            "    own = pT.shape[1] != 1  # parameters that differ between nodes",
            "    n = v.shape[0]",
            "    for lo in range(0, n, FAST_BLOCK):",
            "        nb = min(FAST_BLOCK, n - lo)",
            f"        for k in range({nstate}):",
            "            for w in range(nb):",
            f"                B[{BLOCK} * k + w] = sT[k, lo + w]",
            "        for w in range(nb):",
            f"            B[{off['v']} + w] = v[lo + w]",
            f"            B[{off['stim']} + w] = i_stim[lo + w]",
            "        if own:",
            f"            for k in range({nparam}):",
            "                for w in range(nb):",
            f"                    B[{off['par']} + {BLOCK} * k + w] = pT[k, lo + w]",
            "        block_columns(B, pT, dt, gating, table, v_lo, inv_dv, nb, own)",
            "        if own:",
            "            block_step_own(B, dt, ion_scale, gating, nb)",
            "        else:",
            "            block_step(B, pT, dt, ion_scale, gating, nb)",
            f"        for k in range({nstate}):",
            "            for w in range(nb):",
            f"                sT[k, lo + w] = B[{BLOCK} * k + w]",
            "        for w in range(nb):",
            f"            v[lo + w] = B[{off['v']} + w]"]
    return out


def _const_needed(an, fp) -> list:
    """The parameter-only intermediates the node loop uses (computed once per call)."""
    parsed = an.parsed
    rl = {n: b for n, b in an.linear.items() if b is not None}
    gates = set(fp["gates"])
    exprs = [parsed.derivatives[s.name] for s in parsed.model.states if s.name not in gates]
    exprs += list(parsed.currents.values()) + [rl[n] for n in rl if n not in gates]
    exprs += [parsed.intermediates[n] for n in parsed.intermediates
              if n not in fp["v_only"] and n not in fp["const"]]
    want = set()
    for e in exprs:
        want |= {str(s) for s in e.free_symbols}
    # the closure through parameter-only intermediates only
    todo = [n for n in want if n in fp["const"]]
    seen = set(todo)
    while todo:
        n = todo.pop()
        for s in parsed.intermediates[n].free_symbols:
            k = str(s)
            if k in fp["const"] and k not in seen:
                seen.add(k)
                todo.append(k)
    return [n for n in parsed.intermediates if n in seen]
