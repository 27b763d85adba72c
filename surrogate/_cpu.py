"""How many cores this process may run on: the one figure the surrogate's threads and the
reference solver's workers both start from."""

from __future__ import annotations

import os


def available_cores() -> int:
    """Cores this process may run on [1]: its CPU affinity mask where the platform has one (a
    container or ``taskset`` may allow fewer than the machine has), else ``os.cpu_count()``."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except (AttributeError, OSError):  # not every platform has an affinity mask
        return max(1, os.cpu_count() or 1)
