"""Many independent strands in one kernel call: :func:`simulate_batch`.

Each strand of a batch has sealed ends (no coupling out of its first and last node),
so it evolves as it would alone. The batch makes that exact, not just true to
rounding: every strand is computed with the same floating-point operations, in the
same order, as ``cable.simulate(case)`` performs for it, so its fields and
measurements are bitwise those of the separate run (checked with ``np.array_equal``
in ``tests/kernels/test_batch.py``). What is shared is the per-call and per-step
work: one time loop, one table, one set of Python calls per output
interval, instead of one each per strand. How:

* diffusion: each strand with the factors it has alone (``diffusion.factor``) and the
  operations of ``diffusion.diffuse``; strands of one length on the fast path are
  stored interleaved and solved side by side (``diffusion.diffuse_interleaved``, in
  the single-strand loop with ``Grid.layout`` > 1), others laid end to end, each solved
  on its own slice (the loop's ``"segments"`` layout, on either path);
* reaction, stimulus and probes act node by node, with the same
  arithmetic whatever the node's place in the batch (the pulse table keeps each
  strand's pulses in its own order);
* each case is prepared (grid, parameters, settling or pre-pacing, pulses) by
  ``cable.preparation.prepare``, as alone.

Cases are batched together when everything their time loop depends on is the same
(:func:`group_key`): model, ``numerics`` (dt, splitting, diffusion, gating, reaction,
merged half steps, rates), output interval and count, activation threshold, APD levels,
stored states, ion scale (capacitance), crossings stored per node, and the rate table
(tabulated rates: the values of the table's parameters, ``FastPath.table_parameters``,
one set per table group, so that the batch's tables are those each case builds alone). Grids,
conductances, region parameters, stimuli and initial states may all differ. A case
that asks for what the batch does not do (``measure.safety_factor``, a ring, ``[[electrode]]``,
adaptive steps ``numerics.dt_max``) runs alone.
"""

from __future__ import annotations

import time as _time
from dataclasses import replace
from types import SimpleNamespace

import numpy as np

from cable.kernels.state import crossing_cap, loop_arrays, scheme_codes

#: at most this many nodes in one batch (the rest form further batches): the stored
#: fields and the probes grow with it
MAX_BATCH_NODES = 2_000_000


def _rates_key(setup) -> tuple:
    """What decides the reaction path and table of a case (as ``tables.plan`` decides)."""
    from cable.kernels import tables

    model = setup.model
    fast = model.fast
    rates = setup.case.numerics.rates
    if rates == "reference" or fast is None:
        return ("reference",)
    if setup.case.numerics.reaction != "rush-larsen":
        return ("exact",) if fast.kinetics is not None else ("reference",)
    if rates == "exact" or fast.build_table is None:
        return ("exact",)
    columns = [model.parameter_names.index(name) for name in fast.table_parameters]
    # the bits of the values the tables are built from (FastPath.table_parameters), one row per
    # table group: members share them, so the batch's tables (and whether they fit,
    # tables.MAX_TABLE_BYTES) are those of each member alone
    first, _ = tables.table_groups(setup.p, columns)
    return ("tabulated", np.asarray(setup.p, dtype=np.float64)[first][:, columns].tobytes())


def group_key(setup) -> tuple | None:
    """The key under which a prepared case shares a time loop; None: it runs alone.

    Parameters
    ----------
    setup : cable.preparation.Setup
        From :func:`cable.preparation.prepare`.
    """
    if getattr(setup, "safety", None) is not None or getattr(setup.grid, "closed", False) \
            or setup.case.extra.get("electrode"):
        return None  # a ring's cyclic solve and the pseudo-ECG are cable.simulate's alone
    if setup.case.numerics.adaptive:
        return None  # adaptive steps (numerics.dt_max): each strand chooses its own steps, in cable.simulate
    from cable.quiet import wanted

    case = setup.case
    num = case.numerics
    quiet = (wanted(case), case.quiet_tolerance if wanted(case) else None)
    return (setup.model.name, num.dt, num.splitting, num.diffusion, num.gating, num.reaction, num.merge_half_steps,
            num.rates, setup.steps_per_sample, setup.n_samples, setup.threshold, tuple(case.apd_levels),
            setup.ion_scale, tuple(case.output_states), crossing_cap(setup.pulses.shape[0]), _rates_key(setup),
            quiet)


