"""What a case implies, before it runs: :func:`check_case` (``cable check``, ``cable run --dry-run``).

The check goes through the run's own preparation and validation (:func:`cable.preparation.prepare`,
``check_threshold``, ``check_size``), so it refuses exactly what the run refuses (a
:class:`~cable.case.CaseError`), and then reports, without simulating the case, what it
derives from it: nodes and steps, D, the space constant and dx against it, the upstroke's
extent and the dx it needs (:mod:`cable.grid_check`), the stability limit of the diffusion
scheme, the stimulated nodes, each region's nodes and border ramp, the CV window, the
memory and disk the run needs, and its time, from a short timed run of the same kernel.

Preparation does what a run does before its first step (settling changed parameter sets,
pre-pacing, a ring's one-way start), so a check costs that much.
"""

from __future__ import annotations

import copy
import time
from dataclasses import dataclass, field, replace

import numpy as np

#: steps of the timed run from which the run's time is estimated
TIMED_STEPS = 300
#: output intervals of the timed run, at least: the first loads the kernel, the others give the rate
MIN_INTERVALS = 4
#: a region weight this close to 0 or 1 counts as 0 or 1 (a node at the ramp's end, to rounding of x)
WEIGHT_TOL = 1e-9


@dataclass
class NodeRange:
    """Nodes ``first..last`` (inclusive) and the positions [cm] they span."""

    first: int
    last: int
    x_first: float
    x_last: float

    @property
    def count(self) -> int:
        return self.last - self.first + 1

    def text(self) -> str:
        return f"nodes {self.first}-{self.last} (x = {self.x_first:.4g}-{self.x_last:.4g} cm, {self.count} nodes)"


@dataclass
class CheckReport:
    """What :func:`check_case` found; every value in canonical units (cm, ms, bytes, s).

    Fibre quantities are None for a single cell; ``seconds`` is None when the timed run
    was skipped or failed (``warnings`` says why).
    """

    model: str
    n_nodes: int
    n_steps: int
    dt: float
    duration: float
    n_samples: int
    dx: float | None = None
    diffusivity: float | None = None
    space_constant: float | None = None
    upstroke_extent: float | None = None
    cv_error: float | None = None
    dx_needed: float | None = None
    diffusion: str = ""
    dt_limit: float | None = None
    stimuli: list = field(default_factory=list)      # (label, NodeRange or None, onsets [ms])
    regions: list = field(default_factory=list)      # (label, core NodeRange or None, ramps [NodeRange])
    cv_window: tuple | None = None
    cv_nodes: NodeRange | None = None
    memory_bytes: int = 0
    disk_bytes: int | None = None
    seconds: float | None = None
    timed_steps: int = 0
    compile_seconds: float | None = None
    compiles: bool = False
    warnings: list = field(default_factory=list)
    notes: list = field(default_factory=list)

    def lines(self) -> list[str]:
        """The report as text, one fact per line."""
        from cable.units import format_bytes

        out = [f"model: {self.model}",
               f"time: {self.duration:g} ms in {self.n_steps:,} steps of {self.dt:g} ms, {self.n_samples:,} samples"]
        if self.dx is None:
            out.append("single cell (no fibre)")
        else:
            out.append(f"fibre: {self.n_nodes:,} nodes, dx {self.dx * 1e4:.4g} um, D {self.diffusivity:.4g} cm^2/ms")
            if self.space_constant is not None:
                lam = self.space_constant
                out.append(f"space constant at rest: {lam:.4g} cm (dx = {self.dx / lam:.3g} of it)")
            if self.upstroke_extent is not None:
                up = self.upstroke_extent
                out.append(f"upstroke extent: about {up:.3g} cm ({up / self.dx:.3g} nodes); estimated CV error "
                           f"of this dx {100 * self.cv_error:.2g}%, dx <= {_short_length(self.dx_needed)} for ~2% "
                           f"(check with `cable converge`)")
            if self.diffusion == "forward-euler":
                out.append(f"stability: forward-Euler diffusion needs dt <= {self.dt_limit:.4g} ms (dt is "
                           f"{self.dt / self.dt_limit:.0%} of it)")
            else:
                out.append(f"stability: {self.diffusion} diffusion is unconditionally stable (forward Euler would "
                           f"need dt <= {self.dt_limit:.4g} ms)")
            if self.cv_nodes is not None:
                out.append(f"CV window: {self.cv_window[0]:.4g}-{self.cv_window[1]:.4g} cm, {self.cv_nodes.text()}")
        for label, nodes, onsets in self.stimuli:
            shown = ", ".join(f"{t:g}" for t in onsets[:6]) + (", ..." if len(onsets) > 6 else "")
            where = f"{nodes.text()}, " if nodes is not None else ""
            out.append(f"{label}: {where}{len(onsets)} pulse(s) at {shown} ms")
        for label, core, ramps in self.regions:
            ramp = "; border ramp " + ", ".join(r.text() for r in ramps) if ramps else "; no border ramp"
            out.append(f"{label}: " + (core.text() if core is not None else "no node inside") + ramp)
        out.append(f"memory: about {format_bytes(self.memory_bytes)}"
                   + (f"; disk: up to {format_bytes(self.disk_bytes)} before compression"
                      if self.disk_bytes is not None else " (no output file: the fields are kept in memory)"))
        if self.seconds is not None:
            out.append(f"time: about {_duration(self.seconds)} (from a timed run of {self.timed_steps} steps; "
                       f"writing the file adds to it)")
        if self.compiles:
            took = f", which took {self.compile_seconds:.1f} s here" if self.compile_seconds is not None else ""
            out.append(f"compiling: the first run of this model compiles its kernels{took}; later runs use the cache")
        out.extend(self.notes)
        out.extend(self.warnings)
        if not self.warnings:
            out.append("warnings: none")
        return out


