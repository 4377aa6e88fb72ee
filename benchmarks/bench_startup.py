"""Start-up time of the tour's first commands: empty numba cache (cold) and filled (warm).

Run by hand from the repository root (windsolve installed)::

    python benchmarks/bench_startup.py              # best of 2, every command
    python benchmarks/bench_startup.py --repeats 3 --only run bump

Each command runs as a child process, as a user types it.  A cold run gets a
fresh, empty ``NUMBA_CACHE_DIR`` (numba honours it, so the package's own cache,
warm or not, plays no part): every kernel the command needs is compiled.  A
warm run reuses the directory a cold run filled.  The input files that
``lines`` and ``compare`` read are made first, in a scratch directory, with a
cache of their own (not timed).

Printed per command, best of ``--repeats``: wall time, and the CPU time of the
child (user + sys, ``resource.getrusage(RUSAGE_CHILDREN)`` before and after).
The machine may be shared: wall time then includes waiting for a core, CPU
time does not, so read the CPU column when comparing two checkouts.  As a
baseline the script also times a bare ``python -c "import numpy,
scipy.optimize"``.

Goals (issue 14, item 5): each cold command <= 10 s on 2 cores; a warm
``windsolve run`` <= 1 s.
"""

import argparse
import os
import resource
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
CONFIGS = ROOT / "configs"
COLD_GOAL_S = 10.0
WARM_GOAL_S = 1.0


def commands():
    """(key, argv after ``windsolve``, what it is) of the timed commands, in tour order."""
    return [
        ("run", ["run"], "windsolve run (the demo, Model A)"),
        ("bump", ["run", str(CONFIGS / "bump_wind.toml"), "-o", "bump_out.h5"],
         "windsolve run configs/bump_wind.toml (Model B)"),
        ("lines", ["lines", "bump.h5"], "windsolve lines bump.h5"),
        ("compare", ["compare", "demo.h5", str(CONFIGS / "observed_widths.csv"),
                     "--plot", "residuals.png"],
         "windsolve compare demo.h5 observed_widths.csv --plot"),
    ]


def timed(argv, env, cwd):
    """(wall, cpu) seconds of one child process; cpu = its user + sys time."""
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    t0 = time.perf_counter()
    subprocess.run(argv, check=True, env=env, cwd=cwd, stdout=subprocess.DEVNULL)
    wall = time.perf_counter() - t0
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    cpu = (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)
    return wall, cpu


def best(pairs):
    """(best wall, best cpu) of several runs (each minimum taken on its own)."""
    return min(w for w, _ in pairs), min(c for _, c in pairs)


def main(argv=None):
    keys = [k for k, _, _ in commands()]
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeats", type=int, default=2, help="runs per command and state")
    ap.add_argument("--only", nargs="+", choices=keys, default=keys, help="commands to time")
    ap.add_argument("--warm-only", action="store_true", help="skip the cold runs")
    args = ap.parse_args(argv)

    ws = [sys.executable, "-m", "windsolve"]
    scratch = Path(tempfile.mkdtemp(prefix="windsolve-startup-"))
    caches = []

    def fresh_cache():
        caches.append(tempfile.mkdtemp(prefix="windsolve-numba-"))
        return dict(os.environ, NUMBA_CACHE_DIR=caches[-1])

    try:
        prep = fresh_cache()
        subprocess.run(ws + ["run", "-o", "demo.h5"], check=True, env=prep, cwd=scratch,
                       stdout=subprocess.DEVNULL)
        subprocess.run(ws + ["run", str(CONFIGS / "bump_wind.toml"), "-o", "bump.h5"],
                       check=True, env=prep, cwd=scratch, stdout=subprocess.DEVNULL)
        rows = []
        for key, cmd, label in commands():
            if key not in args.only:
                continue
            cold = []
            env = prep
            if not args.warm_only:
                for _ in range(args.repeats):
                    env = fresh_cache()
                    cold.append(timed(ws + cmd, env, scratch))
            warm = [timed(ws + cmd, env, scratch) for _ in range(args.repeats)]
            rows.append((label, best(cold) if cold else None, best(warm)))
            print(f"  ({label}: cold {cold}, warm {warm})", file=sys.stderr)
        base = best([timed([sys.executable, "-c", "import numpy, scipy.optimize"],
                           prep, scratch) for _ in range(args.repeats)])
    finally:
        shutil.rmtree(scratch, ignore_errors=True)
        for c in caches:
            shutil.rmtree(c, ignore_errors=True)

    print(f"start-up, best of {args.repeats} (wall / CPU of the child, seconds; "
          f"{os.cpu_count()} cores, load {os.getloadavg()[0]:.1f})")
    print(f"{'command':55s} {'cold wall':>9s} {'cold CPU':>9s} {'warm wall':>9s} "
          f"{'warm CPU':>9s}")
    for label, cold, warm in rows:
        c = f"{cold[0]:9.2f} {cold[1]:9.2f}" if cold else f"{'-':>9s} {'-':>9s}"
        print(f"{label:55s} {c} {warm[0]:9.2f} {warm[1]:9.2f}")
    print(f"{'baseline: python -c import numpy, scipy.optimize':55s} {'':19s} "
          f"{base[0]:9.2f} {base[1]:9.2f}")
    print(f"goals: cold <= {COLD_GOAL_S:g} s each, warm 'windsolve run' <= {WARM_GOAL_S:g} s")


if __name__ == "__main__":
    main()
