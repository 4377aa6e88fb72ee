"""Line profiles, chi^2 over a big sweep, and the cost of widths inside a sweep.

Run by hand from the repository root (windsolve installed)::

    python benchmarks/bench_lines.py

Measures, in one run:

* a synthetic emission line with its measured widths from a solved model
  (the demo, Model A; and configs/bump_wind.toml, Model B) -- goal <= 20 ms;
* ``widths_cgs`` alone (what a sweep worker calls: cgs arrays, no astropy)
  on the same profiles, median of 2,000 calls -- goal <= 60 us on the demo,
  <= 2 ms on the optically thick bump wind (whose thin flow slows outward:
  its edge sums every resonance point);
* chi^2 of a 10,000-row sweep table against observed widths (the table is
  written with the sweep's own writer from synthetic rows, so no solve runs)
  -- goal <= 2 s, timed as ``windsolve compare`` does it (read + chi^2);
* a 10,000-model Model A sweep with and without an [observables] table, on
  1 worker and on the default 2, timed in turn (best of 3) -- goal: widths
  add <= 20 % to the run time; also per model as the workers timed it (the
  table's ``seconds``, so start-up and the main process drop out);
* a 200-model Model B sweep the same way (1 worker).
"""

import math
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
from timing import median_ms  # this script's folder

import windsolve
from windsolve.lines import LineSettings, line_widths, widths_cgs
from windsolve.lines.core_radius import _core_radius
from windsolve.lines.synthesis import _read_profile
from windsolve.observe import read_observed, sweep_chi2
from windsolve.sweep import load_sweep, read_sweep_table, write_sweep_table

ROOT = Path(__file__).resolve().parent.parent
REPEATS = 3  # sweep wall times are the best of this many runs, taken in turn
DEMO = ROOT / "configs" / "demo.toml"


