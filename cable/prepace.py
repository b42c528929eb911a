"""Pacing a single cell to steady state before the tissue run.

``[membrane.prepace]`` paces one space-clamped cell for ``beats`` beats at
``cycle_length`` and every node starts from the state reached at the end of the last
beat. Nodes with different parameters (regions) are paced separately, one cell per
distinct parameter set. The change of every state over the last beat, relative to
its scale, tells whether the state has settled.
"""

from __future__ import annotations

import numpy as np

from cable.case import CaseError
from cable.kernels import integrate
from cable.kernels.loop import Probes, Stimulus, no_rates
from cable.kernels.state import godunov_steps, unprobed
from cable.measure.apd import ApdProbe


def _pace_cell(advance, model, p_row, v0, s_row, beats, cl, amp, dur, dt, ion_scale, until_change=None, gating=0):
    """Pace one cell; (v, states, state at the end of each beat, APD90 of each beat [ms]).

    ``advance``: the reference loop of the case's reaction scheme (``loops.loop``), with
    ``gating`` its code (``state.scheme_codes``). With ``until_change`` [ms], stop after the
    first beat whose APD90 differs from the previous beat's by less than that (``beats`` is
    then the cap). The APD probe only reads the potential: the states reached do not depend on it.
    """
    n = 1
    v = np.array([v0], dtype=np.float64)
    s = np.ascontiguousarray(s_row.reshape(1, -1).copy())
    p = np.ascontiguousarray(p_row.reshape(1, -1))
    lo = np.zeros(1)
    grid, step = godunov_steps(lo, lo, dt, gating, ion_scale)   # one cell: no diffusion to split
    cap = 4
    act = np.full((n, cap), np.nan)
    nact = np.zeros(n, dtype=np.int64)
    ups = np.full((n, cap), np.nan)
    steps = int(round(cl / dt))
    ends, apds = [], []
    for b in range(beats):
        pulses = np.array([[0.0, dur, 0, 1, amp]])
        nact[:] = 0
        act[:] = np.nan
        probe = ApdProbe(v, cap, (90.0,))
        probes = Probes(model.threshold, v.copy(), act, nact, np.zeros(1), np.zeros(1, dtype=np.int64), ups,
                        probe.args())
        status, step_at, node = advance(v, s, p, 0.0, steps, grid, step, Stimulus(pulses, np.zeros(1)), probes,
                                        no_rates())
        if status != integrate.OK:
            raise CaseError(f"membrane.prepace: the single cell became unstable in beat {b + 1} "
                            f"(t = {(step_at + 1) * dt:g} ms); reduce membrane.prepace.dt or check the parameters.")
        ends.append(np.concatenate([v, s[0]]))
        apds.append(float(probe.repol[0, 0, 0] - act[0, 0]) if nact[0] >= 1 else float("nan"))
        if until_change is not None and len(apds) >= 2 and abs(apds[-1] - apds[-2]) < until_change:
            break  # NaN (no beat, or not repolarised within the cycle) never counts as settled
    return v[0], s[0].copy(), ends, apds


def _pace_cell_adaptive(model, p_row, v0, s_row, beats, cl, amp, dur, dt, dt_max, ion_scale, rates,
                        until_change=None):
    """:func:`_pace_cell` with adaptive steps from ``dt`` to ``dt_max``
    (:class:`cable.kernels.adaptive_cell.CellStepper`, one call of its loop per beat); the
    same returns, then the steps taken per level."""
    from cable.kernels import adaptive, tables
    from cable.kernels.adaptive_cell import CellStepper
    from cable.kernels.state import loop_arrays

    p_nodes = np.ascontiguousarray(p_row.reshape(1, -1), dtype=np.float64)
    levels = adaptive.step_levels(dt, dt_max)
    plans = [tables.plan(model, p_nodes, h, 0, rates) for h in levels]
    fast = plans[0].mode != "reference"
    v = np.array([v0], dtype=np.float64)
    arrays = loop_arrays(model, fast, v, s_row.reshape(1, -1), p_nodes, 1, (90.0,))
    steps = int(round(cl / dt))
    pulses = np.array([[0.0, dur, 0, 1, amp]])
    stepper = CellStepper(model, arrays, p_nodes, levels, plans if fast else [None] * len(levels), pulses, steps,
                          steps, (), ion_scale, model.threshold)
    ends, apds = [], []
    for b in range(beats):
        arrays.act[:] = np.nan          # each beat probed afresh, as by _pace_cell
        arrays.nact[:] = 0
        arrays.vprev[:] = v
        arrays.pre_rate[:] = 0.0
        arrays.open_up[:] = 0
        arrays.apd = ApdProbe(v, arrays.act.shape[1], (90.0,))
        status, done, _ = stepper.run(v, 0, steps)
        if status != integrate.OK:
            raise CaseError(f"membrane.prepace: the single cell became unstable in beat {b + 1} "
                            f"(t = {done * dt:g} ms); reduce membrane.prepace.dt or numerics.dt_max, or check the "
                            f"parameters.")
        ends.append(np.concatenate([v, arrays.s.reshape(-1)]))   # one node: the same order by node or by state
        apds.append(float(arrays.apd.repol[0, 0, 0] - arrays.act[0, 0]) if arrays.nact[0] >= 1 else float("nan"))
        if until_change is not None and len(apds) >= 2 and abs(apds[-1] - apds[-2]) < until_change:
            break
    return v[0], arrays.s.reshape(-1).copy(), ends, apds, stepper.counts.copy()


