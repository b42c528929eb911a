"""Convergence certificate: rerun a case on refined grids and estimate its discretisation error.

Level k runs the case with dx / 2^k and a time step scaled with it (``ratio``); the
conduction velocity (and APD90 at the centre of the CV window, where it applies) of
one beat is compared across levels:

* observed order p = log2(|f1 - f2| / |f2 - f3|) from the three finest levels;
* Richardson extrapolation f* = f3 + (f3 - f2) / (2^p - 1) (Richardson 1911, Phil Trans
  R Soc A 210:307; from memory);
* the estimated error of the user's own resolution, |f1 - f*| / |f*|.

Which ratio. The scheme is second order in space (three-point operator) but first
order in time: the diffusion step (Crank-Nicolson) and Strang splitting are second
order (Strang 1968, SIAM J Numer Anal 5:506; from memory), but the reaction step every
model uses is first order (Rush-Larsen gates, then an explicit Euler step of V; see
:mod:`cable.membrane.base`), and it limits the composite to first order in dt. Keeping
D dt / dx^2 fixed (``ratio="dt/dx^2"``, the default: dt divided by 4 at each level)
makes both leading errors scale as dx^2, so the formal order in dx is 2 and the
Richardson step rests on one error term. Keeping dt / dx fixed (``"dt/dx"``, dt halved
at each level, 8 instead of 64 times the work at the third level) leaves
A dx^2 + B dx, of formal order 1 once the dt term dominates. With a second-order
reaction step (``numerics.reaction = "rush-larsen-2"``, ``"heun"``, ``"rk4"``; see
:mod:`cable.kernels.schemes`), Strang splitting and Crank-Nicolson the scheme is second
order in dt, and the formal order is 2 with either ratio (:func:`time_order`). In every
case the order used in the extrapolation is the one observed from the data when it is
in :data:`ORDER_RANGE` and the sequence is monotone; the formal one otherwise. The output interval is
scaled like dt so that the APD (interpolated between samples) refines too.

Separate series. Refined together, the dx and dt errors cannot be told apart, so two
more series of ``SERIES_LEVELS`` runs each are made from the case's own grid: dx halved
at the case's dt (the space error, order 2), and dt halved at the case's dx (the time
error, order 1). Each gives its own Richardson estimate of the error of the case's dx
(or dt) alone, and from the error law e(h) = e0 (h/h0)^p the dx and the dt at which each
error is half the tolerance (``tolerance``, default 2 %), so that together they stay
within it. The warning recommends those. With forward-Euler diffusion the dx series at
fixed dt would leave the stability limit; it is not run.

A grid too coarse for the model can block a wave that the continuum carries (discrete
propagation failure; Keener 1987, SIAM J Appl Math 47:556; from memory): when the
user's grid blocks and the finer grids conduct (every grid from some level on, the finest
included), the result says so and names the coarsest grid that conducts.
"""

from __future__ import annotations

import numpy as np
import xarray as xr

from cable.case import CaseError
from cable.io import schema
from cable.protocols.base import Protocol
from cable.protocols import _pacing
from cable.simulate import SimulationError, simulate

RATIOS = ("dt/dx^2", "dt/dx")
#: formal orders of the scheme in dx and in dt (see the module docstring)
SPACE_ORDER = 2
TIME_ORDER = 1
#: relative error of the user's resolution above which a warning is given (the default
#: tolerance of the recommendation too)
WARN_RELATIVE_ERROR = 0.02
#: runs in each of the separate dx and dt series (the case's own run included)
SERIES_LEVELS = 3
#: observed orders outside this range are not used for extrapolation (the formal one is)
ORDER_RANGE = (0.5, 4.0)


def time_order(numerics) -> int:
    """Formal order in dt of a case's scheme: 2 with a second-order reaction step
    (``numerics.reaction``, :data:`cable.kernels.schemes.ORDER`), Strang splitting and
    Crank-Nicolson diffusion; 1 otherwise (Godunov, backward or forward Euler, or the
    first-order Rush-Larsen step)."""
    from cable.kernels.schemes import ORDER

    if numerics.splitting == "strang" and numerics.diffusion == "crank-nicolson":
        return min(2, ORDER[numerics.reaction])
    return TIME_ORDER


