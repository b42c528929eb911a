"""The front door: :func:`simulate` runs a case and returns one ``xarray.Dataset``.

Stages: :func:`cable.preparation.prepare` turns a validated case into arrays (grid, parameters per
node, initial state, stimulus pulses); the compiled time loop advances the strand
between output times; samples go to memory or are streamed to a netCDF file; the
measurements (activation, conduction velocity, block, APD) are computed at the end
from probes the kernel kept, so they do not depend on the sampling interval
(:mod:`cable.results`). The loop a run uses: :mod:`cable.kernels.loops`.
"""

from __future__ import annotations

import contextlib
import os
import time as _time

import numpy as np
import xarray as xr

from cable.arguments import check_call
from cable.case import Case, CaseError, load_case
from cable.io import schema
from cable.kernels import diffusion, integrate, tables
from cable.kernels.loops import _fast_integrator, _integrator, needs_compiling
from cable.kernels.state import loop_arrays, scheme_codes
from cable.measure.activation import assign_beats
from cable.preparation import Setup, check_size, check_threshold, prepare
from cable.results import assemble, grid_closed, measurements, provenance


class SimulationError(RuntimeError):
    """A numerical failure during the run (NaN or runaway potential).

    Attributes
    ----------
    time, position : float
        Where it was found [ms], [cm] (position None for a single cell).
    partial : xarray.Dataset or None
        What was computed up to then.
    """

    def __init__(self, message, time=None, position=None, partial=None):
        super().__init__(message)
        self.time = time
        self.position = position
        self.partial = partial


class _MemorySink:
    def __init__(self, setup: Setup, names):
        self.fields = {name: np.empty((setup.n_samples, setup.n)) for name in names}
        self.filled = 0

    def write(self, k, values):
        for name, arr in values.items():
            self.fields[name][k] = arr
        self.filled = k + 1

    def write_rows(self, k, values):
        """Samples k, k + 1, ... at once (``values``: arrays (rows, n))."""
        m = 0
        for name, arr in values.items():
            m = arr.shape[0]
            self.fields[name][k:k + m] = arr
        self.filled = k + m