def prepace_nodes(case, model, p, v0, s0):
    """Prepace every distinct parameter set; return (v0, s0, report)."""
    from cable.kernels import loops
    from cable.kernels.state import scheme_codes

    cfg = case.membrane.prepace
    if not case.stimuli and (cfg["amplitude"] is None or cfg["duration"] is None):
        raise CaseError("membrane.prepace needs amplitude and duration (or a stimulus table to take them from).")
    amp = cfg["amplitude"] if cfg["amplitude"] is not None else case.stimuli[0].amplitude
    dur = cfg["duration"] if cfg["duration"] is not None else case.stimuli[0].duration
    dt = cfg["dt"] if cfg["dt"] is not None else case.numerics.dt
    cm = case.capacitance
    if dur >= cfg["cycle_length"]:
        raise CaseError(f"membrane.prepace.cycle_length = {cfg['cycle_length']:g} ms must exceed the pulse duration {dur:g} ms.")
    # the case's reaction scheme and gating (its splitting and diffusion do not apply to one cell)
    advance = loops.loop(model.name, case.numerics.reaction)
    gating = scheme_codes(case.numerics)[0]
    rows, inverse = np.unique(p, axis=0, return_inverse=True)
    inverse = np.asarray(inverse).reshape(-1)
    v_out = v0.copy()
    s_out = s0.copy()
    worst = 0.0
    until = cfg.get("until_change")
    taken, apd_change, unsettled = [], 0.0, 0
    dt_max = case.numerics.dt_max
    adaptive = dt_max is not None and dt_max >= 2.0 * dt * (1.0 - 1e-9)
    counts = None
    for r in range(rows.shape[0]):
        node = int(np.flatnonzero(inverse == r)[0])
        if adaptive:
            v_end, s_end, ends, apds, steps = _pace_cell_adaptive(
                model, rows[r], v0[node], s0[node], cfg["beats"], cfg["cycle_length"], amp / cm, dur, dt, dt_max,
                model.ion_scale(cm), case.numerics.rates, until_change=until)
            counts = steps if counts is None else counts + steps
        else:
            v_end, s_end, ends, apds = _pace_cell(advance, model, rows[r], v0[node], s0[node], cfg["beats"],
                                                  cfg["cycle_length"], amp / cm, dur, dt, model.ion_scale(cm),
                                                  until_change=until, gating=gating)
        v_out[inverse == r] = v_end
        s_out[inverse == r] = s_end
        taken.append(len(ends))
        if len(ends) >= 2:
            a, b = ends[-2], ends[-1]
            scale = np.maximum(np.abs(a), 1e-12)
            worst = max(worst, float(np.max(np.abs(b - a) / scale)))
            step = abs(apds[-1] - apds[-2])
            apd_change = max(apd_change, step) if np.isfinite(step) else float("nan")
            unsettled += int(until is not None and not step < until)
    change = worst if max(taken) >= 2 else float("nan")
    beats = f"{cfg['beats']} beats" if until is None else \
        f"{min(taken)}-{max(taken)} beats" if min(taken) != max(taken) else f"{taken[0]} beats"
    summary = (f"prepaced {rows.shape[0]} cell type(s) for {beats} at {cfg['cycle_length']:g} ms; "
               f"largest relative change of a state over the last beat: {change:.2e}")
    if until is not None:
        summary += (f"; APD90 changed by {apd_change:.3g} ms over the last beat (until_change = {until:g} ms"
                    + (f", not reached within {cfg['beats']} beats by {unsettled} cell type(s))" if unsettled else ")"))
    if change > 1e-3 or unsettled:
        summary += " (not settled: consider more beats)"
    report = {"summary": summary, "last_beat_change": change, "beats": max(taken),
              "last_beat_apd90_change": apd_change, "settled": not unsettled}
    if counts is not None:
        from cable.kernels.adaptive import step_levels

        report["summary"] += f"; adaptive steps {dt:g} to {dt_max:g} ms: {int(counts.sum())} steps"
        report["steps_taken"] = counts
        report["step_dt"] = np.array(step_levels(dt, dt_max))
    return v_out, s_out, report