def loop_key(case) -> tuple:
    """A coarse :func:`group_key` computed from a loaded case alone (no preparation).

    Cases that share a time loop have equal loop keys (except where two different
    ``output.every`` or ``run.duration`` values round to the same step counts, or a
    threshold given equals the model's default), so a caller can split its cases by
    this key before sending each part to :func:`simulate_batch` (which still groups
    them by :func:`group_key`) and lose no batching in practice.

    Parameters
    ----------
    case : cable.case.Case
    """
    num = case.numerics
    cm = case.fiber.capacitance if case.fiber is not None else 1.0
    alone = case.safety_factor and case.fiber is not None
    return (case.membrane.model, num.dt, num.splitting, num.diffusion, num.gating, num.reaction, num.merge_half_steps,
            num.rates, case.output_every, case.duration, case.threshold, tuple(case.apd_levels),
            tuple(case.output_states), cm, alone, num.dt_max if num.adaptive else None, case.stop_when_quiet,
            case.quiet_tolerance)


def simulate_batch(cases, *, errors: str = "raise") -> list:
    """Run many cases, batching those that share a time loop into one kernel call.

    Parameters
    ----------
    cases : sequence of (str, pathlib.Path, dict or Case)
        The cases, as :func:`cable.simulate` takes them.
    errors : {"raise", "return"}
        On an invalid case or a numerical failure: raise the first
        :class:`cable.CaseError` (before anything runs) or
        :class:`cable.SimulationError`, or return the exception in that case's place
        (the other cases run).

    Returns
    -------
    list of xarray.Dataset (or exceptions, with ``errors="return"``)
        One result per case, in order: the Dataset :func:`cable.simulate` gives for it,
        with the same values bit for bit and the same attributes, except
        ``wall_time_s`` (the batch's loop time shared among its strands by node count)
        and ``batch_size`` (how many strands shared the loop).

    Raises
    ------
    CaseError
        With ``errors="raise"``, an invalid case (nothing is run).
    SimulationError
        With ``errors="raise"``, the first failure. A batch in which any strand fails
        is rerun strand by strand, so that each failure (and its partial result) is
        that case's own.
    """
    from cable.case import CaseError
    from cable.simulate import SimulationError, simulate
    from cable.preparation import prepare

    if errors not in ("raise", "return"):
        raise ValueError(f"errors = {errors!r}: allowed values are 'raise' and 'return'.")
    out: list = [None] * len(cases)
    setups: dict = {}
    for i, case in enumerate(cases):
        try:
            setups[i] = prepare(case)
        except CaseError as exc:
            if errors == "raise":
                raise
            out[i] = exc
    groups: dict = {}
    for i, setup in setups.items():
        key = group_key(setup)
        key = ("alone", i) if key is None else key
        members = groups.setdefault(key, [])
        if members and sum(setups[j].n for j in members) + setup.n > MAX_BATCH_NODES:
            key = key + (i,)
            members = groups.setdefault(key, [])
        members.append(i)
    for members in groups.values():
        results = _run_batch([setups[i] for i in members]) if len(members) > 1 else None
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


def _layout(setups, fast: bool):
    """(interleaved, slices): where each strand's nodes lie in the batch arrays.

    Strands of one length on the fast path are interleaved (node i of strand j at
    i*S + j: the diffusion sweeps then run over the strands side by side, vectorised);
    otherwise they are laid end to end.
    """
    sizes = [s.n for s in setups]
    count = len(setups)
    if fast and len(set(sizes)) == 1:
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
    """The batch's pulse table: each strand's pulses on its own nodes, in its own order
    (the sort by onset is stable and each strand's table is sorted already)."""
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


def _tracker_part(tracker, sl):
    """The per-beat arrays of an ApdProbe restricted to the nodes ``sl`` (contiguous)."""
    return SimpleNamespace(levels=tracker.levels,
                           **{name: np.ascontiguousarray(getattr(tracker, name)[sl]) for name in ("rest", "peak", "repol")})


