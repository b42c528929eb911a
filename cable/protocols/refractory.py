"""Refractoriness: an S1 train, then an S2 whose coupling interval is found by bisection.

Two intervals are searched at once:

* the effective refractory period (ERP): the shortest S1-S2 coupling interval whose S2
  starts a wave that reaches the far end of the strand;
* the local refractory period: the shortest interval at which S2 starts a regenerative
  response at the stimulus site, whether or not the wave then propagates. Regenerative
  means that the site crosses the activation threshold *and* that its net ionic current
  turns inward (it drives the potential upward at more than ``INWARD_RATE`` and at
  least ``REGENERATIVE_FRACTION`` of the drive of the S1's own upstroke) at some
  sample between the S2 onset and the capture deadline. The threshold crossing alone is
  not enough: late in repolarisation a stimulus near the diastolic threshold pushes
  still-depolarised tissue over the activation level while the membrane's own current
  stays outward (a stimulus-driven bump, not a response). The ionic current is computed
  from the stored states with the model's reference currents, at the output interval;
  a fast upstroke can fall between samples, but such a response propagates and is
  counted by the ERP test, which implies local capture.

Between the two lies the vulnerable window, where S2 gives a local response that fails
to conduct. The coupling interval is measured from the onset of the last S1 pulse to
the onset of S2, both at the case's stimulus site (common practice). Each trial reruns
the whole S1 train from the case's initial state, so the result does not depend on the
order of the trials. The search starts after the S1 upstroke at the site has ended
(the first sample after its peak): an S2 given during the upstroke would be read as part
of the S1 beat.
"""

from __future__ import annotations

import numpy as np
import xarray as xr

from cable.case import CaseError
from cable.io import schema
from cable.protocols.base import Protocol
from cable.io.schema import STATE_PREFIX
from cable.measure.activation import CAPTURE_LATENCY
from cable.membrane import get_model
from cable.protocols import _pacing
from cable.simulate import simulate

#: default absolute tolerance of the coupling-interval search [ms]
DEFAULT_TOLERANCE = 1.0
#: an S2 wave is watched for this many times the S1 wave's transit time, plus the capture latency
TRANSIT_FACTOR = 4.0
#: first trials at these multiples of the S1 APD90 (refractoriness usually ends near it)
GUESS_ABOVE, GUESS_BELOW = 1.15, 0.75
#: net inward ionic current counted as regenerative: its upward drive on V [mV/ms = V/s]; far
#: above round-off at rest (~1e-3) and far below an upstroke (tens to hundreds of V/s)
INWARD_RATE = 0.1
#: ... and at least this fraction of the drive of the last S1's own upstroke at the site
#: (sampled alike). Definition of this protocol: an upstroke is carried by the membrane's
#: inward current at a rate of the order of a full upstroke's, while a stimulus pushing a
#: refractory membrane over the activation level leaves a drive two orders of magnitude
#: smaller (HH axon, measured here: 1.3 mV/ms after an S2 at 0.67 ms against 466 mV/ms in
#: the S1 upstroke, and 122 mV/ms for the first propagating-size response at 1.47 ms).
REGENERATIVE_FRACTION = 0.05


