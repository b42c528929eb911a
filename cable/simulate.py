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
from cable.kernels import diffusion, integrate, loops, tables
from cable.kernels.loop import Rates, no_rates
from cable.kernels.loops import needs_compiling
from cable.kernels.state import loop_arrays, scheme_codes, step_of
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
        In memory either way, its file (with ``output``) closed: without ``output`` the
        run's arrays; with it, the content of the file as written (``vm`` and the
        stored states in float32, as on file), read once the file is complete. (The
        CLI, which prints only measurements, keeps the fields on file:
        :func:`simulate_streamed`.)
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
        partial, when ``output`` is given); in memory too.
    """
    try:
        ds = simulate_streamed(case, output=output, overwrite=overwrite, progress=progress, command=command, info=info)
    except SimulationError as exc:
        if output is not None and exc.partial is not None:
            exc.partial = _loaded(exc.partial)
        raise
    return ds if output is None else _loaded(ds)


def _loaded(ds: xr.Dataset) -> xr.Dataset:
    """A result opened from its file, read into memory and the file closed."""
    with ds:
        return ds.load()


def simulate_streamed(case, *, output=None, overwrite: bool = False, progress=None, command: str | None = None,
                      info=None) -> xr.Dataset:
    """:func:`simulate`, but with ``output`` the returned Dataset is the file opened lazily
    (:func:`cable.io.netcdf.open_result`: nothing but coordinates read; close it), so that the
    fields are never held in memory: for ``cable run -o`` and ``cable rerun``, which read
    only the measurements (a streamed run's memory does not grow with its duration,
    ``tools/bench_memory.py``). Same parameters, errors and result values.
    """
    check_call("simulate", output=output, overwrite=overwrite, progress=progress, command=command, info=info)
    if not isinstance(case, (Case, dict, str, os.PathLike)):
        raise CaseError(f"simulate(case={case!r}): give a case file path (str or pathlib.Path), a dict, a Case, or "
                        f"TOML text as cable.load_case(text=...); not {type(case).__name__}.")
    say = info or (lambda msg: None)
    case = case if isinstance(case, Case) else load_case(case)
    run = _Run(_prepared(case, output, overwrite, say), output, overwrite, command, say)
    run.sample(0)
    failure = None
    interrupted = False
    wall0 = _time.perf_counter()
    try:
        failure = _intervals(run, progress)
    except KeyboardInterrupt:
        interrupted = True
    wall = _time.perf_counter() - wall0
    run.warn_if_uncrossed()
    run.attrs["wall_time_s"] = round(wall, 4)
    with _interrupts_held():  # a second Ctrl-C or SIGTERM waits until the file is complete
        ds = run.finish(failure, interrupted)
    if interrupted:
        raise KeyboardInterrupt
    if failure is not None:
        setup = run.setup
        pos = None if setup.x is None else float(setup.x[failure[2]])
        raise SimulationError(run.attrs["partial_reason"], time=failure[1], position=pos, partial=ds)
    return ds


def _prepared(case: Case, output, overwrite: bool, say) -> Setup:
    """The run's :class:`Setup`, its target and size checked and its notes said."""
    from cable.io import netcdf

    if output is not None:
        netcdf.check_target(output, overwrite)
    # prepare() may already run the reference loop (settling, pre-pacing): say so before it
    if needs_compiling(case):
        say(f"compiling the '{case.membrane.model}' kernels (first run only; later runs use the cache)...")
    setup = prepare(case)
    check_threshold(setup)
    check_size(setup, output)
    for note in setup.notes:
        say(note)
    if setup.prepace is not None:
        say(setup.prepace["summary"])
    return setup


