"""The critical value of a case key at which conduction through the strand turns into block.

:func:`find_critical` bisects any numeric case key (a region's conductance factor, its
K_o, its coupling, its length, a stimulus time ...) between two values, one at which
the wave conducts through the whole strand and one at which it does not. Keys are
dotted, list entries by index: ``region.0.scale.g_Na``, ``region.0.end``,
``stimulus.S2.onset``; values are in the key's canonical unit (see ``cable keys``).

"Conducts" means: every judged beat (all beats, or the one given) captured and its
wave reached both ends of the fibre (``conducted`` in the result of
:func:`cable.simulate`). The two ends of the interval are run first and must straddle
block; when they do not, :class:`NoBracketError` says which way both fell. Bisection
assumes one transition inside the interval: where conduction is not monotonic in the
key (raised K_o is supernormal before it depresses) it finds one of the transitions.

When the failing end's stimulus did not excite at all, the transition found is loss of
capture rather than block; the result's ``note`` attribute says so.

The criterion (``criterion``) says what failing means: ``"block"`` (the default: a
judged beat did not conduct), ``"slow-response"`` (a judged beat did not conduct, or
conducted as a slow response: ``slow_response`` of :func:`cable.simulate`), or
``"cv-below=X"`` (a judged beat did not conduct, or its CV was below X m/s).

A run in which a judged beat was still travelling when the run ended (``timed_out``)
says nothing about block: it is run again with ``run.duration`` doubled, up to
``MAX_EXTENSIONS`` times, and the search stops with an error if it still times out.

The CV reported on the passing side is that run's CV in the case's ``cv_window`` (put
the window inside the injured region to read the region's CV). Within a few % of the
critical value a passing wave in depressed tissue may linger near failure before it
recovers or reaches the end, so that CV can be a transient far below the slowest
steady CV; read the steady CV a little further on the passing side.
"""

from __future__ import annotations

import math

import numpy as np
import xarray as xr

from cable.case import Case, CaseError, load_case
from cable.io import schema
from cable.protocols._journal import Journal
from cable.protocols.base import Protocol
from cable.simulate import SimulationError, simulate

#: default final bracket width, as a fraction of |high - low| (7 bisections)
DEFAULT_RELATIVE_TOLERANCE = 0.01
#: most runs a search may make (a tolerance far below the interval's scale)
MAX_RUNS = 60
#: times a run that timed out is repeated with run.duration doubled
MAX_EXTENSIONS = 3
#: the criteria of failing (see the module's notes)
CRITERIA = ("block", "slow-response", "cv-below=")


def parse_criterion(text) -> tuple[str, float | None]:
    """``"block"``, ``"slow-response"`` or ``"cv-below=X"`` (X in m/s) -> (kind, X or None)."""
    text = str(text).strip()
    if text in ("block", "slow-response"):
        return text, None
    if text.startswith("cv-below="):
        try:
            limit = float(text.split("=", 1)[1])
        except ValueError:
            limit = float("nan")
        if math.isfinite(limit) and limit > 0:
            return "cv-below", limit
        raise CaseError(f"criterion = {text!r}: cv-below needs a positive speed in m/s, e.g. cv-below=0.1.")
    from cable.suggest import did_you_mean

    hint = did_you_mean(text, ["block", "slow-response", "cv-below=0.1"])
    raise CaseError(f"criterion = {text!r}: allowed are 'block', 'slow-response' and 'cv-below=X' (X in m/s).{hint}")


class NoBracketError(CaseError):
    """The two ends of the interval do not straddle block (both conduct, or both do not).

    Attributes
    ----------
    runs : xarray.Dataset
        The two runs made (same layout as :func:`find_critical`'s result).
    """

    def __init__(self, message, runs=None):
        super().__init__(message)
        self.runs = runs


def key_units(case: Case, key: str) -> str:
    """The canonical unit of a dotted case key ("" when it cannot be told)."""
    from cable.case.key_units import unit_of

    return unit_of(key, case).unit