def _short_length(cm: float) -> str:
    return f"{cm:.3g} cm" if cm >= 0.1 else f"{cm * 1e4:.3g} um"


def _duration(seconds: float) -> str:
    if seconds < 60:
        return f"{seconds:.2g} s"
    return f"{int(seconds // 3600)}:{int(seconds % 3600 // 60):02d}:{int(seconds % 60):02d}"


def check_case(case, *, output=None, timed_steps: int = TIMED_STEPS) -> CheckReport:
    """What a run of ``case`` would do, without running it.

    Parameters
    ----------
    case : str, pathlib.Path, dict or Case
        As :func:`cable.simulate` takes it.
    output : str or pathlib.Path, optional
        The result file the run would write: its disk need is estimated and checked
        (the file itself is not checked or touched).
    timed_steps : int
        Steps of the short run timed to estimate the run's time; 0 skips it.

    Returns
    -------
    CheckReport

    Raises
    ------
    CaseError
        Whatever the run would refuse (invalid case, unstable explicit diffusion, a CV
        window of fewer than 3 nodes, a threshold below rest, a run too large for memory
        or disk).
    """
    from cable.case import Case, load_case
    from cable.preparation import check_size, check_threshold, prepare
    from cable.kernels.loops import needs_compiling

    from cable.kernels.jit import compile_timer

    case = case if isinstance(case, Case) else load_case(case)
    compiles = needs_compiling(case)
    with compile_timer() as compiled:
        setup = prepare(case)
        check_threshold(setup)
        check_size(setup, output)
        report = _derived(setup, output)
        report.compiles = compiles
        report.warnings, report.notes = _messages(setup)
        if timed_steps > 0:
            _time_kernel(case, report, timed_steps, setup.steps_per_sample)
    report.compile_seconds = compiled.seconds
    return report


