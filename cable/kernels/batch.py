"""Many independent strands in one kernel call: :func:`simulate_batch`.

The strands of a batch are laid end to end as one long strand. Every strand has
sealed ends (no coupling out of its first and last node), so the diffusion matrix of
the whole is block diagonal and each strand evolves as it would alone: the batch
gives each case the result of ``cable.simulate(case)`` to rounding (checked in
``tests/kernels/test_batch.py``). What is shared is the per-call and per-step work:
one time loop, one table, one APD tracker, one set of Python calls per output
interval, instead of one each per strand.

Cases are batched together when their time loop is the same: model, ``numerics``
(dt, splitting, diffusion, gating, merged half steps, rates), run duration, output
interval, activation threshold, APD levels and capacitance; the grids, parameters,
stimuli and initial states may all differ. Other cases form other batches. A case
that asks for what the batch does not do (``measure.safety_factor``) runs alone.
"""

from __future__ import annotations

import copy
import time as _time

import numpy as np

#: at most this many nodes in one batch (the rest form further batches): the stored
#: fields and the probes grow with it
MAX_BATCH_NODES = 2_000_000


def _key(setup) -> tuple:
    case = setup.case
    num = case.numerics
    return (setup.model.name, num.dt, num.splitting, num.diffusion, num.gating, num.merge_half_steps,
            num.rates, setup.steps_per_sample, setup.n_samples, setup.threshold, tuple(case.apd_levels),
            setup.ion_scale, tuple(case.output_states))


def simulate_batch(cases, *, errors: str = "raise") -> list:
    """Run many cases, batching those that share a time loop into one kernel call.

    Parameters
    ----------
    cases : sequence of (str, pathlib.Path, dict or Case)
        The cases, as :func:`cable.simulate` takes them.
    errors : {"raise", "return"}
        On a numerical failure: raise the first :class:`cable.SimulationError`, or
        return it in the failed case's place.

    Returns
    -------
    list of xarray.Dataset
        One result per case, in order, as :func:`cable.simulate` gives it (the
        ``wall_time_s`` attribute is the batch's wall time divided among its strands
        by node count, and ``batch_size`` says how many strands shared the loop).

    Raises
    ------
    CaseError
        An invalid case (nothing is run).
    SimulationError
        With ``errors="raise"``, the first failure. A batch in which any strand fails
        is rerun strand by strand, so that each failure is that case's own.
    """
    from cable.simulate import SimulationError, prepare, simulate

    if errors not in ("raise", "return"):
        raise ValueError(f"errors = {errors!r}: allowed values are 'raise' and 'return'.")
    setups = [prepare(c) for c in cases]
    out: list = [None] * len(setups)
    groups: dict = {}
    for i, setup in enumerate(setups):
        if getattr(setup, "safety", None) is not None:
            groups.setdefault(("alone", i), []).append(i)
            continue
        key = _key(setup)
        members = groups.setdefault(key, [])
        if members and sum(setups[j].n for j in members) + setup.n > MAX_BATCH_NODES:
            key = key + (i,)
            members = groups.setdefault(key, [])
        members.append(i)
    for key, members in groups.items():
        results = None
        if len(members) > 1:
            results = _run_batch([setups[i] for i in members])
        if results is None:       # a single case, or a batch with a failure: one by one
            results = []
            for i in members:
                try:
                    results.append(simulate(setups[i].case))
                except SimulationError as exc:
                    if errors == "raise":
                        raise
                    results.append(exc)
        for i, ds in zip(members, results):
            out[i] = ds
    return out


def _tracker_slice(tracker, sl, n_total):
    """A view of an ApdTracker restricted to the nodes ``sl``."""
    part = copy.copy(tracker)
    for name, value in vars(tracker).items():
        if isinstance(value, np.ndarray) and value.ndim >= 1 and value.shape[0] == n_total:
            setattr(part, name, value[sl])
    return part


def _layout(setups, fast: bool):
    """(interleaved, slices): where each strand's nodes lie in the batch arrays.

    Strands of one length on the fast path are interleaved (node i of strand j at
    i*S + j: the diffusion sweeps then run over the strands side by side, vectorised);
    otherwise they are laid end to end.
    """
    sizes = [s.n for s in setups]
    count = len(setups)
    if fast and len(set(sizes)) == 1 and sizes[0] > 1:
        return True, [slice(j, None, count) for j in range(count)]
    offsets = np.concatenate([[0], np.cumsum(sizes)]).astype(int)
    return False, [slice(int(offsets[j]), int(offsets[j + 1])) for j in range(count)]


def _place(parts, slices, n):
    """One batch array from per-strand arrays (first axis: nodes)."""
    first = np.asarray(parts[0])
    out = np.empty((n,) + first.shape[1:], dtype=first.dtype)
    for part, sl in zip(parts, slices):
        out[sl] = part
    return out


