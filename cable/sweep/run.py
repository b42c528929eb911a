"""Running a sweep on Dask: a local cluster by default, an existing scheduler when given.

The missing points are split into tasks of at most ``batch`` points (a *chunk*), each
run by :func:`cable.sweep.worker.run_chunk` on a worker, which takes the chunk's cases
as the client loaded them and calls
:func:`cable.kernels.batch.simulate_batch`: points that share a time loop (same model,
numerics, output times... see :func:`cable.kernels.batch.group_key`) run as strands of
one kernel call, and each point's result is bitwise the one :func:`cable.simulate`
gives for it alone (``tests/kernels/test_batch.py``; ``tests/sweep/test_run.py``).
Before chunking, the client loads every point's case (once: the worker runs that
:class:`cable.case.Case`, it does not load it again) and sorts the points by
:func:`cable.sweep.chunks.chunk_key` (about 0.5 ms a point), so that each chunk holds points that can
share a loop; a point whose case does not load is recorded as
``invalid_case`` there and then, without a task. Each group of points with one key is
cut into chunks of nearly equal size, at most ``batch`` points each, and at most
``ceil(group / workers)``, so that a small sweep still gives every worker work (see
:func:`cable.sweep.chunks.chunks`). ``batch = 1`` runs one :func:`cable.simulate` per point.

Workers are separate processes that live for the whole sweep; the compiled time loop is
held by the worker process once loaded (numba's on-disk cache turns a fresh process's
first call into a load, not a compilation), so JIT work is paid once per worker and
model, not once per point or chunk. Every point file records whether its chunk loaded a
time loop of its model into the worker process (``first_on_worker``: on a fresh worker,
the points of its first chunk), which the tests check. The other attributes of a point
file that describe its run: ``worker`` (host:pid; the client's for a point found
invalid before chunking), ``batch_size`` (strands that shared its kernel call: 1 alone,
0 not run), ``chunk`` (index of the first point of its chunk; -1: none), ``chunk_size``,
``chunk_wall_time_s`` and ``wall_time_s`` (the chunk's wall time divided by its points)
[s], ``overrides`` (the point's values, JSON).

Results come back to the client, which writes each point's file as its chunk arrives
(:class:`cable.sweep.store.PointStore`), so workers need no shared file system. A sweep
interrupted while chunks run loses those chunks' points only: resume granularity is a
chunk.
"""

from __future__ import annotations

import contextlib
import hashlib
import logging
import os
import socket
import time
import uuid

import numpy as np
import xarray as xr

from cable.case import CaseError, load_case
from cable.io import schema
from cable.io.netcdf import stored_form
from cable.sweep import store as _store
from cable.sweep.chunks import chunk_key, chunks
from cable.sweep.progress import ProgressBar
from cable.sweep.spec import point_raw
from cable.sweep.worker import run_chunk

__all__ = ["BATCH", "ClusterError", "check_sweep_size", "chunk_key", "chunks", "connect", "point_raw", "run_chunk",
           "sweep", "sweep_id"]

class ClusterError(RuntimeError):
    """Points not computed because the cluster failed (lost connection, cancelled task,
    worker killed after its retries). They are not stored, so a run with the same output
    computes them; the CLI exits with status 5.

    Attributes
    ----------
    missing : list of int
        Indices of the points not computed.
    """

    def __init__(self, message: str, missing=()):
        super().__init__(message)
        self.missing = list(missing)


#: disk taken by one point file of scalars [bytes]: classic netCDF, about 5 kB (see
#: :meth:`cable.sweep.store.PointStore.write`), with room for many beats and levels
POINT_FILE_BYTES = 16 * 2 ** 10
#: client memory per point while a sweep runs and is assembled [bytes]: a loaded point
#: Dataset of one beat takes about 40 KiB (measured here with tracemalloc, 200 loads of
#: an HH point file), with a margin for its raw case and more beats
POINT_MEMORY_BYTES = 64 * 2 ** 10
#: seconds between notes while the client prepares (loads and sorts) the points
PREPARE_NOTE_S = 2.0