def refractory_period(case, *, cycle_length: float | None = None, s1_count: int | None = None,
                      s2_amplitude: float | None = None, s2_duration: float | None = None,
                      tolerance: float = DEFAULT_TOLERANCE, observe: float | None = None,
                      info=None, points: int | None = None, workers: int | None = None) -> xr.Dataset:
    """Effective and local refractory periods after an S1 train.

    Parameters
    ----------
    case : str, pathlib.Path, dict or Case
        A strand case; its first ``[stimulus.NAME]`` gives the site, the S1 amplitude and
        duration, and (when ``count > 1``) the defaults of ``cycle_length`` and ``s1_count``.
    cycle_length : float, optional
        S1 interval [ms]; needed when ``s1_count > 1`` and the case gives none.
    s1_count : int, optional
        Number of S1 pulses (default: the stimulus's count).
    s2_amplitude, s2_duration : float, optional
        S2 pulse [uA/cm^2], [ms]; default the S1's. (Clinical practice often uses twice
        the diastolic threshold, see :func:`cable.strength_duration`.)
    tolerance : float
        Width of the final bracket on each interval [ms].
    observe : float, optional
        How long each S2 is watched after its onset [ms]; default
        ``TRANSIT_FACTOR`` x the S1 wave's transit time plus the capture latency.
    info : callable, optional
        Receives one line per trial.
    points, workers : int, optional
        Coupling intervals tried per round of the joint narrowing, and the threads that
        share them (defaults: the cores free at the start, at most 2, and
        as many points; ``points = 1``: one per
        round, as bisection). Each interval's run has its own duration, so the runs of a
        round do not share a kernel call; they run side by side
        (:mod:`cable.protocols._rounds`).

    Returns
    -------
    xarray.Dataset
        Scalars ``erp``, ``local_refractory_period``, ``vulnerable_window``,
        ``apd90_s1`` (last S1 at the site), ``apd90_s1_centre`` (at the CV-window
        centre), ``erp_minus_apd90`` [ms]; per trial ``coupling_interval``,
        ``s2_captured``, ``s2_propagated``.

    Raises
    ------
    CaseError
        No fibre, no stimulus, invalid options, or an S2 that never propagates.
    """
    who = "refractory_period"
    case = _pacing.as_case(case)
    if case.fiber is None:
        raise CaseError(f"{who}: the ERP is about propagation and needs a [fiber]; for a single cell use "
                        f"strength_duration(mode='cell') at chosen intervals.")
    site = _pacing.stimulus_site(case, who)
    n1, cl = s1_train(case, site, who, s1_count, cycle_length)
    amp2 = site.amplitude if s2_amplitude is None else _pacing.positive(who, "s2_amplitude", s2_amplitude)
    dur2 = site.duration if s2_duration is None else _pacing.positive(who, "s2_duration", s2_duration)
    tol = _pacing.positive(who, "tolerance", tolerance)
    say = info or (lambda msg: None)
    last = (n1 - 1) * cl
    s1 = _pacing.pulse(site, amplitude=site.amplitude, duration=site.duration, count=n1, cycle_length=cl)

    ref, site_node, apd_site, apd_centre, transit = _s1_reference(case, site, s1, n1, cl, who)
    watch = (TRANSIT_FACTOR * transit + CAPTURE_LATENCY + dur2) if observe is None else \
        _pacing.positive(who, "observe", observe)
    inward = _InwardProbe(case, site_node)
    inward.calibrate(ref, last, last + site.duration + CAPTURE_LATENCY)

    from cable.protocols import _rounds

    workers = _rounds.check_count(who, "workers", _rounds.default_workers() if workers is None else workers)
    points = _rounds.check_count(who, "points", workers if points is None else points)

    def s2_case(ci):
        s2 = _pacing.pulse(site, amplitude=amp2, duration=dur2, start=last + ci)
        return _pacing.variant(case, stimuli=[s1, s2], duration=last + ci + watch, overrides=inward.overrides)

    def judge(ci, ds):
        prop = _pacing.propagated(ds, n1, site)
        return prop or (_pacing.captured(ds, n1) and
                        inward.regenerative(ds, last + ci, last + ci + dur2 + CAPTURE_LATENCY)), prop

    tried = _S2Trials(s2_case, judge, workers, say)
    # an S2 during the S1's own upstroke would be read as the S1's crossings: start after it
    start = max(site.duration, upstroke_end(ref, site_node, last, apd_site))
    erp, local = search(tried.one, start, cl if n1 > 1 else max(2.0 * apd_site, cl or 0.0), tol,
                        who=who, limit=4.0 * max(cl or 0.0, apd_site, 1.0), guess=apd_site,
                        many=tried.many if (points > 1 and _rounds.batchable(case)) else None, points=points)
    tried = tried.outcomes
    cis = np.array(sorted(tried))
    data = {"erp": erp, "local_refractory_period": local, "vulnerable_window": erp - local,
            "apd90_s1": apd_site, "apd90_s1_centre": apd_centre, "erp_minus_apd90": erp - apd_site,
            **_wavelengths(ref, n1 - 1, erp, apd_centre),
            "s2_captured": np.array([tried[c][0] for c in cis], dtype=np.int8),
            "s2_propagated": np.array([tried[c][1] for c in cis], dtype=np.int8)}
    attrs = {"s1_count": n1, "s1_cycle_length_ms": cl if n1 > 1 else np.nan, "s1_amplitude": site.amplitude,
             "s2_amplitude": amp2, "s2_duration_ms": dur2, "tolerance_ms": tol, "search_start_ms": start,
             "observe_ms": watch}
    return schema.dataset("refractory", data, {"coupling_interval": cis}, attrs, case=case,
                          description="S1-S2 refractory period", title=f"refractory periods: {case.membrane.model}")


