"""Sweep throughput and memory: 1 vs 2 workers, overhead against a plain loop.

Run by hand from the repository root (windsolve installed)::

    python benchmarks/bench_sweep.py [N] [--baseline OLD_CHECKOUT [--worker-only]]

Builds a Model A grid sweep of N models (default 2000) around the demo model
(luminosity x porosity length), and measures in the same run:

* ``solve`` in a loop in this process (the baseline, no sweep machinery: the
  same row models, summary only, as the workers do);
* ``windsolve sweep`` with 1 and with 2 local workers (wall time including
  worker start-up, which is reported separately from a 1-model sweep);
* peak resident memory of a sweep process at 1,000 and 10,000 models;
* with ``--baseline OLD_CHECKOUT``: rows per second of a worker's job
  (``journal_batch`` over the sweep's rows) with this checkout against the
  windsolve of OLD_CHECKOUT, each in a fresh process, interleaved, best of
  REPEATS (``--worker-only``: only that).

Wall times are the shortest of REPEATS runs: on this two-core virtual
machine a single run varies by 10 % and more.  What two cores can give at
best is measured too: two independent processes solving the demo in a loop,
against one, doing exactly what a worker does (``run_batch`` on the sweep's
rows) without the pool and the journal.  Per-model costs are marginal costs -- the
difference between a sweep and one of half its size, divided by the
difference in models -- so that start-up and other fixed costs cancel.

Goals (sweep issue): speed-up >= 1.8x on 2 cores; per-model overhead <= 10 %
of a Model A solve; memory flat as the sweep grows.
"""

import math
import os
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import windsolve
from windsolve.modelfile import model_from_dict
from windsolve.sweep import apply_changes, load_sweep

ROOT = Path(__file__).resolve().parent.parent
DEMO = ROOT / "configs" / "demo.toml"


def sweep_text(n_l, n_h):
    return f"""[sweep]
base = "{DEMO}"
design = "grid"
[[axis]]
key = "star.luminosity"
start = "2.5e6 Lsun"
stop = "8e6 Lsun"
num = {n_l}
spacing = "log"
[[axis]]
key = "porosity.length"
start = "1 Rsun"
stop = "100 Rsun"
num = {n_h}
spacing = "log"
"""


def diffusion_text(n):
    return f"""[sweep]
base = "{ROOT / 'configs' / 'bump_wind.toml'}"
design = "grid"
batch = 10
[[axis]]
key = "boundary.photosphere_temperature"
start = "3e4 K"
stop = "8e4 K"
num = {n}
spacing = "log"
"""


REPEATS = 4  # every wall time is the shortest of this many runs (noise only adds time)


def run_once(path, out, workers):
    Path(out).unlink(missing_ok=True)
    t0 = time.perf_counter()
    subprocess.run([sys.executable, "-m", "windsolve", "sweep", str(path), "-o", str(out),
                    "--workers", str(workers), "-q"], check=True)
    return time.perf_counter() - t0


def run_interleaved(runs):
    """Shortest wall time of each (path, out, workers) run, the runs taken in turn
    REPEATS times, so that a slow spell of the machine hits all of them alike."""
    best = [math.inf] * len(runs)
    for _ in range(REPEATS):
        for k, run in enumerate(runs):
            best[k] = min(best[k], run_once(*run))
    return best


def run_cli(path, out, workers):
    return run_interleaved([(path, out, workers)])[0]


def peak_rss_mb(path, out):
    """Peak RSS [MB] of a 2-worker sweep: main process and largest worker."""
    code = ("import resource, sys\n"
            "from windsolve import cli\n"
            f"cli.main(['sweep', {str(path)!r}, '-o', {str(out)!r}, '--workers', '2', '-q'])\n"
            "m = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024\n"
            "c = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss / 1024\n"
            "print(m, c)\n")
    res = subprocess.run([sys.executable, "-c", code], check=True, capture_output=True,
                         text=True)
    main, child = res.stdout.split()
    return float(main), float(child)