def simulate(case, *, output=None, overwrite: bool = False, progress=None, command: str | None = None,
             info=None) -> xr.Dataset:
    """Run a case and return its result.

    Parameters
    ----------
    case : str, pathlib.Path, dict or Case
        A case file, its TOML text, a dict of the same structure, or a loaded case.
    output : str or pathlib.Path, optional
        netCDF file to write; ``vm`` is streamed to it during the run so memory does
        not grow with the duration. Written under a temporary name and renamed.
    overwrite : bool
        Replace an existing ``output``.
    progress : callable, optional
        ``progress(t_done, t_total)`` called after each output interval.
    command : str, optional
        The command line, recorded in the provenance attributes.
    info : callable, optional
        Receives one-line notes (compilation, adjusted settings).

    Returns
    -------
    xarray.Dataset
        Coordinates ``t`` [ms], ``x`` [cm] (absent for a single cell), ``beat``;
        ``vm(t, x)``, ``activation_time(beat, x)``, ``conduction_velocity(beat)`` [m/s],
        ``captured``, ``blocked``, ``block_x`` and the APD family; see
        :mod:`cable.io.schema`.

    Raises
    ------
    CaseError
        Invalid case (nothing is run).
    SimulationError
        NaN or runaway potential; the partial result is attached (and written, marked
        partial, when ``output`` is given).
    """
    from cable.io import netcdf

    check_call("simulate", output=output, overwrite=overwrite, progress=progress, command=command, info=info)
    if not isinstance(case, (Case, dict, str, os.PathLike)):
        raise CaseError(f"simulate(case={case!r}): give a case file path (str or pathlib.Path), a dict, a Case, or "
                        f"TOML text as cable.load_case(text=...); not {type(case).__name__}.")
    say = info or (lambda msg: None)
    case = case if isinstance(case, Case) else load_case(case)
    if output is not None:
        netcdf.check_target(output, overwrite)
    # prepare() may already run the reference loop (settling, pre-pacing): say so before it
    name = case.membrane.model
    if needs_compiling(case):
        say(f"compiling the '{name}' kernels (first run only; later runs use the cache)...")
    setup = prepare(case)
    check_threshold(setup)
    check_size(setup, output)
    for note in setup.notes:
        say(note)
    if setup.prepace is not None:
        say(setup.prepace["summary"])
    model = setup.model
    num = case.numerics
    dt = num.dt
    gating, theta, splitting = scheme_codes(num)
    rates = tables.plan(model, setup.p, dt, gating, num.rates, reaction=num.reaction)
    if rates.note:
        say(rates.note)
    fast = rates.mode != "reference"
    advance = _fast_integrator(model.name, num.reaction) if fast else _integrator(model.name, num.reaction)

    state_names = list(case.output_states)
    state_idx = [model.state_names.index(s) for s in state_names]
    field_names = ["vm"] + [schema.STATE_PREFIX + s for s in state_names]
    v = setup.v0.copy()
    extra = 0
    if grid_closed(setup):
        from cable.ring import RING_PASSES as extra  # one crossing per revolution at every node
    arrays = loop_arrays(model, fast, v, setup.s0, setup.p, setup.pulses.shape[0] + extra,
                          case.apd_levels)
    act, nact, upstroke = arrays.act, arrays.nact, arrays.upstroke
    grid = setup.grid
    half = diffusion.factor(grid.lo, grid.up, 0.5 * dt, theta)
    full = diffusion.factor(grid.lo, grid.up, dt, theta)

    attrs = provenance(setup, command)
    attrs["rates"] = rates.mode
    from cable import quiet as _quiet

    quiet = None
    attrs["stop_when_quiet"] = int(_quiet.wanted(case))
    if attrs["stop_when_quiet"]:
        x_nodes = setup.x if setup.x is not None else np.zeros(1)

        def judge(t):  # no beat read as timed out if the run ended at t
            return not np.any(assign_beats(act, nact, x_nodes, setup.pulses, t_end=t).timed_out)

        quiet = _quiet.QuietCheck(setup.pulses, setup.v0, case.quiet_tolerance, len(case.apd_levels), judge=judge)
    if output is not None:
        sink = netcdf.StreamWriter(output, setup, field_names, model, attrs, overwrite=overwrite,
                                   growing=quiet is not None)
    else:
        sink = _MemorySink(setup, field_names)

    highest = [-np.inf]  # the highest potential sampled: says why no node crossed a given threshold

    ecg_w = None
    if setup.x is not None:
        from cable import electrodes

        ecg_w = electrodes.of_case(case, setup.x)
    ecg = np.full((0 if ecg_w is None else ecg_w.shape[0], setup.n_samples), np.nan)
    merge = num.merge_half_steps
    if ecg_w is not None:
        # QRS onset, T peak and QT from every step's profile, not only the output samples:
        # the loop returns after each step, so half steps are not merged (the Strang scheme
        # unmerged; its results differ from the merged one within the time step's error)
        ecg_steps = np.full((ecg_w.shape[0], (setup.n_samples - 1) * setup.steps_per_sample + 1), np.nan)
        ecg_steps[:, 0] = ecg_w @ v
        if merge and num.splitting == "strang":
            say("note: with [[electrode]] the pseudo-ECG is taken at every step, so the half steps are not "
                "merged (numerics.merge_half_steps = false for this run).")
        merge = False

    def sample(k, rows=None):
        """Store output sample k (from v and the states), or the samples k, k + 1, ... of
        ``rows`` (the single-cell loop's: potential, then the output states)."""
        if rows is not None:
            if rows.shape[0]:
                highest[0] = max(highest[0], float(np.max(rows[:, 0])))
                if isinstance(sink, _MemorySink):
                    sink.write_rows(k, {name: rows[:, c:c + 1] for c, name in enumerate(field_names)})
                else:    # streamed: one sample at a time into the writer's buffer
                    for r in range(rows.shape[0]):
                        sink.write(k + r, {name: rows[r, c:c + 1] for c, name in enumerate(field_names)})
            return
        if ecg_w is not None:
            ecg[:, k] = ecg_w @ v  # the pseudo-ECG from the full profile at each output time
        highest[0] = max(highest[0], float(np.max(v)))
        vals = {"vm": v}
        for name, j in zip(state_names, state_idx):
            vals[schema.STATE_PREFIX + name] = arrays.state(j)
        sink.write(k, vals)

    table_args = (rates.table, rates.v_lo, rates.inv_dv, rates.group, 1) if fast else ()
    stepper = _stepper(setup, advance, arrays, rates if fast else None, (gating, theta, splitting,
                                                                         num.merge_half_steps), state_idx)
    cell_chunk = _cell_chunk(setup, quiet) if getattr(stepper, "single_cell", False) else None
    if stepper is not None:
        attrs["dt_max_ms"] = num.dt_max
    sample(0)
    failure = None
    interrupted = False
    spb = setup.steps_per_sample
    t_total = (setup.n_samples - 1) * spb * dt
    wall0 = _time.perf_counter()
    try:
        k_from = 1
        if cell_chunk is not None:   # a single cell, adaptive: many intervals per call (until quiet may stop it)
            k_from, failure = _run_cell(stepper, v, setup, cell_chunk, sample, progress, t_total)
        for k in range(k_from, setup.n_samples if failure is None else 0):
            t0 = (k - 1) * spb * dt
            if cell_chunk is not None:
                status, step, _ = stepper.run(v, (k - 1) * spb, k * spb)
                step, node = step - 1, 0
            elif stepper is not None:
                status, step, node = stepper.run(v, (k - 1) * spb, k * spb)
            elif ecg_w is None:
                status, step, node = advance(v, arrays.s, arrays.p, t0, spb, dt, setup.pulses, grid.lo, grid.up,
                                             theta, half, full, splitting, merge, gating, setup.ion_scale,
                                             setup.threshold, *arrays.probes(), *table_args)
            else:
                for j in range(spb):
                    status, step, node = advance(v, arrays.s, arrays.p, t0 + j * dt, 1, dt, setup.pulses, grid.lo,
                                                 grid.up, theta, half, full, splitting, merge, gating,
                                                 setup.ion_scale, setup.threshold, *arrays.probes(), *table_args)
                    ecg_steps[:, (k - 1) * spb + j + 1] = ecg_w @ v
                    if status != integrate.OK:
                        step += j
                        break
            if status != integrate.OK:
                failure = (status, t0 + (step + 1) * dt, node)
                break
            t_k = k * spb * dt
            if setup.safety is not None: setup.safety.update(v, t_k, nact)  # noqa: E701
            sample(k)
            if progress is not None:
                progress(t_k, t_total)
            if quiet is not None and k < setup.n_samples - 1 and \
                    quiet(t_k, v, act, nact, arrays.apd.pending):
                attrs["stopped_when_quiet_ms"] = t_k  # nothing left to happen (cable/quiet.py)
                break
    except KeyboardInterrupt:
        interrupted = True
    wall = _time.perf_counter() - wall0
    n_done = sink.filled
    if case.threshold is not None and not np.any(nact) and setup.pulses.shape[0]:
        say(f"warning: no node crossed measure.threshold = {case.threshold:g} mV (the highest potential sampled "
            f"was {highest[0]:.4g} mV), so every beat reads as not captured; the model's default is "
            f"{model.threshold:g} mV.")
    attrs["wall_time_s"] = round(wall, 4)
    with _interrupts_held():  # a second Ctrl-C or SIGTERM waits until the file is complete
        try:
            arrays.apd.finish(nact)
            meas = measurements(setup, act, nact, upstroke, arrays.apd, t_end=(n_done - 1) * spb * dt)
            if stepper is not None:
                meas.update(stepper.outputs())
            if ecg_w is not None:
                # a streamed file holds every sample time, unless the run may stop early (then n_done)
                full = output is not None and quiet is None
                n_steps_done = (n_done - 1) * spb + 1
                meas.update(electrodes.outputs(case, setup.t[:n_done], ecg if full else ecg[:, :n_done],
                                               meas["beat_onset"][1], meas["activation_time"][1],
                                               t_steps=np.arange(n_steps_done) * dt,
                                               phi_steps=ecg_steps[:, :n_steps_done]))
        except BaseException:
            if output is not None:
                sink.abort()
            raise
        if failure is not None or interrupted:
            reason = "interrupted" if interrupted else _failure_message(setup, failure)
            attrs.update(status="partial", partial_reason=reason, completed_until_ms=(n_done - 1) * spb * dt)
        else:
            attrs["status"] = "complete"
        if output is not None:
            ds = sink.finish(meas, attrs, n_done)
        else:
            ds = assemble(setup, {k_: v_[:n_done] for k_, v_ in sink.fields.items()}, meas, attrs, model)
    if interrupted:
        raise KeyboardInterrupt
    if failure is not None:
        pos = None if setup.x is None else float(setup.x[failure[2]])
        raise SimulationError(attrs["partial_reason"], time=failure[1], position=pos, partial=ds)
    return ds


