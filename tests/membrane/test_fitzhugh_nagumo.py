"""FitzHugh-Nagumo membrane (``fitzhugh-nagumo``): both gating branches of the kernel, scipy."""

import numpy as np
import pytest
from scipy.integrate import solve_ivp

import cable

MODEL = cable.get_model("fitzhugh-nagumo")
V_REST, V_PEAK, EPS, GAMMA = (MODEL.parameter_names.index(n) for n in ("V_rest", "V_peak", "epsilon", "gamma"))


def _step(v, w, dt, gating, **values):
    p = MODEL.default_parameters()[None, :].copy()
    for name, value in values.items():
        p[0, MODEL.parameter_names.index(name)] = value
    vv, s = np.array([v]), np.array([[w]])
    MODEL.reaction(vv, s, p, np.zeros(1), dt, 1.0, gating)
    return vv[0], s[0, 0], p[0]


def test_rush_larsen_branch_is_the_exact_recovery_update():
    # dw/dt = epsilon (u - gamma w) is linear in w: at fixed u its solution over dt is
    # w_inf + (w - w_inf) exp(-epsilon gamma dt), w_inf = u / gamma (closed form), which the
    # Rush-Larsen branch (gating 0) must give to rounding; forward Euler (gating 1) gives
    # w + dt epsilon (u - gamma w), and the two differ at a step where epsilon gamma dt is large
    v, w, dt = 0.0, 0.2, 50.0
    _, w_rl, p = _step(v, w, dt, 0, gamma=2.0)
    u = (v - p[V_REST]) / (p[V_PEAK] - p[V_REST])
    w_inf = u / p[GAMMA]
    assert w_rl == pytest.approx(w_inf + (w - w_inf) * np.exp(-p[EPS] * p[GAMMA] * dt), rel=1e-14)
    _, w_fe, _ = _step(v, w, dt, 1, gamma=2.0)
    assert w_fe == pytest.approx(w + dt * p[EPS] * (u - p[GAMMA] * w), rel=1e-14)
    assert abs(w_rl - w_fe) > 0.1 * abs(w_rl - w)
    # gamma = 0: no decay term, the branch falls back to the (then exact) Euler update
    _, w0, p0 = _step(v, w, dt, 0, gamma=0.0)
    assert w0 == pytest.approx(w + dt * p0[EPS] * u, rel=1e-14)


@pytest.mark.parametrize("gating", [0, 1])
def test_kernel_converges_to_solve_ivp_at_first_order(gating):
    # scipy's solve_ivp (Radau, rtol 1e-10) on the model's own reference derivatives, from an
    # excited start (u = 0.5) over 100 ms: the kernel (explicit in V) is first order in dt,
    # so its error halves with dt (ratio 2 within 20 %: the asymptotic regime, derived)
    p = MODEL.default_parameters()[None, :]
    v0 = -30.0

    def rhs(t, y):
        _, dw, ion = MODEL.reference(np.array([y[0]]), np.array([[y[1]]]), p)
        return [-ion[0], dw[0, 0]]

    t_end = 100.0
    ref = solve_ivp(rhs, (0.0, t_end), [v0, 0.0], method="Radau", rtol=1e-10, atol=1e-10).y[:, -1]
    errors = []
    for dt in (0.02, 0.01):
        v, s = np.array([v0]), np.zeros((1, 1))
        for _ in range(int(round(t_end / dt))):
            MODEL.reaction(v, s, p, np.zeros(1), dt, 1.0, gating)
        errors.append(abs(v[0] - ref[0]))
    assert errors[1] < 0.1  # mV, at dt = 0.01 ms
    assert errors[0] / errors[1] == pytest.approx(2.0, rel=0.2)