def formal_order(ratio: str, time: int = TIME_ORDER) -> float:
    """Formal order in dx of the scheme refined with ``ratio``, for order ``time`` in dt."""
    return float(min(SPACE_ORDER, time * (2 if ratio == "dt/dx^2" else 1)))


def convergence(case, levels: int = 3, *, ratio: str = "dt/dx^2", beat: int = -1, base=None,
                info=None, tolerance: float = WARN_RELATIVE_ERROR, separate: bool = True) -> xr.Dataset:
    """Rerun ``case`` at dx, dx/2, dx/4 ... and certify its CV (and APD90).

    Parameters
    ----------
    case : str, pathlib.Path, dict or Case
        A strand case; level 0 is the case as given.
    levels : int
        Number of grids (at least 3).
    ratio : {"dt/dx^2", "dt/dx"}
        What is held fixed as dx is halved (see the module docstring).
    beat : int
        Which beat is measured (default the last).
    base : xarray.Dataset, optional
        The result of the case as given, when already computed (``cable run --certify``).
    info : callable, optional
        Receives one line per level.
    tolerance : float
        Relative error the recommended dx and dt should reach together (default 2 %).
    separate : bool
        Also run the separate dx series (fixed dt) and dt series (fixed dx).

    Returns
    -------
    xarray.Dataset
        Per ``level``: ``dx`` [cm], ``dt`` [ms], ``conduction_velocity`` [m/s],
        ``apd90`` [ms], ``propagated``; scalars ``cv_observed_order``,
        ``cv_extrapolated`` [m/s], ``cv_relative_error`` (of level 0), and the same
        for APD90; attributes ``warning`` and ``numerical_block``. With ``separate``:
        ``cv_dx_series(dx_level)`` at the case's dt and ``cv_dt_series(dt_level)`` at
        the case's dx (and the APD90 alike), ``cv_space_error``, ``cv_time_error`` and
        ``dx_recommended`` [cm], ``dt_recommended`` [ms].

    Raises
    ------
    CaseError
        No fibre, fewer than 3 levels, an unknown ratio, or forward-Euler diffusion
        refined with ``"dt/dx"`` (unstable on the finer grids).
    """
    who = "convergence"
    case = _pacing.as_case(case)
    if case.fiber is None:
        raise CaseError(f"{who}: a single cell has no dx to refine; the certificate needs a [fiber].")
    if isinstance(levels, bool) or not isinstance(levels, (int, np.integer)) or levels < 3:
        raise CaseError(f"{who}: levels = {levels!r} must be a whole number of at least 3 (the observed order "
                        f"needs three grids).")
    if ratio not in RATIOS:
        from cable.suggest import did_you_mean

        hint = did_you_mean(ratio, RATIOS)
        raise CaseError(f"{who}: ratio = {ratio!r}; allowed values are 'dt/dx^2', 'dt/dx'.{hint}")
    if ratio == "dt/dx" and case.numerics.diffusion == "forward-euler":
        raise CaseError(f"{who}: ratio = 'dt/dx' with numerics.diffusion = 'forward-euler' breaks the stability "
                        f"limit on the finer grids; use ratio = 'dt/dx^2' or diffusion = 'crank-nicolson'.")
    tolerance = _pacing.positive(who, "tolerance", tolerance)
    site = _pacing.stimulus_site(case, who)
    say = info or (lambda msg: None)
    shrink = 4.0 if ratio == "dt/dx^2" else 2.0
    fib, num = case.fiber, case.numerics

    def run(label, dx, dt):
        # output.every stays: it is a multiple of every finer dt, CV comes from the kernel's
        # interpolated crossings, and APD from interpolated samples (an error second order in
        # output.every, the same at every level) -- while the stored field, and memory, stay
        # the size of the case's own
        refined = case.with_overrides({"fiber.dx": dx, "numerics.dt": dt,
                                       **({} if case.stop_when_quiet is not None else {"run.stop_when_quiet": True})})
        try:
            ds = simulate(refined)
        except SimulationError as exc:
            raise CaseError(f"{who}: {label} (dx = {dx:g} cm, dt = {dt:g} ms) failed numerically: {exc}") from None
        r = _measure(ds, beat, site, case, dx, dt)
        say(f"{label}: dx {dx:.6g} cm, dt {dt:.6g} ms: CV {r['cv']:.6g} m/s, APD90 {r['apd']:.6g} ms"
            + ("" if r["propagated"] else " (no propagation)"))
        return r

    rows = []
    for k in range(int(levels)):
        dx, dt = fib.dx / 2 ** k, num.dt / shrink ** k
        if k == 0 and base is not None:
            rows.append(_measure(base, beat, site, case, dx, dt))
        else:
            rows.append(run(f"level {k}", dx, dt))
    series = None
    if separate:
        series = {"dt": [rows[0]] + [run(f"dt series {k}", fib.dx, num.dt / 2 ** k) for k in range(1, SERIES_LEVELS)]}
        if num.diffusion != "forward-euler":
            series["dx"] = [rows[0]] + [run(f"dx series {k}", fib.dx / 2 ** k, num.dt)
                                        for k in range(1, SERIES_LEVELS)]
    return _result(case, rows, ratio, beat, site, series=series, tolerance=tolerance)