def _run_batch(setups):
    """The strands of ``setups`` (one group key) in one time loop; None if any failed."""
    from cable.kernels import integrate

    first = setups[0]
    b = _batch_loop(setups)
    arrays, v, num = b.arrays, b.v, first.case.numerics
    fields, sample = _batch_fields(setups, b)
    quiet = _batch_quiet(setups, b)
    dt, spb = num.dt, first.steps_per_sample
    sample(0)
    n_done = first.n_samples
    wall0 = _time.perf_counter()
    for k in range(1, first.n_samples):
        t0 = (k - 1) * spb * dt
        status, _, _ = b.advance(v, arrays.s, arrays.p, t0, spb, b.grid, b.step, b.stimulus, b.probes, b.rates)
        if status != integrate.OK:
            return None
        sample(k)
        if quiet is not None and k < first.n_samples - 1 and \
                quiet(k * spb * dt, v, arrays.act, arrays.nact, arrays.apd.pending):
            n_done = k + 1
            break
    wall = _time.perf_counter() - wall0
    return _strand_results(setups, b, fields, n_done, wall, quiet is not None)


def _batch_loop(setups) -> SimpleNamespace:
    """The batch's time loop and its arguments: the strands placed side by side (:func:`_layout`),
    their diffusion factors, pulses, initial state and probes, the one rate table."""
    from cable.kernels import diffusion, loops, tables
    from cable.kernels.loop import Rates, no_rates
    from cable.kernels.state import step_of

    first = setups[0]
    model, num = first.model, first.case.numerics
    n = sum(s.n for s in setups)
    gating, theta, splitting = scheme_codes(num)
    # the tables of the group: its table groups are those of every member (group_key)
    rates = tables.plan(model, first.p, num.dt, gating, num.rates, reaction=num.reaction)
    fast = rates.mode != "reference"
    interleaved, slices = _layout(setups, fast)
    grids = [(s.grid.lo, s.grid.up) for s in setups]
    if interleaved:
        advance = loops.loop(model.name, num.reaction, fast=True)
        factor, layout = diffusion.factor_interleaved, len(setups)
    else:
        advance = loops.loop(model.name, num.reaction, fast, layout="segments")
        factor = diffusion.factor_segments
        layout = np.concatenate([[0], np.cumsum([s.n for s in setups])]).astype(np.int64)
    v = _place([s.v0 for s in setups], slices, n)
    p_nodes = _place([np.broadcast_to(s.p, (s.n, s.p.shape[1])) for s in setups], slices, n)
    if rates.table.shape[0] > 1:   # each node's table group (numbered alike for every member: group_key)
        rates = replace(rates, group=tables.node_groups(model, p_nodes))
    # the crossing cap is the same for every member (group_key)
    arrays = loop_arrays(model, fast, v, _place([s.s0 for s in setups], slices, n), p_nodes, first.pulses.shape[0],
                         first.case.apd_levels)
    grid = arrays.grid(_place([s.grid.lo for s in setups], slices, n), _place([s.grid.up for s in setups], slices, n),
                       theta, factor(grids, 0.5 * num.dt, theta), factor(grids, num.dt, theta), layout)
    return SimpleNamespace(
        n=n, plan=rates, rates=Rates(rates.table, rates.v_lo, rates.inv_dv, rates.group) if fast else no_rates(),
        interleaved=interleaved, slices=slices, advance=advance, grid=grid,
        step=step_of(num.dt, splitting, num.merge_half_steps, gating, first.ion_scale),
        stimulus=arrays.stimulus(_pulses(setups, slices, n)), probes=arrays.probes(first.threshold), v=v,
        arrays=arrays)


