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
as exp(e log x), integer powers as products), so LLVM turns it into SIMD code.
With one parameter column (``shared_step``) the parameters and the parameter-only
values are scalars of the node loop, computed once per block. With parameters by node
(``pT`` with n columns, ``by_node_step``) they are loaded into the buffer and worked out
per block, per node, by the same expressions, and the node loop reads them from the
buffer: still vectorised (before issue 15 such nodes went one at a time). A node's
arithmetic is the same either way and whatever its block-mates, so a batch gives each
strand its result alone, bit for bit (IEEE arithmetic in every SIMD lane as in scalar
code: numba compiles without fast-math; tested). Each node interpolates in the table of
its table group (``group``; see cable/kernels/tables.py); a labelled parameter (a cell
type) the columns depend on is a table parameter like the others, so the nodes of each
label interpolate in their own table (a transmural strand keeps its tables).
"""

from __future__ import annotations

import hashlib
import inspect

import sympy

from cable.membrane.equations import blocks, exponentials, singular, vecmath
from cable.membrane.equations.analysis import Analysis, needed, split_states, update_text
from cable.membrane.equations.description import POTENTIAL

BLOCK = blocks.BLOCK
#: models with at most this many states get the whole-strand steps (``array_step``,
#: ``array_exact``) besides the block path
ARRAY_STATES = 20


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


def classify(an: Analysis) -> tuple[set, set]:
    """(the intermediates of V and parameters alone, those of parameters alone): no state in either.

    Parameters
    ----------
    an : Analysis
        The analysed description.

    Returns
    -------
    v_only, const : set of str
        Intermediate names.
    """
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
    v_only, const = classify(an)
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
    # a labelled parameter (a cell type) the columns depend on is a table parameter like any
    # other: the nodes of each label are a table group of their own (cable/kernels/tables.py)
    return {"tabulated": frontier, "gates": gates, "factors": factors, "const_factors": const_factors,
            "v_only": v_only, "const": const,
            "parameters": sorted(deps, key=[p.name for p in m.parameters].index)}


def _helpers_hash() -> str:
    # the generated text carries the helpers' sources: an edited helper makes a new module
    # (numba checks a cached function against its own file only)
    from cable.kernels import elementary
    h = hashlib.sha256()
    for mod in (elementary, vecmath, singular):
        h.update(inspect.getsource(mod).encode())
    return h.hexdigest()[:12]


def _column_lines(an, pr, names, fp, indent, store, hoisted=None) -> list:
    """Exact values of the table's columns at one node (V and p0.. set): ``store(c, text)``.
    ``hoisted``: a list that takes the lines of the parameter-only intermediates instead
    (computed once, before a node loop, when every node has the same parameters)."""
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
    V = parsed.sym[POTENTIAL]
    bases, shared = exponentials.share([inter[n] for n in use] + want, V)
    for base, slope in bases:
        names[str(base)] = str(base)[1:]
        out.append(f"{indent}{names[str(base)]} = _vexp({slope!r} * V)")
    for n in use:
        text = pr.doprint_np(inter[n].xreplace(shared))
        if n in guards:
            f, points = guards[n]
            # its values beside the point in terms of the parameter-only intermediates
            # (computed once), not written out again
            f = f.xreplace(singular.written_out(parsed, fp["const"]))
            text = singular.text(pr, f, points, text, parsed.sym[POTENTIAL])
        if hoisted is not None and n in fp["const"]:
            hoisted.append(f"    {names[n]} = {text}")
        else:
            out.append(f"{indent}{names[n]} = {text}")
    c = 0
    for n in frontier:
        out.append(store(c, names[n]))
        c += 1
    for n in factors:
        k = sidx[n]
        out.append(f"{indent}e{k} = _vexpm1r(({pr.doprint_np(rl[n].xreplace(shared))}) * dt) if gating == 0 else 1.0")
        out.append(store(c, f"e{k}"))
        c += 1
    for n in gates:
        k = sidx[n]
        y = parsed.sym[n]
        a = parsed.derivatives[n].xreplace({y: sympy.Integer(0)})
        out.append(f"{indent}b{k} = ({pr.doprint_np(rl[n].xreplace(shared))}) * dt")
        out.append(f"{indent}e{k} = _vexpm1r(b{k}) if gating == 0 else 1.0")
        out.append(store(c, f"({pr.doprint_np(a.xreplace(shared))}) * dt * e{k}"))
        out.append(store(c + 1, f"1.0 + b{k} * e{k}"))
        c += 2
    return out


class _InBuffer:
    """Where the node loop of a block finds its values: the block buffer B, at constant
    offsets (node w of the block)."""

    loop = "    for w in range(nb):"

    def __init__(self, off):
        self.off = off

    def v(self):
        return f"B[{self.off['v']} + w]"

    def stim(self):
        return f"B[{self.off['stim']} + w]"

    def state(self, k):
        return f"B[{k * BLOCK} + w]"

    def col(self, c):
        return f"B[{self.off['col'] + c * BLOCK} + w]"

    def gate(self, k, c):
        """The new value of pure gate k (table columns c, c + 1 hold A, B of y <- A + B y)."""
        return f"{self.col(c)} + {self.col(c + 1)} * y{k}"


class _InLocals(_InBuffer):
    """Where the node loop of ``array_exact`` finds its values: the strand's arrays (node i),
    and the columns as the locals c0, c1, .. computed just before (exact)."""

    loop = "    for i in range(n):"

    def __init__(self):
        pass

    def v(self):
        return "v[i]"

    def stim(self):
        return "i_stim[i]"

    def state(self, k):
        return f"sT[{k}, i]"

    def col(self, c):
        return f"c{c}"


class _InArrays(_InLocals):
    """Where the node loop of ``array_step`` finds its values: the strand's arrays (node i),
    and the work array W of the interpolated columns (``_gather_lines``), whose pure gates
    are one column each, already advanced."""

    def __init__(self, work: dict):
        self.work = work

    def col(self, c):
        return f"W[{self.work[c]}, i]"

    def gate(self, k, c):
        return f"W[{self.work[c]}, i]"


def _main_lines(an, pr, names, fp, cols, where, by_node=True, off=None) -> list:
    """The node loop: of a block (``where`` an :class:`_InBuffer`: every value in the buffer
    B at a constant offset, so that the loop's memory accesses are provably independent and
    LLVM vectorises it), or of the whole strand (an :class:`_InArrays`).
    ``by_node``: the parameters and parameter-only values read per node from the buffer
    (else they are the caller's scalars p0.., x..)."""
    parsed, m = an.parsed, an.parsed.model
    inter = parsed.intermediates
    rl = {n: b for n, b in an.linear.items() if b is not None}
    sidx = {s.name: k for k, s in enumerate(m.states)}
    frontier, gates, factors = fp["tabulated"], fp["gates"], fp["factors"]
    pre = set(fp["v_only"]) | set(fp["const"])
    ind = "        "
    col = where.col

    out = [where.loop, f"{ind}V = {where.v()}", f"{ind}istim = {where.stim()}"]
    if by_node:
        out += blocks.parameter_loads(len(m.parameters), off, ind)
        for c, name in enumerate(_const_names(an, fp, names, sidx)):
            out.append(f"{ind}{name} = B[{off['const'] + c * BLOCK} + w]")
    out += [f"{ind}y{k} = {where.state(k)}" for k in range(len(m.states))]
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
        slot = where.state(k)
        if name in gates:
            out.append(f"{ind}y{k} = {where.gate(k, cols[name])}")
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
        out.append(f"{ind}{where.state(k)} = {update_text(an, pr, k, name, f'd{k}')}")
    out.append(f"{ind}{where.v()} = V + dt * ({where.stim()} - ion_scale * ion)")
    return out


def _array_exact_lines(an, pr, names, fp, cols, loads) -> list:
    """``array_exact``: the shared-parameter step without a table over the whole strand, in
    one node loop (the columns exact, as locals; the parameter-only values computed once):
    no buffer, and a loop LLVM vectorises. The arithmetic of a node is that of
    ``exact_columns`` and ``block_step_shared``."""
    m = an.parsed.model
    sidx = {s.name: k for k, s in enumerate(m.states)}
    hoisted: list = []
    columns = _column_lines(an, pr, names, fp, "        ", lambda c, t: f"        c{c} = {t}", hoisted)
    body = _main_lines(an, pr, names, fp, cols, _InLocals(), by_node=False)
    out = ["", "", "@jit", "def array_exact(v, sT, pT, i_stim, dt, ion_scale, gating):", "    n = v.shape[0]"]
    out += loads + hoisted + _const_lines(an, pr, names, fp, sidx, "    ")
    return out + body[:2] + columns + body[2:]


def _array_lines(an, pr, names, fp, cols, loads) -> list:
    """``array_step``: the shared-parameter tabulated step over the whole strand in three
    passes (rows and fractions; the columns interpolated, pure gates advanced, into a work
    array W; the node loop over the arrays), or False, changing nothing, when a node lies
    outside the table. For a model whose node loop is short (HH) the block buffer's copies
    in and out cost more than the loop (measured: 9.2 against 5.8 ns per node-step for the
    HH reaction; docs in DEVELOPERS.md); the arithmetic of a node is the same either way."""
    m = an.parsed.model
    sidx = {s.name: k for k, s in enumerate(m.states)}
    nplain = len(fp["tabulated"]) + len(fp["factors"])
    work = {c: c for c in range(nplain)}
    for g, name in enumerate(fp["gates"]):
        work[cols[name]] = nplain + g

    def at(c):
        return f"(table[j, {2 * c}] + f * table[j, {2 * c + 1}])"

    out = ["", "", "@jit", "def array_step(v, sT, pT, i_stim, dt, ion_scale, gating, table, v_lo, inv_dv):",
           "    n = v.shape[0]",
           "    top = table.shape[0] - 1.0",
           "    if top <= 0.0:",
           "        return False",
           "    rows = np.empty(n, dtype=np.int64)",
           "    frac = np.empty(n)",
           "    inside = True",
           "    for i in range(n):",
           "        x = (v[i] - v_lo) * inv_dv",
           "        inside = inside & (x >= 0.0) & (x < top)",
           "        x = x if (x >= 0.0) & (x < top) else 0.0",
           "        j = np.int64(x)",
           "        rows[i] = j",
           "        frac[i] = x - np.float64(j)",
           "    if not inside:",
           "        return False",
           f"    W = np.empty(({max(nplain + len(fp['gates']), 1)}, n))",
           "    for i in range(n):",
           "        j = rows[i]",
           "        f = frac[i]"]
    out += [f"        W[{c}, i] = {at(c)}" for c in range(nplain)]
    for name in fp["gates"]:
        c = cols[name]
        out.append(f"        W[{work[c]}, i] = {at(c)} + {at(c + 1)} * sT[{sidx[name]}, i]")
    out += loads + _const_lines(an, pr, names, fp, sidx, "    ")
    out += _main_lines(an, pr, names, fp, cols, _InArrays(work), by_node=False)
    out.append("    return True")
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
        for k, sym in enumerate(self.map.values()):
            names[str(sym)] = f"{prefix}{k}"   # (unique per prefix, however often a loop is written)
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
    m = an.parsed.model
    pr = fast_printer(base_printer)
    sidx = {s.name: k for k, s in enumerate(m.states)}
    nstate, nparam = len(m.states), len(m.parameters)
    frontier, gates, factors = fp["tabulated"], fp["gates"], fp["factors"]
    ncol = len(frontier) + len(factors) + 2 * len(gates)
    cols, c = {}, len(frontier) + len(factors)
    for n in gates:
        cols[n] = c
        c += 2
    consts = _const_names(an, fp, names, sidx)
    off = blocks.offsets(len(m.states), ncol, len(m.parameters), len(consts))
    loads = [f"    p{k} = pT[{k}, 0]" for k in range(nparam)]
    out = ["", "", f"# fast path (helpers {_helpers_hash()})",
           "from cable.kernels.elementary import exp as _vexp",
           "from cable.membrane.equations.vecmath import expm1_ratio as _vexpm1r, log as _vlog, power as _vpow",
           "from cable.membrane.equations.vecmath import buffered as _vbuffered",
           "", f"TABLE_COLUMNS = {max(ncol, 1)}", f"TABLE_PARAMETERS = {tuple(fp['parameters'])!r}",
           "FAST_BY_STATE = True", f"FAST_BLOCK = {BLOCK}", f"FAST_BUFFER = {off['size']}"]
    # exact columns of the buffer's nodes w0..w1-1 (a run without a table, or nodes outside it)
    out += ["", "", "@jit", "def exact_columns(B, dt, gating, w0, w1):"]
    out += ["    for w in range(w0, w1):", f"        V = B[{off['v']} + w]"]
    out += blocks.parameter_loads(len(m.parameters), off, "        ")
    out += _column_lines(an, pr, names, fp, "        ",
                         lambda c, t: f"        B[{off['col'] + c * BLOCK} + w] = {t}")
    # the table: row j is the mean of the values at V_j -+ dv/1000 (a removable singularity
    # falling on a row then needs no special case; the mean is off by ~1e-7 dv^2 f'')
    out += ["", "", "@jit", "def table_row(V, pT, dt, gating, row):"]
    out += loads
    out += _column_lines(an, pr, names, fp, "    ", lambda c, t: f"    row[{c}] = {t}")
    out.append("    return")
    # the table holds each column's value and its slope to the next row (one multiply-add to
    # interpolate); the last row's slopes are 0
    out += ["", "", "@jit", "def fill_table(table, pT, dt, gating, v_lo, dv):",
            "    nc = table.shape[1] // 2",
            "    side = np.zeros(nc)",
            "    here = np.zeros(nc)",
            "    for j in range(table.shape[0]):",
            "        V = v_lo + dv * j",
            "        table_row(V - 1e-3 * dv, pT, dt, gating, side)",
            "        table_row(V + 1e-3 * dv, pT, dt, gating, here)",
            "        for c in range(nc):",
            "            table[j, 2 * c] = 0.5 * (here[c] + side[c])",
            "            table[j, 2 * c + 1] = 0.0",
            "            if j > 0:",
            "                table[j - 1, 2 * c + 1] = table[j, 2 * c] - table[j - 1, 2 * c]"]
    out += ["", "", "def build_table(p_row, dt, gating, v_lo, v_hi, dv):",
            '    """The table of the tabulated subexpressions (contract: cable.membrane.base.FastPath):',
            '    per row, each column\'s value and its difference to the next row."""',
            "    rows = int(round((v_hi - v_lo) / dv)) + 1",
            "    table = np.zeros((rows, 2 * TABLE_COLUMNS))",
            "    pT = np.ascontiguousarray(np.asarray(p_row, dtype=np.float64).reshape(-1, 1))",
            "    fill_table(table, pT, float(dt), int(gating), float(v_lo), float(dv))",
            "    return table"]
    # the columns of a block: interpolated in each node's table (G: its group), exact for the
    # nodes outside the table, or all exact
    out += blocks.columns_lines(off, ncol, grouped=False) + blocks.columns_lines(off, ncol, grouped=True)
    # the parameters of nodes lo..lo+nb-1, and the values of parameters alone, per node
    out += blocks.parameters_lines(off, nparam)
    out += ["", "", "@jit", "def block_constants(B, dt, gating, nb):", "    for w in range(nb):"]
    out += blocks.parameter_loads(len(m.parameters), off, "        ")
    out += _const_lines(an, pr, names, fp, sidx, "        ")
    out += [f"        B[{off['const'] + c * BLOCK} + w] = {name}" for c, name in enumerate(consts)]
    if not consts:
        out.append("        pass")
    # the node loop of a block: parameters by node (from the buffer), or one set for all
    # (scalars computed once per block, loop-invariant operands: the shared case's code as
    # before issue 15)
    out += ["", "", "@jit", "def block_step(B, dt, ion_scale, gating, nb):"]
    out += _main_lines(an, pr, names, fp, cols, _InBuffer(off), off=off)
    out += ["", "", "@jit", "def block_step_shared(B, pT, dt, ion_scale, gating, nb):"]
    out += loads + _const_lines(an, pr, names, fp, sidx, "    ")
    out += _main_lines(an, pr, names, fp, cols, _InBuffer(off), by_node=False)
    # the whole-strand steps for models up to ARRAY_STATES states: each is one more copy of
    # the node loop (and array_exact of the columns) to compile, which for O'Hara-Rudy 2011
    # (41 states) added minutes to the cold compile (measured here)
    array = nstate <= ARRAY_STATES
    out.append(f"ARRAY_STEPS = {array}")
    if array:
        out += _array_lines(an, pr, names, fp, cols, loads) + _array_exact_lines(an, pr, names, fp, cols, loads)
    out += blocks.driver_lines(off, nstate, array)
    return out


def _const_names(an, fp, names, sidx) -> list:
    """Names of the parameter-only values the node loop reads (buffer order)."""
    return [names[n] for n in _const_needed(an, fp)] + [f"e{sidx[n]}" for n in fp["const_factors"]]


def _const_lines(an, pr, names, fp, sidx, indent) -> list:
    """Lines computing the parameter-only values of :func:`_const_names` (p0.. set)."""
    rl = {n: b for n, b in an.linear.items() if b is not None}
    out = [f"{indent}{names[n]} = {pr.doprint_np(an.parsed.intermediates[n])}" for n in _const_needed(an, fp)]
    for n in fp["const_factors"]:
        out.append(f"{indent}e{sidx[n]} = _vexpm1r(({pr.doprint_np(rl[n])}) * dt) if gating == 0 else 1.0")
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