def _number(who, name, value) -> float:
    try:
        out = float(value)
    except (TypeError, ValueError):
        raise CaseError(f"{who}: {name} = {value!r} must be a number in the key's canonical unit.") from None
    if not math.isfinite(out):
        raise CaseError(f"{who}: {name} = {value!r} must be finite.")
    return out


def _judge(ds: xr.Dataset, beat: int | None, criterion=("block", None)) -> dict:
    """The outcome of one run: passed (``conducted``, under ``criterion``), and what the
    judged beats did."""
    if "reentry_sustained" in ds.variables:
        return _judge_ring(ds)
    nb = ds.sizes.get("beat", 0)
    beats = list(range(nb)) if beat is None else [beat]
    conducted = ds["conducted"].values.astype(bool)
    through = conducted.copy()
    kind, limit = criterion
    slow = ds["slow_response"].values.astype(bool) if "slow_response" in ds else np.zeros(nb, dtype=bool)
    if kind == "slow-response":
        conducted = conducted & ~slow
    elif kind == "cv-below":
        with np.errstate(invalid="ignore"):
            conducted = conducted & (ds["conduction_velocity"].values >= limit)
    timed = ds["timed_out"].values.astype(bool) if "timed_out" in ds else np.zeros(nb, dtype=bool)
    ok = bool(all(conducted[b] for b in beats))
    failed = [b for b in beats if not conducted[b]]
    last = failed[0] if failed else beats[-1]
    return {
        "conducted": ok,
        "captured": bool(ds["captured"].values[last]),
        "blocked": bool(ds["blocked"].values[last]),
        "block_x": float(ds["block_x"].values[last]),
        "cv": float(ds["conduction_velocity"].values[last]),
        "beats_conducted": int(sum(conducted[b] for b in beats)),
        "timed_out": bool(any(timed[b] for b in beats)),
        "front_x": float(next((ds["front_x"].values[b] for b in beats if timed[b]), np.nan)),
        "slow_response": bool(slow[last]),
        "through": bool(through[last]),
        "activation": ds["activation_time"].values[beats[0]],
        "x": ds["x"].values,
    }


def _judge_ring(ds: xr.Dataset) -> dict:
    """A ring's outcome (cable.ring): "conducts" means the reentry was sustained to the end of the run."""
    alive = bool(int(ds["reentry_sustained"].values))
    cv = ds["revolution_cv"].values[1:]
    return {"conducted": alive, "captured": True, "blocked": False, "block_x": math.nan,
            "cv": float(np.nanmean(cv)) if np.isfinite(cv).any() else math.nan, "beats_conducted": int(alive),
            "timed_out": False, "front_x": math.nan, "slow_response": False, "through": alive,
            "activation": np.full(ds.sizes["x"], np.nan), "x": ds["x"].values}


def describe(outcome: dict) -> str:
    """One line on a run's outcome: conducts with its CV, blocked where, or no capture."""
    if outcome["conducted"]:
        cv = outcome["cv"]
        return f"conducts (CV {cv:.4g} m/s)" if np.isfinite(cv) else "conducts"
    if outcome.get("through", False):
        cv = outcome["cv"]
        why = "as a slow response" if outcome.get("slow_response", False) else "below the CV limit"
        return f"conducts {why} (CV {cv:.4g} m/s): fails the criterion"
    if not outcome["captured"]:
        return "no capture (the stimulus did not excite)"
    if outcome["blocked"]:
        return f"blocked at x = {outcome['block_x']:.4g} cm"
    return "does not conduct"


