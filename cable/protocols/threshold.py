"""Strength-duration: the smallest stimulus that starts an action potential, per pulse duration.

For each duration the amplitude is bracketed and bisected until the bracket is narrower
than ``tolerance`` times its upper end; the threshold reported is that upper end, an
amplitude that did excite. In ``"strand"`` mode excitation means a wave that reaches
the far end of the fibre (a local response that dies out is not a capture); in
``"cell"`` mode the fibre is removed and the cell's potential must cross the activation
threshold (``measure.threshold`` or the model's).

Two laws are fitted to the thresholds I(d), each in its own form:

* Lapicque's exponential law, I = I_rh / (1 - exp(-d/tau)), the threshold of a
  membrane charged through its time constant tau to a fixed depolarisation (Lapicque
  1907, J Physiol Pathol Gen 9:620; from memory); its chronaxie is tau ln 2;
* Weiss's hyperbola, I = I_rh (1 + c/d), a constant charge plus a constant current
  (Weiss 1901, Arch Ital Biol 35:413; from memory); its chronaxie is c.

Both are fitted by least squares in the relative residual (I - fit)/I, so that each
point weighs the same whatever its amplitude (the thresholds span decades). The
chronaxie is the duration at which the threshold is twice the rheobase (Lapicque's
definition).

What is measured, not fitted: the rheobase is the plateau of the computed curve (the
threshold at the longest duration; a note says when the last two durations still differ
by more than the search tolerance, so the plateau is not reached), and the chronaxie
the duration at which the computed curve crosses twice it (log-log interpolation).
A fit that misses a point by more than ``FIT_TOLERANCE`` gets a warning in the notes.
"""

from __future__ import annotations

import numpy as np
import xarray as xr

from cable.case import CaseError
from cable.io import schema
from cable.protocols.base import Protocol
from cable.protocols import _pacing
from cable.simulate import SimulationError, simulate

MODES = ("strand", "cell")

#: default relative width of the final bracket on the amplitude
DEFAULT_TOLERANCE = 0.01
#: the amplitude search gives up above this factor times the first guess
MAX_GROWTH = 2.0 ** 16
#: a fitted law that misses a computed threshold by more than this (relative) is warned
#: about: the thresholds are exact to the search tolerance (1 % by default), so a law off by
#: more than 5 % at some duration does not describe the curve there (common practice)
FIT_TOLERANCE = 0.05
LN2 = float(np.log(2.0))


