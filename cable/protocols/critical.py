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
from cable.io.schema import provenance
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


class _Journal:
    """The runs of a search with an output file, kept as they finish so that an
    interrupted search, started again with the same output, reuses them.

    Bisection is deterministic: replaying the same case, key, interval and tolerance
    asks for the same values in the same order, so the reused outcomes give the same
    bracket and the same file as an uninterrupted search. The folder
    ``<output>.runs/`` holds one ``.npz`` per run and ``search.txt`` (the identity:
    the case text and the search settings); a different search at the same output
    discards it. It is removed when the result is written.
    """

    def __init__(self, output, identity: str):
        import hashlib
        from pathlib import Path

        self.folder = Path(f"{output}.runs")
        self.identity = hashlib.sha256(identity.encode()).hexdigest()
        self.done = {}
        stamp = self.folder / "search.txt"
        if self.folder.is_dir():
            if stamp.is_file() and stamp.read_text().strip() == self.identity:
                for f in sorted(self.folder.glob("run-*.npz")):
                    try:
                        with np.load(f) as z:
                            self.done[float(z["value"])] = {k: (z[k] if z[k].ndim else z[k].item())
                                                            for k in z.files if k != "value"}
                    except Exception:  # noqa: BLE001 -- a damaged entry (cut off: BadZipFile, EOFError,
                        # zlib.error, OSError...) is redone, whatever the zip reader raises for it
                        f.unlink(missing_ok=True)
            else:
                self.remove()
        self.folder.mkdir(parents=True, exist_ok=True)
        stamp.write_text(self.identity + "\n")

    def get(self, value):
        return self.done.get(float(value))

    def put(self, value, outcome: dict) -> None:
        import os

        taken = [int(f.stem.split("-")[1]) for f in self.folder.glob("run-*.npz") if f.stem.split("-")[1].isdigit()]
        name = self.folder / f"run-{max(taken, default=-1) + 1:04d}.npz"  # after every entry kept (none replaced)
        tmp = self.folder / f".{name.name}.{os.getpid()}.tmp.npz"
        np.savez(tmp, value=float(value), **outcome)
        os.replace(tmp, name)
        self.done[float(value)] = outcome

    def remove(self) -> None:
        import shutil

        shutil.rmtree(self.folder, ignore_errors=True)


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
        runs already made (see :class:`_Journal`).
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

    def width(a, b):
        return max(a, b) / min(a, b) - 1.0 if log else abs(a - b)

    def middle(a, b):
        return math.sqrt(a * b) if log else 0.5 * (a + b)

    if math.log2(width(lo, hi) / tol) + 2 > MAX_RUNS:
        raise CaseError(f"{who}: tolerance = {tol:g} would need more than {MAX_RUNS} runs over [{lo:g}, {hi:g}]; "
                        f"give a larger tolerance.")
    if output is not None:
        from cable.io.netcdf import check_target

        check_target(output, overwrite)
    from cable.protocols import _rounds
    from cable.quiet import quiet_by_default

    workers = _rounds.check_count(who, "workers", _rounds.default_workers() if workers is None else workers)
    points = _rounds.check_count(who, "points", workers if points is None else points)
    if not _rounds.batchable(case):
        points, workers = 1, 1  # a ring's, the electrodes' and the safety factor's runs go alone
    run_case = quiet_by_default(case)  # each run ends when nothing is left to happen, unless the case says
    variants = {}
    for value in (lo, hi):  # invalid keys and values fail here, before anything runs
        variants[value] = run_case.with_overrides({key: value})
    nbeat = len({round(t, 9) for s in variants[lo].stimuli for t in s.onsets()})
    if beat is not None and not 0 <= int(beat) < nbeat:
        raise CaseError(f"{who}: beat = {beat} is out of range; the case has {nbeat} beat(s) (0 to {nbeat - 1}).")
    say = info or (lambda msg: None)
    unit = key_units(case, key)
    runs: list[tuple[float, dict]] = []
    journal = None
    if output is not None:
        # points is not part of the identity: runs are reused by value, whatever the rounds asked
        journal = _Journal(output, f"{case.text}\n{key} {lo!r} {hi!r} {tol!r} {beat!r} {log!r} {criterion!r}")
        if journal.done:
            say(f"resuming: {len(journal.done)} run(s) of an interrupted search reused from {journal.folder}")

    rounds = [0]

    def trials(values) -> list[bool]:
        """Run ``values`` together (those not in the journal); whether each conducted."""
        done = {v: journal.get(v) for v in values} if journal is not None else {}
        todo = [v for v in values if done.get(v) is None]
        if todo:
            rounds[0] += 1
            for value in todo:
                if value not in variants:  # an invalid value fails here, before the round runs
                    variants[value] = run_case.with_overrides({key: value})
            fresh = _rounds.run_together([variants[v] for v in todo], workers)
            for value, ds in zip(todo, fresh):
                outcome = _decide(run_case, ds, key, value, beat, crit, say)
                if journal is not None:
                    journal.put(value, outcome)
                done[value] = outcome
        shown = f" {unit}" if unit and unit != "1" else ""
        for value in values:
            reused = value not in todo
            runs.append((value, done[value]))
            say(f"{key} = {value:.6g}{shown}: {describe(done[value])}{' (reused)' if reused else ''}")
        return [bool(done[v]["conducted"]) for v in values]

    c_lo, c_hi = trials([lo, hi])
    if c_lo == c_hi:
        ds = _result(case, key, unit, lo, hi, tol, runs, None, None, log, criterion)
        if output is not None:
            _write(ds, output, overwrite)
            journal.remove()
        both = "conduct" if c_lo else "fail to conduct"
        hint = ("move the interval toward more severe values" if c_lo else
                "move the interval toward milder values (or check that the stimulus captures)")
        raise NoBracketError(f"{who}: {key} between {lo:g} and {hi:g} does not straddle block: both ends {both} "
                             f"(at {lo:g}: {describe(runs[0][1])}; at {hi:g}: {describe(runs[1][1])}); {hint}.",
                             runs=ds)
    passing, failing = (lo, hi) if c_lo else (hi, lo)
    while width(passing, failing) > tol:
        values = _rounds.inside(passing, failing, points, tol, log) if points > 1 else [middle(passing, failing)]
        passing, failing = _rounds.narrow(passing, failing, values, trials(values))
    ds = _result(case, key, unit, lo, hi, tol, runs, passing, failing, log, criterion)
    ds.attrs.update(rounds=rounds[0], points_per_round=points)
    fail_outcome = [o for v, o in runs if v == failing][-1]
    if not fail_outcome["captured"]:
        # the search found where the stimulus stops exciting, not where a started wave blocks
        ds.attrs["note"] = (f"at the failing end ({key} = {failing:g}) the stimulus did not excite at all: the "
                            f"transition found is loss of capture, not conduction block; keep the stimulated "
                            f"tissue out of the change, or raise the stimulus.")
        say(f"note: {ds.attrs['note']}")
    if output is not None:
        _write(ds, output, overwrite)
        journal.remove()
    return ds


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
    data = {
        "value": (("run",), values, {"units": unit or "1", "long_name": f"value of {key}"}),
        "conducted": (("run",), np.array([o["conducted"] for o in out], dtype=np.int8),
                      {"long_name": "every judged beat conducted through the strand", "flag_values": [0, 1],
                       "flag_meanings": "false true"}),
        "captured": (("run",), np.array([o["captured"] for o in out], dtype=np.int8),
                     {"long_name": "the stimulus excited (first failing beat, else last judged)",
                      "flag_values": [0, 1], "flag_meanings": "false true"}),
        "blocked": (("run",), np.array([o["blocked"] for o in out], dtype=np.int8),
                    {"long_name": "the wave started but did not reach an end", "flag_values": [0, 1],
                     "flag_meanings": "false true"}),
        "block_x": (("run",), np.array([o["block_x"] for o in out]),
                    {"units": "cm", "long_name": "last activated position of the blocked wave"}),
        "conduction_velocity": (("run",), np.array([o["cv"] for o in out]),
                                {"units": "m/s", "long_name": "conduction velocity in the measurement window"}),
        "beats_conducted": (("run",), np.array([o["beats_conducted"] for o in out], dtype=np.int32),
                            {"units": "1", "long_name": "judged beats that conducted"}),
        "slow_response": (("run",), np.array([bool(o.get("slow_response", False)) for o in out], dtype=np.int8),
                          {"long_name": "conduction by a slow response (first failing beat, else last judged)",
                           "flag_values": [0, 1], "flag_meanings": "false true"}),
    }
    coords = {"run": ("run", np.arange(len(runs)), {"long_name": "run number, in the order made"})}
    grids = [o["x"] for o in out]
    if grids and all(g.shape == grids[0].shape and np.allclose(g, grids[0]) for g in grids):
        coords["x"] = ("x", grids[0], {"units": "cm", "long_name": "position along the fibre"})
        data["activation_time"] = (("run", "x"), np.array([o["activation"] for o in out]),
                                   {"units": "ms", "long_name": "activation time of the first judged beat"})
    attrs = {
        **provenance(f"cable critical-value search: {key}", case, protocol="critical-value search"),
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
    return xr.Dataset(data, coords=coords, attrs=attrs)


def _write(ds: xr.Dataset, output, overwrite: bool) -> None:
    from cable.io.netcdf import write_dataset

    write_dataset(ds, output, overwrite=overwrite)
