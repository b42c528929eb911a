"""The worker side of a sweep: one chunk of points through the batched kernel.

:func:`run_chunk` runs on a Dask worker. It receives the points' cases as the client
loaded them (so that a point's case is validated once, on the client) and returns
each point's Dataset with the record of its run; see :mod:`cable.sweep.run` for the
attributes of that record.
"""

from __future__ import annotations

import os
import socket
import time

import xarray as xr

from cable.case import Case, CaseError, load_case
from cable.sweep import store as _store


def run_chunk(cases: list, keep_fields: bool) -> list[tuple[xr.Dataset, dict]]:
    """Run a chunk of points (on a worker) through :func:`cable.kernels.batch.simulate_batch`.

    Parameters
    ----------
    cases : list of Case or dict
        The points' cases as the client loaded them (a :class:`cable.case.Case` is run as
        it is, not loaded again), or their raw cases (the case without ``[sweep]``, with
        the point's values), loaded here.
    keep_fields : bool
        Keep the space-time fields.

    Returns
    -------
    list of (xarray.Dataset, dict)
        One entry per point, in order: the point's Dataset (see
        :func:`cable.sweep.store.point_dataset`) and a record of the run:

        * ``worker`` (host:pid);
        * ``first_on_worker``: this chunk loaded a time loop of the point's model into
          the worker process (the same for every point of the chunk);
        * ``batch_size``: how many strands shared this point's kernel call (1: it ran
          alone, as :func:`cable.simulate`; 0: it did not run, an invalid case);
        * ``chunk_size``: points in the chunk;
        * ``chunk_wall_time_s`` [s]: the chunk's wall time on the worker (loading,
          running, keeping the results), and ``wall_time_s`` [s] its share per point
          (that time divided by ``chunk_size``).

        Invalid cases and numerical failures are returned as failed points, with the
        message :func:`cable.simulate` gives for the point alone. An unexpected error of
        the batch reruns the chunk point by point, so that it fails only its own point.
    """
    from cable.kernels.batch import simulate_batch

    wall0 = time.perf_counter()
    n = len(cases)
    data: list = [None] * n
    sizes = [0] * n
    loaded = {}
    for i, given in enumerate(cases):
        try:
            loaded[i] = given if isinstance(given, Case) else load_case(given)
        except CaseError as exc:
            data[i] = _store.failed_dataset("invalid_case", str(exc))
    unloaded = [fn for fn in _time_loops({(c.membrane.model, c.numerics.rates, c.numerics.reaction)
                                         for c in loaded.values()})
                if not fn.signatures]
    order = list(loaded)
    try:
        results = simulate_batch([loaded[i] for i in order], errors="return")
    except Exception:  # a bug of the batch: each point on its own, so that it fails only itself
        results = []
        for i in order:
            try:
                results.extend(simulate_batch([loaded[i]], errors="return"))
            except Exception as exc:
                results.append(exc)
    for i, result in zip(order, results):
        data[i], sizes[i] = _outcome(result, keep_fields)
    first = any(fn.signatures for fn in unloaded)
    wall = time.perf_counter() - wall0
    worker = f"{socket.gethostname()}:{os.getpid()}"
    return [(ds, {"worker": worker, "first_on_worker": first, "batch_size": size, "chunk_size": n,
                  "chunk_wall_time_s": round(wall, 6), "wall_time_s": round(wall / n, 6)})
            for ds, size in zip(data, sizes)]


def _outcome(result, keep_fields: bool) -> tuple[xr.Dataset, int]:
    """A point's Dataset and batch size from what ``simulate_batch`` returned for it."""
    from cable.simulate import SimulationError

    if isinstance(result, CaseError):
        return _store.failed_dataset("invalid_case", str(result)), 0
    if isinstance(result, SimulationError):
        return _store.failed_dataset("numerical_failure", str(result)), 1
    if isinstance(result, Exception):
        return _store.failed_dataset("error", f"{result.__class__.__name__}: {result}"), 0
    return _store.point_dataset(result, keep_fields), int(result.attrs.get("batch_size", 1))


def _time_loops(models: set) -> list:
    """Every compiled time loop a run of these (model, rates, reaction) triples may load: the
    single strand's loops (fast path and reference, the latter also used to settle nodes) and
    the batch's loop of strands laid end to end, for each reaction scheme asked for."""
    from cable.kernels.loops import loop
    from cable.membrane import get_model

    loops = []
    for name in sorted({key[0] for key in models}):
        loops += [loop(name), loop(name, layout="segments")]
        if get_model(name).fast is not None:
            loops += [loop(name, fast=True), loop(name, fast=True, layout="segments")]
    for name, _, reaction in sorted(key for key in models if key[2:] and key[2] != "rush-larsen"):
        loops += [loop(name, reaction), loop(name, reaction, layout="segments")]
        if get_model(name).fast is not None and get_model(name).fast.kinetics is not None:
            loops += [loop(name, reaction, fast=True), loop(name, reaction, fast=True, layout="segments")]
    return loops
