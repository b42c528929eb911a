"""Grouping a sweep's points into tasks: points that can share a time loop go together."""

from __future__ import annotations

import numpy as np


def chunk_key(case) -> tuple:
    """The key by which points are chunked: :func:`cable.kernels.batch.loop_key` and, with
    tabulated rates, the values of the rate table's parameters (``FastPath.table_parameters``,
    e.g. the HH temperature), which :func:`cable.kernels.batch.group_key` also compares but
    ``loop_key`` does not: without them a sweep over temperature would fill each chunk with
    points that cannot share a loop.

    Parameters
    ----------
    case : cable.case.Case
        A loaded point.
    """
    from cable.kernels.batch import loop_key
    from cable.membrane import get_model
    from cable.preparation import node_parameters

    key = loop_key(case)
    model = get_model(case.membrane.model)
    fast = model.fast
    if case.numerics.rates in ("reference", "exact") or fast is None or fast.build_table is None:
        return key
    row = node_parameters(case, model, 1)[0]  # before regions: batch.group_key has the last word
    return key + (tuple(float(row[model.parameter_names.index(name)]) for name in fast.table_parameters),)


def chunks(keys: list, batch: int, workers: int) -> list[list[int]]:
    """Split points into tasks: points of one key together, ``batch`` at most per task.

    Parameters
    ----------
    keys : list of (int, hashable)
        Each point's index and its grouping key (:func:`chunk_key`), in the order to run
        them.
    batch : int
        Most points per task.
    workers : int
        Workers of the cluster: no task of a group holds more than ``ceil(group /
        workers)`` points, so that a group of fewer than ``batch * workers`` points
        still gives every worker a task (where it has that many points).

    Returns
    -------
    list of list of int
        The point indices of each task; groups in order of first appearance, each cut
        into chunks of nearly equal size.
    """
    groups: dict = {}
    for index, key in keys:
        groups.setdefault(key, []).append(index)
    out = []
    for members in groups.values():
        size = max(1, min(batch, -(-len(members) // max(1, workers))))
        count = -(-len(members) // size)
        out += [[int(i) for i in part] for part in np.array_split(np.array(members), count)]
    return out
