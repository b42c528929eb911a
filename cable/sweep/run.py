"""Running a sweep on Dask: a local cluster by default, an existing scheduler when given.

Each point is one task, :func:`run_point`, which loads the point's case and calls
:func:`cable.simulate` on a worker. Workers are separate processes that live for the
whole sweep; the compiled time loop is held by the worker process once loaded
(``cable.simulate`` keeps one specialised kernel per model, and numba's on-disk cache
turns a fresh process's first call into a load, not a compilation), so JIT work is paid
once per worker and model, not once per point. Every point file records whether its
point was the first on its worker (``first_on_worker``), which the tests check.

Results come back to the client, which writes each point's file as it arrives
(:class:`cable.sweep.store.PointStore`), so workers need no shared file system.
"""

from __future__ import annotations

import contextlib
import hashlib
import logging
import os
import socket
import sys
import time
import uuid

import numpy as np
import xarray as xr

from cable import __version__
from cable.case import CaseError, load_case
from cable.io import schema
from cable.sweep import store as _store
from cable.sweep.spec import point_raw

#: how long to wait for a scheduler given by address [s]
CONNECT_TIMEOUT_S = 10


# ----------------------------------------------------------------------------- worker side
def run_point(raw: dict, keep_fields: bool) -> tuple[xr.Dataset, dict]:
    """Run one point (on a worker).

    Parameters
    ----------
    raw : dict
        The point's raw case (the case without ``[sweep]``, with the point's values).
    keep_fields : bool
        Keep the space-time fields.

    Returns
    -------
    (xarray.Dataset, dict)
        The point's Dataset (see :func:`cable.sweep.store.point_dataset`) and a record
        of the run: ``wall_time_s`` [s], ``worker`` (host:pid), ``first_on_worker``
        (the model's time loop was not loaded in this process before this point).
        Invalid cases and numerical failures are returned as failed points.
    """
    from cable.simulate import SimulationError, simulate, time_loop

    wall0 = time.perf_counter()
    meta = {"worker": f"{socket.gethostname()}:{os.getpid()}", "first_on_worker": False}
    try:
        case = load_case(raw)
        # the loop this point's run uses (a model's fast path, or the reference loop)
        meta["first_on_worker"] = not time_loop(case.membrane.model, case.numerics.rates).signatures
        data = _store.point_dataset(simulate(case), keep_fields)
    except CaseError as exc:
        data = _store.failed_dataset("invalid_case", str(exc))
    except SimulationError as exc:
        data = _store.failed_dataset("numerical_failure", str(exc))
    meta["wall_time_s"] = round(time.perf_counter() - wall0, 6)
    return data, meta


# ----------------------------------------------------------------------------- progress
class ProgressBar:
    """A one-line progress bar: points done, failures, time left (on a terminal, redrawn).

    Parameters
    ----------
    total : int
        Points of the sweep.
    done, failed : int
        Points stored already (and how many of them failed).
    stream : file
        Where to draw (stderr by default). Not a terminal: one line per tenth done.
    """

    def __init__(self, total: int, done: int = 0, failed: int = 0, stream=None, width: int = 28):
        self.total, self.done, self.failed = total, done, failed
        self.stream = stream or sys.stderr
        self.width = width
        self.start_done = done
        self.t0 = time.perf_counter()
        self.tty = getattr(self.stream, "isatty", lambda: False)()
        self.last_draw = 0.0
        self.last_tenth = -1
        self.width_drawn = 0
        self.draw(force=True)

    def update(self, failed: bool) -> None:
        self.done += 1
        self.failed += int(failed)
        self.draw()

    def line(self) -> str:
        frac = self.done / self.total if self.total else 1.0
        fill = int(round(frac * self.width))
        ran = self.done - self.start_done
        left = self.total - self.done
        if ran and left:
            rest = (time.perf_counter() - self.t0) / ran * left
            eta = f"{int(rest // 3600)}:{int(rest % 3600 // 60):02d}:{int(rest % 60):02d} left"
        else:
            eta = "done" if not left else "time left: --"
        return (f"[{'#' * fill}{'.' * (self.width - fill)}] {self.done}/{self.total} points, "
                f"{self.failed} failed, {eta}")

    def draw(self, force: bool = False) -> None:
        now = time.perf_counter()
        if self.tty:
            if force or now - self.last_draw > 0.1 or self.done == self.total:
                self._redraw()
                self.last_draw = now
            return
        tenth = int(10 * self.done / self.total) if self.total else 10
        if force or tenth > self.last_tenth:
            self.stream.write(self.line() + "\n")
            self.stream.flush()
            self.last_tenth = tenth

    def _redraw(self, end: str = "") -> None:
        text = self.line()
        self.stream.write("\r" + text.ljust(self.width_drawn) + end)  # blank what a longer line left
        self.stream.flush()
        self.width_drawn = len(text)

    def close(self) -> None:
        if self.tty:
            self._redraw("\n")