def _s1_reference(case, site, s1, n1, cl, who):
    """The S1 train alone: (its result, the site's node, APD90 of its last beat at the site
    and mid-strand [ms], the time its wave takes to cross [ms])."""
    last = (n1 - 1) * cl
    states = {"output.states": list(get_model(case.membrane.model).state_names)}
    ref = simulate(_pacing.variant(case, stimuli=[s1], duration=last + max(cl, case.duration), overrides=states))
    site_node = _pacing.node_index(ref, site.centre)
    centre_node = _pacing.node_index(ref, _pacing.cv_centre(case))
    if not _pacing.propagated(ref, n1 - 1, site):
        raise CaseError(f"{who}: the last S1 beat does not propagate along the strand (stimulus.0.amplitude = "
                        f"{site.amplitude:g} uA/cm^2, cycle_length = {cl:g} ms); raise the amplitude or lengthen "
                        f"the cycle.")
    act = ref["activation_time"].values[n1 - 1]
    return (ref, site_node, _pacing.apd90(ref, n1 - 1, site_node), _pacing.apd90(ref, n1 - 1, centre_node),
            float(np.nanmax(act) - np.nanmin(act)))


class _S2Trials:
    """The S2 trials of a search, by coupling interval [ms] (rounded to 1e-9 ms, so that a
    value met twice runs once): ``outcomes[ci] = (local response, propagated)``."""

    def __init__(self, s2_case, judge, workers, say):
        self.s2_case, self.judge, self.workers, self.say = s2_case, judge, workers, say
        self.outcomes = {}

    def _record(self, ci, ds):
        self.outcomes[ci] = local, prop = self.judge(ci, ds)
        self.say(f"S1-S2 {ci:g} ms: {'captured' if local else 'no capture'}, "
                 f"{'propagated' if prop else 'no propagation'}")

    def one(self, ci):
        ci = round(float(ci), 9)
        if ci not in self.outcomes:
            self._record(ci, simulate(self.s2_case(ci)))
        return self.outcomes[ci]

    def many(self, cis):
        """One round, side by side."""
        from cable.protocols import _rounds

        todo = sorted({round(float(ci), 9) for ci in cis} - set(self.outcomes))
        for ci, ds in zip(todo, _rounds.run_together([self.s2_case(ci) for ci in todo], self.workers)):
            if isinstance(ds, Exception):
                raise ds
            self._record(ci, ds)


def upstroke_end(ds, node: int, onset: float, apd: float) -> float:
    """Time [ms] from ``onset`` to the first sample after the peak of the beat at ``node``.

    The peak is the largest sampled potential within the beat's APD90 (or 50 ms) after
    ``onset``; the sample after it is the earliest time at which the upstroke has surely
    ended, at the output interval's resolution.
    """
    t = ds["t"].values
    v = ds["vm"].values[:, node] if ds["vm"].ndim == 2 else ds["vm"].values
    span = apd if np.isfinite(apd) else 50.0
    sel = np.flatnonzero((t >= onset) & (t <= onset + span))
    if sel.size == 0:
        return 0.0
    k = sel[int(np.argmax(v[sel]))]
    return float(t[min(k + 1, t.size - 1)] - onset)