def separate_errors(values, h0: float, order: float, tolerance: float):
    """(error of the first value, observed order, step reaching ``tolerance``) of one series.

    ``values`` come from steps h0, h0/2, h0/4...; the error of the first is estimated by
    Richardson extrapolation (formal ``order`` where the observed one is unusable), and
    the step at which e(h) = e0 (h/h0)^p equals ``tolerance`` is returned (h0 itself when
    e0 is already below it).
    """
    p, used, ext, _note = richardson(values, formal=order)
    f0 = float(np.asarray(values, dtype=float)[0])
    if not (np.isfinite(ext) and ext != 0 and np.isfinite(f0)):
        return np.nan, p, np.nan
    err = abs(f0 - ext) / abs(ext)
    if err <= tolerance or err == 0.0:
        return err, p, h0
    return err, p, h0 * (tolerance / err) ** (1.0 / used)


def _measure(ds, beat, site, case, dx, dt):
    nb = ds.sizes.get("beat", 0)
    b = beat if beat >= 0 else nb + beat
    if not 0 <= b < nb:
        return {"dx": dx, "dt": dt, "cv": np.nan, "apd": np.nan, "propagated": False}
    prop = _pacing.propagated(ds, b, site)
    cv = float(ds["conduction_velocity"].values[b]) if prop else np.nan
    apd = _pacing.apd90(ds, b, _pacing.node_index(ds, _pacing.cv_centre(case))) if prop else np.nan
    return {"dx": dx, "dt": dt, "cv": cv, "apd": apd, "propagated": prop}


def richardson(values, ratio: str = "dt/dx^2", time: int | None = None, *, formal: float | None = None):
    """(observed order, order used, extrapolated value, note) from a sequence on grids halved each
    time; the observed order is used unless it is out of range or the sequence oscillates, the formal
    one then: ``formal`` if given, else that of ``ratio`` for order ``time`` in dt (default
    :data:`TIME_ORDER`)."""
    f = np.asarray(values, dtype=float)
    formal = formal_order(ratio, TIME_ORDER if time is None else time) if formal is None else float(formal)
    if f.size < 3 or not np.all(np.isfinite(f[-3:])):
        return np.nan, np.nan, np.nan, "fewer than three finite values"
    f1, f2, f3 = f[-3:]
    d12, d23 = f1 - f2, f2 - f3
    if d23 == 0 or d12 == 0:
        return np.nan, formal, f3, "values identical to rounding; the finest value is taken"
    p = float(np.log2(abs(d12) / abs(d23)))
    note = ""
    used = p
    if d12 * d23 < 0:
        used, note = formal, "oscillatory convergence: extrapolated with the formal order"
    elif not ORDER_RANGE[0] <= p <= ORDER_RANGE[1]:
        used, note = formal, f"observed order {p:.2f} outside {ORDER_RANGE}: extrapolated with the formal order"
    ext = f3 + (f3 - f2) / (2.0 ** used - 1.0)
    return p, used, float(ext), note