def _pulses(setups, slices, n):
    """The batch's pulse table: each strand's pulses on its own nodes."""
    rows = []
    index = np.arange(n)
    for setup, sl in zip(setups, slices):
        nodes = index[sl]
        for on, off, i0, i1, amp in setup.pulses:
            i0, i1 = int(i0), int(i1)
            if sl.step is None:
                rows.append((on, off, nodes[i0], nodes[i1 - 1] + 1, amp))
            else:        # interleaved: one row per node of the zone
                rows.extend((on, off, g, g + 1, amp) for g in nodes[i0:i1])
    pulses = np.array(rows, dtype=np.float64).reshape(-1, 5)
    return np.ascontiguousarray(pulses[np.argsort(pulses[:, 0], kind="stable")])


def _run_batch(setups):
    """The strands of ``setups`` in one time loop; None if any strand failed."""
    from cable.io import schema
    from cable.kernels import diffusion, integrate, tables
    from cable.measure.apd import ApdTracker
    from cable.simulate import (CHECK_EVERY, MAX_CROSSINGS, _fast_integrator, _integrator, assemble,
                                measurements, provenance)

    first = setups[0]
    model = first.model
    case0 = first.case
    num = case0.numerics
    dt = num.dt
    n = sum(s.n for s in setups)
    gating = 0 if num.gating == "rush-larsen" else 1
    p_parts = [np.broadcast_to(s.p, (s.n, s.p.shape[1])) for s in setups]
    rates = tables.plan(model, np.concatenate(p_parts), dt, gating, num.rates)
    fast = rates.mode != "reference"
    interleaved, slices = _layout(setups, fast)
    advance = _fast_integrator(model.name) if fast else _integrator(model.name)
    lo = _place([s.grid.lo for s in setups], slices, n)
    up = _place([s.grid.up for s in setups], slices, n)
    p_nodes = _place(p_parts, slices, n)
    pulses = _pulses(setups, slices, n)
    v = _place([s.v0 for s in setups], slices, n)
    s0 = _place([s.s0 for s in setups], slices, n)
    theta = diffusion.THETA[num.diffusion]
    if interleaved:
        def factors(h):
            parts = [diffusion.factor_thomas(s.grid.lo, s.grid.up, h, theta) for s in setups]
            return tuple(diffusion.interleave([f[k] for f in parts]) for k in range(3))
        strands = len(setups)
    else:
        def factors(h):
            return diffusion.factor(lo, up, h, theta)
        strands = 1
    half, full = factors(0.5 * dt), factors(dt)
    by_state = fast and model.fast.by_state
    if by_state:
        st = np.ascontiguousarray(s0.T)
        p = tables.by_parameter(p_nodes)
    else:
        st = np.ascontiguousarray(s0)
        p = np.ascontiguousarray(p_nodes)
    extra = (rates.table, rates.v_lo, rates.inv_dv, strands) if fast else ()
    splitting = integrate.STRANG if num.splitting == "strang" else integrate.GODUNOV
    cap = max(max(16, min(2 * s.pulses.shape[0] + 8, MAX_CROSSINGS)) for s in setups)
    act = np.full((n, cap), np.nan)
    nact = np.zeros(n, dtype=np.int64)
    upstroke = np.full((n, cap), np.nan)
    vprev = v.copy()
    pre_rate = np.zeros(n)
    open_up = np.zeros(n, dtype=np.int64)
    i_stim = np.zeros(n)
    work = np.zeros(n)
    tracker = ApdTracker(v, act, case0.apd_levels)
    state_idx = [model.state_names.index(name) for name in case0.output_states]
    field_names = ["vm"] + [schema.STATE_PREFIX + name for name in case0.output_states]
    spb = first.steps_per_sample
    fields = {name: np.empty((first.n_samples, n)) for name in field_names}

    def sample(k):
        fields["vm"][k] = v
        for name, j in zip(field_names[1:], state_idx):
            fields[name][k] = st[j] if by_state else st[:, j]

    sample(0)
    wall0 = _time.perf_counter()
    for k in range(1, first.n_samples):
        t0 = (k - 1) * spb * dt
        status, _, _ = advance(v, st, p, t0, spb, dt, pulses, lo, up, theta, half, full, splitting,
                               num.merge_half_steps, gating, first.ion_scale, first.threshold, vprev, act, nact,
                               pre_rate, open_up, upstroke, i_stim, work, CHECK_EVERY, *extra)
        if status != integrate.OK:
            return None
        tracker.update(v, k * spb * dt, act, nact)
        sample(k)
    wall = _time.perf_counter() - wall0
    t_end = (first.n_samples - 1) * spb * dt
    results = []
    for setup, sl in zip(setups, slices):
        meas = measurements(setup, act[sl], nact[sl], upstroke[sl], _tracker_slice(tracker, sl, n), t_end=t_end)
        attrs = provenance(setup, None)
        attrs.update(rates=rates.mode, status="complete", batch_size=len(setups),
                     wall_time_s=round(wall * setup.n / n, 6))
        if rates.note:
            attrs["notes"] = "\n".join(filter(None, [attrs.get("notes", ""), rates.note]))
        ds = assemble(setup, {name: arr[:, sl] for name, arr in fields.items()}, meas, attrs, model)
        results.append(ds)
    return results
