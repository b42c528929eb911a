"""Calibration: the value of a case key at which a measurement hits a target, on the user's grid.

:func:`calibrate` finds the value of any numeric key (``fiber.conductivity``,
``membrane.scale.G_Na``, ``drug.a.concentration`` ...) for which a measurement of the
run — conduction velocity, APD at a level, wavelength, effective refractory period —
equals a target. It runs the
case as given (its own dx and dt: the conductivity that gives a measured CV at dx 250 um
is not the converged one, and a study run at that dx needs the former; common practice),
so the value found belongs to that grid.

Method: a run at the key's current value, then a second run at the value a power law
predicts, m ~ value^p, with p = 1/2 for the coupling keys (CV grows as the square root
of the diffusivity, hence of the conductivity or the radius; the inverse square root of
the resistivity: the cable equation's scaling, common practice) and p = 1 otherwise.
While the target is not bracketed, the step is widened geometrically (the exponent
re-estimated from the last two runs), up to :data:`MAX_WIDENINGS` times or the key's
allowed range; then :func:`scipy.optimize.brentq` closes the bracket. With ``between``
the two ends are given instead. A target outside what the runs reached is refused
(:class:`UnreachableError`, a :class:`CaseError`: exit 2), saying the range reached.
"""

from __future__ import annotations

import math

import numpy as np
import xarray as xr

from cable.case import Case, CaseError, load_case
from cable.io import schema
from cable.protocols.base import Protocol
from cable.simulate import SimulationError, simulate

#: the measurements a target may name -> unit
MEASURES = {"conduction_velocity": "m/s", "wavelength": "cm", "apd": "ms", "erp": "ms"}
#: an ERP target: each evaluation is an S1-S2 search (:func:`cable.refractory_period`) resolved
#: to this fraction of the target, and the value is sought to ERP_RTOL; the residual is
#: then bounded by the search's resolution, not by brentq's (the ERP is a step function
#: of the key at that resolution)
ERP_RESOLUTION = 1e-3
ERP_RTOL = 1e-3
#: seed exponent of the measurement in the key, m ~ value^p (cable-equation scaling of CV)
SEED_EXPONENT = {"fiber.conductivity": 0.5, "fiber.radius": 0.5, "fiber.axial_resistivity": -0.5,
                 "fiber.surface_to_volume": -0.5, "fiber.gap_junction_conductance": 0.5}
#: default relative tolerance of the value (brentq's rtol): CV ~ sqrt(value) then moves by half of it
DEFAULT_RTOL = 1e-5
#: most times the seed step is widened before the target is declared out of reach
MAX_WIDENINGS = 6
#: most runs a calibration may make
MAX_RUNS = 40


class UnreachableError(CaseError):
    """The target lies outside the range of the measurement the runs reached.

    Attributes
    ----------
    runs : xarray.Dataset
        The runs made (layout of :func:`calibrate`'s result, without ``value``).
    """

    def __init__(self, message, runs=None):
        super().__init__(message)
        self.runs = runs


def parse_target(text: str) -> tuple[str, float, float | None]:
    """``"conduction_velocity=0.6"`` or ``"apd90=250"`` -> (measure, value, level or None)."""
    if "=" not in text:
        raise CaseError(f"--target {text!r}: expected MEASURE=VALUE, e.g. conduction_velocity=0.6.")
    name, value = (s.strip() for s in text.split("=", 1))
    level = None
    if name.startswith("apd") and name[3:]:
        try:
            level = float(name[3:])
        except ValueError:
            level = None
        name = "apd" if level is not None else name
    if name not in MEASURES or (name == "apd" and level is None):
        from cable.suggest import did_you_mean

        names = ["conduction_velocity", "wavelength", "erp", "apd90", "apd50"]
        raise CaseError(f"--target {text!r}: '{name}' is not a measure; allowed: conduction_velocity [m/s], "
                        f"wavelength [cm], erp [ms] (effective refractory period, S1-S2), "
                        f"apdNN [ms] (APD at NN% repolarisation, e.g. apd90)." + did_you_mean(name, names))
    try:
        target = float(value)
    except ValueError:
        raise CaseError(f"--target {text!r}: {value!r} must be a number in {MEASURES[name]}.") from None
    if not math.isfinite(target) or target <= 0:
        raise CaseError(f"--target {text!r}: the target must be a positive finite number in {MEASURES[name]}.")
    return name, target, level


