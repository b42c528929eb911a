"""The front door: :func:`simulate` runs a case and returns one ``xarray.Dataset``.

Stages: :func:`prepare` turns a validated case into arrays (grid, parameters per
node, initial state, stimulus pulses); the compiled time loop advances the strand
between output times; samples go to memory or are streamed to a netCDF file; the
measurements (activation, conduction velocity, block, APD) are computed at the end
from probes the kernel kept, so they do not depend on the sampling interval.
"""

from __future__ import annotations

import contextlib
import functools
import os
import time as _time
from dataclasses import dataclass, field

import numpy as np
import xarray as xr

from cable.arguments import check_call
from cable.units import format_bytes
from cable.case import Case, CaseError, load_case
from cable.fiber import Grid, build_grid, forward_euler_dt_limit, node_positions
from cable.io import schema
from cable.kernels import diffusion, fused, integrate, schemes, tables
from cable.kernels.jit import specialise
from cable.kernels.state import crossing_cap, loop_arrays, scheme_codes
from cable.measure.activation import assign_beats, per_beat
from cable.measure.apd import ApdProbe
from cable.measure.velocity import conduction_velocity, default_window, window_nodes
from cable.membrane import MembraneModel, get_model

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


def _integrator(model_name: str, reaction: str = "rush-larsen"):
    """The reference time loop of the model and reaction scheme (one dispatcher per pair,
    however the arguments are spelled)."""
    return _integrator_for(model_name, reaction)


@functools.lru_cache(maxsize=None)
def _integrator_for(model_name: str, reaction: str):
    model = get_model(model_name)
    if reaction == schemes.DEFAULT:
        return specialise(integrate.advance, model.name, reaction=model.reaction)
    # the reaction scheme applied to the model's kinetics (cable/kernels/schemes.py)
    return specialise(integrate.advance, f"{model.name}_{reaction}", reaction=schemes.kernel(model_name, reaction),
                      depends=(model.kinetics,))


def _fast_integrator(model_name: str, reaction: str = "rush-larsen"):
    """The fast time loop of the model and reaction scheme (one dispatcher per pair)."""
    return _fast_integrator_for(model_name, reaction)


@functools.lru_cache(maxsize=None)
def _fast_integrator_for(model_name: str, reaction: str):
    model = get_model(model_name)
    if reaction == schemes.DEFAULT:
        return specialise(fused.advance_fast, model.name, fast_reaction=model.fast.kernel)
    return specialise(fused.advance_fast, f"{model.name}_{reaction}",
                      fast_reaction=schemes.fast_kernel(model_name, reaction), depends=(model.fast.kinetics,))


def time_loop(model_name: str, rates: str = "tabulated", reaction: str = "rush-larsen"):
    """The compiled time loop (numba dispatcher) that a run of ``model_name`` uses.

    ``rates`` is ``numerics.rates``: models with a fast path
    (:class:`cable.membrane.base.FastPath`) use ``cable.kernels.fused.advance_fast``
    unless it is ``"reference"`` (for a ``reaction``, ``numerics.reaction``, other than
    ``"rush-larsen"``: when the fast path supplies ``kinetics``); the others use
    ``cable.kernels.integrate.advance``.
    Its ``signatures`` are non-empty once it is loaded in this process.
    """
    model = get_model(model_name)
    if rates == "reference" or not schemes.has_fast(model, reaction):
        return _integrator(model_name, reaction)
    return _fast_integrator(model_name, reaction)


def is_compiled(model_name: str, rates: str = "tabulated", reaction: str = "rush-larsen") -> bool:
    """Whether the time loop a run of ``model_name`` uses is in numba's on-disk cache already."""
    return _in_cache(time_loop(model_name, rates, reaction))


def _in_cache(fn) -> bool:
    if fn.signatures:
        return True
    try:
        return os.path.exists(fn._cache._cache_file._index_path)
    except AttributeError:  # numba internals changed: assume not
        return False


def needs_compiling(case: Case) -> bool:
    """Whether a run of ``case`` compiles kernels first (its time loop, or the reference loop
    that settling and pre-pacing use, is not in numba's cache yet)."""
    name = case.membrane.model
    mem = case.membrane
    settles = mem.prepace is not None or mem.temperature is not None or \
        bool(mem.parameters or mem.scale or case.raw.get("region") or case.raw.get("drug"))
    cell_loop = None
    if case.numerics.adaptive and (case.fiber is None or mem.prepace is not None):   # adaptive_cell's loop
        from cable.kernels.adaptive_cell import cell_loop as _cell_loop

        model = get_model(name)
        cell_loop = _cell_loop(model, case.numerics.rates != "reference" and model.fast is not None)
    return not is_compiled(name, case.numerics.rates, case.numerics.reaction) or \
        (settles and not _in_cache(_integrator(name))) or (cell_loop is not None and not _in_cache(cell_loop))