SCALING_CODE = """
import sys, time
from windsolve.sweep import load_sweep, run_batch
sweep = load_sweep(sys.argv[1])
items = [(i, sweep.rows[i]) for i in range(len(sweep))]
run_batch(sweep.base, items[:50])
t0 = time.perf_counter(); n = 0
while time.perf_counter() - t0 < 5.0:
    k = n % len(items)
    run_batch(sweep.base, items[k:k + 50]); n += 50
print(n)
"""


def machine_scaling(path):
    """Rows per second of two independent processes doing a worker's job (run_batch on
    the sweep's rows, no pool, no journal) over one: what two cores give this work."""
    def run(k):
        procs = [subprocess.Popen([sys.executable, "-c", SCALING_CODE, str(path)],
                                  stdout=subprocess.PIPE, text=True) for _ in range(k)]
        return sum(int(p.communicate()[0]) for p in procs)
    return run(2) / run(1)


WORKER_CODE = """
import sys, time
from windsolve.sweep import journal_batch, load_sweep
sweep = load_sweep(sys.argv[1])
items = [(i, sweep.rows[i]) for i in range(len(sweep))]
batch = 200  # Model A's ModelSpec.sweep_batch
journal_batch(sweep.base, items[:batch], design="bench")  # kernels loaded, base parsed
best = float("inf")
for _ in range(int(sys.argv[2])):
    t0 = time.perf_counter()
    for k in range(0, len(items), batch):
        journal_batch(sweep.base, items[k:k + batch], design="bench")
    best = min(best, time.perf_counter() - t0)
import windsolve
print(windsolve.__file__, len(items) / best)
"""


def worker_rows_per_second(path, root, passes=3):
    """Rows per second of a worker's job (journal_batch over every row of the sweep,
    in batches of 200, best of ``passes``) with the windsolve of ``root`` (a checkout),
    in a fresh process."""
    # Run from the checkout's root: ``python -c`` puts the working directory first on
    # sys.path, before an editable install of another checkout.
    res = subprocess.run([sys.executable, "-c", WORKER_CODE, str(path), str(passes)],
                         check=True, capture_output=True, text=True, cwd=root)
    where, rate = res.stdout.split()[-2:]
    if not Path(where).resolve().is_relative_to(Path(root).resolve()):
        raise RuntimeError(f"the benchmark imported {where}, not the windsolve of {root}")
    return float(rate)