def _series_data(series, tolerance, time: int = TIME_ORDER):
    """Variables of the separate dx and dt series, and the recommended dx and dt."""
    data, coords = {}, {}
    rec = {"dx": np.nan, "dt": np.nan}
    errors = {}
    for axis, order in (("dx", SPACE_ORDER), ("dt", time)):
        rows = series.get(axis)
        if rows is None:
            continue
        coords[f"{axis}_series_{axis}"] = np.array([r[axis] for r in rows])
        steps = []
        for name, key in (("cv", "cv"), ("apd90", "apd")):
            f = np.array([r[key] for r in rows], dtype=float)
            data[f"{name}_{axis}_series"] = f
            err, p, h = separate_errors(f, rows[0][axis], order, 0.5 * tolerance)
            kind = "space" if axis == "dx" else "time"
            data[f"{name}_{kind}_error"] = err
            data[f"{name}_{kind}_observed_order"] = p
            errors[(name, axis)] = err
            steps.append(h)
        finite = [h for h in steps if np.isfinite(h)]
        rec[axis] = min(finite) if finite else np.nan
    data["dx_recommended"] = rec["dx"]
    data["dt_recommended"] = rec["dt"]
    return data, coords, rec, errors


def _result(case, rows, ratio, beat, site, series=None, tolerance=WARN_RELATIVE_ERROR) -> xr.Dataset:
    col = lambda key: np.array([r[key] for r in rows], dtype=float)  # noqa: E731
    cv, apd, prop = col("cv"), col("apd"), col("propagated").astype(bool)
    notes, warnings = [], []
    out = {}
    sdata, scoords, rec, serr = _series_data(series, tolerance, time_order(case.numerics)) if series else ({}, {}, None, {})
    for name, f, unit in (("cv", cv, "m/s"), ("apd90", apd, "ms")):
        p, used, ext, note = richardson(f, ratio, time_order(case.numerics))
        err = abs(f[0] - ext) / abs(ext) if np.isfinite(ext) and ext != 0 and np.isfinite(f[0]) else np.nan
        out[name] = (p, used, ext, err)
        if note:
            notes.append(f"{name}: {note}")
        if np.isfinite(err) and err > tolerance:
            advice = "refine dx and dt"
            if rec is not None:
                parts = [f"space {100 * serr[(name, 'dx')]:.1f}%" if np.isfinite(serr.get((name, "dx"), np.nan))
                         else None,
                         f"time {100 * serr[(name, 'dt')]:.1f}%" if np.isfinite(serr.get((name, "dt"), np.nan))
                         else None]
                need = [f"dx <= {rec['dx']:.3g} cm" if np.isfinite(rec["dx"]) else None,
                        f"dt <= {rec['dt']:.3g} ms" if np.isfinite(rec["dt"]) else None]
                advice = (f"of which {', '.join(x for x in parts if x)} (separate series); for "
                          f"{100 * tolerance:g}% use {' and '.join(x for x in need if x) or 'finer dx and dt'}")
            warnings.append(f"the {name.upper() if name == 'cv' else 'APD90'} at the case's resolution (dx = "
                            f"{rows[0]['dx']:g} cm, dt = {rows[0]['dt']:g} ms) is off by an estimated "
                            f"{100 * err:.1f}% (> {100 * tolerance:g}%): {f[0]:.5g} against "
                            f"{ext:.5g} {unit} extrapolated; {advice}.")
    # numerical block: the case's grid fails and the finest grid conducts (the finer grids
    # from the first conducting one on all conduct, so the outcome has settled with dx)
    first = int(np.argmax(prop)) if prop.any() else len(prop)
    block = bool(not prop[0] and prop.any() and prop[first:].all())
    if block:
        coarse = ", ".join(format(r["dx"], "g") for r in rows[1:first])
        also = "" if first == 1 else f" (and at dx = {coarse} cm)"
        warnings.append(f"conduction fails at the case's dx = {rows[0]['dx']:g} cm{also} but succeeds on every "
                        f"grid from dx = {rows[first]['dx']:g} cm down: the block is numerical (a coarse grid can "
                        f"stop a wave the continuum carries; Keener 1987, SIAM J Appl Math 47:556); refine dx "
                        f"to {rows[first]['dx']:g} cm or less.")
    elif not prop.any():
        notes.append("no level propagates: the block persists on every grid tried, so it is not a grid artefact "
                     "at these resolutions.")
    elif not prop.all():
        notes.append(f"propagation differs between levels: {', '.join(str(int(v)) for v in prop)}.")
    data = {"dt": col("dt"), "conduction_velocity": cv, "apd90": apd, "propagated": prop.astype(np.int8)}
    for name in ("cv", "apd90"):
        p, used, ext, err = out[name]
        data.update({f"{name}_observed_order": p, f"{name}_order_used": used, f"{name}_extrapolated": ext,
                     f"{name}_relative_error": err})
    data.update(sdata)
    coords = {"level": np.arange(len(rows)), "dx": col("dx"), **scoords}
    attrs = {
        "ratio": ratio,
        "formal_order": formal_order(ratio, time_order(case.numerics)),
        "refinement": "dx halved per level; "
                      + ("dt / 4 (D dt/dx^2 fixed)" if ratio == "dt/dx^2" else "dt / 2 (dt/dx fixed)")
                      + "; output interval kept",
        "scheme_orders": f"space {SPACE_ORDER}, time {time_order(case.numerics)} (reaction step "
                         f"{case.numerics.reaction})",
        "beat": beat,
        "splitting": case.numerics.splitting,
        "diffusion": case.numerics.diffusion,
        "gating": case.numerics.gating,
        "tolerance_relative": tolerance,
        "warning": "\n".join(warnings),
        "numerical_block": int(block),
        "notes": "\n".join(notes),
    }
    return schema.dataset("converge", data, coords, attrs, case=case, description="grid convergence",
                          title=f"convergence certificate: {case.membrane.model}")