@dataclass
class Setup:
    """Everything the time loop needs, in canonical units (see :func:`prepare`)."""

    case: Case
    model: MembraneModel
    x: np.ndarray | None          # None for a single cell
    grid: Grid
    v0: np.ndarray
    s0: np.ndarray
    p: np.ndarray
    pulses: np.ndarray            # (npulse, 5): on, off, i0, i1, amplitude/C_m
    threshold: float
    ion_scale: float
    steps_per_sample: int
    n_samples: int
    cv_window: tuple[float, float] | None
    notes: list[str] = field(default_factory=list)
    prepace: dict | None = None
    safety: object | None = None  # cable.measure.safety.SafetyTracker when measure.safety_factor

    @property
    def n(self) -> int:
        return self.v0.size

    @property
    def t(self) -> np.ndarray:
        return np.arange(self.n_samples) * self.steps_per_sample * self.case.numerics.dt


def node_parameters(case: Case, model: MembraneModel, n: int) -> np.ndarray:
    """Parameter array (n, nparam): defaults, then [membrane.parameters], then scales."""
    row = model.default_parameters()
    for name, value in case.membrane.parameters.items():
        row[model.parameter_names.index(name)] = model.parameter(name).encode(value)
    model.fill_labelled_defaults(row, given=case.membrane.parameters)
    for name, factor in case.membrane.scale.items():
        row[model.parameter_names.index(name)] *= factor
    from cable.drugs import drug_factors

    for name, factor in drug_factors(case).items():  # [drug]: Hill block, after the scales
        row[model.parameter_names.index(name)] *= factor
    return np.tile(row, (n, 1))


def stimulus_pulses(case: Case, x: np.ndarray | None, notes: list) -> np.ndarray:
    """Pulse table (npulse, 5) from the case's stimuli; amplitudes divided by C_m."""
    cm = case.capacitance
    rows = []
    for k, s in enumerate(case.stimuli):
        label = s.name or k
        if x is None:
            i0, i1 = 0, 1
        else:
            tol = 1e-9 * max(1.0, x[-1])
            inside = np.flatnonzero((x >= s.x - tol) & (x <= s.x + s.width + tol))
            if inside.size == 0:
                near = int(np.argmin(np.abs(x - (s.x + 0.5 * s.width))))
                inside = np.array([near])
                notes.append(f"stimulus.{label}: zone narrower than dx; applied at the nearest node x = {x[near]:g} cm.")
            i0, i1 = int(inside[0]), int(inside[-1]) + 1
        for onset in s.onsets():
            rows.append((onset, onset + s.duration, i0, i1, s.amplitude / cm))
    pulses = np.array(rows, dtype=np.float64).reshape(-1, 5)
    return pulses[np.argsort(pulses[:, 0], kind="stable")]


