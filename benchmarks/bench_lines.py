"""Line profiles, chi^2 over a big sweep, and the cost of widths inside a sweep.

Run by hand from the repository root (windsolve installed)::

    python benchmarks/bench_lines.py

Measures, in one run:

* a synthetic emission line with its measured widths from a solved model
  (the demo, Model A; and configs/bump_wind.toml, Model B) -- goal <= 20 ms;
* ``widths_cgs`` alone (what a sweep worker calls: cgs arrays, no astropy)
  on the same profiles, median of 2,000 calls -- goal <= 60 us on the demo;
* chi^2 of a 10,000-row sweep table against observed widths (the table is
  written with the sweep's own writer from synthetic rows, so no solve runs)
  -- goal <= 2 s, timed as ``windsolve compare`` does it (read + chi^2);
* a 1,000-model sweep with and without an [observables] table (1 worker)
  -- goal: widths add <= 20 % to the run time; printed for the whole run
  (start-up included) and per model (the difference between 2,000- and
  1,000-model sweeps, so that start-up cancels).
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
from windsolve.lines import LineSettings, _core_radius, _read_profile, line_widths, widths_cgs
from windsolve.observe import read_observed, sweep_chi2
from windsolve.sweep import load_sweep, read_sweep_table, write_sweep_table

ROOT = Path(__file__).resolve().parent.parent
REPEATS = 3  # sweep wall times are medians of this many runs
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
        goal = " (goal <= 60 us)" if path == DEMO else ""
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
        def grid(n_l):
            return (f'[sweep]\nbase = "{DEMO}"\ndesign = "grid"\n[[axis]]\n'
                    f'key = "star.luminosity"\nstart = "2.5e6 Lsun"\nstop = "8e6 Lsun"\n'
                    f'num = {n_l}\nspacing = "log"\n[[axis]]\nkey = "porosity.length"\n'
                    f'start = "1 Rsun"\nstop = "100 Rsun"\nnum = 20\nspacing = "log"\n')

        def run_once(path):
            t0 = time.perf_counter()
            subprocess.run([sys.executable, "-m", "windsolve", "sweep", str(path), "-o",
                            str(path.with_suffix(".h5")), "--workers", "1", "-q"], check=True)
            return time.perf_counter() - t0

        def run(path):
            return min(run_once(path) for _ in range(REPEATS))

        paths = {}
        for n_l in (50, 100):  # 1000 and 2000 models
            for label, extra in (("plain", ""),
                                 ("widths", "[observables]\nemissivity_power = 2\n")):
                paths[label, n_l] = tmp / f"{label}{n_l}.toml"
                paths[label, n_l].write_text(grid(n_l) + extra)
        run_once(paths["widths", 50])  # warm every kernel cache
        walls = dict.fromkeys(paths, math.inf)
        in_worker = dict.fromkeys(paths, math.inf)
        for _ in range(REPEATS):  # in turn, so that a slow spell hits all alike
            for key, path in paths.items():
                walls[key] = min(walls[key], run_once(path))
                seconds = read_sweep_table(path.with_suffix(".h5"))[0]["seconds"]
                in_worker[key] = min(in_worker[key], float(np.mean(seconds)))
        t_plain, t_widths = walls["plain", 50], walls["widths", 50]
        print(f"1000-model Model A sweep, 1 worker (best of {REPEATS}): {t_plain:.2f} s "
              f"without widths, {t_widths:.2f} s with widths: "
              f"+{100 * (t_widths / t_plain - 1):.0f} % of the whole run, start-up included "
              f"(goal <= 20 %)")
        # Per model, start-up cancelling: (2000-model run - 1000-model run) / 1000.
        m_plain = (walls["plain", 100] - walls["plain", 50]) / 1000
        m_widths = (walls["widths", 100] - walls["widths", 50]) / 1000
        print(f"  marginal cost per model: {1e3 * m_plain:.3f} ms without widths, "
              f"{1e3 * m_widths:.3f} ms with: +{100 * (m_widths / m_plain - 1):.0f} % per model")
        w_plain, w_widths = in_worker["plain", 100], in_worker["widths", 100]
        print(f"  per model as timed in the worker (2000 models, the table's 'seconds'): "
              f"{1e3 * w_plain:.3f} ms without widths, {1e3 * w_widths:.3f} ms with: "
              f"+{100 * (w_widths / w_plain - 1):.0f} %")
        body_b = (f'[sweep]\nbase = "{ROOT / "configs" / "bump_wind.toml"}"\n'
                  f'design = "grid"\nbatch = 10\n[[axis]]\n'
                  f'key = "boundary.photosphere_temperature"\nstart = "3e4 K"\n'
                  f'stop = "8e4 K"\nnum = 200\nspacing = "log"\n')
        small_b = tmp / "small_b.toml"
        small_b.write_text(body_b)
        widths_b = tmp / "widths_b.toml"
        widths_b.write_text(body_b + "[observables]\nemissivity_power = 2\n")
        run(widths_b)  # warm
        t_plain_b = run(small_b)
        t_widths_b = run(widths_b)
        print(f"200-model Model B sweep, 1 worker: {t_plain_b:.2f} s without widths, "
              f"{t_widths_b:.2f} s with widths: +{100 * (t_widths_b / t_plain_b - 1):.0f} % "
              f"(goal <= 20 %)")


if __name__ == "__main__":
    main()