def _cell_chunk(setup: Setup, quiet) -> tuple[int, int]:
    """Output intervals the single-cell loop runs per call before the last one that a quiet
    stop could end: up to that one (``quiet.not_before``), in calls of ``CELL_CHUNK_MS``."""
    spb_ms = setup.steps_per_sample * setup.case.numerics.dt
    last = setup.n_samples - 1
    if quiet is not None:
        last = min(last, max(0, int(np.ceil(quiet.not_before / spb_ms - 1e-9)) - 1))   # t_k < not_before
    return last, max(1, int(CELL_CHUNK_MS / spb_ms))


#: simulated time per call of the single-cell adaptive loop (samples returned per call) [ms]
CELL_CHUNK_MS = 1000.0


def _run_cell(stepper, v, setup: Setup, chunk, sample, progress, t_total):
    """Run a single cell's output intervals 1..``chunk[0]`` in calls of ``chunk[1]`` intervals;
    (the next interval to run, failure or None). Samples are written as the calls return."""
    last, per_call = chunk
    spb, dt = setup.steps_per_sample, setup.case.numerics.dt
    k = 1
    while k <= last:
        k1 = min(last, k + per_call - 1)
        status, done, rows = stepper.run(v, (k - 1) * spb, k1 * spb)
        sample(k, rows)
        if status != integrate.OK:
            return k, (status, (k - 1) * spb * dt + done * dt, 0)
        k = k1 + 1
        if progress is not None:
            progress((k - 1) * spb * dt, t_total)
    return k, None


