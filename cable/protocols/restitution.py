"""Restitution: APD90, CV and wavelength against the diastolic interval.

Two protocols (both common practice):

* ``"s1s2"``: an S1 train at ``cycle_length``, then one S2 at each coupling interval
  (one simulation per interval, longest first, stopping after the first S2 that fails
  to propagate);
* ``"dynamic"``: one simulation pacing ``beats`` beats at each cycle length in turn,
  longest first; each cycle length is represented by its last beat.

APD90 and the diastolic interval are read at the centre of the CV window (a single
cell: at the cell), where :func:`cable.simulate` also measures the wavelength:
DI = activation of the beat - (activation + APD90) of the beat before it. The maximal
slope of the APD restitution curve is the largest finite-difference slope between
neighbouring points ordered by DI; a slope above 1 is the classical condition for
alternans (Nolasco & Dahlen 1968, J Appl Physiol 25:191; from memory).
"""

from __future__ import annotations

import numpy as np
import xarray as xr

from cable.case import CaseError
from cable.io import schema
from cable.protocols.base import Protocol
from cable.measure.activation import CAPTURE_LATENCY
from cable.protocols import _pacing
from cable.protocols.refractory import TRANSIT_FACTOR, s1_train
from cable.simulate import simulate

PROTOCOLS = ("s1s2", "dynamic")
#: default number of coupling intervals / cycle lengths
DEFAULT_POINTS = 12
#: shortest default diastolic interval, as a fraction of the S1 APD90
SHORTEST_DI_FRACTION = 0.02
#: default beats per cycle length in the dynamic protocol
DEFAULT_BEATS = 5


def restitution(case, intervals=None, protocol: str = "s1s2", *, cycle_length: float | None = None,
                s1_count: int | None = None, beats: int = DEFAULT_BEATS, observe: float | None = None,
                info=None) -> xr.Dataset:
    """APD90 and CV restitution by S1-S2 or dynamic pacing.

    Parameters
    ----------
    case : str, pathlib.Path, dict or Case
        The case; its first ``[stimulus.NAME]`` gives the site, amplitude, duration and
        (when ``count > 1``) the default ``cycle_length`` and ``s1_count``.
    intervals : sequence of float, optional
        S1-S2 coupling intervals (``"s1s2"``) or cycle lengths (``"dynamic"``) [ms].
        Default: ``DEFAULT_POINTS`` values whose diastolic intervals run geometrically
        from ``cycle_length - APD90`` down to ``SHORTEST_DI_FRACTION`` x APD90.
    protocol : {"s1s2", "dynamic"}
    cycle_length : float, optional
        S1 (basic) cycle length [ms].
    s1_count : int, optional
        S1 pulses before each S2.
    beats : int
        Dynamic protocol: beats at each cycle length.
    observe : float, optional
        S1-S2: how long each S2 is watched [ms]; default the S1 APD90 plus four S1 transit times.
    info : callable, optional
        Receives one line per point.

    Returns
    -------
    xarray.Dataset
        Per point (dimension ``point``): ``interval`` (coupling interval or cycle
        length), ``diastolic_interval``, ``apd90`` [ms], ``conduction_velocity``
        [m/s], ``wavelength_apd`` [cm] (CV x APD90), ``propagated``; scalars ``max_slope`` and
        ``max_slope_di`` [ms], ``apd90_s1`` [ms].
    """
    who = "restitution"
    case = _pacing.as_case(case)
    if protocol not in PROTOCOLS:
        from cable.suggest import did_you_mean

        hint = did_you_mean(protocol, PROTOCOLS)
        raise CaseError(f"{who}: protocol = {protocol!r}; allowed values are 's1s2', 'dynamic'.{hint}")
    site = _pacing.stimulus_site(case, who)
    n1, cl = s1_train(case, site, who, s1_count, cycle_length)
    if cl <= 0:
        raise CaseError(f"{who}: needs a basic cycle length; pass cycle_length= (--cycle-length) or set "
                        f"stimulus.0.cycle_length.")
    say = info or (lambda msg: None)
    s1 = _pacing.pulse(site, amplitude=site.amplitude, duration=site.duration, count=n1, cycle_length=cl)
    last = (n1 - 1) * cl
    ref = simulate(_pacing.variant(case, stimuli=[s1], duration=last + cl))
    centre = _pacing.cv_centre(case)
    node = _pacing.node_index(ref, centre if centre is not None else 0.0)
    apd1 = _pacing.apd90(ref, n1 - 1, node)
    if not np.isfinite(apd1):
        raise CaseError(f"{who}: the last S1 beat has no APD90 at the measurement site (no capture or no "
                        f"repolarisation within cycle_length = {cl:g} ms).")
    if intervals is None:
        dis = np.geomspace(max(cl - apd1, 1.0), max(SHORTEST_DI_FRACTION * apd1, 1.0), DEFAULT_POINTS)
        values = apd1 + dis
    else:
        try:
            values = np.array(sorted({float(v) for v in intervals}, reverse=True))
        except (TypeError, ValueError):
            raise CaseError(f"{who}: intervals = {intervals!r} must be numbers [ms].") from None
        if values.size == 0 or np.any(~np.isfinite(values)) or np.any(values <= site.duration):
            raise CaseError(f"{who}: intervals = {list(intervals)!r} must be longer than the pulse "
                            f"duration {site.duration:g} ms.")
    if protocol == "s1s2":
        act = ref["activation_time"].values[n1 - 1]
        transit = float(np.nanmax(act) - np.nanmin(act)) if case.fiber is not None else 0.0
        watch = (apd1 + TRANSIT_FACTOR * transit + CAPTURE_LATENCY) if observe is None else \
            _pacing.positive(who, "observe", observe)
        rows = _s1s2(case, site, s1, n1, last, values, watch, node, say)
    else:
        if isinstance(beats, bool) or not isinstance(beats, (int, np.integer)) or beats < 2:
            raise CaseError(f"{who}: beats = {beats!r} must be a whole number of at least 2 (the last beat of "
                            f"each cycle length needs one before it).")
        rows = _dynamic(case, site, values, int(beats), node, say)
    return _result(case, protocol, rows, apd1, n1, cl, beats, node, ref)


