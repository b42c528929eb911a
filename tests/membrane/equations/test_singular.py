"""Removable singular points (cable/membrane/equations/singular.py) in every generated function:
the plain-Python reference (``point``), ``kinetics``, ``reaction``, ``currents`` and the exact fast
path give the limit at the point itself, not 0/0 (NaN) or the finite wrong value the rounding of
the denominator leaves there."""

import numpy as np
import pytest

import cable
from cable.kernels import tables

#: (model, potentials [mV] where a rate or current of the paper is 0/0 with a finite limit)
POINTS = [
    # Hodgkin & Huxley 1952 (J Physiol 117:500), alpha_m and alpha_n: x/(1 - exp(-x/10)) at x = 0
    ("equations:hodgkin_huxley_1952", (-40.0, -55.0)),
    # Luo & Rudy 1991 (Circ Res 68:1501): alpha_m at -47.13 mV, the I_K factor X_i at -77 mV
    ("luo-rudy-1991", (-47.13, -77.0)),
    # ten Tusscher & Panfilov 2006 (Am J Physiol 291:H1088): the GHK factor of I_CaL,
    # (V - 15)/(exp(2 (V - 15) F/RT) - 1), at 15 mV
    ("ten-tusscher-panfilov-2006", (15.0,)),
]
#: the neighbours of the point the value there is compared with [mV]
H = 1e-6
#: the formulas as written, at H from the point, lose ~eps/(a H) relative to cancellation
#: (a >= 0.04 /mV, LR1's X_i, the smallest slope factor here: 2.2e-16/4e-8 ~ 6e-9); the value
#: at the point is the series branch's (~1e-10 relative, singular.py)
CANCELLATION = 1e-8
EPS = np.finfo(float).eps


def outputs(model, v0):
    """Every generated function's results at the potentials v0 - H, v0, v0 + H: {what: (array whose
    rows are the three potentials, rounding allowed besides, absolute)}."""
    v = np.array([v0 - H, v0, v0 + H])
    n, ns = v.size, len(model.states)
    s = np.tile(model.initial_states(), (n, 1))
    p = np.tile(model.default_parameters(), (n, 1))
    _, ds, ion = model.reference(v, s, p)
    out = {"reference ds": (ds, 0.0), "reference I_ion": (ion, 0.0)}
    a, b, ion = np.zeros((n, ns)), np.zeros((n, ns)), np.zeros(n)
    for i in range(n):
        ion[i] = model.kinetics(v[i], s[i].copy(), p, i, 0.0, a[i], b[i])
    # a = f + b y (contract: cable.membrane.base) carries the rounding of the larger of f and b y
    out.update({"kinetics a": (a, 4 * EPS * np.abs(b * s)), "kinetics b": (b, 0.0), "kinetics I_ion": (ion, 0.0)})
    for gating in (0, 1):  # Rush-Larsen and forward Euler
        vv, ss = v.copy(), s.copy()
        model.reaction(vv, ss, p, np.zeros(n), 0.01, 1.0, gating)
        vf, sT = v.copy(), np.ascontiguousarray(s.T)
        model.fast.kernel(vf, sT, tables.by_parameter(p), np.zeros(n), 0.01, 1.0, gating, tables.no_table(),
                          0.0, 1.0, tables.one_group(n))
        out.update({f"reaction V {gating}": (vv, 0.0), f"reaction states {gating}": (ss, 0.0),
                    f"exact fast path V {gating}": (vf, 0.0), f"exact fast path states {gating}": (sT.T, 0.0)})
    cur = np.zeros((n, len(model.current_names)))
    model.currents(v.copy(), s.copy(), p, cur)
    out["currents"] = (cur, 0.0)
    return {k: (np.asarray(x, dtype=float).reshape(n, -1), np.broadcast_to(r, (n, 1)) if np.ndim(r) == 0
                else np.asarray(r).reshape(n, -1)) for k, (x, r) in out.items()}


@pytest.mark.parametrize("name,points", POINTS)
def test_every_generated_function_gives_the_limit_at_a_removable_singular_point(name, points):
    model = cable.get_model(name)
    for v0 in points:
        for what, (x, rounding) in outputs(model, v0).items():
            lo, at, hi = x
            assert np.all(np.isfinite(at)), (name, v0, what)
            # the limit is the mean of the two sides to f'' H^2/2; |f'| H (half their difference)
            # bounds how far the value at the point may be from either side
            tol = 0.5 * np.abs(hi - lo) + CANCELLATION * np.abs(at) + rounding.max(axis=0)
            np.testing.assert_array_less(np.abs(at - 0.5 * (lo + hi)), tol + 1e-300, err_msg=f"{name} {v0} {what}")