def summary(ds: xr.Dataset) -> str:
    """The certificate as text (the warnings last, each on a line starting with WARNING)."""
    lines = [f"convergence certificate: {ds.attrs['model']}; refinement: {ds.attrs['refinement']}; "
             f"formal order {ds.attrs['formal_order']:g} ({ds.attrs['scheme_orders']})",
             "level  dx_cm       dt_ms        CV_m/s     APD90_ms  propagated"]
    for k in range(ds.sizes["level"]):
        p = ds.isel(level=k)
        lines.append(f"{k:5d}  {float(p['dx']):<10.5g}  {float(p['dt']):<11.5g}  {float(p['conduction_velocity']):9.6g}"
                     f"  {float(p['apd90']):9.6g}  {'yes' if int(p['propagated']) else 'no'}")
    for name, unit in (("cv", "m/s"), ("apd90", "ms")):
        lines.append(f"{'CV' if name == 'cv' else 'APD90'}: observed order {float(ds[f'{name}_observed_order']):.3g}, "
                     f"extrapolated {float(ds[f'{name}_extrapolated']):.6g} {unit}, estimated error at the case's "
                     f"resolution {100 * float(ds[f'{name}_relative_error']):.3g}%")
    for axis, kind, unit in (("dx", "space", "cm"), ("dt", "time", "ms")):
        if f"cv_{kind}_error" in ds:
            lines.append(f"{axis} alone ({axis} series {', '.join(format(v, '.4g') for v in ds[f'{axis}_series_{axis}'].values)}"
                         f" {unit}): CV {kind} error {100 * float(ds[f'cv_{kind}_error']):.3g}%, APD90 "
                         f"{100 * float(ds[f'apd90_{kind}_error']):.3g}%; {axis} for half the tolerance: "
                         f"{float(ds[f'{axis}_recommended']):.3g} {unit}")
    if ds.attrs.get("notes"):
        lines += [f"note: {n}" for n in ds.attrs["notes"].split("\n")]
    if ds.attrs.get("warning"):
        lines += [f"WARNING: {w}" for w in ds.attrs["warning"].split("\n")]
    return "\n".join(lines)


def figure(ds, fig) -> None:
    """CV, its error and APD90 against dx (:mod:`cable.plot.protocol_figures.converge`)."""
    from cable.plot.protocol_figures.converge import figure as draw

    draw(ds, fig)


PROTOCOL = Protocol(name="converge", title="convergence", run=convergence, summary=summary, figure=figure,
                    command="converge", order=40,
                    legacy=lambda ds: ds.attrs.get("protocol") == "grid convergence"
                    or "cv_extrapolated" in ds.variables)