def _beat_row(ds, b, node, site, interval):
    a_prev = _pacing.activation(ds, b - 1, node)
    apd_prev = _pacing.apd90(ds, b - 1, node)
    a = _pacing.activation(ds, b, node)
    apd = _pacing.apd90(ds, b, node)
    prop = _pacing.propagated(ds, b, site) if "x" in ds.dims else _pacing.captured(ds, b)
    cv = float(ds["conduction_velocity"].values[b]) if "conduction_velocity" in ds and prop else np.nan
    if not prop:
        a = apd = np.nan
    return {"interval": interval, "di": a - (a_prev + apd_prev), "apd": apd, "cv": cv, "propagated": prop}


def _s1s2(case, site, s1, n1, last, values, watch, node, say):
    rows = []
    for ci in values:
        s2 = _pacing.pulse(site, amplitude=site.amplitude, duration=site.duration, start=last + ci)
        ds = simulate(_pacing.variant(case, stimuli=[s1, s2], duration=last + ci + watch))
        row = _beat_row(ds, n1, node, site, float(ci))
        rows.append(row)
        say(f"S1-S2 {ci:g} ms: DI {row['di']:.4g} ms, APD90 {row['apd']:.4g} ms, CV {row['cv']:.4g} m/s")
        if not row["propagated"]:
            break
    return rows


def _dynamic(case, site, values, beats, node, say):
    stimuli, start = [], 0.0
    for cl in values:
        stimuli.append(_pacing.pulse(site, amplitude=site.amplitude, duration=site.duration, start=start,
                                     count=beats, cycle_length=float(cl)))
        start += beats * cl
    ds = simulate(_pacing.variant(case, stimuli=stimuli, duration=start))
    rows = []
    for k, cl in enumerate(values):
        b = (k + 1) * beats - 1
        row = _beat_row(ds, b, node, site, float(cl))
        block = range(k * beats, (k + 1) * beats)
        ok = all(_pacing.propagated(ds, j, site) if "x" in ds.dims else _pacing.captured(ds, j) for j in block)
        row["one_to_one"] = ok
        rows.append(row)
        say(f"cycle length {cl:g} ms: DI {row['di']:.4g} ms, APD90 {row['apd']:.4g} ms, CV {row['cv']:.4g} m/s"
            + ("" if ok else " (not 1:1)"))
    return rows