class _Run:
    """One run between :func:`prepare` and its Dataset: the loop's arrays and constants, the
    stepper (fixed steps, adaptive), the sink of the samples (memory or the streamed file),
    the pseudo-ECG, the quiet check and the attributes written with the result."""

    def __init__(self, setup: Setup, output, overwrite: bool, command, say):
        case, model, num = setup.case, setup.model, setup.case.numerics
        self.setup, self.output, self.say = setup, output, say
        self.gating, self.theta, self.splitting = scheme_codes(num)
        rates = tables.plan(model, setup.p, num.dt, self.gating, num.rates, reaction=num.reaction)
        if rates.note:
            say(rates.note)
        fast = rates.mode != "reference"
        self.advance = loops.loop(model.name, num.reaction, fast)
        self.state_names = list(case.output_states)
        self.state_idx = [model.state_names.index(s) for s in self.state_names]
        self.field_names = ["vm"] + [schema.STATE_PREFIX + s for s in self.state_names]
        self.v = setup.v0.copy()
        extra = 0
        if grid_closed(setup):
            from cable.ring import RING_PASSES as extra  # one crossing per revolution at every node
        self.arrays = loop_arrays(model, fast, self.v, setup.s0, setup.p, setup.pulses.shape[0] + extra,
                                  case.apd_levels)
        grid = setup.grid
        self.half = diffusion.factor(grid.lo, grid.up, 0.5 * num.dt, self.theta)
        self.full = diffusion.factor(grid.lo, grid.up, num.dt, self.theta)
        self.attrs = provenance(setup, command)
        self.attrs["rates"] = rates.mode
        self.quiet = self._quiet_check()
        self.sink = self._sink(overwrite)
        self.highest = -np.inf  # the highest potential sampled: says why no node crossed a given threshold
        self._electrodes()
        self.rates = Rates(rates.table, rates.v_lo, rates.inv_dv, rates.group) if fast else no_rates()
        self.grid = self.arrays.grid(grid.lo, grid.up, self.theta, self.half, self.full)
        self.step = step_of(num.dt, self.splitting, self.merge, self.gating, setup.ion_scale)
        self.stimulus = self.arrays.stimulus(setup.pulses)
        self.probes = self.arrays.probes(setup.threshold)
        self.stepper = _stepper(setup, self.advance, self.arrays, rates if fast else None,
                                (self.gating, self.theta, self.splitting, num.merge_half_steps), self.state_idx)
        self.cell_chunk = _cell_chunk(setup, self.quiet) if getattr(self.stepper, "single_cell", False) else None
        if self.stepper is not None:
            self.attrs["dt_max_ms"] = num.dt_max

    def _quiet_check(self):
        """The run.stop_when_quiet check (:mod:`cable.quiet`), or None."""
        from cable import quiet as _quiet

        setup, case, arrays = self.setup, self.setup.case, self.arrays
        self.attrs["stop_when_quiet"] = int(_quiet.wanted(case))
        if not self.attrs["stop_when_quiet"]:
            return None
        x_nodes = setup.x if setup.x is not None else np.zeros(1)

        def judge(t):  # no beat read as timed out if the run ended at t
            return not np.any(assign_beats(arrays.act, arrays.nact, x_nodes, setup.pulses, t_end=t).timed_out)

        return _quiet.QuietCheck(setup.pulses, setup.v0, case.quiet_tolerance, len(case.apd_levels), judge=judge)

    def _sink(self, overwrite: bool):
        if self.output is None:
            return _MemorySink(self.setup, self.field_names)
        from cable.io import netcdf

        return netcdf.StreamWriter(self.output, self.setup, self.field_names, self.setup.model, self.attrs,
                                   overwrite=overwrite, growing=self.quiet is not None)

    def _electrodes(self):
        """The pseudo-ECG's weights and its records at the output times and at every step."""
        setup, num = self.setup, self.setup.case.numerics
        self.ecg_w = None
        if setup.x is not None:
            from cable import electrodes

            self.ecg_w = electrodes.of_case(setup.case, setup.x)
        self.ecg = np.full((0 if self.ecg_w is None else self.ecg_w.shape[0], setup.n_samples), np.nan)
        self.merge = num.merge_half_steps
        if self.ecg_w is not None:
            # QRS onset, T peak and QT from every step's profile, not only the output samples:
            # the loop returns after each step, so half steps are not merged (the Strang scheme
            # unmerged; its results differ from the merged one within the time step's error)
            self.ecg_steps = np.full((self.ecg_w.shape[0], (setup.n_samples - 1) * setup.steps_per_sample + 1),
                                     np.nan)
            self.ecg_steps[:, 0] = self.ecg_w @ self.v
            if self.merge and num.splitting == "strang":
                self.say("note: with [[electrode]] the pseudo-ECG is taken at every step, so the half steps are not "
                         "merged (numerics.merge_half_steps = false for this run).")
            self.merge = False

    def sample(self, k, rows=None):
        """Store output sample k (from v and the states), or the samples k, k + 1, ... of
        ``rows`` (the single-cell loop's: potential, then the output states)."""
        sink, field_names = self.sink, self.field_names
        if rows is not None:
            if rows.shape[0]:
                self.highest = max(self.highest, float(np.max(rows[:, 0])))
                if isinstance(sink, _MemorySink):
                    sink.write_rows(k, {name: rows[:, c:c + 1] for c, name in enumerate(field_names)})
                else:    # streamed: one sample at a time into the writer's buffer
                    for r in range(rows.shape[0]):
                        sink.write(k + r, {name: rows[r, c:c + 1] for c, name in enumerate(field_names)})
            return
        v = self.v
        if self.ecg_w is not None:
            self.ecg[:, k] = self.ecg_w @ v  # the pseudo-ECG from the full profile at each output time
        self.highest = max(self.highest, float(np.max(v)))
        vals = {"vm": v}
        for name, j in zip(self.state_names, self.state_idx):
            vals[schema.STATE_PREFIX + name] = self.arrays.state(j)
        sink.write(k, vals)

    def warn_if_uncrossed(self):
        """Say so when a given measure.threshold was never crossed (every beat then reads as not captured)."""
        case, setup = self.setup.case, self.setup
        if case.threshold is not None and not np.any(self.arrays.nact) and setup.pulses.shape[0]:
            self.say(f"warning: no node crossed measure.threshold = {case.threshold:g} mV (the highest potential "
                     f"sampled was {self.highest:.4g} mV), so every beat reads as not captured; the model's "
                     f"default is {setup.model.threshold:g} mV.")

    def finish(self, failure, interrupted: bool) -> xr.Dataset:
        """Measure, mark the status and write the result (called with the interrupts held)."""
        setup, attrs, sink = self.setup, self.attrs, self.sink
        n_done = sink.filled
        t_done = (n_done - 1) * setup.steps_per_sample * setup.case.numerics.dt
        try:
            meas = self._measurements(n_done, t_done)
        except BaseException:
            if self.output is not None:
                sink.abort()
            raise
        if failure is not None or interrupted:
            reason = "interrupted" if interrupted else _failure_message(setup, failure)
            attrs.update(status="partial", partial_reason=reason, completed_until_ms=t_done)
        else:
            attrs["status"] = "complete"
        if self.output is not None:
            return sink.finish(meas, attrs, n_done)
        return assemble(setup, {k_: v_[:n_done] for k_, v_ in sink.fields.items()}, meas, attrs, setup.model)

    def _measurements(self, n_done: int, t_done: float) -> dict:
        setup, arrays = self.setup, self.arrays
        arrays.apd.finish(arrays.nact)
        meas = measurements(setup, arrays.act, arrays.nact, arrays.upstroke, arrays.apd, t_end=t_done)
        if self.stepper is not None:
            meas.update(self.stepper.outputs())
        if self.ecg_w is not None:
            from cable import electrodes

            # a streamed file holds every sample time, unless the run may stop early (then n_done)
            every = self.output is not None and self.quiet is None
            n_steps_done = (n_done - 1) * setup.steps_per_sample + 1
            meas.update(electrodes.outputs(setup.case, setup.t[:n_done], self.ecg if every else self.ecg[:, :n_done],
                                           meas["beat_onset"][1], meas["activation_time"][1],
                                           t_steps=np.arange(n_steps_done) * setup.case.numerics.dt,
                                           phi_steps=self.ecg_steps[:, :n_steps_done]))
        return meas


