"""Main-process memory of a sweep: bytes per row at two sweep sizes, this checkout vs another.

Run by hand from the repository root (windsolve installed)::

    python benchmarks/bench_sweep_memory.py [--baseline OLD_CHECKOUT] [--sizes 2000,20000]
                                            [--workers 2]

Builds a Model A grid sweep (star.luminosity x star.mass around the demo
model, configs/demo.toml) of each size and runs ``run_sweep`` (quiet, local
workers) in a fresh process per measurement, with the windsolve of this
checkout and, with ``--baseline``, of OLD_CHECKOUT (e.g. ``git worktree add
../sweep-old 042755c``; imported through PYTHONPATH, which the spawned
workers inherit).  Two measurements, each in its own process:

* ``tracemalloc``: the peak of Python allocations in the main process during
  ``run_sweep``, above what was allocated when it started (the sweep file,
  its rows and the imports are not counted);
* ``rss``: the growth of the main process's peak resident set
  (``resource.getrusage``) over ``run_sweep``, without tracemalloc.

Bytes per row is the marginal cost: the difference between the two sizes
divided by the difference in rows, so fixed costs (imports, the pool,
tqdm) cancel.  The workers' memory is not counted: they hold one batch.
"""

import argparse
import os
import subprocess
import sys
import tempfile
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
DEMO = ROOT / "configs" / "demo.toml"
N_MASS = 40  # masses per luminosity


def sweep_text(n):
    n_l = max(1, n // N_MASS)
    return f"""[sweep]
base = "{DEMO}"
design = "grid"
[[axis]]
key = "star.luminosity"
start = "3e6 Lsun"
stop = "6e6 Lsun"
num = {n_l}
spacing = "log"
[[axis]]
key = "star.mass"
start = "45 Msun"
stop = "60 Msun"
num = {N_MASS}
"""


MEMORY_CODE = """
import resource, sys, tracemalloc
import windsolve
from windsolve.sweep import load_sweep, run_sweep
path, out, workers, mode = sys.argv[1], sys.argv[2], int(sys.argv[3]), sys.argv[4]
sweep = load_sweep(path)
rows = len(sweep)
if mode == "tracemalloc":
    tracemalloc.start()
    start = tracemalloc.get_traced_memory()[0]
    tracemalloc.reset_peak()
    run_sweep(sweep, out, workers=workers, quiet=True)
    growth = tracemalloc.get_traced_memory()[1] - start
else:
    before = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    run_sweep(sweep, out, workers=workers, quiet=True)
    growth = (resource.getrusage(resource.RUSAGE_SELF).ru_maxrss - before) * 1024
print(windsolve.__file__, rows, growth)
"""


def measure(root, n, mode, workers, tmp):
    """(rows, bytes) of one run_sweep in a fresh process with the windsolve of ``root``."""
    path = Path(tmp) / f"sweep_{n}.toml"
    path.write_text(sweep_text(n))
    out = Path(tmp) / f"out_{n}_{os.getpid()}.h5"
    out.unlink(missing_ok=True)
    env = dict(os.environ, PYTHONPATH=str(root))
    res = subprocess.run([sys.executable, "-c", MEMORY_CODE, str(path), str(out),
                          str(workers), mode], check=True, capture_output=True, text=True,
                         cwd=root, env=env)
    where, rows, growth = res.stdout.split()[-3:]
    if not Path(where).resolve().is_relative_to(Path(root).resolve()):
        raise RuntimeError(f"the benchmark imported {where}, not the windsolve of {root}")
    out.unlink(missing_ok=True)
    return int(rows), int(growth)


def report(label, root, sizes, workers, tmp):
    per_row = {}
    for mode in ("tracemalloc", "rss"):
        (n1, m1), (n2, m2) = (measure(root, n, mode, workers, tmp) for n in sizes)
        per_row[mode] = (m2 - m1) / (n2 - n1)
        print(f"{label:>9} {mode:>11}: {n1:6d} rows {m1 / 1e6:8.1f} MB, {n2:6d} rows "
              f"{m2 / 1e6:8.1f} MB: {per_row[mode]:7.0f} bytes/row", flush=True)
    return per_row


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--baseline", help="another checkout to compare with")
    parser.add_argument("--sizes", default="2000,20000")
    parser.add_argument("--workers", type=int, default=2)
    args = parser.parse_args()
    sizes = [int(s) for s in args.sizes.split(",")]
    print(f"main-process memory growth of run_sweep (Model A grid, {args.workers} workers)")
    with tempfile.TemporaryDirectory() as tmp:
        if args.baseline:
            old = report("baseline", Path(args.baseline), sizes, args.workers, tmp)
        new = report("this", ROOT, sizes, args.workers, tmp)
    if args.baseline:
        for mode in new:
            print(f"{mode:>11}: {old[mode]:7.0f} -> {new[mode]:7.0f} bytes/row")


if __name__ == "__main__":
    main()