def prepare(case) -> Setup:
    """Turn a case (path, dict or Case) into the arrays of the run.

    Raises
    ------
    CaseError
        When the case is invalid or too large.
    """
    case = case if isinstance(case, Case) else load_case(case)
    model = get_model(case.membrane.model)
    notes = list(case.notes)
    num = case.numerics
    if case.fiber is not None:
        from cable.regions import node_fields

        x = node_positions(case.fiber)
        p, coupling = node_fields(case, model, x, node_parameters(case, model, x.size))
        grid = build_grid(case.fiber, coupling_factor=coupling)
        cm = case.fiber.capacitance
    else:
        x = None
        grid = Grid(x=np.zeros(1), lo=np.zeros(1), up=np.zeros(1))
        cm = case.capacitance
        p = node_parameters(case, model, 1)
    n = grid.n
    s0 = np.tile(model.initial_states(), (n, 1)).reshape(n, len(model.states))
    v0 = np.full(n, model.resting_potential)
    pre = None
    if case.membrane.prepace is not None:
        from cable.prepace import prepace_nodes

        v0, s0, pre = prepace_nodes(case, model, p, v0, s0)
    else:
        from cable.prepace import settle_nodes

        v0, s0, note = settle_nodes(case, model, p, v0, s0)
        if note:
            notes.append(note)
    if x is not None:
        from cable.settle import settle_strand

        v0, s0, note = settle_strand(case, model, p, grid, v0, s0, prepaced=pre is not None)
        if note:
            notes.append(note)
    pulses = stimulus_pulses(case, x, notes)
    if x is not None:
        from cable.grid_check import coarse_grid_note

        note = coarse_grid_note(case, model, p[0])  # said before the run (simulate prints the notes first)
        if note:
            notes.append(note)
    if case.fiber is not None and case.fiber.closed:
        v0, s0, pulses = _ring_start(case, model, grid, p, v0, s0, pulses, cm, notes)
    spb = max(1, int(round(case.output_every / num.dt)))
    intervals = int(round(case.duration / (spb * num.dt)))
    if abs(intervals * spb * num.dt - case.duration) > 1e-9 * case.duration:
        intervals = int(np.ceil(case.duration / (spb * num.dt)))
        notes.append(f"run.duration rounded up to {intervals * spb * num.dt:g} ms, a whole number of output intervals.")
    # pulses starting after the run's end change nothing (a train may be longer than the run)
    t_end = intervals * spb * num.dt
    if case.stimuli and pulses.shape[0] and not np.any(pulses[:, 0] < t_end):
        first = float(np.min(pulses[:, 0]))
        notes.append(f"warning: no stimulus starts before the run ends (the first at {first:g} ms, the run ends at "
                     f"{t_end:g} ms): nothing is stimulated; lengthen run.duration or move stimulus.NAME.onset.")
    pulses = pulses[pulses[:, 0] < t_end]
    cv_window = None
    if x is not None:
        cv_window = case.cv_window or default_window(case.fiber.length)
        if window_nodes(x, cv_window).size < 3:
            raise CaseError(f"measure.cv_window = {list(cv_window)} cm holds fewer than 3 nodes at dx = "
                            f"{case.fiber.dx:g} cm; widen it or refine dx.")
        if num.diffusion == "forward-euler":
            limit = forward_euler_dt_limit(grid, num)
            if num.dt > limit:
                raise CaseError(f"numerics.dt = {num.dt:g} ms exceeds the stability limit of forward-Euler diffusion "
                                f"on this grid ({limit:.4g} ms); reduce dt or use "
                                f"diffusion = \"crank-nicolson\".")
    setup = Setup(case=case, model=model, x=x, grid=grid, v0=v0, s0=s0, p=p, pulses=pulses,
                  threshold=case.threshold if case.threshold is not None else model.threshold,
                  ion_scale=model.ion_scale(cm), steps_per_sample=spb, n_samples=intervals + 1,
                  cv_window=cv_window, notes=notes, prepace=pre)
    if case.raw.get("measure", {}).get("safety_factor", False):
        if x is None:
            notes.append("measure.safety_factor needs a [fiber] (axial currents); ignored for a single cell.")
        else:
            from cable.measure.safety import tracker_for

            setup.safety = tracker_for(case, grid, v0, pulses, notes)
    return setup


def _ring_start(case, model, grid, p, v0, s0, pulses, cm, notes):
    """A ring's initial state and pulses: as given, or one-way (:mod:`cable.ring`)."""
    if case.raw.get("measure", {}).get("safety_factor", False):
        raise CaseError("measure.safety_factor is not computed on a ring (fiber.closed = true); remove one of them.")
    if case.fiber.initial != "one-way":
        return v0, s0, pulses
    from cable.ring import one_way_start, ring_cases

    threshold = case.threshold if case.threshold is not None else model.threshold
    v0, s0, t_start = one_way_start(case, model, grid, p, v0, s0, threshold, model.ion_scale(cm))
    notes.append(f"ring: started one-way from an open strand {t_start:g} ms after the first stimulus, its wave at the far "
                 f"end; the first stimulus is not applied on the ring.")
    return v0, s0, stimulus_pulses(ring_cases(case)[0], grid.x, notes)


def check_threshold(setup: Setup) -> None:
    """Refuse a ``measure.threshold`` that no activation can cross upward: at or below the
    resting potential of every node (each would read as activated at once or never), or
    beyond the runaway bound of the time loop (crossing it stops the run)."""
    th = setup.case.threshold
    if th is None:
        return
    rest = float(np.max(setup.v0))
    if th <= rest:
        raise CaseError(f"measure.threshold = {th:g} mV is at or below the resting potential ({rest:.4g} mV): an "
                        f"activation is an upward crossing from rest. Give a level between rest and the action "
                        f"potential's peak (the model's default is {setup.model.threshold:g} mV).")
    if th >= integrate.RUNAWAY_MV:
        raise CaseError(f"measure.threshold = {th:g} mV is beyond +/-{integrate.RUNAWAY_MV:g} mV, where a run "
                        f"stops as a runaway; give a level between rest ({rest:.4g} mV) and the action "
                        f"potential's peak (the model's default is {setup.model.threshold:g} mV).")