class _InwardProbe:
    """Whether the net ionic current at one node turned inward between two times."""

    def __init__(self, case, node):
        from cable.preparation import node_fields_of

        self.model = get_model(case.membrane.model)
        self.node = node
        # the run's parameters at the node, without settling or pre-pacing a strand for them
        self.p = np.ascontiguousarray(node_fields_of(case, self.model)[1][node:node + 1])
        self.scale = self.model.ion_scale(case.fiber.capacitance)
        self.overrides = {"output.states": list(self.model.state_names)}
        self.level = INWARD_RATE

    def drive(self, ds, t0, t1) -> float:
        """Largest upward drive of the net ionic current on V [mV/ms] at the samples in [t0, t1]."""
        t = ds["t"].values
        sel = (t >= t0) & (t <= t1)
        if not sel.any():
            return 0.0
        v = ds["vm"].values[sel, self.node]
        s = np.stack([ds[STATE_PREFIX + name].values[sel, self.node] for name in self.model.state_names], axis=1)
        _, _, ion = self.model.reference(v, s, np.repeat(self.p, v.size, axis=0))
        return float(np.nanmax(-self.scale * np.asarray(ion, dtype=float)))

    def calibrate(self, ref, t0, t1) -> None:
        """Count as regenerative a drive of at least REGENERATIVE_FRACTION of the S1 upstroke's."""
        self.level = max(INWARD_RATE, REGENERATIVE_FRACTION * self.drive(ref, t0, t1))

    def regenerative(self, ds, t0, t1) -> bool:
        return self.drive(ds, t0, t1) > self.level


def s1_train(case, site, who, s1_count, cycle_length):
    """(count, cycle length [ms]) of the S1 train from the options or the case's stimulus."""
    n1 = site.count if s1_count is None else s1_count
    if isinstance(n1, bool) or not isinstance(n1, (int, np.integer)) or n1 < 1:
        raise CaseError(f"{who}: s1_count = {s1_count!r} must be a whole number of at least 1.")
    cl = cycle_length if cycle_length is not None else site.cycle_length
    if cl is None:
        if n1 > 1:
            raise CaseError(f"{who}: s1_count = {n1} needs cycle_length (stimulus.0.cycle_length is not set); "
                            f"pass cycle_length= (--cycle-length).")
        cl = 0.0
    else:
        cl = _pacing.positive(who, "cycle_length", cl)
        if n1 > 1 and cl <= site.duration:
            raise CaseError(f"{who}: cycle_length = {cl:g} ms must exceed the S1 duration {site.duration:g} ms.")
    return int(n1), float(cl)