def measure_of(ds: xr.Dataset, measure: str, beat: int, level: float | None) -> float:
    """The measurement of one run: CV or wavelength of ``beat``, or its APD at the CV window's centre."""
    if beat >= ds.sizes.get("beat", 0):
        return math.nan
    if measure == "apd":
        apd = ds["apd"].sel(level=level).isel(beat=beat)
        if "x" not in apd.dims:  # a single cell
            return float(apd)
        window = ds.attrs.get("cv_window_cm")
        centre = float(np.mean(window)) if window is not None else float(ds["x"].mean())
        return float(apd.sel(x=centre, method="nearest"))
    if measure == "wavelength":  # CV x APD90 at the CV window's centre, as simulate stores it
        measure = "wavelength_apd"
    return float(ds[measure].values[beat])


def current_value(case: Case, key: str) -> float | None:
    """The key's value in the loaded case (canonical unit), or None when it cannot be told."""
    from cable.case.names import canonical_key

    try:
        key = canonical_key(key, case.raw)
    except CaseError:
        return None
    parts = key.split(".")
    if parts[0] == "fiber" and len(parts) == 2 and case.fiber is not None:
        return getattr(case.fiber, parts[1], None)
    if parts[:2] in (["membrane", "scale"], ["membrane", "parameters"]) and len(parts) == 3:
        from cable.membrane import get_model

        kind = "conductance" if parts[1] == "scale" else "parameter"
        parts[2] = get_model(case.membrane.model).resolve(parts[2], kind)[0] or parts[2]  # g_Na: G_Na
    if parts[:2] == ["membrane", "scale"] and len(parts) == 3:
        return case.membrane.scale.get(parts[2], 1.0)
    if parts[:2] == ["membrane", "parameters"] and len(parts) == 3:
        from cable.membrane import get_model

        if parts[2] in case.membrane.parameters:
            return case.membrane.parameters[parts[2]]
        try:
            return get_model(case.membrane.model).parameter(parts[2]).default
        except (KeyError, AttributeError):
            return None
    if parts[0] == "drug" and len(parts) == 3 and parts[2] == "concentration":
        for d in case.extra.get("drug", ()):
            if d.name == parts[1]:
                return d.concentration
    if parts[0] == "stimulus" and len(parts) == 3:
        for s in case.stimuli:
            if s.name == parts[1]:
                return getattr(s, parts[2], None)
    return None


def unit_of(case: Case, key: str) -> str:
    """The canonical unit of a key ("" when it cannot be told)."""
    from cable.drugs import key_unit
    from cable.protocols.critical import key_units

    return key_unit(key) or key_units(case, key)