def _batch_fields(setups, b):
    """(fields, sample): the stored fields of the batch and the function storing sample k.

    Interleaved strands are stored per strand (strand, t, node), each strand's field
    contiguous; strands end to end as one (t, node) field."""
    from cable.io import schema

    first = setups[0]
    model, states = first.model, first.case.output_states
    state_idx = [model.state_names.index(name) for name in states]
    field_names = ["vm"] + [schema.STATE_PREFIX + name for name in states]
    if b.interleaved:
        count = len(setups)
        length = b.n // count
        fields = {name: np.empty((count, first.n_samples, length)) for name in field_names}

        def put(name, k, values):
            fields[name][:, k, :] = values.reshape(length, count).T
    else:
        fields = {name: np.empty((first.n_samples, b.n)) for name in field_names}

        def put(name, k, values):
            fields[name][k] = values

    def sample(k):
        put("vm", k, b.v)
        for name, j in zip(field_names[1:], state_idx):
            put(name, k, b.arrays.state(j))

    return fields, sample


def _batch_quiet(setups, b):
    """run.stop_when_quiet (the same for every member, group_key): the batch stops once every
    strand is quiet; None when not asked."""
    from cable.quiet import QuietCheck, wanted

    case0 = setups[0].case
    if not wanted(case0):
        return None
    act, nact = b.arrays.act, b.arrays.nact

    def judge(t):  # no strand's beat read as timed out if the run ended at t
        from cable.measure.activation import assign_beats

        return not any(np.any(assign_beats(np.ascontiguousarray(act[sl]), nact[sl].copy(),
                                           s.x if s.x is not None else np.zeros(1), s.pulses, t_end=t).timed_out)
                       for s, sl in zip(setups, b.slices))

    return QuietCheck(b.stimulus.pulses, b.v, case0.quiet_tolerance, len(case0.apd_levels), judge=judge)


def _strand_results(setups, b, fields, n_done: int, wall: float, quiet: bool) -> list:
    """Each strand's Dataset from the batch's fields and probes (its own slice of each)."""
    from cable.results import measurements, provenance

    first = setups[0]
    arrays = b.arrays
    t_end = (n_done - 1) * first.steps_per_sample * first.case.numerics.dt
    tracker = arrays.apd
    tracker.finish(arrays.nact)
    results = []
    template = None
    for j, (setup, sl) in enumerate(zip(setups, b.slices)):
        meas = measurements(setup, np.ascontiguousarray(arrays.act[sl]), arrays.nact[sl].copy(),
                            np.ascontiguousarray(arrays.upstroke[sl]), _tracker_part(tracker, sl), t_end=t_end)
        attrs = provenance(setup, None)
        attrs.update(rates=b.plan.mode, wall_time_s=round(wall * setup.n / b.n, 6), status="complete",
                     batch_size=len(setups), stop_when_quiet=int(quiet))
        if n_done < first.n_samples:
            attrs["stopped_when_quiet_ms"] = t_end
        own = {name: (arr[j, :n_done] if b.interleaved else arr[:n_done, sl]).copy() for name, arr in fields.items()}
        ds = _like(template, setup, own, meas, attrs)
        if ds is None:
            from cable.results import assemble

            ds = assemble(setup, own, meas, attrs, first.model)
            template = (setup, ds, meas)
        results.append(ds)
    return results


def _like(template, setup, fields, meas, attrs):
    """The result Dataset as a copy of an earlier one of the batch with the data replaced
    (what ``cable.results.assemble`` builds, without building it again: its variables,
    coordinates and attributes are the same); None when the coordinates or shapes differ."""
    if template is None:
        return None
    setup0, ds0, meas0 = template
    if (setup.x is None) != (setup0.x is None) or (setup.x is not None and not np.array_equal(setup.x, setup0.x)):
        return None
    if meas.keys() != meas0.keys() or any(meas[k][0] != meas0[k][0] or np.shape(meas[k][1]) != np.shape(meas0[k][1])
                                          for k in meas):
        return None
    data = {}
    for name, arr in fields.items():
        data[name] = arr if setup.x is not None else arr[:, 0]
    for name, (dims, arr) in meas.items():
        arr = np.asarray(arr)
        data[name] = arr if setup.x is not None or "x" not in dims else np.take(arr, 0, axis=dims.index("x"))
    if data.keys() != set(ds0.data_vars):
        return None
    ds = ds0.copy(deep=False, data=data)
    ds.attrs = attrs
    return ds