def _intervals(run: _Run, progress):
    """Run the output intervals 1, 2, ... until the end, a numerical failure or a quiet stop;
    the failure (status, time [ms], node) or None. The loop of :func:`simulate`."""
    setup, v, arrays, stepper, quiet, advance = run.setup, run.v, run.arrays, run.stepper, run.quiet, run.advance
    dt, spb = setup.case.numerics.dt, setup.steps_per_sample
    t_total = (setup.n_samples - 1) * spb * dt
    k_from = 1
    if run.cell_chunk is not None:   # a single cell, adaptive: many intervals per call (until quiet may stop it)
        k_from, failure = _run_cell(stepper, v, setup, run.cell_chunk, run.sample, progress, t_total)
        if failure is not None:
            return failure
    for k in range(k_from, setup.n_samples):
        t0 = (k - 1) * spb * dt
        if run.cell_chunk is not None:
            status, step, _ = stepper.run(v, (k - 1) * spb, k * spb)
            step, node = step - 1, 0
        elif stepper is not None:
            status, step, node = stepper.run(v, (k - 1) * spb, k * spb)
        elif run.ecg_w is None:
            status, step, node = advance(v, arrays.s, arrays.p, t0, spb, run.grid, run.step, run.stimulus,
                                         run.probes, run.rates)
        else:
            status, step, node = _steps_with_ecg(run, t0, k)
        if status != integrate.OK:
            return (status, t0 + (step + 1) * dt, node)
        t_k = k * spb * dt
        if setup.safety is not None:
            setup.safety.update(v, t_k, arrays.nact)
        run.sample(k)
        if progress is not None:
            progress(t_k, t_total)
        if quiet is not None and k < setup.n_samples - 1 and \
                quiet(t_k, v, arrays.act, arrays.nact, arrays.apd.pending):
            run.attrs["stopped_when_quiet_ms"] = t_k  # nothing left to happen (cable/quiet.py)
            break
    return None


def _steps_with_ecg(run: _Run, t0: float, k: int):
    """Output interval k from ``t0`` one fixed step per call, the pseudo-ECG taken after each
    ([[electrode]]); (status, step, node) as one call over the interval gives them."""
    setup, v, arrays, ecg_w = run.setup, run.v, run.arrays, run.ecg_w
    dt, spb = setup.case.numerics.dt, setup.steps_per_sample
    for j in range(spb):
        status, step, node = run.advance(v, arrays.s, arrays.p, t0 + j * dt, 1, run.grid, run.step, run.stimulus,
                                         run.probes, run.rates)
        run.ecg_steps[:, (k - 1) * spb + j + 1] = ecg_w @ v
        if status != integrate.OK:
            return status, step + j, node
    return status, step, node


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