def stored_bytes(setup: Setup) -> int:
    """Bytes of the stored fields (vm and extra states, float32 on file, float64 in memory)."""
    return setup.n_samples * setup.n * (1 + len(setup.case.output_states)) * 8


def probe_bytes(n: int, n_pulses: int, n_levels: int) -> int:
    """Bytes of the per-crossing probes (activation, upstroke, rest, peak, APD levels) of n nodes."""
    cap = crossing_cap(n_pulses)  # as simulate() sizes them
    return n * cap * 8 * (4 + n_levels)


def check_size(setup: Setup, output=None) -> None:
    """Refuse a run whose stored fields would not fit in memory (or, streamed, on disk)."""
    _check_bytes(setup.case, setup.n, setup.n_samples, setup.pulses.shape[0], output)


def check_case_size(case: Case, output=None) -> None:
    """:func:`check_size` from a loaded case alone (no preparation), for checks before a protocol runs."""
    dt = case.numerics.dt
    spb = max(1, int(round(case.output_every / dt)))
    n_samples = int(np.ceil(case.duration / (spb * dt) - 1e-9)) + 1
    n_pulses = sum(sum(1 for t in s.onsets() if t < case.duration) for s in case.stimuli)
    _check_bytes(case, case.fiber.n_nodes if case.fiber is not None else 1, n_samples, n_pulses, output)


def _check_bytes(case: Case, n: int, n_samples: int, n_pulses: int, output) -> None:
    import shutil

    fields = n_samples * n * (1 + len(case.output_states)) * 8
    probes = probe_bytes(n, n_pulses, len(case.apd_levels))
    hint = (f"increase output.every (now {case.output_every:g} ms), store fewer output.states, "
            f"or shorten run.duration")
    if output is not None:
        on_disk = fields // 2  # float32 on file, before compression
        folder = os.path.dirname(os.path.abspath(output))
        free = shutil.disk_usage(folder).free
        if on_disk > free:
            raise CaseError(f"the stored fields need up to {format_bytes(on_disk)} (before compression) but "
                            f"{format_bytes(free)} is free on disk at '{folder}': {hint}.")
    try:
        avail = os.sysconf("SC_AVPHYS_PAGES") * os.sysconf("SC_PAGE_SIZE")
    except (ValueError, OSError, AttributeError):
        return
    need = probes + (0 if output is not None else fields)
    if need > 0.8 * avail:
        if output is None and fields > probes:
            raise CaseError(f"the stored fields need {format_bytes(need)} but {format_bytes(avail)} of memory "
                            f"is free: {hint}; or give an output file, to which the fields are streamed.")
        raise CaseError(f"the activation probes of {n} nodes x up to {2 * n_pulses + 8} threshold crossings need "
                        f"{format_bytes(need)} but {format_bytes(avail)} of memory is free: use fewer pulses "
                        f"(stimulus count), a coarser fiber.dx or a shorter fibre.")


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

    table_args = (rates.table, rates.v_lo, rates.inv_dv, 1) if fast else ()
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


