"""Exponentials of the potential that share one evaluation, for the exact fast path.

Rate expressions are full of exp(a V + b) with a few distinct slopes a, often integer
multiples of one another (Hodgkin & Huxley 1952: -1/80, -1/20 = 4 (-1/80), -1/10 =
8 (-1/80) per mV). Each is one exponential per node and step, the costliest operation of
the vectorised node loop. Where slopes are positive integer multiples k a_0 of a slope
a_0 (k <= :data:`MAX_POWER`) and b is a number, exp(k a_0 V + b) is written as
E^k exp(b) with E = exp(a_0 V) evaluated once: integer powers are products, so one
exponential serves the group (the HH rates go from six exponentials to two). The
product is off by at most about k + 1 ulp (E's 1 ulp raised to the k-th power, and the
roundings of the products), against 1 ulp for the exponential taken alone: rounding,
within the fast path's contract (cable.membrane.base.FastPath). A group is formed only
where it saves an exponential, and only where k |a_0| stays below :data:`MAX_SLOPE`
(E^k cannot overflow where exp(k a_0 V + b) does not, for |V| under 1000 mV).
"""

from __future__ import annotations

import math

import sympy

#: largest power of a shared exponential
MAX_POWER = 8
#: largest slope k |a_0| written through a shared exponential [1/mV]
MAX_SLOPE = 0.7
#: largest |b| of exp(a V + b) written as E^k exp(b)
MAX_OFFSET = 50.0


def _linear(arg, V):
    """(a, b) of a numeric a V + b, or None."""
    arg = sympy.expand(arg)
    if not arg.is_polynomial(V):
        return None
    poly = sympy.Poly(arg, V)
    if poly.degree() != 1:
        return None
    a, b = poly.all_coeffs()
    if not (a.is_number and b.is_number):
        return None
    a, b = float(a), float(b)
    if not (math.isfinite(a) and math.isfinite(b)) or a == 0.0 or abs(b) > MAX_OFFSET:
        return None
    return a, b


def share(exprs, V, prefix: str = "_xe"):
    """The shared exponentials of ``exprs``.

    Returns
    -------
    bases : list of (sympy.Symbol, float)
        Each shared exponential E = exp(a_0 V) and its slope a_0 (evaluate them first).
    mapping : dict
        exp(k a_0 V + b) -> E^k exp(b), for ``expr.xreplace``.
    """
    found = {}
    for e in exprs:
        for atom in e.atoms(sympy.exp):
            if atom not in found and V in atom.free_symbols:
                ab = _linear(atom.args[0], V)
                if ab is not None:
                    found[atom] = ab
    groups: list = []   # [slope a_0, [(atom, k, b)]]
    for atom, (a, b) in sorted(found.items(), key=lambda kv: (abs(kv[1][0]), kv[1][0], kv[1][1])):
        for g in groups:
            k = a / g[0]
            if k > 0 and abs(k - round(k)) < 1e-12 * k and round(k) <= MAX_POWER and abs(a) < MAX_SLOPE:
                g[1].append((atom, int(round(k)), b))
                break
        else:
            groups.append([a, [(atom, 1, b)]])
    bases, mapping = [], {}
    for a0, members in groups:
        if len(members) < 2:
            continue
        base = sympy.Symbol(f"{prefix}{len(bases)}", real=True)
        bases.append((base, a0))
        for atom, k, b in members:
            mapping[atom] = base ** k * sympy.Float(math.exp(b)) if b != 0.0 else base ** k
    return bases, mapping