def find_critical(case, key: str, low, high, *, tolerance: float | None = None, beat: int | None = None,
                  log: bool = False, output=None, overwrite: bool = False, info=None,
                  criterion: str = "block", points: int | None = None, workers: int | None = None) -> xr.Dataset:
    """Bisect ``key`` between ``low`` and ``high`` for the value where conduction turns into block.

    Parameters
    ----------
    case : str, pathlib.Path, dict or Case
        The case; it needs a ``[fiber]`` and a ``[stimulus.NAME]``.
    key : str
        Dotted case key, list entries by index (``region.0.scale.g_Na``).
    low, high : float
        Ends of the interval, in the key's canonical unit; low < high.
    tolerance : float, optional
        Width of the final bracket, same unit; default 1 % of ``high - low``. With
        ``log``, the bracket's relative width (its ratio minus 1); default 0.01.
    beat : int, optional
        Judge this beat only; default every beat must conduct.
    log : bool
        Bisect the logarithm of the value (geometric midpoints), for keys that span
        decades such as a coupling factor; needs 0 < low.
    output : str or pathlib.Path, optional
        netCDF file for the runs made (also written when the ends do not straddle).
        With it, an interrupted search started again with the same output reuses the
        runs already made (see :class:`cable.protocols._journal.Journal`).
    overwrite : bool
        Replace an existing ``output``.
    info : callable, optional
        Receives one line per run.
    criterion : str
        What failing means: ``"block"`` (default), ``"slow-response"``, ``"cv-below=X"``
        (X in m/s); see the module's notes.
    points : int, optional
        Values tried per round inside the bracket (default: ``workers``, one run per
        thread; 1 is plain bisection). They divide the bracket evenly (geometrically with ``log``)
        and run together (:mod:`cable.protocols._rounds`); a case that cannot batch
        (a ring, electrodes, the safety factor) is bisected one value per round.
    workers : int, optional
        Threads that share a round's runs (default: the cores free at the start, at most
        2: :func:`cable.protocols._rounds.default_workers`).

    Returns
    -------
    xarray.Dataset
        Per run (dimension ``run``, in the order made): ``value``, ``conducted``,
        ``captured``, ``blocked``, ``block_x`` [cm], ``conduction_velocity`` [m/s],
        ``beats_conducted``, and ``activation_time(run, x)`` of the first judged beat
        (when every run has the same grid). Attributes: ``key``, ``units``, ``low``,
        ``high``, ``tolerance``, ``passing_value``, ``failing_value``,
        ``critical_value`` (their midpoint, geometric with ``log``), ``runs``, ``rounds`` (the
        rounds of runs made together), ``points_per_round``, ``cv_passing_m_per_s`` (the CV
        at the passing end of the bracket), ``case``, and ``note`` when the failing end's
        stimulus did not excite (the transition found is then loss of capture).

    Raises
    ------
    CaseError
        Invalid key, values or options; a run still timed out after ``MAX_EXTENSIONS``
        doublings of ``run.duration``.
    NoBracketError
        The two ends do not straddle block (the message says how each end fell).
    SimulationError
        A run failed numerically (the message names the value).
    """
    who = "find_critical"
    crit = parse_criterion(criterion)
    case = case if isinstance(case, Case) else load_case(case)
    if case.fiber is None:
        raise CaseError(f"{who}: the case has no [fiber]; conduction block needs a strand.")
    if not case.stimuli:
        raise CaseError(f"{who}: the case has no stimulus; add a [stimulus.S1] to start the wave.")
    lo, hi, tol = _interval(who, low, high, tolerance, log)
    if output is not None:
        from cable.io.netcdf import check_target

        check_target(output, overwrite)
    from cable.protocols import _rounds

    workers = _rounds.check_count(who, "workers", _rounds.default_workers() if workers is None else workers)
    points = _rounds.check_count(who, "points", workers if points is None else points)
    if not _rounds.batchable(case):
        points, workers = 1, 1  # a ring's, the electrodes' and the safety factor's runs go alone
    say = info or (lambda msg: None)
    trials = _Trials(case, key, (lo, hi), beat, crit, workers, say)   # invalid keys and beats fail here
    unit, journal = trials.unit, None
    if output is not None:
        # points is not part of the identity: runs are reused by value, whatever the rounds asked
        journal = trials.journal = Journal(output, f"{case.text}\n{key} {lo!r} {hi!r} {tol!r} {beat!r} {log!r} "
                                                   f"{criterion!r}")
        if journal.done:
            say(f"resuming: {len(journal.done)} run(s) of an interrupted search reused from {journal.folder}")

    def finish(ds):
        if output is not None:
            _write(ds, output, overwrite)
            journal.remove()
        return ds

    c_lo, c_hi = trials([lo, hi])
    if c_lo == c_hi:
        ds = finish(_result(case, key, unit, lo, hi, tol, trials.runs, None, None, log, criterion))
        both = "conduct" if c_lo else "fail to conduct"
        hint = ("move the interval toward more severe values" if c_lo else
                "move the interval toward milder values (or check that the stimulus captures)")
        raise NoBracketError(f"{who}: {key} between {lo:g} and {hi:g} does not straddle block: both ends {both} "
                             f"(at {lo:g}: {describe(trials.runs[0][1])}; at {hi:g}: "
                             f"{describe(trials.runs[1][1])}); {hint}.", runs=ds)
    passing, failing = (lo, hi) if c_lo else (hi, lo)
    while _bracket_width(passing, failing, log) > tol:
        values = _rounds.inside(passing, failing, points, tol, log) if points > 1 else \
            [math.sqrt(passing * failing) if log else 0.5 * (passing + failing)]
        passing, failing = _rounds.narrow(passing, failing, values, trials(values))
    ds = _result(case, key, unit, lo, hi, tol, trials.runs, passing, failing, log, criterion)
    ds.attrs.update(rounds=trials.rounds, points_per_round=points)
    fail_outcome = [o for v, o in trials.runs if v == failing][-1]
    if not fail_outcome["captured"]:
        # the search found where the stimulus stops exciting, not where a started wave blocks
        ds.attrs["note"] = (f"at the failing end ({key} = {failing:g}) the stimulus did not excite at all: the "
                            f"transition found is loss of capture, not conduction block; keep the stimulated "
                            f"tissue out of the change, or raise the stimulus.")
        say(f"note: {ds.attrs['note']}")
    return finish(ds)