#: how long to wait for a scheduler given by address [s]
CONNECT_TIMEOUT_S = 10

#: most points per task (``cable sweep --batch``): 16 small strands share a kernel call
#: for most of the batch's gain (``python tools/bench_sweep.py --batch-only``)
BATCH = 16


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
    from cable.machine import usable_cores

    n = workers or max(1, min(n_tasks, usable_cores()))
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
          overwrite: bool = False, limit: int | None = None, batch: int | None = None, info=None,
          case_path=None) -> xr.Dataset:
    """Run every point of a case's ``[sweep]`` on Dask and gather the results.

    Parameters
    ----------
    case : str, pathlib.Path, dict or Case
        A case with a ``[sweep]`` section (see :mod:`cable.sweep.spec`).
    client : distributed.Client, optional
        Run on this client (left open).
    output : str or pathlib.Path, optional
        Result file (.nc). Each point is stored in ``<output>.points/`` as its chunk
        finishes; running the same sweep again computes only the missing points (a
        sweep interrupted loses the points of the chunks that were running). Needed for
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
        Discard an existing result and points of a different sweep at ``output``. The
        points of this same sweep are kept and reused either way.
    limit : int, optional
        Compute at most this many of the missing points in this call (the others are
        ``not_computed``; a later call with the same output continues).
    batch : int, optional
        Most points per task (default :data:`BATCH`); the points of a task that share a
        time loop run as the strands of one kernel call
        (:func:`cable.kernels.batch.simulate_batch`), with the same results bit for bit.
        1: one :func:`cable.simulate` per point.
    info : callable, optional
        Receives one-line notes (cluster, resumed points, files written).
    case_path : str or pathlib.Path, optional
        The file the case was read from, when ``case`` is already loaded: ``output``
        may not be it.

    Returns
    -------
    xarray.Dataset
        Dimensions: the swept keys (named after their last part; the full key in the
        coordinate's ``case_key`` attribute; ``point`` for ``mode = "zip"``), then
        ``beat`` and ``level``. Variables: ``status`` (flags: the outcomes ``ok``,
        ``no_capture`` and ``blocked`` of a point that ran, its first beat's; the failures
        ``numerical_failure``, ``invalid_case``, ``error``; ``not_computed``), ``failure_reason``,
        ``sample_x`` and every per-beat scalar measurement of :func:`cable.simulate`
        (x-resolved ones at ``sample_x``).

    Raises
    ------
    CaseError
        No ``[sweep]`` section, an invalid swept key or value, an unreachable
        scheduler, or an output holding another sweep.
    ClusterError
        Some points were not computed because the cluster failed; the others are stored
        (with ``output``), and a run with the same output computes the rest.
    """
    from cable.arguments import check_call

    check_call("sweep", output=output, overwrite=overwrite, info=info)
    if not (isinstance(progress, bool) or callable(progress)):
        raise CaseError(f"sweep(progress={progress!r}): progress must be True, False or a callable "
                        f"progress(done, failed, total).")
    say = info or (lambda msg: None)
    source = case
    case = load_case(case, overrides)
    spec = case.extra.get("sweep")
    if spec is None:
        raise CaseError("the case has no [sweep] section; add one, e.g. [sweep] \"membrane.scale.g_Na\" = "
                        "[1.0, 0.5], or use --vary KEY=VALUES.")
    keep_fields = case.keep_fields
    if keep_fields and output is None:
        raise CaseError("output.keep_fields = true writes each point's fields next to the result; give an output "
                        "file (-o OUT.nc).")
    if limit is not None and (isinstance(limit, bool) or not isinstance(limit, int) or limit < 0):
        raise CaseError(f"limit = {limit!r}: must be a whole number of at least 0.")
    batch = BATCH if batch is None else batch
    if isinstance(batch, bool) or not isinstance(batch, (int, np.integer)) or batch < 1:
        raise CaseError(f"batch = {batch!r}: must be a whole number of at least 1 (points per task; 1 runs each "
                        f"point alone).")
    n = len(spec)
    ident = sweep_id(case)
    store = None
    points: list = [None] * n
    check_sweep_size(case, n, 0, None, keep_fields)  # memory, before anything is created or loaded
    if output is not None:
        from cable.io.netcdf import check_target

        source = case_path if case_path is not None else (source if isinstance(source, (str, os.PathLike)) else None)
        check_target(output, True, inputs=(source,))  # a folder, FIFO or the case file itself is refused
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
    check_sweep_size(case, n, len(todo), output, keep_fields)
    for k in done:
        points[k] = store.read(k)
    failed_before = sum(_store.is_failure(_store.status_of(points[k])) for k in done)
    if todo:
        _compute(spec, case.raw, todo, points, store, keep_fields, client, scheduler, workers, progress,
                 len(done), failed_before, n, say, int(batch))
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
            result = stored_form(result)  # what the file holds, exactly (in memory: the file is not read back)
            _store.write_result(result, output)
            a = result.attrs
            say(f"wrote {output} ({n} points: {a['n_failed']} failed; of those that ran, {a['n_blocked']} blocked, "
                f"{a['n_no_capture']} not captured)")
    return result