def calibrate(case, key: str, measure: str, target: float, *, level: float | None = None, beat: int = 0,
              between=None, rtol: float | None = None, info=None) -> xr.Dataset:
    """Find the value of ``key`` at which ``measure`` of the run equals ``target``.

    Parameters
    ----------
    case : str, pathlib.Path, dict or Case
        The case, on the grid the value is wanted for.
    key : str
        Dotted numeric case key (``fiber.conductivity``, ``membrane.scale.G_Na`` ...).
    measure : {"conduction_velocity", "wavelength", "apd", "erp"}
        What is matched; ``apd`` needs ``level`` (percent repolarisation) and is read at
        the centre of the CV window; ``erp`` is the effective refractory period of
        :func:`cable.refractory_period` with its defaults (S1 train of the case's first
        stimulus), each evaluation an S1-S2 search resolved to ``ERP_RESOLUTION`` x target.
    target : float
        The target, in m/s, cm or ms.
    level : float, optional
        APD level [%] for ``measure = "apd"``.
    beat : int
        The beat measured (default the first).
    between : (float, float), optional
        The bracket, in the key's canonical unit; default: found from the current value.
    rtol : float, optional
        Relative tolerance of the value (brentq); default 1e-5, for ``erp`` 1e-3.
    info : callable, optional
        Receives one line per run.

    Returns
    -------
    xarray.Dataset
        ``value`` (the value found, canonical unit of the key), ``residual`` (measure at
        ``value`` minus target), and per run (dimension ``run``, in the order made)
        ``run_value`` and ``run_measure``. Attributes: ``key``, ``units``, ``measure``,
        ``measure_units``, ``target``, ``runs``, ``low``, ``high`` (the bracket), ``case``.

    Raises
    ------
    UnreachableError
        The target lies outside the range the runs reached (the message gives it).
    CaseError
        Invalid key, measure or values.
    """
    who = "calibrate"
    case = case if isinstance(case, Case) else load_case(case)
    if case.fiber is None and measure != "apd":
        raise CaseError(f"{who}: {measure} needs a [fiber].")
    if measure not in MEASURES:
        raise CaseError(f"{who}: measure = {measure!r}; allowed: {', '.join(MEASURES)}.")
    if measure == "apd":
        level = 90.0 if level is None else float(level)
        if not 0 < level < 100:
            raise CaseError(f"{who}: level = {level:g} must be a percentage between 0 and 100.")
        if level not in case.apd_levels:
            case = case.with_overrides({"measure.apd_levels": [*case.apd_levels, level]})
    if not (math.isfinite(target) and target > 0):
        raise CaseError(f"{who}: target = {target!r} must be a positive finite number in {MEASURES[measure]}.")
    rtol = (ERP_RTOL if measure == "erp" else DEFAULT_RTOL) if rtol is None else float(rtol)
    if not 1e-12 <= rtol < 0.1:
        raise CaseError(f"{who}: rtol = {rtol:g} must lie between 1e-12 and 0.1 (default {DEFAULT_RTOL:g}).")
    unit = unit_of(case, key)
    say = info or (lambda msg: None)
    runs: list[tuple[float, float]] = []
    memo: dict[float, float] = {}

    def run(value: float) -> float:
        value = float(value)
        if value in memo:
            return memo[value]
        if len(runs) >= MAX_RUNS:
            raise CaseError(f"{who}: no convergence within {MAX_RUNS} runs; give a bracket with between.")
        # an invalid key or value fails here, nothing run; the run stops when quiet unless the case says
        variant = case.with_overrides({key: value, **_quiet_default(case)})
        try:
            m = _erp(variant, target) if measure == "erp" else measure_of(simulate(variant), measure, beat, level)
        except SimulationError as exc:
            raise SimulationError(f"{who}: the run at {key} = {value:g} failed: {exc}", time=exc.time,
                                  position=exc.position, partial=exc.partial) from None
        memo[value] = m
        runs.append((value, m))
        shown = f" {unit}" if unit and unit != "1" else ""
        say(f"{key} = {value:.8g}{shown}: {_name(measure, level)} = {m:.6g} {MEASURES[measure]}")
        return m

    if between is not None:
        lo, hi = sorted(float(v) for v in between)
        if not lo < hi:
            raise CaseError(f"{who}: between = {list(between)}: give two different values.")
        bracket = (lo, hi) if _straddles(run(lo), run(hi), target) else None
    else:
        bracket = _seek(case, key, target, run)
    if bracket is None:
        reached = [m for _, m in runs if math.isfinite(m)]
        values = [v for v, _ in runs]
        span = (f"{min(reached):.6g} to {max(reached):.6g} {MEASURES[measure]}" if reached else "nothing")
        failed = [v for v, m in runs if not math.isfinite(m)]
        if failed:
            span += (f" (no measurement, block or no capture, at {', '.join(f'{v:.6g}' for v in failed)})")
        ds = _result(case, key, unit, measure, level, target, runs, math.nan, math.nan, None)
        raise UnreachableError(f"{who}: {_name(measure, level)} = {target:g} {MEASURES[measure]} is out of reach "
                               f"for {key} between {min(values):.6g} and {max(values):.6g}"
                               f"{' ' + unit if unit and unit != '1' else ''}: the runs reached {span}. "
                               f"Give a wider --between, or a target inside that range.", runs=ds)
    from scipy.optimize import brentq

    lo, hi = bracket
    found = brentq(lambda v: run(v) - target, lo, hi, rtol=rtol, xtol=1e-300, maxiter=MAX_RUNS)
    residual = run(found) - target
    return _result(case, key, unit, measure, level, target, runs, found, residual, bracket)


def _erp(case: Case, target: float) -> float:
    """The effective refractory period [ms] of ``case``; NaN when no S2 propagates."""
    from cable.protocols.refractory import refractory_period

    try:
        return float(refractory_period(case, tolerance=ERP_RESOLUTION * target).erp)
    except SimulationError:
        raise
    except CaseError as exc:
        if "not propagate" in str(exc):  # the S1 train or every S2 fails (refractory_period's refusals)
            return math.nan  # no S2 gets through (nor the S1 train): nothing to match here
        raise


def _straddles(a: float, b: float, target: float) -> bool:
    return math.isfinite(a) and math.isfinite(b) and (a - target) * (b - target) <= 0