def _bracket_width(a, b, log) -> float:
    """Width of a bracket: its ratio minus 1 with ``log``, else its difference."""
    return max(a, b) / min(a, b) - 1.0 if log else abs(a - b)


def _interval(who, low, high, tolerance, log):
    """(low, high, tolerance) of the search, checked."""
    lo = _number(who, "low", low)
    hi = _number(who, "high", high)
    if not lo < hi:
        raise CaseError(f"{who}: low = {lo:g} must be less than high = {hi:g}.")
    if log and not lo > 0:
        raise CaseError(f"{who}: log = true needs low > 0 (got low = {lo:g}).")
    if tolerance is None:
        tol = DEFAULT_RELATIVE_TOLERANCE if log else DEFAULT_RELATIVE_TOLERANCE * (hi - lo)
    else:
        tol = _number(who, "tolerance", tolerance)
    if not tol > 0:
        raise CaseError(f"{who}: tolerance = {tol:g} must be positive.")
    if math.log2(_bracket_width(lo, hi, log) / tol) + 2 > MAX_RUNS:
        raise CaseError(f"{who}: tolerance = {tol:g} would need more than {MAX_RUNS} runs over [{lo:g}, {hi:g}]; "
                        f"give a larger tolerance.")
    return lo, hi, tol


class _Trials:
    """The runs of one search: ``trials(values)`` runs the values together (those not in
    the journal) and says whether each conducted; ``runs`` keeps (value, outcome) in the
    order asked, ``rounds`` the rounds that ran something."""

    def __init__(self, case, key, ends, beat, crit, workers, say):
        from cable.quiet import quiet_by_default

        self.case = quiet_by_default(case)  # each run ends when nothing is left to happen, unless the case says
        self.key, self.beat, self.crit, self.workers, self.say = key, beat, crit, workers, say
        self.journal = None   # a Journal when the search has an output file
        self.variants = {v: self.case.with_overrides({key: v}) for v in ends}  # invalid keys fail before any run
        lo = ends[0]
        nbeat = len({round(t, 9) for s in self.variants[lo].stimuli for t in s.onsets()})
        if beat is not None and not 0 <= int(beat) < nbeat:
            raise CaseError(f"find_critical: beat = {beat} is out of range; the case has {nbeat} beat(s) (0 to "
                            f"{nbeat - 1}).")
        self.unit = key_units(case, key)
        self.runs: list[tuple[float, dict]] = []
        self.rounds = 0

    def __call__(self, values) -> list[bool]:
        from cable.protocols import _rounds

        journal, key = self.journal, self.key
        done = {v: journal.get(v) for v in values} if journal is not None else {}
        todo = [v for v in values if done.get(v) is None]
        if todo:
            self.rounds += 1
            for value in todo:
                if value not in self.variants:  # an invalid value fails here, before the round runs
                    self.variants[value] = self.case.with_overrides({key: value})
            fresh = _rounds.run_together([self.variants[v] for v in todo], self.workers)
            for value, ds in zip(todo, fresh):
                outcome = _decide(self.case, ds, key, value, self.beat, self.crit, self.say)
                if journal is not None:
                    journal.put(value, outcome)
                done[value] = outcome
        shown = f" {self.unit}" if self.unit and self.unit != "1" else ""
        for value in values:
            self.runs.append((value, done[value]))
            self.say(f"{key} = {value:.6g}{shown}: {describe(done[value])}{'' if value in todo else ' (reused)'}")
        return [bool(done[v]["conducted"]) for v in values]


