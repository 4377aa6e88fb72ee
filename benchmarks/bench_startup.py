"""Wall time of ``windsolve run`` on the built-in demo: first run and warm runs.

Run by hand from the repository root (windsolve installed)::

    python benchmarks/bench_startup.py

The first run compiles every numba kernel; later runs load them from numba's
on-disk cache.  A fresh ``NUMBA_CACHE_DIR`` makes the first run honest even
when the package's own cache is already warm.  As a baseline the script also
times a bare ``python -c "import numpy, scipy.optimize"`` in the same run.
Goal (foundation issue): a warm run in <= 2 s wall.
"""

import os
import shutil
import statistics
import subprocess
import sys
import tempfile
import time

RUNS = 5
GOAL_S = 2.0


def wall(cmd, env):
    t0 = time.perf_counter()
    subprocess.run(cmd, check=True, env=env, stdout=subprocess.DEVNULL)
    return time.perf_counter() - t0


def main():
    cache = tempfile.mkdtemp(prefix="windsolve-numba-")
    try:
        env = dict(os.environ, NUMBA_CACHE_DIR=cache)
        run = [sys.executable, "-m", "windsolve", "run"]
        first = wall(run, env)
        warm = [wall(run, env) for _ in range(RUNS)]
        base = [wall([sys.executable, "-c", "import numpy, scipy.optimize"], env)
                for _ in range(RUNS)]
    finally:
        shutil.rmtree(cache, ignore_errors=True)
    w = statistics.median(warm)
    b = statistics.median(base)
    print(f"windsolve run (demo), first run, empty numba cache: {first:6.2f} s")
    print(f"windsolve run (demo), warm cache, median of {RUNS}:     {w:6.2f} s"
          f"  (goal <= {GOAL_S:g} s)")
    print(f"baseline: python -c 'import numpy, scipy.optimize':  {b:6.2f} s"
          f"  (windsolve warm / baseline = {w / b:.1f})")


if __name__ == "__main__":
    main()
