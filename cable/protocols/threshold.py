"""Strength-duration: the smallest stimulus that starts an action potential, per pulse duration.

For each duration the amplitude is bracketed and bisected until the bracket is narrower
than ``tolerance`` times its upper end; the threshold reported is that upper end, an
amplitude that did excite. In ``"strand"`` mode excitation means a wave that reaches
the far end of the fibre (a local response that dies out is not a capture); in
``"cell"`` mode the fibre is removed and the cell's potential must cross the activation
threshold (``measure.threshold`` or the model's).

Two laws are fitted to the thresholds I(d):

* Lapicque's hyperbola, I = I_rh (1 + c/d), least squares in current
  (Lapicque 1907, J Physiol Pathol Gen 9:620; from memory);
* Weiss's law, Q = I d = I_rh (d + c), least squares in charge
  (Weiss 1901, Arch Ital Biol 35:413; from memory).

They are the same two-parameter law written for current and for charge, so the fits
differ only through what the least squares weighs: Lapicque's fit is dominated by the
short pulses' large currents, Weiss's by the long pulses' large charges. I_rh is the
rheobase and c the chronaxie, the duration at which the threshold is twice the
rheobase (Lapicque's definition); that duration is also read off the computed curve
directly (``chronaxie_direct``, by log-log interpolation) to show how well each law fits.
"""

from __future__ import annotations

import numpy as np
import xarray as xr

from cable import __version__
from cable.case import CaseError
from cable.io.schema import CONVENTIONS
from cable.protocols import _pacing
from cable.simulate import SimulationError, simulate

MODES = ("strand", "cell")

#: default relative width of the final bracket on the amplitude
DEFAULT_TOLERANCE = 0.01
#: the amplitude search gives up above this factor times the first guess
MAX_GROWTH = 2.0 ** 16