def check_sweep_size(case, n: int, n_todo: int, output, keep_fields: bool) -> None:
    """Refuse a sweep whose points cannot fit: the client's memory, the point files' disk.

    Parameters
    ----------
    case : cable.case.Case
        The sweep's case (its base point sizes the fields with ``keep_fields``).
    n, n_todo : int
        Points of the sweep, and those still to compute.
    output : str or pathlib.Path or None
        The sweep's output (its folder holds the point files).
    keep_fields : bool
        Each point file also holds its fields.
    """
    import shutil

    from cable.units import format_bytes

    try:
        avail = os.sysconf("SC_AVPHYS_PAGES") * os.sysconf("SC_PAGE_SIZE")
    except (ValueError, OSError, AttributeError):
        avail = None
    need = n * POINT_MEMORY_BYTES
    if avail is not None and need > 0.8 * avail:
        raise CaseError(f"the sweep has {n} points; the client holds each while the sweep runs and is assembled, "
                        f"about {format_bytes(need)}, but {format_bytes(avail)} of memory is free. Sweep fewer "
                        f"values (at most about {int(0.8 * avail // POINT_MEMORY_BYTES)} points here), or split "
                        f"the sweep into several.")
    if output is None or not n_todo:
        return
    per_point = POINT_FILE_BYTES
    if keep_fields and case.fiber is not None:
        dt = case.numerics.dt
        spb = max(1, int(round(case.output_every / dt)))
        samples = int(np.ceil(case.duration / (spb * dt) - 1e-9)) + 1
        per_point += samples * case.fiber.n_nodes * (1 + len(case.output_states)) * 4
    folder = os.path.dirname(os.path.abspath(output))
    free = shutil.disk_usage(folder).free
    if n_todo * per_point > free:
        raise CaseError(f"the {n_todo} points to compute need up to {format_bytes(n_todo * per_point)} of point "
                        f"files (about {format_bytes(per_point)} each) but {format_bytes(free)} is free on disk at "
                        f"'{folder}'; sweep fewer values, free space or choose another output folder.")