def compare_worker_path(baseline, n=2000, rounds=REPEATS):
    """Worker-path rows/s of this checkout against ``baseline`` (e.g. a worktree of
    main: ``git worktree add ../sweep-old 042755c``), interleaved, best of ``rounds``."""
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "sweep.toml"
        path.write_text(sweep_text(max(1, n // 20), 20))
        new = old = 0.0
        for _ in range(rounds):
            old = max(old, worker_rows_per_second(path, baseline))
            new = max(new, worker_rows_per_second(path, ROOT))
    print(f"worker path (journal_batch, Model A demo grid of {n} rows, best of {rounds} "
          f"interleaved): {old:7.0f} rows/s at {baseline}, {new:7.0f} rows/s here: "
          f"{new / old:.2f}x   (goal >= 1.5x)")
    return old, new


def main():
    args = sys.argv[1:]
    baseline = None
    if "--baseline" in args:
        k = args.index("--baseline")
        baseline = args[k + 1]
        del args[k:k + 2]
        compare_worker_path(baseline)
        if "--worker-only" in args:
            return
        args = [a for a in args if a != "--worker-only"]
    n = int(args[0]) if args else 2000
    n_h = 20
    n_l = max(1, n // n_h)
    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        path = tmp / "sweep.toml"
        path.write_text(sweep_text(n_l, n_h))
        sweep = load_sweep(path)
        total = len(sweep)
        # Baseline: the same work in a loop in this process (kernels warm):
        # build each row's model from the base and solve it, summary only.
        base = model_from_dict(sweep.base)
        windsolve.solve(apply_changes(base, sweep.rows[0]), profile=False)
        def loop_once():
            t0 = time.perf_counter()
            for changes in sweep.rows:
                windsolve.solve(apply_changes(base, changes), profile=False)
            return time.perf_counter() - t0

        loop = min(loop_once() for _ in range(REPEATS))
        # Start-up (spawn the workers, import, load the kernels) measured for
        # each worker count: three processes share two cores while it lasts.
        one = tmp / "one.toml"
        one.write_text(sweep_text(1, 1))
        two = tmp / "two.toml"
        two.write_text(sweep_text(1, 2).replace('design = "grid"', 'design = "grid"\nbatch = 1'))
        # Fixed costs (start-up, first kernel loads, the final file) cancel in
        # the difference between a sweep and one of half its size.
        half = tmp / "half.toml"
        half.write_text(sweep_text(max(1, n_l // 2), n_h))
        n_half = len(load_sweep(half))
        startup, startup2, t1, t2, h1, h2 = run_interleaved([
            (one, tmp / "one.h5", 1), (two, tmp / "two.h5", 2), (path, tmp / "w1.h5", 1),
            (path, tmp / "w2.h5", 2), (half, tmp / "h1.h5", 1), (half, tmp / "h2.h5", 2)])
        loop = min([loop, *(loop_once() for _ in range(REPEATS))])  # before and after
        per_model = loop / total
        slope1 = (t1 - h1) / (total - n_half)
        slope2 = (t2 - h2) / (total - n_half)
        print(f"{total} Model A models (demo grid: luminosity x porosity length)")
        print(f"  loop of windsolve.solve in one process: {loop:7.2f} s "
              f"({1e3 * per_model:.3f} ms per model, {total / loop:7.1f} models/s)")
        print(f"  sweep, 1 worker:  {t1:7.2f} s  ({total / t1:7.1f} models/s)")
        print(f"  sweep, 2 workers: {t2:7.2f} s  ({total / t2:7.1f} models/s)")
        print(f"  start-up (spawn workers, load kernels): {startup:.2f} s with 1 worker, "
              f"{startup2:.2f} s with 2")
        speedup = slope1 / slope2
        overhead = (slope1 - per_model) / per_model
        print(f"  marginal cost per model ({total} vs {n_half} models): {1e3 * slope1:.3f} ms "
              f"with 1 worker, {1e3 * slope2:.3f} ms with 2")
        print(f"  speed-up 2 vs 1 worker (marginal): {speedup:.2f}x   (goal >= 1.8x; raw "
              f"{t1 / t2:.2f}x, start-up subtracted "
              f"{(t1 - startup) / (t2 - startup2):.2f}x)")
        print(f"  two independent processes doing the workers' job (run_batch, no sweep "
              f"machinery): {machine_scaling(path):.2f}x one -- what 2 cores give this work here")
        print(f"  per-model overhead of the sweep machinery, 1 worker (marginal): "
              f"{100 * overhead:+.1f} % of a solve   (goal <= 10 %)")
        # Model B: photosphere-anchored optically thick winds.
        pb = tmp / "diffusion.toml"
        pb.write_text(diffusion_text(200))
        sweep_b = load_sweep(pb)
        base_b = model_from_dict(sweep_b.base)
        windsolve.solve(apply_changes(base_b, sweep_b.rows[0]), profile=False)
        t0 = time.perf_counter()
        for changes in sweep_b.rows:
            windsolve.solve(apply_changes(base_b, changes), profile=False)
        loop_b = time.perf_counter() - t0
        b1 = run_cli(pb, tmp / "b1.h5", 1)
        b2 = run_cli(pb, tmp / "b2.h5", 2)
        print(f"200 Model B models (bump wind, T_eff 3e4..8e4 K): loop {loop_b:.2f} s "
              f"({1e3 * loop_b / 200:.1f} ms each); sweep 1 worker {b1:.2f} s, 2 workers "
              f"{b2:.2f} s; speed-up (start-up removed) "
              f"{(b1 - startup) / (b2 - startup2):.2f}x")
        for n_mem in (1000, 10000):
            p = tmp / f"mem{n_mem}.toml"
            p.write_text(sweep_text(n_mem // n_h, n_h))
            main_mb, child_mb = peak_rss_mb(p, tmp / f"mem{n_mem}.h5")
            print(f"  peak RSS at {n_mem:5d} models: main process {main_mb:6.1f} MB, "
                  f"largest worker {child_mb:6.1f} MB")
    rss = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    print(f"(machine: {os.cpu_count()} cores; this process peak RSS {rss:.0f} MB)")


if __name__ == "__main__":
    main()