def strength_duration(case, durations, *, tolerance: float = DEFAULT_TOLERANCE, mode: str = "strand",
                      observe: float | None = None, info=None) -> xr.Dataset:
    """Threshold amplitude against stimulus duration, with Lapicque's and Weiss's fits.

    Parameters
    ----------
    case : str, pathlib.Path, dict or Case
        The case; its first ``[[stimulus]]`` gives the site (x, width) and the first
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
        import difflib

        near = difflib.get_close_matches(str(mode), MODES, n=1)
        hint = f" Did you mean {near[0]!r}?" if near else ""
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

    def excites(amplitude, duration):
        trial = _pacing.variant(case, stimuli=[_pacing.pulse(site, amplitude=amplitude, duration=duration)],
                                duration=duration + watch, single_cell=(mode == "cell"))
        try:
            ds = simulate(trial)
        except SimulationError:
            return None  # numerical failure at this amplitude: treat as beyond the search
        return _pacing.propagated(ds, 0, site) if mode == "strand" else _pacing.captured(ds, 0)

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
        value, count, note = _bisect(excites, d, lo, hi, tolerance)
        thresholds[k], trials[k] = value, count
        if note:
            notes.append(note)
        say(f"duration {d:g} ms: threshold {value:.5g} uA/cm^2 ({count} runs)")
        if np.isfinite(value):
            prev = (value, d)
    return _result(case, durs, thresholds, trials, tolerance, mode, watch, site, notes)


def _bisect(excites, d, lo, hi, tolerance):
    """Bracket then bisect the threshold amplitude at duration ``d``; (value, runs, note)."""
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
        mid = 0.5 * (lo + hi)
        if test(mid) is True:
            hi = mid
        else:
            lo = mid
    return hi, runs, ""


def fit_lapicque(durations, thresholds):
    """Least squares of I = a + b/d in current: (rheobase a, chronaxie b/a, residuals I - fit)."""
    d, i = np.asarray(durations, float), np.asarray(thresholds, float)
    ok = np.isfinite(i)
    if ok.sum() < 2:
        return np.nan, np.nan, np.full(d.size, np.nan)
    a_mat = np.column_stack([np.ones(ok.sum()), 1.0 / d[ok]])
    (a, b), *_ = np.linalg.lstsq(a_mat, i[ok], rcond=None)
    return float(a), float(b / a), i - (a + b / d)


def fit_weiss(durations, thresholds):
    """Least squares of Q = a d + b in charge: (rheobase a, chronaxie b/a, residuals Q - fit)."""
    d, i = np.asarray(durations, float), np.asarray(thresholds, float)
    q = i * d
    ok = np.isfinite(q)
    if ok.sum() < 2:
        return np.nan, np.nan, np.full(d.size, np.nan)
    a_mat = np.column_stack([d[ok], np.ones(ok.sum())])
    (a, b), *_ = np.linalg.lstsq(a_mat, q[ok], rcond=None)
    return float(a), float(b / a), q - (a * d + b)


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


def _result(case, durs, thr, trials, tolerance, mode, watch, site, notes) -> xr.Dataset:
    charge = thr * durs
    rl, cl, res_l = fit_lapicque(durs, thr)
    rw, cw, res_w = fit_weiss(durs, thr)
    direct = chronaxie_direct(durs, thr, rw)
    cur = {"units": "uA/cm^2"}
    data = {
        "threshold": ("duration", thr, {**cur, "long_name": "threshold stimulus amplitude (an amplitude that excited, "
                                                           "within the tolerance of the true threshold)"}),
        "charge": ("duration", charge, {"units": "nC/cm^2", "long_name": "threshold charge (amplitude x duration)"}),
        "trials": ("duration", trials, {"units": "1", "long_name": "simulations run for this duration"}),
        "lapicque_residual": ("duration", res_l, {**cur, "long_name": "threshold minus Lapicque fit"}),
        "weiss_residual": ("duration", res_w, {"units": "nC/cm^2", "long_name": "charge minus Weiss fit"}),
        "rheobase_lapicque": ((), rl, {**cur, "long_name": "rheobase, Lapicque fit I = I_rh (1 + c/d)"}),
        "chronaxie_lapicque": ((), cl, {"units": "ms", "long_name": "chronaxie, Lapicque fit"}),
        "rheobase_weiss": ((), rw, {**cur, "long_name": "rheobase, Weiss fit Q = I_rh (d + c)"}),
        "chronaxie_weiss": ((), cw, {"units": "ms", "long_name": "chronaxie, Weiss fit"}),
        "chronaxie_direct": ((), direct, {"units": "ms", "long_name": "duration at which the computed threshold "
                                                                       "is twice the Weiss rheobase"}),
        "lapicque_rms_relative_residual": ((), _rms_relative(res_l, thr), {
            "units": "1", "long_name": "root-mean-square of the Lapicque residuals relative to the thresholds"}),
        "weiss_rms_relative_residual": ((), _rms_relative(res_w, charge), {
            "units": "1", "long_name": "root-mean-square of the Weiss residuals relative to the threshold charges"}),
    }
    coords = {"duration": ("duration", durs, {"units": "ms", "long_name": "stimulus pulse duration"})}
    if mode == "cell" and case.fiber is not None and case.fiber.capacitance != 1.0:
        notes.append(f"cell mode runs one cell with C_m = 1 uF/cm^2 (the case's fibre has "
                     f"{case.fiber.capacitance:g} uF/cm^2).")
    attrs = {
        "Conventions": CONVENTIONS,
        "title": f"strength-duration: {case.membrane.model}",
        "protocol": "strength-duration",
        "source": f"cable {__version__}",
        "model": case.membrane.model,
        "mode": mode,
        "capture_criterion": ("the wave reaches the far end of the fibre" if mode == "strand"
                              else "the cell crosses the activation threshold"),
        "tolerance_relative": tolerance,
        "observe_ms": watch,
        "stimulus_x_cm": site.x,
        "stimulus_width_cm": site.width,
        "fits": "Lapicque I = I_rh (1 + c/d) fitted in current; Weiss Q = I_rh (d + c) fitted in charge",
        "case": case.text,
        "notes": "\n".join(notes),
        "comment": "Research tool; not for clinical decisions.",
    }
    return xr.Dataset(data, coords=coords, attrs=attrs)


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
    lines.append(f"chronaxie read off the curve (threshold = 2 x Weiss rheobase): "
                 f"{float(ds['chronaxie_direct']):.4g} ms")
    if ds.attrs.get("notes"):
        lines.append("notes: " + ds.attrs["notes"])
    return "\n".join(lines)