# ----------------------------------------------------------------------------- client side
@contextlib.contextmanager
def connect(client=None, scheduler: str | None = None, workers: int | None = None, n_tasks: int = 1, say=None):
    """A Dask client: ``client`` as given, one on ``scheduler``, or a new local cluster.

    Parameters
    ----------
    client : distributed.Client, optional
        Used as it is (not closed).
    scheduler : str, optional
        Address of a running scheduler, e.g. ``tcp://10.0.0.5:8786``.
    workers : int, optional
        Local cluster: its number of worker processes (default: one per core, at most
        one per task). With a scheduler: wait until at least this many workers joined.
    n_tasks : int
        Number of tasks to run (caps the local cluster's size).
    """
    say = say or (lambda msg: None)
    if workers is not None and (isinstance(workers, bool) or not isinstance(workers, int) or workers < 1):
        raise CaseError(f"workers = {workers!r}: must be a whole number of at least 1.")
    if client is not None:
        yield client
        return
    from distributed import Client, LocalCluster

    if scheduler is not None:
        try:
            cl = Client(scheduler, timeout=CONNECT_TIMEOUT_S)
        except (OSError, TimeoutError, ValueError) as exc:
            raise CaseError(f"scheduler {scheduler!r}: cannot connect ({exc.__class__.__name__}: {exc}). Give the "
                            f"address of a running Dask scheduler (e.g. tcp://host:8786), or leave it out to use a "
                            f"local cluster.") from None
        try:
            if workers:
                say(f"waiting for {workers} workers on {scheduler}...")
                cl.wait_for_workers(workers)
            say(f"using the scheduler at {scheduler} ({len(cl.scheduler_info()['workers'])} workers)")
            yield cl
        finally:
            cl.close()
        return
    n = workers or max(1, min(n_tasks, len(os.sched_getaffinity(0)) if hasattr(os, "sched_getaffinity")
                              else os.cpu_count() or 1))
    say(f"starting a local cluster of {n} worker process{'es' if n > 1 else ''}...")
    cluster = LocalCluster(n_workers=n, threads_per_worker=1, processes=True, dashboard_address=None,
                           silence_logs=logging.ERROR)
    try:
        cl = Client(cluster)
        try:
            yield cl
        finally:
            cl.close()
    finally:
        cluster.close()


def sweep_id(case) -> str:
    """Identity of a sweep: a hash of its case text (with the ``[sweep]`` section)."""
    return hashlib.sha256(case.text.encode()).hexdigest()[:16]


def sweep(case, *, client=None, output=None, workers=None, scheduler=None, progress=True, overrides=(),
          overwrite: bool = False, limit: int | None = None, info=None) -> xr.Dataset:
    """Run every point of a case's ``[sweep]`` on Dask and gather the results.

    Parameters
    ----------
    case : str, pathlib.Path, dict or Case
        A case with a ``[sweep]`` section (see :mod:`cable.sweep.spec`).
    client : distributed.Client, optional
        Run on this client (left open).
    output : str or pathlib.Path, optional
        Result file (.nc). Each point is stored in ``<output>.points/`` as it finishes;
        running the same sweep again computes only the missing points. Needed for
        ``[output] keep_fields = true``.
    workers : int, optional
        Worker processes of the local cluster (default: one per core), or, with
        ``scheduler``, the number of workers to wait for.
    scheduler : str, optional
        Address of a running Dask scheduler; default: a local cluster started and
        closed here (worker processes; call from under ``if __name__ == "__main__":``
        in a script, as for any use of multiprocessing).
    progress : bool or callable
        True: a progress bar on stderr; a callable gets ``(done, failed, total)``.
    overrides : iterable of str or dict
        ``KEY=VALUE`` overrides of the case (as ``--set``), applied before sweeping.
    overwrite : bool
        Discard an existing result and points of a different sweep at ``output``.
    limit : int, optional
        Compute at most this many of the missing points in this call (the others are
        ``not_computed``; a later call with the same output continues).
    info : callable, optional
        Receives one-line notes (cluster, resumed points, files written).

    Returns
    -------
    xarray.Dataset
        Dimensions: the swept keys (named after their last part; the full key in the
        coordinate's ``case_key`` attribute; ``point`` for ``mode = "zip"``), then
        ``beat`` and ``level``. Variables: ``status`` (flags), ``failure_reason``,
        ``sample_x`` and every per-beat scalar measurement of :func:`cable.simulate`
        (x-resolved ones at ``sample_x``).

    Raises
    ------
    CaseError
        No ``[sweep]`` section, an invalid swept key or value, an unreachable
        scheduler, or an output holding another sweep.
    """
    say = info or (lambda msg: None)
    case = load_case(case, overrides)
    spec = case.extra.get("sweep")
    if spec is None:
        raise CaseError("the case has no [sweep] section; add one, e.g. [sweep] \"membrane.scale.g_Na\" = "
                        "[1.0, 0.5], or use --vary KEY=VALUES.")
    keep_fields = bool(case.raw.get("output", {}).get("keep_fields", False))
    if keep_fields and output is None:
        raise CaseError("output.keep_fields = true writes each point's fields next to the result; give an output "
                        "file (-o OUT.nc).")
    if limit is not None and (isinstance(limit, bool) or not isinstance(limit, int) or limit < 0):
        raise CaseError(f"limit = {limit!r}: must be a whole number of at least 0.")
    n = len(spec)
    ident = sweep_id(case)
    store = None
    points: list = [None] * n
    if output is not None:
        store = _store.PointStore(output, ident, n, overwrite=overwrite)
        _store.remove(_store.stale_temporaries(store))
        done = store.done()
        if done:
            say(f"{len(done)} of {n} points already in {store.folder}; computing the other {n - len(done)}.")
    else:
        done = set()
    todo = [k for k in range(n) if k not in done]
    if limit is not None:
        todo = todo[:limit]
    for k in done:
        points[k] = store.read(k)
    failed_before = sum(_store.status_of(points[k]) != _store.STATUS["ok"] for k in done)
    if todo:
        _compute(spec, case.raw, todo, points, store, keep_fields, client, scheduler, workers, progress,
                 len(done), failed_before, n, say)
    if store is not None:  # the result is built from the files alone: the same after a resume
        for k in todo:
            points[k] = store.read(k)
    attrs = result_attrs(case, spec, ident)
    if store is not None:  # when the sweep was started: the same whether or not it was resumed
        attrs["date_created"] = store.created
        attrs["history"] = f"{store.created} cable sweep, sweep_id {ident}, {n} points"
    result = _store.assemble(spec, points, attrs)
    if store is not None:
        left = result.attrs["n_not_computed"]
        if left:
            say(f"{left} of {n} points not computed yet; run the sweep again with the same output to continue.")
        else:
            _store.write_result(result, output)
            say(f"wrote {output} ({n} points, {result.attrs['n_failed']} failed)")
            with xr.open_dataset(output) as ds:  # what the file holds, exactly
                result = ds.load()
    return result