def strength_duration(case, durations, *, tolerance: float = DEFAULT_TOLERANCE, mode: str = "strand",
                      observe: float | None = None, info=None, points: int | None = None,
                      workers: int | None = None) -> xr.Dataset:
    """Threshold amplitude against stimulus duration, with Lapicque's and Weiss's fits.

    Parameters
    ----------
    case : str, pathlib.Path, dict or Case
        The case; its first ``[stimulus.NAME]`` gives the site (x, width) and the first
        guess of the amplitude; its other stimuli are dropped.
    durations : sequence of float
        Pulse durations [ms].
    tolerance : float
        Relative width of the final amplitude bracket (0.01 = 1 %).
    mode : {"strand", "cell"}
        Capture criterion: the wave reaches the far end of the fibre, or the single
        cell (the case without its ``[fiber]``) crosses the activation threshold.
        A single cell has C_m = 1 uF/cm^2 in :func:`cable.simulate`.
    observe : float, optional
        How long to watch after the pulse ends [ms]; default the case's run.duration.
    info : callable, optional
        Receives one line per duration.
    points, workers : int, optional
        Amplitudes tried per round of the final narrowing, and the threads that share
        them (defaults: the cores free at the start, at most 2, and
        as many points; ``points = 1`` is plain
        bisection); see :mod:`cable.protocols._rounds`.

    Returns
    -------
    xarray.Dataset
        ``threshold(duration)`` [uA/cm^2], ``charge(duration)`` [nC/cm^2],
        ``trials(duration)``, the fits' ``rheobase_*`` [uA/cm^2], ``chronaxie_*`` [ms]
        and ``*_residual(duration)``, and ``chronaxie_direct`` [ms].

    Raises
    ------
    CaseError
        Invalid options, no stimulus, or strand mode without a fibre.
    """
    who = "strength_duration"
    case = _pacing.as_case(case)
    if mode not in MODES:
        from cable.suggest import did_you_mean

        hint = did_you_mean(mode, MODES)
        raise CaseError(f"{who}: mode = {mode!r}; allowed values are 'strand', 'cell'.{hint}")
    if mode == "strand" and case.fiber is None:
        raise CaseError(f"{who}: mode = 'strand' needs a [fiber]; use mode = 'cell' for a single cell.")
    tolerance = _pacing.positive(who, "tolerance", tolerance)
    if tolerance >= 0.5:
        raise CaseError(f"{who}: tolerance = {tolerance:g} is a relative bracket width; give less than 0.5 "
                        f"(e.g. 0.01 for 1 %).")
    try:
        durs = np.array(sorted({float(d) for d in durations}), dtype=float)
    except (TypeError, ValueError):
        raise CaseError(f"{who}: durations = {durations!r} must be numbers [ms].") from None
    if durs.size == 0 or not np.all(np.isfinite(durs)) or np.any(durs <= 0):
        raise CaseError(f"{who}: durations = {list(durations)!r} must be one or more positive numbers [ms].")
    site = _pacing.stimulus_site(case, who)
    watch = case.duration if observe is None else _pacing.positive(who, "observe", observe)
    say = info or (lambda msg: None)
    from cable.protocols import _rounds

    workers = _rounds.check_count(who, "workers", _rounds.default_workers() if workers is None else workers)
    points = _rounds.check_count(who, "points", workers if points is None else points)
    if not _rounds.batchable(case):
        points, workers = 1, 1

    def trial_case(amplitude, duration):
        return _pacing.variant(case, stimuli=[_pacing.pulse(site, amplitude=amplitude, duration=duration)],
                               duration=duration + watch, single_cell=(mode == "cell"))

    def judged(ds):
        if isinstance(ds, SimulationError):
            return None  # numerical failure at this amplitude: treat as beyond the search
        return _pacing.propagated(ds, 0, site) if mode == "strand" else _pacing.captured(ds, 0)

    def excites(amplitude, duration):
        try:
            return judged(simulate(trial_case(amplitude, duration)))
        except SimulationError as exc:
            return judged(exc)

    def excite_many(amplitudes, duration):  # one round: run together (one batched call per thread)
        return [judged(ds) for ds in _rounds.run_together([trial_case(a, duration) for a in amplitudes], workers)]

    thresholds = np.full(durs.size, np.nan)
    trials = np.zeros(durs.size, dtype=np.int64)
    notes = []
    prev = None
    for k, d in enumerate(durs):
        # first guesses: the previous (shorter) pulse's threshold captures at this longer one,
        # and the same charge at this duration does not (charge thresholds rise with duration)
        if prev is None:
            hi, lo = site.amplitude, None
        else:
            hi, lo = prev[0], prev[0] * prev[1] / d
        value, count, note = _bisect(excites, d, lo, hi, tolerance, many=excite_many, points=points)
        thresholds[k], trials[k] = value, count
        if note:
            notes.append(note)
        say(f"duration {d:g} ms: threshold {value:.5g} uA/cm^2 ({count} runs)")
        if np.isfinite(value):
            prev = (value, d)
    return _result(case, durs, thresholds, trials, tolerance, mode, watch, site, notes)


def _bisect(excites, d, lo, hi, tolerance, many=None, points=1):
    """Bracket then bisect the threshold amplitude at duration ``d``; (value, runs, note).

    With ``many`` (``many(amplitudes, d) -> outcomes``) and ``points`` > 1, the final
    narrowing tries ``points`` amplitudes per round (:func:`cable.protocols._rounds.inside`).
    """
    runs = 0

    def test(a):
        nonlocal runs
        runs += 1
        return excites(a, d)

    first = hi
    ok = test(hi)
    lo_fails = False  # whether lo is known not to excite
    while ok is not True:
        if ok is None or hi > first * MAX_GROWTH:
            return np.nan, runs, (f"duration {d:g} ms: no amplitude up to {hi:.4g} uA/cm^2 excited"
                                  + (" (the run failed numerically)" if ok is None else "")
                                  + "; lengthen the observation time or check the case.")
        lo, hi, lo_fails = hi, 2.0 * hi, True
        ok = test(hi)
    if lo is None or lo >= hi:
        lo = 0.5 * hi
    while not lo_fails:
        if test(lo) is True:
            hi, lo = lo, 0.5 * lo
        else:
            lo_fails = True
    while hi - lo > tolerance * hi:
        if many is not None and points > 1:
            from cable.protocols import _rounds

            # a round narrows the bracket to below tolerance * lo <= tolerance * (the new hi)
            values = _rounds.inside(hi, lo, points, tolerance * lo)
            runs += len(values)
            hi, lo = _rounds.narrow(hi, lo, values, [ok is True for ok in many(values, d)])
            continue
        mid = 0.5 * (lo + hi)
        if test(mid) is True:
            hi = mid
        else:
            lo = mid
    return hi, runs, ""


