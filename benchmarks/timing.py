"""Timing helper shared by the benchmark scripts (run from this folder's parent)."""

import statistics
import time


def median_ms(fn, n):
    """Median wall time of ``fn()`` over ``n`` calls [ms], and its last result."""
    times = []
    out = None
    for _ in range(n):
        t0 = time.perf_counter()
        out = fn()
        times.append(time.perf_counter() - t0)
    return 1e3 * statistics.median(times), out