def _stepper(setup: Setup, advance, arrays, plan, codes, state_idx=()):
    """The adaptive stepper of the run (``numerics.dt_max``), or None for fixed steps: a
    :class:`cable.kernels.adaptive_cell.CellStepper` for a single cell."""
    num = setup.case.numerics
    if not num.adaptive:
        return None
    if setup.x is not None and setup.case.extra.get("electrode"):
        raise CaseError(f"numerics.dt_max = {num.dt_max:g} ms: adaptive steps are not available with [[electrode]] "
                        f"(the pseudo-ECG is taken at every fixed step); remove numerics.dt_max or the electrodes.")
    from cable.kernels import adaptive

    levels = adaptive.step_levels(num.dt, num.dt_max)
    plans = [None] * len(levels) if plan is None else \
        [plan] + adaptive.level_plans(setup.model, setup.p, levels[1:], codes[0], plan.mode, num.reaction)
    n_end = (setup.n_samples - 1) * setup.steps_per_sample
    if setup.x is None:
        from cable.kernels.adaptive_cell import CellStepper

        return CellStepper(setup.model, arrays, setup.p, levels, plans if plan is not None else [None] * len(levels),
                           setup.pulses, n_end, setup.steps_per_sample, state_idx, setup.ion_scale, setup.threshold)
    return adaptive.Stepper(advance, setup, arrays, levels, plans, codes, n_end)


@contextlib.contextmanager
def _interrupts_held():
    """Hold SIGINT and SIGTERM while a result is completed; deliver them when it is.

    Measuring and writing the result take a bounded time; an interrupt then would leave
    a temporary file and lose the run. A signal received inside is sent again on leaving,
    to whatever handler was in place (the CLI turns it into KeyboardInterrupt, exit 130).
    """
    import signal
    import threading

    if threading.current_thread() is not threading.main_thread():
        yield
        return
    received = []
    previous = {}
    for sig in (signal.SIGINT, signal.SIGTERM):
        try:
            previous[sig] = signal.signal(sig, lambda signum, frame: received.append(signum))
        except (ValueError, OSError):  # not settable here (embedded interpreters)
            pass
    try:
        yield
    finally:
        for sig, handler in previous.items():
            signal.signal(sig, signal.SIG_DFL if handler is None else handler)
        for sig in dict.fromkeys(received):
            os.kill(os.getpid(), sig)


def _failure_message(setup: Setup, failure) -> str:
    status, t_fail, node = failure
    what = "the potential became NaN" if status == integrate.NONFINITE else \
        f"the potential left +/-{integrate.RUNAWAY_MV:g} mV"
    where = "" if setup.x is None else f" at x = {setup.x[node]:.4g} cm"
    num = setup.case.numerics
    causes = []
    if num.gating == "forward-euler":
        causes.append(f"numerics.gating = \"forward-euler\" with dt = {num.dt:g} ms is likely too coarse; "
                      "use \"rush-larsen\" or a smaller dt")
    if num.reaction in ("heun", "rk4"):
        causes.append(f"numerics.reaction = \"{num.reaction}\" is explicit in every gate and limited to small steps "
                      "by the fastest one; use \"rush-larsen-2\" or a smaller dt")
    if num.diffusion == "forward-euler":
        causes.append("forward-Euler diffusion near its stability limit; use \"crank-nicolson\"")
    if setup.case.membrane.scale or setup.case.membrane.parameters:
        causes.append("a changed parameter or conductance may have made the model unstable "
                      f"({', '.join(list(setup.case.membrane.scale) + list(setup.case.membrane.parameters))})")
    causes.append(f"numerics.dt = {num.dt:g} ms may be too large for this model; try half")
    return f"{what}{where} near t = {t_fail:.4g} ms. Likely cause: " + "; or ".join(causes) + "."
