"""Removable singularities of the potential-only subexpressions, for the exact fast path.

Rate expressions such as a (V - V_h)/(1 - exp(-(V - V_h)/k)) (Luo & Rudy 1991, alpha_m;
Hodgkin & Huxley 1952, alpha_m and alpha_n) and the Goldman-Hodgkin-Katz flux factor
V/(exp(z F V/RT) - 1) are 0/0 at one potential V0 and have a finite limit there; evaluated
as written they give NaN at V0 and lose digits close to it (the denominator is a
difference of nearly equal numbers). Where a denominator of a potential-only intermediate
vanishes at a potential V0 (found from its form: linear in V, or alpha exp(u(V)) + beta
with u linear in V; V0 may depend on parameters) and the expression stays finite on both
sides of V0 (checked at the default parameters), the generated code evaluates it, for
|V - V0| < DELTA, as the straight line through its values at V0 -+ DELTA (a first-order
series branch; common practice). With DELTA = 1e-4 mV the line is off by about
f'' DELTA^2 / 2 (relative ~(a DELTA)^2 ~ 1e-10 for a slope factor a ~ 0.1/mV) and the
formula outside it loses at most ulp/(a DELTA) ~ 1e-11 to cancellation.
"""

from __future__ import annotations

import numpy as np
import sympy

from cable.membrane.equations.description import POTENTIAL

#: half width of the series branch around a removable singular point [mV]
DELTA = 1e-4
#: singular points further than this from 0 mV are not guarded (no cell reaches them) [mV]
V_RANGE = 500.0


def _expand(expr, inter, cache):
    """``expr`` with every intermediate written out (potential and parameters only)."""
    subs = {}
    for s in expr.free_symbols:
        n = str(s)
        if n in inter:
            if n not in cache:
                cache[n] = _expand(inter[n], inter, cache)
            subs[s] = cache[n]
    return expr.xreplace(subs) if subs else expr


def _roots(base, V):
    """Potentials where ``base`` (in V and parameters) vanishes, for the forms we know."""
    if V not in base.free_symbols:
        return []
    if base.is_Mul:
        return [r for a in base.args for r in _roots(a, V)]
    if base.is_Pow and base.exp.is_positive:
        return _roots(base.base, V)
    poly = sympy.Poly(base, V) if base.is_polynomial(V) else None
    if poly is not None and poly.degree() == 1:
        c1, c0 = poly.all_coeffs()
        return [-c0 / c1]
    if base.is_Add:
        beta, rest = base.as_independent(V, as_Add=True)
        alpha, e = rest.as_independent(V, as_Add=False)
        if isinstance(e, sympy.exp) and e.args[0].is_polynomial(V):
            u = sympy.Poly(e.args[0], V)
            if u.degree() == 1 and beta != 0:
                u1, u0 = u.all_coeffs()
                return [(sympy.log(-beta / alpha) - u0) / u1]
    return []


def _finite(x) -> bool:
    return bool(np.isfinite(x))


def guarded(an, names, v_only) -> dict:
    """Intermediate name -> the text of its guarded form, for those of ``names`` (in V and
    parameters only) with a removable singular point."""
    parsed = an.parsed
    inter = parsed.intermediates
    V = parsed.sym[POTENTIAL]
    defaults = {parsed.sym[p.name]: p.value for p in parsed.model.parameters}
    cache: dict = {}
    out = {}
    for n in names:
        if n not in v_only:
            continue
        expr = inter[n]
        dens = [a.base for a in sympy.preorder_traversal(expr)
                if a.is_Pow and a.exp.is_negative]
        points = []
        for d in dens:
            full = _expand(d, inter, cache)
            for r in _roots(full, V):
                if r.has(sympy.I):
                    continue
                try:
                    r0 = float(r.xreplace(defaults))
                except (TypeError, ValueError):
                    continue
                if np.isfinite(r0) and abs(r0) < V_RANGE:
                    points.append((r, r0))
        if not points:
            continue
        f = _expand(expr, inter, cache)
        fn = sympy.lambdify([V], f.xreplace(defaults), modules="numpy")
        keep = []
        with np.errstate(all="ignore"):
            for r, r0 in points:
                lo, hi = complex(fn(r0 - DELTA)), complex(fn(r0 + DELTA))
                if lo.imag == 0 and hi.imag == 0 and _finite(lo.real) and _finite(hi.real) \
                        and abs(hi.real - lo.real) <= 1e-3 * max(abs(hi.real), abs(lo.real), 1e-300):
                    keep.append(r)
        if keep:
            out[n] = (f, keep)
    return out


def text(pr, f, points, plain: str, V) -> str:
    """The guarded form of ``f`` (its plain text ``plain``) around each of ``points``."""
    body = plain
    for r in points:
        v0 = pr.doprint_np(r)
        at_lo = pr.doprint_np(f.xreplace({V: r - DELTA}))
        at_hi = pr.doprint_np(f.xreplace({V: r + DELTA}))
        line = (f"(({at_lo}) * (({v0}) + {DELTA!r} - V) + ({at_hi}) * (V - ({v0}) + {DELTA!r})) "
                f"* {0.5 / DELTA!r}")
        body = f"({line} if abs(V - ({v0})) < {DELTA!r} else ({body}))"
    return body


def written_out(parsed, which) -> dict:
    """The written-out form (see :func:`guarded`) of each intermediate of ``which`` ->
    its symbol: ``f.xreplace`` of it writes a guarded form back in terms of them."""
    inter = parsed.intermediates
    cache: dict = {}
    return {_expand(inter[n], inter, cache): parsed.sym[n] for n in inter if n in which}