def search(trial, lo, hi, tol, *, who, limit, guess=None, many=None, points=1):
    """Joint bisection of (ERP, local refractory period).

    With ``many`` (``many(intervals)`` runs them together, so that ``trial`` then finds
    them done) and ``points`` > 1, each round of the narrowing tries ``points``
    intervals dividing the brackets wider than ``tol`` evenly (shared between the two
    brackets while both are).

    ``trial(ci) -> (captured, propagated)``. ``lo`` is the shortest interval tried
    (checked), ``hi`` a first interval expected to propagate (doubled up to ``limit``
    until it does). With ``guess`` (the S1 APD90), intervals at ``GUESS_ABOVE`` and
    ``GUESS_BELOW`` times it are tried first, to start from narrow brackets. Each trial
    narrows both brackets; the midpoint of the wider one is tried next. Returns the
    upper ends: intervals known to propagate and to capture.
    """
    b = {"cap_lo": None, "cap_hi": None, "prop_lo": None, "prop_hi": None}

    def run(ci):
        ci = round(float(ci), 9)  # the key trial() stores its result under
        c, p = trial(ci)
        if p:
            b["prop_hi"] = ci if b["prop_hi"] is None else min(b["prop_hi"], ci)
        else:
            b["prop_lo"] = ci if b["prop_lo"] is None else max(b["prop_lo"], ci)
        if c or p:
            b["cap_hi"] = ci if b["cap_hi"] is None else min(b["cap_hi"], ci)
        else:
            b["cap_lo"] = ci if b["cap_lo"] is None else max(b["cap_lo"], ci)

    if guess is not None and np.isfinite(guess):
        first = [ci for ci in (GUESS_ABOVE * guess, GUESS_BELOW * guess) if lo < ci < hi]
        if many is not None and points > 1:
            many(first)
        for ci in first:
            run(ci)
    while b["prop_hi"] is None:
        run(hi)
        if b["prop_hi"] is not None:
            break
        if hi >= limit:
            raise CaseError(f"{who}: S2 did not propagate at coupling intervals up to {hi:g} ms; raise "
                            f"s2_amplitude or check that the S1 beats propagate.")
        hi = min(2.0 * hi, limit)
    if b["cap_lo"] is None:
        run(lo)
        if b["prop_hi"] <= lo:
            return lo, lo
        if b["cap_lo"] is None:  # S2 captures even at the shortest interval
            b["cap_lo"] = b["cap_hi"] = lo
    while True:
        w_prop = b["prop_hi"] - b["prop_lo"]
        w_cap = b["cap_hi"] - b["cap_lo"]
        if max(w_prop, w_cap) <= tol:
            return b["prop_hi"], b["cap_hi"]
        if many is not None and points > 1:
            from cable.protocols._rounds import inside

            wide = [(b["prop_lo"], b["prop_hi"])] if w_prop > tol else []
            if w_cap > tol and (b["cap_lo"], b["cap_hi"]) != (b["prop_lo"], b["prop_hi"]):
                wide.append((b["cap_lo"], b["cap_hi"]))
            share = [points // len(wide) + (1 if k < points % len(wide) else 0) for k in range(len(wide))]
            cis = [ci for (a, c), k in zip(wide, share) for ci in inside(a, c, k, tol)]
            many(cis)
            for ci in cis:
                run(ci)
        else:
            run(0.5 * (b["prop_lo"] + b["prop_hi"]) if w_prop >= w_cap else 0.5 * (b["cap_lo"] + b["cap_hi"]))
        # capture never comes later than propagation: keep the brackets consistent
        b["cap_hi"] = min(b["cap_hi"], b["prop_hi"])
        b["cap_lo"] = min(b["cap_lo"], b["cap_hi"])


def _wavelengths(ref, beat, erp, apd_centre) -> dict:
    """Wavelengths of the last S1 beat: CV x ERP (the classical one) and CV x APD90."""
    cv = float(ref["conduction_velocity"].values[beat])     # m/s
    return {"conduction_velocity_s1": cv, "wavelength_erp": cv / 10.0 * erp, "wavelength_apd": cv / 10.0 * apd_centre}


def summary(ds: xr.Dataset) -> str:
    """A few lines: the periods, APD90 and the trials."""
    f = lambda name: float(ds[name])  # noqa: E731
    lines = [f"refractory periods: {ds.attrs['model']} (S1 x {ds.attrs['s1_count']} at "
             f"{ds.attrs['s1_cycle_length_ms']:g} ms, S2 {ds.attrs['s2_amplitude']:g} uA/cm^2 for "
             f"{ds.attrs['s2_duration_ms']:g} ms; tolerance {ds.attrs['tolerance_ms']:g} ms)",
             f"ERP {f('erp'):.4g} ms   local refractory period {f('local_refractory_period'):.4g} ms   "
             f"vulnerable window {f('vulnerable_window'):.4g} ms",
             f"APD90 of the last S1: {f('apd90_s1'):.4g} ms at the site, {f('apd90_s1_centre'):.4g} ms mid-strand; "
             f"ERP - APD90 = {f('erp_minus_apd90'):.4g} ms",
             *([f"wavelength: CV x ERP {f('wavelength_erp'):.4g} cm (wavelength_erp), CV x APD90 "
                f"{f('wavelength_apd'):.4g} cm (wavelength_apd)"] if "wavelength_erp" in ds else []),
             "S1-S2_ms  captured  propagated"]
    for ci, c, p in zip(ds["coupling_interval"].values, ds["s2_captured"].values, ds["s2_propagated"].values):
        lines.append(f"{ci:8.5g}  {'yes' if c else 'no':>8}  {'yes' if p else 'no':>10}")
    return "\n".join(lines)


def figure(ds, fig) -> None:
    """The S2 trials by outcome (:mod:`cable.plot.protocol_figures.refractory`)."""
    from cable.plot.protocol_figures.refractory import figure as draw

    draw(ds, fig)


PROTOCOL = Protocol(name="refractory", title="refractory period", run=refractory_period, summary=summary,
                    figure=figure, command="erp", order=20,
                    legacy=lambda ds: ds.attrs.get("protocol") == "S1-S2 refractory period" or "erp" in ds.variables)