def _decide(case, ds, key, value, beat, crit, say) -> dict:
    """The outcome of the run at ``key = value`` from its result ``ds`` (or the
    SimulationError it raised), running it again alone if it timed out."""
    if isinstance(ds, SimulationError):
        raise SimulationError(f"find_critical: the run at {key} = {value:g} failed: {ds}", time=ds.time,
                              position=ds.position, partial=ds.partial) from None
    outcome = _judge(ds, beat, crit)
    if not outcome["timed_out"]:
        return outcome
    return _run_until_decided(case, None, key, value, beat, crit, say, first=ds)


def _run_until_decided(case, variant, key, value, beat, crit, say, first=None) -> dict:
    """The outcome of the run at ``key = value``, with run.duration doubled while a
    judged beat times out (at most MAX_EXTENSIONS times); ``first``: the result of the
    first run when it was made already."""
    who = "find_critical"
    variant = variant or case.with_overrides({key: value})
    duration = variant.duration
    for extension in range(MAX_EXTENSIONS + 1):
        try:
            ds = first if (extension == 0 and first is not None) else simulate(variant)
        except SimulationError as exc:
            raise SimulationError(f"{who}: the run at {key} = {value:g} failed: {exc}", time=exc.time,
                                  position=exc.position, partial=exc.partial) from None
        outcome = _judge(ds, beat, crit)
        if not outcome["timed_out"]:
            return outcome
        if extension == MAX_EXTENSIONS:
            break
        duration *= 2.0
        say(f"{key} = {value:.6g}: the wave was still travelling at x = {outcome['front_x']:.4g} cm when the run "
            f"ended; running again with run.duration = {duration:g} ms")
        variant = case.with_overrides({key: value, "run.duration": duration})
    raise CaseError(f"{who}: at {key} = {value:g} the wave was still travelling at x = {outcome['front_x']:.4g} cm "
                    f"after run.duration = {duration:g} ms ({MAX_EXTENSIONS} doublings): it neither conducted nor "
                    f"blocked; raise run.duration in the case.")