def _compute(spec, raw, todo, points, store, keep_fields, client, scheduler, workers, progress, n_done, n_failed,
             n, say) -> None:
    from distributed import as_completed

    report = progress if callable(progress) else None
    done, failed = n_done, n_failed
    with connect(client, scheduler, workers, len(todo), say) as cl:
        bar = ProgressBar(n, n_done, n_failed) if progress is True else None
        tag = uuid.uuid4().hex[:8]
        futures = {}
        for k in todo:
            fut = cl.submit(run_point, point_raw(raw, spec.overrides(k)), keep_fields, key=f"cable-point-{k}-{tag}",
                            pure=False)
            futures[fut.key] = (k, fut)
        try:
            for fut in as_completed([f for _, f in futures.values()]):
                k = futures[fut.key][0]
                try:
                    data, meta = fut.result()
                except Exception as exc:  # a worker died or a bug: record it, go on with the others
                    data = _store.failed_dataset("error", f"{exc.__class__.__name__}: {exc}")
                    meta = {"worker": "", "first_on_worker": False, "wall_time_s": float("nan")}
                fut.release()
                meta["overrides"] = spec.overrides(k)
                labelled = _store.label(data, spec, k)
                if store is not None:
                    store.write(k, labelled, _store.point_attrs(meta))
                else:
                    points[k] = labelled
                bad = _store.status_of(data) != _store.STATUS["ok"]
                done, failed = done + 1, failed + bad
                if bar is not None:
                    bar.update(bad)
                if report is not None:
                    report(done, failed, n)
        except KeyboardInterrupt:
            cl.cancel([f for _, f in futures.values()])
            raise
        finally:
            if bar is not None:
                bar.close()


def result_attrs(case, spec, ident: str) -> dict:
    """Global attributes of a sweep's result (nothing that changes from run to run)."""
    import dask
    import numba

    from cable.membrane import get_model

    model = get_model(case.membrane.model)
    return {
        "Conventions": schema.CONVENTIONS,
        "title": f"cable sweep: {model.name}",
        "source": f"cable {__version__}",
        "model": model.name,
        "model_citation": model.citation,
        "case": case.text,
        "cable_version": __version__,
        "numpy_version": np.__version__,
        "numba_version": numba.__version__,
        "dask_version": dask.__version__,
        "sweep_id": ident,
        "sweep_mode": spec.mode,
        "sweep_keys": ", ".join(a.key for a in spec.axes),
        "n_points": len(spec),
        "comment": "Research tool; not for clinical decisions. Per-point run records (worker, wall time) are "
                   "in the point files.",
    }