def law_threshold(law: str, rheobase: float, chronaxie: float, d):
    """The threshold [uA/cm^2] a fitted law gives at durations ``d`` [ms].

    ``law`` is "lapicque" (I_rh / (1 - exp(-d ln2 / c))) or "weiss" (I_rh (1 + c/d)).
    """
    d = np.asarray(d, dtype=float)
    if law == "lapicque":
        return rheobase / -np.expm1(-d * LN2 / chronaxie)
    if law == "weiss":
        return rheobase * (1.0 + chronaxie / d)
    raise ValueError(law)


def _weighted_scale(shape, i):
    # the I_rh minimising sum(((i - I_rh shape)/i)^2): linear in I_rh for a fixed shape
    w = shape / i
    return float(np.sum(w) / np.sum(w * w))


def fit_lapicque(durations, thresholds):
    """Lapicque's I = I_rh / (1 - exp(-d/tau)), least squares in (I - fit)/I.

    Returns (rheobase, chronaxie = tau ln 2, residuals I - fit) [uA/cm^2, ms, uA/cm^2].
    """
    from scipy.optimize import minimize_scalar

    d, i = np.asarray(durations, float), np.asarray(thresholds, float)
    ok = np.isfinite(i)
    if ok.sum() < 2:
        return np.nan, np.nan, np.full(d.size, np.nan)
    dk, ik = d[ok], i[ok]

    def cost(log_tau):
        shape = 1.0 / -np.expm1(-dk / np.exp(log_tau))
        return float(np.sum((1.0 - _weighted_scale(shape, ik) * shape / ik) ** 2))

    span = np.log([dk.min() * 1e-3, dk.max() * 1e3])
    grid = np.linspace(span[0], span[1], 121)
    k = int(np.argmin([cost(g) for g in grid]))
    lo, hi = grid[max(k - 1, 0)], grid[min(k + 1, grid.size - 1)]
    log_tau = minimize_scalar(cost, bounds=(lo, hi), method="bounded", options={"xatol": 1e-10}).x
    tau = float(np.exp(log_tau))
    rh = _weighted_scale(1.0 / -np.expm1(-dk / tau), ik)
    return rh, tau * LN2, i - law_threshold("lapicque", rh, tau * LN2, d)


def fit_weiss(durations, thresholds):
    """Weiss's I = I_rh (1 + c/d), least squares in (I - fit)/I (linear in I_rh and I_rh c).

    Returns (rheobase, chronaxie c, residuals I - fit) [uA/cm^2, ms, uA/cm^2].
    """
    d, i = np.asarray(durations, float), np.asarray(thresholds, float)
    ok = np.isfinite(i)
    if ok.sum() < 2:
        return np.nan, np.nan, np.full(d.size, np.nan)
    w = 1.0 / i[ok]
    a_mat = np.column_stack([np.ones(ok.sum()), 1.0 / d[ok]]) * w[:, None]
    (a, b), *_ = np.linalg.lstsq(a_mat, i[ok] * w, rcond=None)
    return float(a), float(b / a), i - law_threshold("weiss", float(a), float(b / a), d)


def measured_rheobase(durations, thresholds, tolerance):
    """(plateau of the computed curve [uA/cm^2], whether it is reached) from the longest pulses."""
    i = np.asarray(thresholds, float)
    ok = np.isfinite(i)
    if not ok.any():
        return np.nan, False
    i = i[ok]
    reached = i.size >= 2 and abs(i[-2] - i[-1]) <= 2.0 * tolerance * i[-1]
    return float(i[-1]), bool(reached)


def chronaxie_direct(durations, thresholds, rheobase):
    """Duration [ms] where the computed curve crosses 2 x ``rheobase`` (log-log interpolation)."""
    d, i = np.asarray(durations, float), np.asarray(thresholds, float)
    ok = np.isfinite(i)
    d, i = d[ok], i[ok]
    if not np.isfinite(rheobase) or rheobase <= 0 or d.size < 2:
        return np.nan
    target = 2.0 * rheobase
    for k in range(d.size - 1):
        a, b = i[k], i[k + 1]
        if (a - target) * (b - target) <= 0 and a != b:
            w = (np.log(target) - np.log(a)) / (np.log(b) - np.log(a))
            return float(np.exp(np.log(d[k]) + w * (np.log(d[k + 1]) - np.log(d[k]))))
    return np.nan


def _rms_relative(residual, reference):
    ok = np.isfinite(residual) & np.isfinite(reference)
    if not ok.any():
        return np.nan
    return float(np.sqrt(np.mean((residual[ok] / reference[ok]) ** 2)))