def _seek(case, key, target, run):
    """A bracket from the current value, widened geometrically; None when out of reach."""
    v0 = current_value(case, key)
    if v0 is None or not math.isfinite(v0) or v0 <= 0:
        raise CaseError(f"calibrate: the current value of {key} cannot be read from the case (or is not "
                        f"positive); give the bracket with --between LOW HIGH.")
    m0 = run(v0)
    if not math.isfinite(m0):
        raise CaseError(f"calibrate: at the case's own {key} = {v0:g} the measurement is undefined (block or no "
                        f"capture); give the bracket with --between LOW HIGH.")
    if m0 == target:
        return (v0, v0)
    p = SEED_EXPONENT.get(key, 1.0)
    v_prev, m_prev = v0, m0
    first = min(max((target / m0) ** (1.0 / p), 1 / 16), 16)  # the power-law prediction, as a factor
    first = first * (1.0 + 0.02 * (1 if first >= 1 else -1))  # a little beyond it, so that it brackets
    step, flipped = first, False
    for _ in range(MAX_WIDENINGS + 2):
        v = v_prev * step
        m = run(v)
        if _straddles(m_prev, m, target):
            return (min(v_prev, v), max(v_prev, v))
        if not math.isfinite(m):
            return None  # block or no capture beyond: the target lies past what conducts
        toward = (m - m_prev) * (target - m) > 0
        if not toward and not flipped and v_prev == v0:
            # the measurement moved away: the key acts the other way round (a guessed exponent)
            step, flipped = 1.0 / first, True
            continue
        if not toward or m <= 0 or m_prev <= 0 or m == m_prev:
            return None  # moving away from the target both ways: beyond an extremum, out of reach
        p_local = math.log(m / m_prev) / math.log(v / v_prev)
        step = min(max((target / m) ** (1.0 / p_local), 1 / 16), 16) ** 1.5  # widen: a bracket, not a guess
        v_prev, m_prev = v, m
    return None


def _name(measure, level):
    return f"APD{level:g}" if measure == "apd" else measure


def _result(case, key, unit, measure, level, target, runs, value, residual, bracket) -> xr.Dataset:
    mu = MEASURES[measure]
    data = {"value": float(value), "residual": float(residual), "run_value": np.array([v for v, _ in runs]),
            "run_measure": np.array([m for _, m in runs])}
    attrs = {"key": key, "units": unit, "measure": _name(measure, level), "measure_units": mu,
             "target": float(target), "runs": len(runs),
             "dx_cm": float(case.fiber.dx) if case.fiber is not None else math.nan,
             "dt_ms": float(case.numerics.dt)}
    if bracket is not None:
        attrs.update(low=float(bracket[0]), high=float(bracket[1]))
    return schema.dataset("calibrate", data, {"run": np.arange(len(runs))}, attrs, case=case,
                          description="calibration", title=f"cable calibration: {key}")


def summary(ds: xr.Dataset) -> str:
    """The result as a few lines; the last reads ``KEY = VALUE UNIT``."""
    a = ds.attrs
    unit = a.get("units", "")
    unit = unit if unit and unit != "1" else ""
    lines = [f"calibration of {a['key']} for {a['measure']} = {a['target']:g} {a['measure_units']} "
             f"(dx {a.get('dx_cm', math.nan):g} cm, dt {a['dt_ms']:g} ms)",
             f"runs: {a['runs']}   bracket: {a.get('low', math.nan):.8g} to {a.get('high', math.nan):.8g}"
             f"{' ' + unit if unit else ''}   residual: {float(ds['residual']):.3g} {a['measure_units']}",
             f"{a['key']} = {float(ds['value']):.8g}{' ' + unit if unit else ''}"]
    return "\n".join(lines)


def _quiet_default(case) -> dict:
    """``run.stop_when_quiet = true`` unless the case gives it (the protocols' default, cable/quiet.py)."""
    return {} if case.stop_when_quiet is not None else {"run.stop_when_quiet": True}


def figure(ds, fig) -> None:
    """The runs, the target and the value found (:func:`cable.plot.calibration`)."""
    from cable.plot.studies import calibration

    calibration(ds, fig.add_subplot())


PROTOCOL = Protocol(name="calibrate", title="calibration", run=calibrate, summary=summary, figure=figure,
                    command="calibrate", order=50, legacy=lambda ds: ds.attrs.get("protocol") == "calibration")
