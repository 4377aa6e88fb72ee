"""``windsolve compare`` with confidence regions over a 10,000-row sweep.

Run by hand from the repository root (windsolve installed)::

    python benchmarks/bench_compare.py

A 100 x 100 Model A sweep table with widths is written with the sweep's own
writer from synthetic rows (no solve runs), and three observed quantities are
compared with it.  Timed in one run, in turn (interleaved), best of several:

* ``windsolve compare SWEEP OBS -o chi2.csv`` in this process (read and check
  the file, chi^2 with per-measurement exclusion, the five best rows, the
  Delta chi^2 ranges at 1, 2, 3 sigma for one and two parameters, the CSV
  with Mdot, v_inf, predictions and residuals) -- goal <= 2 s;
* the same without ``-o``;
* a plain baseline: h5py reads the columns, numpy computes chi^2, its
  minimum and the rows inside each Delta chi^2 level, and ``csv`` writes the
  same number of rows -- the floor any implementation pays.

Prints each time and the ratio to the baseline.
"""

import contextlib
import csv
import io
import tempfile
import time
from pathlib import Path

import h5py
import numpy as np

from windsolve import cli
from windsolve.sweep import load_sweep, write_sweep_table

ROOT = Path(__file__).resolve().parent.parent
DEMO = ROOT / "configs" / "demo.toml"
REPEATS = 7


def make_sweep(tmp):
    big = tmp / "big.toml"
    big.write_text(f'[sweep]\nbase = "{DEMO}"\ndesign = "grid"\n[observables]\n'
                   f'turbulence = "10 km/s"\n[[axis]]\nkey = "star.luminosity"\n'
                   f'start = "2.5e6 Lsun"\nstop = "8e6 Lsun"\nnum = 100\nspacing = "log"\n'
                   f'[[axis]]\nkey = "porosity.length"\nstart = "1 Rsun"\n'
                   f'stop = "100 Rsun"\nnum = 100\nspacing = "log"\n')
    sweep = load_sweep(big)
    rng = np.random.default_rng(0)
    L = sweep.axis_table[:, 0] / sweep.axis_table[:, 0].min()
    h = sweep.axis_table[:, 1] / sweep.axis_table[:, 1].min()
    records = {}
    for i in range(len(sweep)):
        v = 3e7 * L[i] ** 0.5 * h[i] ** 0.05
        records[i] = {"row": i, "converged": bool(rng.random() > 0.05), "status": "converged",
                      "message": "", "seconds": 0.0, "mass_loss_rate": 1e22 * L[i],
                      "terminal_velocity": v, "fwhm": 0.9 * v, "hwzi": 1.1 * v,
                      "edge_velocity": -v if rng.random() > 0.1 else np.nan}
    out = tmp / "big.h5"
    write_sweep_table(sweep, records, out)
    obs = tmp / "obs.csv"
    obs.write_text("object,quantity,line,value,uncertainty,unit\n"
                   "S,terminal_velocity,-,450,40,km/s\nS,fwhm,Ha,420,40,km/s\n"
                   "S,edge_velocity,CIV,-460,50,km/s\n")
    return out, obs


def run_cli(argv):
    with contextlib.redirect_stdout(io.StringIO()):
        assert cli.main(argv) == 0


def baseline(path, out_csv):
    observed = [("terminal_velocity", 450e5, 40e5), ("fwhm", 420e5, 40e5),
                ("edge_velocity", -460e5, 50e5)]
    with h5py.File(path) as f:
        g = f["table"]
        conv = g["converged"][()]
        cols = {q: g[q][()] for q, _, _ in observed}
        axes = [g["star.luminosity"][()], g["porosity.length"][()]]
        mdot, vinf = g["mass_loss_rate"][()], g["terminal_velocity"][()]
    z = np.stack([(cols[q] - v) / s for q, v, s in observed], axis=1)
    chi2 = np.where(conv, np.sum(z ** 2, axis=1), np.nan)
    lo = np.nanmin(chi2)
    for level in (1.0, 4.0, 9.0, 2.30, 6.18, 11.8):
        inside = chi2 <= lo + level
        [(a[inside].min(), a[inside].max()) for a in axes]
    with open(out_csv, "w", newline="") as fh:
        w = csv.writer(fh)
        for i in range(len(chi2)):
            w.writerow([i, repr(float(axes[0][i])), repr(float(axes[1][i])),
                        repr(float(mdot[i])), repr(float(vinf[i]))]
                       + [repr(float(x)) for x in z[i]] + [repr(float(chi2[i]))])


def main():
    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        sweep, obs = make_sweep(tmp)
        csv_out = tmp / "chi2.csv"
        runs = {
            "compare -o chi2.csv": lambda: run_cli(["compare", str(sweep), str(obs), "-o",
                                                    str(csv_out)]),
            "compare (print only)": lambda: run_cli(["compare", str(sweep), str(obs)]),
            "baseline (h5py + numpy + csv)": lambda: baseline(sweep, tmp / "base.csv"),
        }
        for fn in runs.values():  # warm: imports, caches
            fn()
        best = dict.fromkeys(runs, float("inf"))
        for _ in range(REPEATS):  # interleaved
            for name, fn in runs.items():
                t0 = time.perf_counter()
                fn()
                best[name] = min(best[name], time.perf_counter() - t0)
        base = best["baseline (h5py + numpy + csv)"]
        print("compare over a 10,000-row sweep (3 measurements, 2 axes), best of "
              f"{REPEATS}, interleaved:")
        for name, t in best.items():
            print(f"  {name:32s} {1e3 * t:8.1f} ms  ({t / base:5.2f} x baseline)")
        print(f"  goal: compare with confidence regions <= 2000 ms: "
              f"{'met' if best['compare -o chi2.csv'] <= 2.0 else 'NOT met'}")


if __name__ == "__main__":
    main()
