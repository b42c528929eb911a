"""Helpers for the CellML checks: the files, and scipy's solve_ivp on libcellml's own code.

The five files are in ``../shared/cellml/`` beside the checkout (CI has that folder); the
tests skip, saying so, only when it is absent. The scipy reference runs the Python code
libcellml's generator writes for a file (its units, its sign convention), with the
conversion to the package's units written out here by hand: V_modern = c0 + c1 V_file
[mV] and t [ms] = s_t t_file, so that it checks the import's conversion independently.
"""

from pathlib import Path

import numba
import numpy as np
import pytest
from scipy.integrate import solve_ivp

from cable.membrane.equations.cellml_read import ieee_namespace, initial_values, read

SHARED = Path(__file__).resolve().parents[3].parent / "shared" / "cellml"
needs_files = pytest.mark.skipif(not SHARED.is_dir(), reason=f"the CellML test files ({SHARED}) are absent")


def path(name):
    return str(SHARED / f"{name}.cellml")


def solve_file(name, t_end, stimulus=(0.0, 0.0, 0.0), v_index=0, c0=0.0, c1=1.0, s_t=1.0, every=0.01,
               parameters=None):
    """V_modern(t) [mV] on t = 0, every, ..., t_end [ms], LSODA rtol 1e-8.

    ``stimulus`` = (start, duration, amplitude [mV/ms]) in the modern convention; the file's own
    stimulus is switched off by evaluating it at t = 1e12 (beyond any pulse, as libcellml's C
    yardstick in ../shared/bench does). ``parameters``: {index in constants: value}.
    """
    code = read(path(name))
    ns = ieee_namespace(code)
    a = initial_values(code)
    for k, v in (parameters or {}).items():
        a["constants"][k] = v
        ns["compute_computed_constants"](0.0, a["states"], a["rates"], a["constants"],
                                         a["computed_constants"], a["algebraic_variables"])
    start, dur, amp = stimulus
    rates = np.zeros_like(a["states"])

    def rhs(t_file, y):
        ns["compute_rates"](1e12, y, rates, a["constants"], a["computed_constants"], a["algebraic_variables"])
        out = rates.copy()
        if start <= t_file * s_t < start + dur:
            out[v_index] += amp * c1 * s_t  # dV_file/dt_file from dV_modern/dt [mV/ms]
        return out

    t_eval = np.arange(0.0, t_end + every / 2, every)
    y, ts, vs = a["states"].copy(), [], []
    # pieces split at the pulse edges, so that the integrator never steps over the pulse
    edges = sorted({0.0, start, start + dur, t_end} if dur else {0.0, t_end})
    for lo, hi in zip(edges[:-1], edges[1:]):
        sel = t_eval[(t_eval >= lo) & (t_eval < hi)] if hi < t_end else t_eval[t_eval >= lo]
        with np.errstate(all="ignore"):
            sol = solve_ivp(rhs, (lo / s_t, hi / s_t), y, method="LSODA", rtol=1e-8, atol=1e-10,
                            dense_output=True, first_step=1e-6 / s_t, max_step=(hi - lo) / s_t / 10)
        assert sol.success, sol.message
        ts.append(sel)
        vs.append(c0 + c1 * sol.sol(sel / s_t)[v_index])
        y = sol.y[:, -1]
    return np.concatenate(ts), np.concatenate(vs)


def apd90(t, v, level=-20.0):
    """APD90 [ms]: from the upward crossing of ``level`` to the return to 90% repolarisation
    (rest = v[0]); crossings interpolated linearly."""
    up = np.nonzero((v[:-1] < level) & (v[1:] >= level))[0][0]
    t_up = t[up] + (level - v[up]) * (t[up + 1] - t[up]) / (v[up + 1] - v[up])
    ipk = up + np.argmax(v[up:up + int(np.searchsorted(t, t[up] + 1e3) - up)])
    target = v[ipk] - 0.9 * (v[ipk] - v[0])
    dn = ipk + np.nonzero(v[ipk:] < target)[0][0] - 1
    t_dn = t[dn] + (target - v[dn]) * (t[dn + 1] - t[dn]) / (v[dn + 1] - v[dn])
    return t_dn - t_up


def period(t, v, level=-20.0):
    """Mean interval between the upward crossings of ``level`` [ms], and the crossings."""
    k = np.nonzero((v[:-1] < level) & (v[1:] >= level))[0]
    tc = t[k] + (level - v[k]) * (t[k + 1] - t[k]) / (v[k + 1] - v[k])
    return float(np.mean(np.diff(tc))), tc



@numba.njit
def _drive(kernel, v, s, p, dt, nsteps, stride, start, dur, amp, cycle, ion_scale, table, v_lo, inv_dv, group, out):
    i_stim = np.zeros(1)
    out[0] = v[0]
    for k in range(nsteps):
        t = k * dt
        tc = (t - start) % cycle if cycle > 0.0 and t >= start else t - start
        i_stim[0] = amp if 0.0 <= tc < dur - 1e-9 else 0.0
        kernel(v, s, p, i_stim, dt, ion_scale, 0, table, v_lo, inv_dv, group)
        if (k + 1) % stride == 0:
            out[(k + 1) // stride] = v[0]


def cell_run(model, t_end, dt, stimulus=(0.0, 0.0, 0.0), every=0.01, parameters=None, rates="tabulated"):
    """V(t) [mV] of one cell: the model's fast kernel stepped as ``cable.simulate`` steps a single
    cell (Rush-Larsen gates; tabulated rates by default), in a small numba loop of its own, so that
    a test does not compile the solver's time loop for each model.

    ``stimulus`` = (start, duration, amplitude [mV/ms] (the stimulus divided by C_m), cycle length
    or 0); ``parameters``: {name: value}.
    """
    from cable.kernels import tables

    start, dur, amp, *rest = stimulus
    v = np.array([model.resting_potential])
    s = np.ascontiguousarray(model.initial_states()[None, :])
    p = model.default_parameters()[None, :].copy()
    for name, value in (parameters or {}).items():
        p[0, model.parameter_names.index(name)] = value
    plan = tables.plan(model, p, dt, 0, rates)
    nsteps = int(round(t_end / dt))
    stride = max(1, int(round(every / dt)))
    out = np.full(nsteps // stride + 1, np.nan)
    ion_scale = model.ion_scale(model.capacitance or 1.0)
    if model.fast.by_state:  # states by state, parameters by parameter (FastPath contract)
        s, p = np.ascontiguousarray(s.T), np.ascontiguousarray(p.T)
    _drive(model.fast.kernel, v, s, p, dt, nsteps, stride, float(start), float(dur), float(amp),
           float(rest[0] if rest else 0.0), ion_scale, plan.table, plan.v_lo, plan.inv_dv, plan.group, out)
    return np.arange(out.size) * stride * dt, out
