"""What this machine offers a run: the cores this process may use."""

from __future__ import annotations

import os


def usable_cores() -> int:
    """The CPU cores this process may run on (its affinity mask where the system has one)."""
    try:
        return len(os.sched_getaffinity(0))
    except AttributeError:  # not on Linux
        return os.cpu_count() or 1