def main():
    settings = LineSettings()
    for name, path in (("demo (Model A)", DEMO), ("bump wind (Model B)",
                                                  ROOT / "configs" / "bump_wind.toml")):
        result = windsolve.solve(windsolve.load_model(path))
        line_widths(result, settings)  # compile / warm
        t = median_ms(lambda result=result: line_widths(result, settings), 30)[0]
        print(f"line profile + widths, {name}: {t:.2f} ms median (goal <= 20 ms)")
        r, v, rho = _read_profile(result, "bench")  # + the thin flow of Model B
        Rc = _core_radius(result, None, r, "bench")
        widths_cgs(r, v, rho, settings, Rc)
        t = median_ms(lambda r=r, v=v, rho=rho, Rc=Rc: widths_cgs(r, v, rho, settings, Rc),
                      2000)[0]
        goal = " (goal <= 60 us)" if path == DEMO else " (goal <= 2 ms, issue 12)"
        print(f"widths_cgs alone, {name}: {1e3 * t:.1f} us median{goal}")
    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        big = tmp / "big.toml"
        big.write_text(f'[sweep]\nbase = "{DEMO}"\ndesign = "grid"\n[observables]\n'
                       f'emissivity_power = 2\n[[axis]]\nkey = "star.luminosity"\n'
                       f'start = "2.5e6 Lsun"\nstop = "8e6 Lsun"\nnum = 100\nspacing = "log"\n'
                       f'[[axis]]\nkey = "porosity.length"\nstart = "1 Rsun"\n'
                       f'stop = "100 Rsun"\nnum = 100\nspacing = "log"\n')
        sweep = load_sweep(big)
        rng = np.random.default_rng(0)
        records = {i: {"row": i, "converged": bool(rng.random() > 0.05), "status": "converged",
                       "message": "", "seconds": 0.0,
                       "mass_loss_rate": float(rng.uniform(1e21, 1e23)),
                       "terminal_velocity": float(rng.uniform(2e7, 8e7)),
                       "fwhm": float(rng.uniform(1e7, 5e7)), "hwzi": float(rng.uniform(2e7, 8e7)),
                       "edge_velocity": float(-rng.uniform(2e7, 8e7))} for i in range(len(sweep))}
        out = tmp / "big.h5"
        write_sweep_table(sweep, records, out)
        obs = ROOT / "configs" / "observed_widths.csv"

        def chi2():
            table, attrs = read_sweep_table(out)
            return sweep_chi2(table, read_observed(obs))

        t = median_ms(chi2, 5)[0]
        print(f"chi^2 over a {len(sweep)}-row sweep table (read + compute): {t:.1f} ms "
              f"(goal <= 2000 ms)")
        def grid(extra=""):
            return (f'[sweep]\nbase = "{DEMO}"\ndesign = "grid"\n[[axis]]\n'
                    f'key = "star.luminosity"\nstart = "2.5e6 Lsun"\nstop = "8e6 Lsun"\n'
                    f'num = 100\nspacing = "log"\n[[axis]]\nkey = "porosity.length"\n'
                    f'start = "1 Rsun"\nstop = "100 Rsun"\nnum = 100\nspacing = "log"\n'
                    + extra)

        def run_once(path, workers=1):
            t0 = time.perf_counter()
            subprocess.run([sys.executable, "-m", "windsolve", "sweep", str(path), "-o",
                            str(path.with_suffix(".h5")), "--workers", str(workers), "-q"],
                           check=True)
            return time.perf_counter() - t0

        paths = {"plain": tmp / "plain.toml", "widths": tmp / "widths.toml"}
        paths["plain"].write_text(grid())
        paths["widths"].write_text(grid("[observables]\nemissivity_power = 2\n"))
        run_once(paths["widths"])  # warm every kernel cache
        walls = {}
        in_worker = {}
        for _ in range(REPEATS):  # in turn, so that a slow spell hits all alike
            for workers in (1, 2):
                for label, path in paths.items():
                    key = label, workers
                    walls[key] = min(walls.get(key, math.inf), run_once(path, workers))
                    if workers == 1:
                        seconds = read_sweep_table(path.with_suffix(".h5"))[0]["seconds"]
                        in_worker[label] = min(in_worker.get(label, math.inf),
                                               float(np.mean(seconds)))
        for workers in (1, 2):
            t_plain, t_widths = walls["plain", workers], walls["widths", workers]
            print(f"10,000-model Model A sweep, {workers} worker(s) (best of {REPEATS}): "
                  f"{t_plain:.2f} s without widths, {t_widths:.2f} s with: "
                  f"{100 * (t_widths / t_plain - 1):+.0f} % (goal <= 20 %)")
        w_plain, w_widths = in_worker["plain"], in_worker["widths"]
        print(f"  per model as timed in the worker (1 worker, the table's 'seconds'): "
              f"{1e3 * w_plain:.3f} ms without widths, {1e3 * w_widths:.3f} ms with: "
              f"{100 * (w_widths / w_plain - 1):+.0f} %")
        body_b = (f'[sweep]\nbase = "{ROOT / "configs" / "bump_wind.toml"}"\n'
                  f'design = "grid"\nbatch = 10\n[[axis]]\n'
                  f'key = "boundary.photosphere_temperature"\nstart = "3e4 K"\n'
                  f'stop = "8e4 K"\nnum = 200\nspacing = "log"\n')
        small_b = tmp / "small_b.toml"
        small_b.write_text(body_b)
        widths_b = tmp / "widths_b.toml"
        widths_b.write_text(body_b + "[observables]\nemissivity_power = 2\n")
        run_once(widths_b)  # warm
        t_plain_b = t_widths_b = math.inf
        for _ in range(REPEATS):
            t_plain_b = min(t_plain_b, run_once(small_b))
            t_widths_b = min(t_widths_b, run_once(widths_b))
        print(f"200-model Model B sweep, 1 worker: {t_plain_b:.2f} s without widths, "
              f"{t_widths_b:.2f} s with widths: {100 * (t_widths_b / t_plain_b - 1):+.0f} % "
              f"(goal <= 20 %)")


if __name__ == "__main__":
    main()
