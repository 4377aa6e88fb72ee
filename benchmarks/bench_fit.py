"""Likelihood evaluations per second of `windsolve fit`, against a plain loop of the same solves.

Run from the repository's top folder: ``python benchmarks/bench_fit.py``.

For each case the same walker points are solved
  (0) as bare solves of models built beforehand (the kernels' cost: a lower bound),
  (1) by a plain loop: one :func:`windsolve.sweep.run_batch` call per model (what a
      hand-written likelihood around windsolve's fastest solve would do),
  (2) by the fit's likelihood (:class:`windsolve.fit.LogPosterior`, a whole half-ensemble
      per call, in this process),
  (3) by a whole fit (emcee, checkpoints, convergence, output) in this process, and
  (4) by a whole fit with 2 local worker processes (the sweep executor),
and each is printed as models per second.  Goals (issue 15): Model A with widths
>= 2000/s on 2 cores; Model B photosphere-anchored >= 100/s.  The machine is noisy:
run it two or three times before reading a number off it.
"""

import sys
import tempfile
import time
from pathlib import Path

import numpy as np

TOP = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(TOP))

from windsolve.fit import LogPosterior, initial_walkers, load_fit, run_fit  # noqa: E402
from windsolve.lines import LineSettings  # noqa: E402
from windsolve.models.isothermal import solve_isothermal_cgs  # noqa: E402
from windsolve.solve import solve  # noqa: E402
from windsolve.sweep import apply_changes, run_batch  # noqa: E402

CASES = {
    "Model A (demo, porous) with widths": ("demo.toml", "observed_widths.csv", """
[[free]]
key = "star.luminosity"
prior = "log-uniform"
lower = "3.5e6 Lsun"
upper = "4.5e6 Lsun"

[[free]]
key = "porosity.length"
prior = "uniform"
lower = "6 Rsun"
upper = "14 Rsun"

[[free]]
key = "boundary.base_density"
prior = "log-uniform"
lower = "5e-10 g/cm3"
upper = "2e-9 g/cm3"
""", 32, 400),
    "Model B (bump wind, photosphere-anchored), v_inf": ("bump_wind.toml", None, """
[[free]]
key = "boundary.photosphere_luminosity"
prior = "log-uniform"
lower = "1.9e5 Lsun"
upper = "2.1e5 Lsun"
""", 8, 40),
}


def write(tmp, name, base, obs, free, walkers, steps):
    if obs is None:  # a terminal velocity near the base model's (invented)
        obs_path = tmp / f"{name}.csv"
        obs_path.write_text("object,quantity,line,value,uncertainty,unit\n"
                            "bench (invented),terminal_velocity,-,1000,300,km/s\n")
    else:
        obs_path = TOP / "configs" / obs
    fit = tmp / f"{name}.toml"
    fit.write_text(f'[fit]\nbase = "{TOP / "configs" / base}"\nobservations = "{obs_path}"\n'
                   f'model_uncertainty = 0.05\n{free}\n[sampler]\nwalkers = {walkers}\n'
                   f'steps = {steps}\nseed = 1\n')
    return fit


def main():
    import emcee  # noqa: F401 -- imported once (~1.5 s, scipy.stats), not timed in a fit
    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        for i, (label, (base, obs, free, walkers, steps)) in enumerate(CASES.items()):
            spec = load_fit(write(tmp, f"case{i}", base, obs, free, walkers, steps))
            theta = initial_walkers(spec)
            # Distinct points, as a chain's (no value is read twice).
            points = np.concatenate([theta * (1 + 1e-9 * k) for k in range(4)])
            items = [(j, spec.changes(t)) for j, t in enumerate(points)]
            run_batch(spec.base, items[:2], False, spec.lines)  # warm (numba cache, imports)
            # (0) the bare solves of models built beforehand (not timed): the kernels'
            # own cost, with widths for Model A, a lower bound for any likelihood.
            models = [apply_changes(spec.base_model, changes) for _, changes in items]
            if spec.base_model.kind == "isothermal":
                settings = LineSettings(**spec.lines).cgs

                def bare(model, settings=settings):
                    return solve_isothermal_cgs(model, profile=False, critical=False,
                                                widths=settings, explain=False)
            else:
                bare = solve
            t0 = time.perf_counter()
            for model in models:
                bare(model)
            kernel = len(models) / (time.perf_counter() - t0)
            t0 = time.perf_counter()
            for item in items:
                run_batch(spec.base, [item], False, spec.lines)
            plain = len(items) / (time.perf_counter() - t0)
            logpost = LogPosterior(spec)
            half = walkers // 2
            t0 = time.perf_counter()
            for j in range(0, len(points), half):
                logpost(points[j:j + half])
            batched = len(points) / (time.perf_counter() - t0)
            print(f"{label}:")
            print(f"  bare solves of prebuilt models   {kernel:9.0f} models/s")
            print(f"  plain loop of run_batch solves   {plain:9.0f} models/s")
            print(f"  fit likelihood, half-ensembles   {batched:9.0f} models/s "
                  f"({batched / plain:.2f} x plain)")
            for workers in (1, 2):
                t0 = time.perf_counter()
                run = run_fit(spec, tmp / f"chain{i}-{workers}.h5", workers=workers)
                rate = run.evaluations / (time.perf_counter() - t0)
                print(f"  whole fit, {workers} worker{'s' * (workers > 1)} "
                      f"{'(in process)' if workers == 1 else '(process pool)'}"
                      f"{'' if workers == 1 else '  '}  {rate:9.0f} models/s "
                      f"({rate / plain:.2f} x plain; {run.evaluations} models, "
                      f"statuses {run.statuses})")


if __name__ == "__main__":
    main()