def _derived(setup, output) -> CheckReport:
    from cable.preparation import probe_bytes, stored_bytes

    case, num = setup.case, setup.case.numerics
    spb = setup.steps_per_sample
    fields = stored_bytes(setup)
    probes = probe_bytes(setup.n, setup.pulses.shape[0], len(case.apd_levels))
    report = CheckReport(model=setup.model.name, n_nodes=setup.n, n_steps=(setup.n_samples - 1) * spb, dt=num.dt,
                         duration=(setup.n_samples - 1) * spb * num.dt, n_samples=setup.n_samples,
                         memory_bytes=probes + (0 if output is not None else fields),
                         disk_bytes=fields // 2 if output is not None else None, diffusion=num.diffusion)
    report.stimuli = _stimuli(setup)
    if setup.x is None:
        return report
    from cable.case.describe import space_constant
    from cable.grid_check import upstroke_grid
    from cable.measure.velocity import window_nodes
    from cable.fiber import forward_euler_dt_limit

    f = case.fiber
    report.dx, report.diffusivity = f.dx, f.diffusivity
    report.space_constant = space_constant(case, setup.model)
    up = upstroke_grid(case, setup.model, setup.p[0])
    if up is not None:
        report.upstroke_extent, report.cv_error, report.dx_needed = up.extent, up.error, up.dx_needed
    report.dt_limit = forward_euler_dt_limit(setup.grid, num)
    report.cv_window = tuple(setup.cv_window)
    report.cv_nodes = _range(setup.x, window_nodes(setup.x, setup.cv_window))
    report.regions = _regions(case, setup.x)
    return report


def _range(x, idx) -> NodeRange | None:
    idx = np.asarray(idx)
    if idx.size == 0:
        return None
    return NodeRange(int(idx[0]), int(idx[-1]), float(x[idx[0]]), float(x[idx[-1]]))


def _runs(x, mask) -> list[NodeRange]:
    """The contiguous stretches of nodes where ``mask`` holds."""
    idx = np.flatnonzero(mask)
    if idx.size == 0:
        return []
    cuts = np.flatnonzero(np.diff(idx) > 1) + 1
    return [_range(x, part) for part in np.split(idx, cuts)]


def _stimuli(setup) -> list:
    """(label, stimulated nodes, onsets before the run's end) per stimulus, as the run applies them."""
    from cable.preparation import stimulus_pulses

    case = setup.case
    t_end = (setup.n_samples - 1) * setup.steps_per_sample * case.numerics.dt
    out = []
    for k, stim in enumerate(case.stimuli):
        label = f"stimulus {getattr(stim, 'name', None) or k}"
        onsets = [t for t in stim.onsets() if t < t_end]
        nodes = None
        if setup.x is not None:
            rows = stimulus_pulses(replace(case, stimuli=(stim,)), setup.x, [])
            if rows.shape[0]:
                nodes = _range(setup.x, np.arange(int(rows[0, 2]), int(rows[0, 3])))
        out.append((label, nodes, onsets))
    return out


def _regions(case, x) -> list:
    """(label, core nodes, border-ramp stretches) per region (weight 1 inside, between 0 and 1 on the ramp)."""
    from cable.regions import regions_of

    out = []
    for k, region in enumerate(regions_of(case)):
        w = region.weight(x)
        label = f"region {getattr(region, 'name', None) or k}"
        core = _runs(x, w >= 1.0 - WEIGHT_TOL)
        out.append((label, core[0] if core else None, _runs(x, (w > WEIGHT_TOL) & (w < 1.0 - WEIGHT_TOL))))
    return out


def _messages(setup) -> tuple[list, list]:
    """(warnings, notes) the run prints before its first step: the preparation's and the rate table's."""
    from cable.kernels import tables
    from cable.kernels.state import scheme_codes

    num = setup.case.numerics
    said = list(setup.notes)
    if setup.prepace is not None:
        said.append(setup.prepace["summary"])
    gating, _, _ = scheme_codes(num)
    plan = tables.plan(setup.model, setup.p, num.dt, gating, num.rates, reaction=num.reaction)
    if plan.note:
        said.append(plan.note)
    warnings = [m for m in said if m.startswith("warning")]
    return warnings, [m for m in said if not m.startswith("warning")]


def _time_kernel(case, report: CheckReport, steps: int, spb: int) -> None:
    """Time a short run of the case (about its first ``steps`` steps, from rest, no pre-pacing) and
    scale it. Its first output interval also loads (or compiles) the kernel, which the estimate
    adds once; the rate comes from the intervals after it, sampled as the run samples where they
    fit (at least ``MIN_INTERVALS``)."""
    from cable.case import CaseError
    from cable.case.load import from_dict, set_key
    from cable.kernels.jit import compile_timer
    from cable.simulate import SimulationError, simulate

    dt = case.numerics.dt
    steps = max(MIN_INTERVALS, min(steps, report.n_steps))
    every = spb if steps // spb >= MIN_INTERVALS else steps // MIN_INTERVALS
    intervals = steps // every
    steps = intervals * every
    raw = copy.deepcopy(case.raw)
    set_key(raw, "run.duration", steps * dt)
    set_key(raw, "output.every", every * dt)
    raw.get("membrane", {}).pop("prepace", None)  # the kernel's cost does not depend on the start
    raw.pop("sweep", None)
    stamps = []
    try:
        with compile_timer() as compiled:
            ds = simulate(from_dict(raw), progress=lambda done, total: stamps.append(time.perf_counter()))
    except (CaseError, SimulationError) as exc:
        report.warnings.append(f"warning: the timed run of the first {steps} steps failed ({exc}); no time "
                               f"estimate. The run may fail the same way.")
        return
    loop = float(ds.attrs["wall_time_s"])
    per_interval = (stamps[-1] - stamps[0]) / (len(stamps) - 1)
    # the first interval's extra time: loading the loop from the cache (a run pays it), or compiling it
    # (the first run only; said apart)
    first_call = max(0.0, loop - (stamps[-1] - stamps[0]) - per_interval - (compiled.seconds or 0.0))
    report.timed_steps = steps
    report.seconds = first_call + per_interval / every * report.n_steps