#: settling of an unstimulated cell whose parameters differ from the model's defaults:
#: checked every SETTLE_CHUNK ms until |dV/dt| < SETTLE_RATE, at most SETTLE_MAX ms
SETTLE_CHUNK = 50.0
SETTLE_RATE = 1e-4      # [mV/ms]
SETTLE_MAX = 5000.0
#: the step tried first for settling [ms]
SETTLE_DT_COARSE = 0.05
#: a settled rest this far from the default [mV] is worth a note to the user
NOTE_SHIFT = 0.01


def _settle_cell(advance, model, p_row, v0, s0, dt, ion_scale):
    """Integrate one unstimulated cell until dV/dt < SETTLE_RATE; None if it diverged."""
    lo = np.zeros(1)
    grid, step = godunov_steps(lo, lo, dt, 0, ion_scale)
    steps = max(1, int(round(SETTLE_CHUNK / dt)))
    v = np.array([v0])
    s = np.ascontiguousarray(np.asarray(s0).reshape(1, -1).copy())
    prow = np.ascontiguousarray(p_row.reshape(1, -1))
    stimulus = Stimulus(np.zeros((0, 5)), np.zeros(1))
    t = 0.0
    rate = np.inf
    while t < SETTLE_MAX:
        before = v[0]
        status, _, _ = advance(v, s, prow, 0.0, steps, grid, step, stimulus, unprobed(v), no_rates())
        t += steps * dt
        if status != integrate.OK or not np.all(np.isfinite(s)):
            return None
        rate = abs(v[0] - before) / (steps * dt)
        if rate < SETTLE_RATE:
            break
    return v[0], s[0].copy(), t, rate


def settle_nodes(case, model, p, v0, s0):
    """Start nodes whose parameters differ from the defaults at their own resting state.

    The model's initial state is a resting state for its default parameters only; a
    raised K_o, say, moves the rest. Each distinct parameter set is integrated without
    stimulus until dV/dt falls below ``SETTLE_RATE`` (or ``SETTLE_MAX`` ms).

    Returns
    -------
    v0, s0 : ndarray
    note : str or None
    """
    from cable.kernels import loops

    default = model.default_parameters()
    rows, inverse = np.unique(p, axis=0, return_inverse=True)
    inverse = np.asarray(inverse).reshape(-1)
    changed = [r for r in range(rows.shape[0]) if not np.array_equal(rows[r], default)]
    if not changed:
        return v0, s0, None
    # Rush-Larsen whatever numerics.reaction: a rest is a fixed point of every scheme
    advance = loops.loop(model.name)
    cm = case.capacitance
    # The rest reached does not depend on dt (at a fixed point of the Rush-Larsen step the
    # gates sit at their steady values and I_ion = 0), so a coarse step is tried first and
    # the run's own step is the fallback if the coarse one is unstable.
    steps_to_try = [SETTLE_DT_COARSE, min(max(case.numerics.dt, 1e-3), 0.01)]
    v_out, s_out = v0.copy(), s0.copy()
    worst = 0.0
    longest = 0.0
    for r in changed:
        node = int(np.flatnonzero(inverse == r)[0])
        for dt in steps_to_try:
            result = _settle_cell(advance, model, rows[r], v0[node], s0[node], dt, model.ion_scale(cm))
            if result is not None:
                break
        else:
            names = model.parameter_names
            which = ", ".join(f"{names[i]} = {rows[r][i]:.6g} (default {default[i]:.6g})"
                              for i in np.flatnonzero(rows[r] != default))
            raise CaseError(f"the membrane has no stable rest with {which} (the unstimulated cell diverged); "
                            f"change that in membrane.parameters, membrane.scale, membrane.temperature or the "
                            f"[region.NAME] that sets it.")
        v_end, s_end, t, rate = result
        worst = max(worst, rate)
        longest = max(longest, t)
        v_out[inverse == r] = v_end
        s_out[inverse == r] = s_end
    moved = float(np.max(np.abs(v_out - v0)))
    if moved < NOTE_SHIFT:
        return v_out, s_out, None  # the changes (a temperature, say) do not move the rest
    note = (f"started {len(changed)} changed parameter set(s) at their own rest, up to {moved:.3g} mV from "
            f"the model's default rest (settled for up to "
            f"{longest:g} ms; final |dV/dt| {worst:.1e} mV/ms)")
    return v_out, s_out, note