def _compute(spec, raw, todo, points, store, keep_fields, client, scheduler, workers, progress, n_done, n_failed,
             n, say, batch) -> None:
    from distributed import as_completed

    report = progress if callable(progress) else None
    done, failed = n_done, n_failed
    bar = None

    def keep(k, data, meta):
        nonlocal done, failed
        meta["overrides"] = spec.overrides(k)
        labelled = _store.label(data, spec, k)
        if store is not None:
            store.write(k, labelled, _store.point_attrs(meta))
            points[k] = _store.without_fields(labelled)  # kept, not read back (see assemble.as_stored)
        else:
            points[k] = labelled
        bad = _store.is_failure(_store.status_of(data))  # no capture and block are outcomes, not failures
        done, failed = done + 1, failed + bad
        if bar is not None:
            bar.update(bad)
        if report is not None:
            report(done, failed, n)

    cases, keys, invalid = {}, [], []
    noted = time.perf_counter()
    if len(todo) > 1000:
        say(f"preparing {len(todo)} points (loading each case to group the points that share a time loop)...")
    for j, k in enumerate(todo):  # on the client: the loop each point would use, to chunk points that share one
        if time.perf_counter() - noted > PREPARE_NOTE_S:
            say(f"preparing points: {j} of {len(todo)}")
            noted = time.perf_counter()
        try:  # loaded once, here: the worker runs this Case as it is
            cases[k] = load_case(point_raw(raw, spec.overrides(k)))
            keys.append((k, chunk_key(cases[k])))
        except CaseError as exc:
            invalid.append((k, str(exc)))
    with connect(client, scheduler, workers, len(todo), say) as cl:
        bar = ProgressBar(n, n_done, n_failed) if progress is True else None
        here = f"{socket.gethostname()}:{os.getpid()}"
        for k, reason in invalid:  # nothing to run: recorded here
            keep(k, _store.failed_dataset("invalid_case", reason),
                 {"worker": here, "first_on_worker": False, "batch_size": 0, "chunk": -1, "chunk_size": 0,
                  "chunk_wall_time_s": 0.0, "wall_time_s": 0.0})
        tag = uuid.uuid4().hex[:8]
        n_workers = max(1, len(cl.scheduler_info().get("workers", {})))
        futures = {}
        for part in chunks(keys, batch, n_workers):
            fut = cl.submit(run_chunk, [cases[k] for k in part], keep_fields, key=f"cable-chunk-{part[0]}-{tag}",
                            pure=False)
            futures[fut.key] = (part, fut)
        lost, why = [], ""
        try:
            for fut in as_completed([f for _, f in futures.values()]):
                part = futures[fut.key][0]
                try:
                    results = fut.result()
                except Exception as exc:  # noqa: BLE001
                    # run_chunk returns every failure of a point's own computation as a
                    # failed point; an exception here is the cluster's (lost connection,
                    # cancelled future, worker killed after retries): not a result, so the
                    # points are not stored and a resume computes them
                    lost += part
                    why = why or f"{exc.__class__.__name__}: {exc}"
                    continue
                fut.release()
                for k, (data, meta) in zip(part, results):
                    keep(k, data, dict(meta, chunk=part[0]))
        except KeyboardInterrupt:
            cl.cancel([f for _, f in futures.values()])
            raise
        finally:
            if bar is not None:
                bar.close()
    if lost:
        where = " (the others are stored; run the sweep again with the same output to compute these)" \
            if store is not None else ""
        raise ClusterError(f"{len(lost)} of {n} points were not computed because the cluster failed ({why}); they "
                           f"are not stored as results{where}.", sorted(lost))


def result_attrs(case, spec, ident: str) -> dict:
    """Global attributes of a sweep's result (nothing that changes from run to run)."""
    import dask

    from cable.membrane import get_model

    model = get_model(case.membrane.model)
    return {
        **schema.provenance(f"cable sweep: {model.name}", case, model=model),
        "dask_version": dask.__version__,
        "sweep_id": ident,
        "sweep_mode": spec.mode,
        "sweep_keys": ", ".join(a.key for a in spec.axes),
        "n_points": len(spec),
        "comment": schema.CAUTION + " Per-point run records (worker, wall time) are in the point files.",
    }
