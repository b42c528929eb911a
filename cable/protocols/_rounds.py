"""Searches by rounds: several candidate values per round, run together.

A bisection tries one value per round and halves its bracket. A round of ``k`` values
dividing the bracket evenly cuts it ``k + 1`` times: to shrink a bracket by a factor
R takes ceil(log(R) / log(k + 1)) rounds instead of ceil(log2(R)) (R = 100, k = 4:
3 rounds instead of 7). The values of a round are independent runs: they are split
into ``workers`` groups, each group one call of :func:`cable.kernels.batch.simulate_batch`
(strands of one time loop in one kernel call), the groups in threads (the kernels
release the GIL, ``nogil=True``), so that two cores share the round.

The bracket found is never wider than the tolerance, as with bisection, and it holds
the same transition when there is one in the interval; where conduction is not
monotonic in the key, a round keeps the first transition seen from the passing end
(bisection may keep another, as it may with a different interval).
"""

from __future__ import annotations

import math
import os

from cable.case import CaseError

#: threads that share a round's runs at most by default (the development machine has 2 cores)
DEFAULT_WORKERS = 2


def default_workers() -> int:
    """Threads for a round: the cores free when the search starts, at most ``DEFAULT_WORKERS``.

    Free means the cores this process may use less the 1-minute load average, rounded:
    on a busy machine a second thread gets no core of its own, and the extra runs of a
    round would only lengthen the search (measured here: 0.87 times the speed of
    bisection at load 4.7 on 2 cores), so the default is then one value per round.
    """
    from cable.machine import usable_cores

    cores = usable_cores()
    try:
        free = cores - os.getloadavg()[0]
    except OSError:  # no load average: take the cores as free
        free = float(cores)
    return max(1, min(DEFAULT_WORKERS, cores, int(free + 0.5)))


def check_count(who: str, name: str, value) -> int:
    """``value`` as a whole number of at least 1, or a CaseError naming the option."""
    import numbers

    if isinstance(value, bool) or not isinstance(value, numbers.Integral):
        raise CaseError(f"{who}: {name} = {value!r} must be a whole number of at least 1.")
    if not 1 <= int(value) <= 64:
        raise CaseError(f"{who}: {name} = {value!r} must lie between 1 and 64.")
    return int(value)


def batchable(case) -> bool:
    """Whether runs of ``case`` can share a kernel call (as ``cable.kernels.batch.group_key``
    decides: not a ring, no electrodes, no safety factor)."""
    if case.fiber is not None and case.fiber.closed:
        return False
    if case.extra.get("electrode"):
        return False
    return not (case.fiber is not None and case.safety_factor)


def inside(passing: float, failing: float, points: int, tol: float, log: bool = False) -> list[float]:
    """Values dividing the bracket evenly (geometrically with ``log``), ordered from
    ``passing`` toward ``failing``: ``points`` of them, or fewer when fewer already make
    the next bracket no wider than ``tol`` (absolute; relative with ``log``)."""
    if log:
        a, b, step = math.log(passing), math.log(failing), math.log1p(tol)
    else:
        a, b, step = passing, failing, tol
    need = max(1, math.floor(abs(b - a) / step))  # need + 1 parts, each narrower than step
    k = min(points, need)
    values = [a + (b - a) * (i + 1) / (k + 1) for i in range(k)]
    return [math.exp(u) for u in values] if log else values


def narrow(passing: float, failing: float, values: list[float], passed: list[bool]) -> tuple[float, float]:
    """The new bracket from the outcomes of ``values`` (ordered from ``passing`` toward
    ``failing``): the first failing value and the one before it."""
    for value, ok in zip(values, passed):
        if not ok:
            return passing, value
        passing = value
    return passing, failing


def run_together(cases: list, workers: int) -> list:
    """Run ``cases`` in ``workers`` groups, each one :func:`cable.kernels.batch.simulate_batch`
    call, the groups in threads; the results in order (a run's SimulationError in its place).

    Raises
    ------
    CaseError
        A case that cannot be prepared.
    """
    from cable.case import CaseError as _CaseError
    from cable.kernels.batch import simulate_batch

    groups = min(workers, len(cases))
    if groups <= 1:
        results = simulate_batch(cases, errors="return")
    else:
        from concurrent.futures import ThreadPoolExecutor

        size, extra = divmod(len(cases), groups)
        parts, start = [], 0
        for g in range(groups):
            stop = start + size + (1 if g < extra else 0)
            parts.append(cases[start:stop])
            start = stop
        with ThreadPoolExecutor(max_workers=groups, thread_name_prefix="cable-round") as pool:
            futures = [pool.submit(simulate_batch, part, errors="return") for part in parts]
            results = [ds for f in futures for ds in f.result()]
    for ds in results:
        if isinstance(ds, _CaseError):
            raise ds
    return results