def _fit_notes(durs, thr, fits, rheobase, reached, tolerance):
    """Warnings on the fits and on the measured rheobase (see the module docstring)."""
    notes = []
    if np.isfinite(rheobase) and not reached:
        notes.append(f"warning: the computed thresholds still fall at the longest pulses ({durs[-1]:g} ms), so "
                     f"the measured rheobase {rheobase:.4g} uA/cm^2 is an upper bound; add longer durations.")
    for law, (rh, c, res) in fits.items():
        rel = np.abs(res / thr)
        if not np.any(np.isfinite(rel)):
            continue
        k = int(np.nanargmax(rel))
        if rel[k] > FIT_TOLERANCE:
            notes.append(f"warning: the {law.capitalize()} fit misses the computed threshold by {100 * rel[k]:.0f}% at "
                         f"{durs[k]:g} ms (tolerance {100 * FIT_TOLERANCE:.0f}%); its rheobase {rh:.4g} uA/cm^2 "
                         f"against the measured {rheobase:.4g}: read the measured values.")
    return notes


def _result(case, durs, thr, trials, tolerance, mode, watch, site, notes) -> xr.Dataset:
    charge = thr * durs
    rl, cl, res_l = fit_lapicque(durs, thr)
    rw, cw, res_w = fit_weiss(durs, thr)
    rheobase, reached = measured_rheobase(durs, thr, tolerance)
    direct = chronaxie_direct(durs, thr, rheobase)
    notes = list(notes) + _fit_notes(durs, thr, {"lapicque": (rl, cl, res_l), "weiss": (rw, cw, res_w)},
                                     rheobase, reached, tolerance)
    data = {"threshold": thr, "charge": charge, "trials": trials, "lapicque_residual": res_l,
            "weiss_residual": res_w, "rheobase_lapicque": rl, "chronaxie_lapicque": cl, "rheobase_weiss": rw,
            "chronaxie_weiss": cw, "rheobase_measured": rheobase, "chronaxie_direct": direct,
            "lapicque_rms_relative_residual": _rms_relative(res_l, thr),
            "weiss_rms_relative_residual": _rms_relative(res_w, thr)}
    if mode == "cell" and case.fiber is not None and case.fiber.capacitance != 1.0:
        notes.append(f"cell mode runs one cell with C_m = 1 uF/cm^2 (the case's fibre has "
                     f"{case.fiber.capacitance:g} uF/cm^2).")
    attrs = {
        "mode": mode,
        "capture_criterion": ("the wave reaches the far end of the fibre" if mode == "strand"
                              else "the cell crosses the activation threshold"),
        "tolerance_relative": tolerance,
        "observe_ms": watch,
        "stimulus_x_cm": site.x,
        "stimulus_width_cm": site.width,
        "fits": "Lapicque I = I_rh / (1 - exp(-d/tau)), chronaxie tau ln 2; Weiss I = I_rh (1 + c/d); both by "
                "least squares in the relative residual",
        "notes": "\n".join(notes),
    }
    return schema.dataset("threshold", data, {"duration": durs}, attrs, case=case, description="strength-duration",
                          title=f"strength-duration: {case.membrane.model}")


def summary(ds: xr.Dataset) -> str:
    """A table of the thresholds and the fits."""
    lines = [f"strength-duration ({ds.attrs['mode']}): {ds.attrs['model']}; capture: {ds.attrs['capture_criterion']}",
             "duration_ms  threshold_uA/cm^2  charge_nC/cm^2  runs"]
    for d, i, q, n in zip(ds["duration"].values, ds["threshold"].values, ds["charge"].values, ds["trials"].values):
        lines.append(f"{d:11.4g}  {i:17.5g}  {q:14.5g}  {int(n):4d}")
    lines.append(f"Lapicque: rheobase {float(ds['rheobase_lapicque']):.5g} uA/cm^2, chronaxie "
                 f"{float(ds['chronaxie_lapicque']):.4g} ms, rms relative residual "
                 f"{float(ds['lapicque_rms_relative_residual']):.2%}")
    lines.append(f"Weiss:    rheobase {float(ds['rheobase_weiss']):.5g} uA/cm^2, chronaxie "
                 f"{float(ds['chronaxie_weiss']):.4g} ms, rms relative residual "
                 f"{float(ds['weiss_rms_relative_residual']):.2%}")
    lines.append(f"measured: rheobase {float(ds['rheobase_measured']):.5g} uA/cm^2 (the curve's plateau), "
                 f"chronaxie {float(ds['chronaxie_direct']):.4g} ms (threshold = 2 x that rheobase)")
    if ds.attrs.get("notes"):
        lines.append("notes: " + ds.attrs["notes"])
    return "\n".join(lines)


def figure(ds, fig) -> None:
    """Amplitude and charge against duration (:mod:`cable.plot.protocol_figures.threshold`)."""
    from cable.plot.protocol_figures.threshold import figure as draw

    draw(ds, fig)


PROTOCOL = Protocol(name="threshold", title="strength-duration", run=strength_duration, summary=summary,
                    figure=figure, command="threshold", order=10,
                    legacy=lambda ds: ds.attrs.get("protocol") == "strength-duration"
                    or "rheobase_weiss" in ds.variables)
