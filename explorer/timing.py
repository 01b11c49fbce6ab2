"""Wall-time measurement shared by the benchmark sections."""

from __future__ import annotations

import time


def best_of(fn, repeat: int, warm_up: bool = True):
    """Shortest wall time of ``repeat`` calls of ``fn`` and the last result.

    One untimed call first (``warm_up``) takes imports, property tables and
    cached factorisations out of the figure; the minimum over the repeats
    suppresses the noise of a shared machine without hiding a slow path.
    """
    if warm_up:
        fn()
    best, out = float("inf"), None
    for _ in range(max(1, int(repeat))):
        t0 = time.perf_counter()
        out = fn()
        best = min(best, time.perf_counter() - t0)
    return best, out