def measurements(setup: Setup, act, nact, upstroke, tracker: ApdProbe, t_end=None) -> dict:
    """Per-beat measurements as ``{name: (dims, array)}`` (with the x dimension).

    ``tracker``: the repolarisation probe of the run (its ``rest``, ``peak`` and
    ``repol`` arrays, peaks stored by :meth:`cable.measure.apd.ApdProbe.finish`).

    ``t_end`` [ms]: the time computed (a partial run counts only the beats begun by then).
    """
    x = setup.x if setup.x is not None else np.zeros(1)
    pulses = setup.pulses if t_end is None else setup.pulses[setup.pulses[:, 0] < t_end]
    beats = assign_beats(act, nact, x, pulses, t_end=t_end)
    out = {
        "beat_onset": (("beat",), beats.onset),
        "activation_time": (("beat", "x"), beats.activation),
        "captured": (("beat",), beats.captured.astype(np.int8)),
        "blocked": (("beat",), beats.blocked.astype(np.int8)),
        "block_x": (("beat",), beats.block_x),
        "upstroke_velocity": (("beat", "x"), per_beat(upstroke, beats.index)),
        "resting_potential": (("beat", "x"), per_beat(tracker.rest, beats.index)),
        "peak_potential": (("beat", "x"), per_beat(tracker.peak, beats.index)),
    }
    repol = per_beat(tracker.repol, beats.index)          # (nbeat, n, nlev)
    apd = np.moveaxis(repol, 2, 0) - beats.activation[None, :, :]
    out["apd"] = (("level", "beat", "x"), apd)
    if setup.x is not None:
        cv = conduction_velocity(beats.activation, setup.x, setup.cv_window)
        out["conduction_velocity"] = (("beat",), cv)
        centre = int(np.argmin(np.abs(setup.x - 0.5 * (setup.cv_window[0] + setup.cv_window[1]))))
        levels = list(setup.case.apd_levels)
        if 90.0 in levels:
            apd90 = apd[levels.index(90.0), :, centre]
            out["wavelength_apd"] = (("beat",), cv / 10.0 * apd90)  # m/s -> cm/ms, times ms
        from cable.measure import block

        out.update(block.outputs(beats))
        ups = out["upstroke_velocity"][1]
        out["slow_response"] = (("beat",), block.slow_response(ups, setup.x, setup.cv_window,
                                                               out["conducted"][1] == 1).astype(np.int8))
        if setup.safety is not None:
            out["safety_factor"] = (("beat", "x"), setup.safety.per_beat(beats))
        if grid_closed(setup):
            from cable import ring

            t_last = t_end if t_end is not None else setup.t[-1]
            out.update(ring.outputs(setup.case.fiber.length, act, nact, tracker.repol, setup.case.apd_levels, t_last))
    return out


def grid_closed(setup: Setup) -> bool:
    """Whether the strand is a ring (``[fiber] closed``)."""
    return bool(getattr(setup.grid, "closed", False))


def provenance(setup: Setup, command: str | None) -> dict:
    """Run facts recorded with the result (CF global attributes)."""
    case = setup.case
    num = case.numerics
    attrs = {
        **schema.provenance(f"cable run: {setup.model.name}", case, model=setup.model),
        "command": command or "",
        "dt_ms": num.dt,
        "splitting": num.splitting,
        "diffusion": num.diffusion,
        "gating": num.gating,
        "reaction": num.reaction,
        "merge_half_steps": int(num.merge_half_steps and not (setup.x is not None and case.extra.get("electrode"))),
        "threshold_mV": setup.threshold,
        "notes": "\n".join(setup.notes),
        "drug_block": _drug_text(case),
    }
    if setup.x is not None:
        attrs.update(dx_cm=float(case.fiber.dx), diffusivity_cm2_per_ms=case.fiber.diffusivity,
                     cv_window_cm=list(setup.cv_window))
        if case.fiber.closed:
            attrs["ring_circumference_cm"] = float(case.fiber.length)
    if setup.prepace is not None:
        attrs["prepace"] = setup.prepace["summary"]
        attrs["prepace_last_beat_change"] = setup.prepace["last_beat_change"]
        attrs["prepace_beats"] = int(setup.prepace["beats"])
    return attrs


def _drug_text(case) -> str:
    from cable.drugs import describe

    return describe(case)


def assemble(setup: Setup, fields: dict, meas: dict, attrs: dict, model: MembraneModel) -> xr.Dataset:
    """Build the in-memory result Dataset (single cells lose the x dimension)."""
    t = setup.t[: next(iter(fields.values())).shape[0]]
    data = {}
    for name, arr in fields.items():
        data[name] = (("t", "x"), arr, _field_attrs(name, model))
    for name, (dims, arr) in meas.items():
        data[name] = (dims, arr, schema.attrs(name))
    coords = {
        "t": ("t", t, schema.attrs("t")),
        "beat": ("beat", np.arange(len(meas["beat_onset"][1])), schema.attrs("beat")),
        "level": ("level", np.array(setup.case.apd_levels), schema.attrs("level")),
    }
    x = setup.x if setup.x is not None else np.zeros(1)
    coords["x"] = ("x", x, schema.attrs("x"))
    ds = xr.Dataset(data, coords=coords, attrs=attrs)
    if setup.x is None:
        ds = ds.isel(x=0, drop=True)
    return ds


def _field_attrs(name: str, model: MembraneModel) -> dict:
    if name == "vm":
        return schema.attrs("vm")
    state = model.states[model.state_names.index(name[len(schema.STATE_PREFIX):])]
    return {"units": state.units, "long_name": state.meaning}