def max_slope(di, apd):
    """Largest slope dAPD/dDI between neighbours ordered by DI, and the DI [ms] where it is."""
    di, apd = np.asarray(di, float), np.asarray(apd, float)
    ok = np.isfinite(di) & np.isfinite(apd)
    di, apd = di[ok], apd[ok]
    if di.size < 2:
        return np.nan, np.nan
    order = np.argsort(di)
    di, apd = di[order], apd[order]
    step = np.diff(di)
    good = step > 0
    if not good.any():
        return np.nan, np.nan
    slopes = np.diff(apd)[good] / step[good]
    mid = (0.5 * (di[1:] + di[:-1]))[good]
    k = int(np.argmax(slopes))
    return float(slopes[k]), float(mid[k])


def _result(case, protocol, rows, apd1, n1, cl, beats, node, ref) -> xr.Dataset:
    col = lambda key: np.array([r[key] for r in rows], dtype=float)  # noqa: E731
    di, apd, cv = col("di"), col("apd"), col("cv")
    wavelength = cv / 10.0 * apd  # m/s -> cm/ms, times ms
    slope, slope_di = max_slope(di, apd)
    data = {"diastolic_interval": di, "apd90": apd, "conduction_velocity": cv, "wavelength_apd": wavelength,
            "propagated": col("propagated").astype(np.int8), "max_slope": slope, "max_slope_di": slope_di,
            "apd90_s1": apd1}
    if protocol == "dynamic":
        data["one_to_one"] = col("one_to_one").astype(np.int8)
    x = ref["x"].values[node] if "x" in ref.dims else np.nan
    attrs = {"s1_count": n1, "basic_cycle_length_ms": cl, "beats_per_cycle_length": beats if protocol == "dynamic" else 0,
             "measurement_x_cm": float(x)}
    return schema.dataset("restitution", data, {"interval": col("interval")}, attrs, case=case, description=protocol,
                          title=f"restitution ({protocol}): {case.membrane.model}")


def summary(ds: xr.Dataset) -> str:
    """A table of the restitution points and the maximal slope."""
    head = "S1-S2_ms" if ds.attrs["protocol"] == "s1s2" else "CL_ms"
    lines = [f"restitution ({ds.attrs['protocol']}): {ds.attrs['model']}; basic cycle length "
             f"{ds.attrs['basic_cycle_length_ms']:g} ms, APD90 there {float(ds['apd90_s1']):.4g} ms",
             f"{head:>9}  DI_ms    APD90_ms  CV_m/s   wavelength_apd_cm  propagated"]
    for k in range(ds.sizes["point"]):
        p = ds.isel(point=k)
        lines.append(f"{float(p['interval']):9.5g}  {float(p['diastolic_interval']):7.4g}  {float(p['apd90']):8.4g}  "
                     f"{float(p['conduction_velocity']):7.4g}  {float(p['wavelength_apd']):17.4g}  "
                     f"{'yes' if int(p['propagated']) else 'no'}")
    lines.append(f"maximal APD restitution slope {float(ds['max_slope']):.3g} at DI {float(ds['max_slope_di']):.4g} ms")
    return "\n".join(lines)


def figure(ds, fig) -> None:
    """APD90 and CV against DI (:mod:`cable.plot.protocol_figures.restitution`)."""
    from cable.plot.protocol_figures.restitution import figure as draw

    draw(ds, fig)


PROTOCOL = Protocol(name="restitution", title="restitution", run=restitution, summary=summary, figure=figure,
                    command="restitution", order=30, legacy=lambda ds: "max_slope" in ds.variables)