def _result(case, key, unit, lo, hi, tol, runs, passing, failing, log=False, criterion="block") -> xr.Dataset:
    values = np.array([v for v, _ in runs])
    out = [o for _, o in runs]
    col = lambda key, dtype=np.int8: np.array([o[key] for o in out], dtype=dtype)  # noqa: E731
    data = {"value": values, "conducted": col("conducted"), "captured": col("captured"), "blocked": col("blocked"),
            "block_x": col("block_x", float), "conduction_velocity": col("cv", float),
            "beats_conducted": col("beats_conducted", np.int32),
            "slow_response": np.array([bool(o.get("slow_response", False)) for o in out], dtype=np.int8)}
    coords = {"run": np.arange(len(runs))}
    grids = [o["x"] for o in out]
    if grids and all(g.shape == grids[0].shape and np.allclose(g, grids[0]) for g in grids):
        coords["x"] = grids[0]
        data["activation_time"] = np.array([o["activation"] for o in out])
    attrs = {
        "key": key,
        "units": unit,
        "low": lo,
        "high": hi,
        "tolerance": tol,
        "scale": "log" if log else "linear",
        "runs": len(runs),
        "straddles": int(passing is not None),
        "criterion": criterion,
    }
    if passing is not None:
        k_pass = int(np.flatnonzero(values == passing)[-1])
        mid = math.sqrt(passing * failing) if log else 0.5 * (passing + failing)
        attrs.update(passing_value=passing, failing_value=failing, critical_value=mid,
                     cv_passing_m_per_s=float(out[k_pass]["cv"]))
    return schema.dataset("critical", data, coords, attrs, case=case, description="critical-value search",
                          title=f"cable critical-value search: {key}")


def _write(ds: xr.Dataset, output, overwrite: bool) -> None:
    from cable.io.netcdf import write_dataset

    write_dataset(ds, output, overwrite=overwrite)


def summary(ds: xr.Dataset) -> str:
    """The search's result as a few lines: bracket, runs, CV on the passing side."""
    a = ds.attrs
    unit = a.get("units", "")
    unit = f" {unit}" if unit and unit != "1" else ""
    if "passing_value" not in a:
        return (f"{a['key']}: {a['low']:.6g}{unit} and {a['high']:.6g}{unit} do not straddle block "
                f"(both ends {'conduct' if int(ds['conducted'].values.all()) else 'fail to conduct'}); "
                f"runs: {a['runs']}")
    crit = a.get("criterion", "block")
    fails = {"block": "blocks", "slow-response": "blocks or slow response"}.get(crit, f"blocks or {crit}")
    lines = [f"{a['key']}: critical value between {a['passing_value']:.6g}{unit} (conducts) and "
             f"{a['failing_value']:.6g}{unit} ({fails}); midpoint {a['critical_value']:.6g}{unit}",
             f"runs: {a['runs']}" + (f" in {a['rounds']} rounds" if "rounds" in a else "")
             + f"   final bracket: {_width(a)} (tolerance {a['tolerance']:.3g})",
             f"CV just on the passing side: {a['cv_passing_m_per_s']:.4g} m/s"]
    if a.get("note"):
        lines.append(f"note: {a['note']}")
    return "\n".join(lines)


def _width(a) -> str:
    p, f = a["passing_value"], a["failing_value"]
    if a.get("scale") == "log":
        return f"ratio {max(p, f) / min(p, f):.4g}"
    unit = a.get("units", "")
    return f"width {abs(p - f):.3g}{' ' + unit if unit and unit != '1' else ''}"


PROTOCOL = Protocol(name="critical", title="critical-value search", run=find_critical, summary=summary,
                    command="critical", order=60,
                    legacy=lambda ds: ds.attrs.get("protocol") == "critical-value search"
                    or str(ds.attrs.get("title", "")).startswith("cable critical-value search"))
