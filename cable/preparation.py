"""From a validated case to the arrays of a run: :func:`prepare` -> :class:`Setup`.

The grid, the parameters of every node (defaults, [membrane.parameters], scales, drugs,
regions), the initial state (settled at rest or pre-paced), the stimulus pulses and the
sampling, in canonical units; and the checks a run makes before it starts (threshold,
memory and disk).
"""

from __future__ import annotations

import os
from dataclasses import dataclass, field

import numpy as np

from cable.case import Case, CaseError, load_case
from cable.fiber import Grid, build_grid, check_grid_forward_euler, node_positions
from cable.kernels import integrate
from cable.kernels.state import crossing_cap
from cable.measure.velocity import default_window, window_nodes
from cable.membrane import MembraneModel, get_model
from cable.units import format_bytes


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


def node_fields_of(case: Case, model: MembraneModel):
    """(x, p, coupling) of a case: node positions [cm] (None for a single cell), the parameters
    of every node (n, nparam) as :func:`prepare` gives them to the run (defaults, [membrane],
    drugs, then regions; one row for a single cell) and the coupling factor per node (None:
    uniform). What a result's parameters are, rebuilt from its case without preparing it."""
    if case.fiber is None:
        return None, node_parameters(case, model, 1), None
    from cable.regions import node_fields

    x = node_positions(case.fiber)
    p, coupling = node_fields(case, model, x, node_parameters(case, model, x.size))
    return x, p, coupling


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
    x, p, coupling = node_fields_of(case, model)
    if x is not None:
        grid = build_grid(case.fiber, coupling_factor=coupling)
        cm = case.fiber.capacitance
    else:
        grid = Grid(x=np.zeros(1), lo=np.zeros(1), up=np.zeros(1))
        cm = case.capacitance
    v0, s0, pre = _initial_state(case, model, p, grid, x, notes)
    pulses = stimulus_pulses(case, x, notes)
    if x is not None:
        from cable.grid_check import coarse_grid_note

        note = coarse_grid_note(case, model, p[0])  # said before the run (simulate prints the notes first)
        if note:
            notes.append(note)
    if case.fiber is not None and case.fiber.closed:
        v0, s0, pulses = _ring_start(case, model, grid, p, v0, s0, pulses, cm, notes)
    spb, intervals, pulses = _sampling(case, pulses, notes)
    cv_window = None
    if x is not None:
        cv_window = case.cv_window or default_window(case.fiber.length)
        if window_nodes(x, cv_window).size < 3:
            raise CaseError(f"measure.cv_window = {list(cv_window)} cm holds fewer than 3 nodes at dx = "
                            f"{case.fiber.dx:g} cm; widen it or refine dx.")
        if case.numerics.diffusion == "forward-euler":
            check_grid_forward_euler(grid, case.numerics)
    setup = Setup(case=case, model=model, x=x, grid=grid, v0=v0, s0=s0, p=p, pulses=pulses,
                  threshold=case.threshold if case.threshold is not None else model.threshold,
                  ion_scale=model.ion_scale(cm), steps_per_sample=spb, n_samples=intervals + 1,
                  cv_window=cv_window, notes=notes, prepace=pre)
    if case.safety_factor:
        if x is None:
            notes.append("measure.safety_factor needs a [fiber] (axial currents); ignored for a single cell.")
        else:
            from cable.measure.safety import tracker_for

            setup.safety = tracker_for(case, grid, v0, pulses, notes)
    return setup


def _initial_state(case, model, p, grid, x, notes):
    """(v0, s0, pre-pacing summary or None): the model's rest, settled per node or pre-paced
    ([membrane.prepace]), then, on a strand, settled coupled (:mod:`cable.settle`)."""
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
    return v0, s0, pre


def _sampling(case, pulses, notes):
    """(steps per output interval, intervals, the pulses that start before the run ends)."""
    num = case.numerics
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
    return spb, intervals, pulses[pulses[:, 0] < t_end]


def _ring_start(case, model, grid, p, v0, s0, pulses, cm, notes):
    """A ring's initial state and pulses: as given, or one-way (:mod:`cable.ring`)."""
    if case.safety_factor:
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
