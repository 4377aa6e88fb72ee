"""Time the base-anchored Model B solve (R0, L0, T0) against today's nested root-finds.

Run by hand from the repository root::

    python benchmarks/bench_base_anchor.py

The case is the base-anchored twin of ``configs/bump_wind.toml``: R0, L0 at
T0 = 1e6 K as the photosphere-anchored solve of that file reports them (an
invented hot star).  Timed in one run, interleaved, best of several rounds:

(a) ``windsolve.solve`` of the twin from nothing (cold: the first search for
    the photosphere, then the quasi-Newton iteration);
(b) the same model started from a neighbour's result (``start_from``: what a
    sweep worker or a family does), the neighbour at L0 x 1.02;
(c) the nested root-finds that were the whole base anchor before
    (``shooting.solve_base_anchor_nested``, kept as the fallback), on the same
    kernel arrays -- the ratio (c)/(a) is the speed-up;
(d) the photosphere-anchored ``windsolve.solve`` of configs/bump_wind.toml,
    for scale;
(e) a 25-model base-anchored sweep (L0 from 1.9e5 to 2.5e5 Lsun) through
    ``windsolve sweep`` on 2 workers, wall time of the whole command.

Goals (issue 13): (a) <= 50 ms median; (e) <= 3 s.
"""

import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import astropy.units as u

import windsolve
from windsolve.models.diffusion import shooting as B

ROOT = Path(__file__).resolve().parent.parent
CONFIG = ROOT / "configs" / "bump_wind.toml"
ROUNDS = 5
PER_ROUND = 6
GOAL_MS = 50.0
GOAL_SWEEP_S = 3.0


def twin_text(top):
    """The model file of the base-anchored twin of the photosphere-anchored result ``top``."""
    s = top.summary
    text = CONFIG.read_text()
    text = text.replace('photosphere_luminosity = "2e5 Lsun"\n', "")
    text = text.replace('photosphere_temperature = "5e4 K"\n', "")
    return text.replace(
        '[star]\nmass = "10 Msun"\n',
        f'[star]\nmass = "10 Msun"\nradius = "{float(s["base_radius"].to_value(u.cm))!r} cm"\n'
        f'luminosity = "{float(s["base_luminosity"].to_value(u.erg / u.s))!r} erg/s"\n')


def best_median(fn):
    """min over ROUNDS of the median of PER_ROUND calls [ms]."""
    best = []
    for _ in range(ROUNDS):
        times = []
        for _ in range(PER_ROUND):
            t0 = time.perf_counter()
            fn()
            times.append(time.perf_counter() - t0)
        best.append(statistics.median(times))
    return 1e3 * min(best)


def main():
    top_model = windsolve.load_model(CONFIG)
    top = windsolve.solve(top_model)
    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        twin_path = tmp / "twin.toml"
        twin_path.write_text(twin_text(top))
        twin = windsolve.load_model(twin_path)
        neighbour = windsolve.solve(twin.replace(luminosity=twin.luminosity * 1.02))
        cold = windsolve.solve(twin)  # compile / warm
        warm = windsolve.solve(twin, start_from=neighbour)
        P, O = twin.kernel_arrays
        L0, T0 = twin.cgs("luminosity"), twin.cgs("base_temperature")

        def nested():
            return B.solve_base_anchor_nested(P, O, L0, "temperature", T0, twin.rtol)

        nested()
        t = {"cold": [], "warm": [], "nested": [], "top": []}
        for _ in range(3):  # interleaved: a slow spell hits all alike
            t["cold"].append(best_median(lambda: windsolve.solve(twin)))
            t["warm"].append(best_median(lambda: windsolve.solve(twin, start_from=neighbour)))
            t["top"].append(best_median(lambda: windsolve.solve(top_model)))
            t0 = time.perf_counter()
            L_ph, T_eff = nested()
            t["nested"].append(1e3 * (time.perf_counter() - t0))
        ms = {k: min(v) for k, v in t.items()}
        mdot = {k: r.summary["mass_loss_rate"].to_value(u.g / u.s)
                for k, r in (("cold", cold), ("warm", warm), ("top", top))}
        B.reset_shots()
        nested()
        nested_shots = B.shots()
        # the nested answer's Mdot: the photosphere solve at its (L_ph, T_eff)
        sol = B.solve_photosphere_anchor(P, O, L_ph, T_eff, twin.rtol)[0]
        mdot["nested"] = sol.crit.mdot

        spec = tmp / "sweep.toml"
        spec.write_text(f'[sweep]\nbase = "{twin_path}"\ndesign = "grid"\n[[axis]]\n'
                        'key = "star.luminosity"\nstart = "1.9e5 Lsun"\nstop = "2.5e5 Lsun"\n'
                        'num = 25\n')
        walls = []
        for _ in range(3):
            t0 = time.perf_counter()
            subprocess.run([sys.executable, "-m", "windsolve", "sweep", str(spec), "-o",
                            str(tmp / "sweep.h5"), "--workers", "2", "-q"], check=True)
            walls.append(time.perf_counter() - t0)
    print(f"base-anchored twin of {CONFIG.name} (R0 = {twin.radius.to_value(u.Rsun):.4f} Rsun, "
          f"L0 = {twin.luminosity.to_value(u.Lsun):.5g} Lsun, T0 = 1e6 K)")
    print(f"(a) cold solve:   {ms['cold']:8.1f} ms  ({cold.counters['shots']} shots)  "
          f"goal <= {GOAL_MS:g} ms")
    print(f"(b) warm solve:   {ms['warm']:8.1f} ms  ({warm.counters['shots']} shots, started "
          f"from L0 x 1.02)")
    print(f"(c) nested:       {ms['nested']:8.1f} ms  ({nested_shots} shots)   (c)/(a) = "
          f"{ms['nested'] / ms['cold']:.1f}x, (c)/(b) = {ms['nested'] / ms['warm']:.1f}x")
    print(f"(d) photosphere-anchored solve: {ms['top']:.1f} ms")
    for k in ("cold", "warm", "nested"):
        print(f"    Mdot {k:6s} / photosphere-anchored - 1 = {mdot[k] / mdot['top'] - 1:+.2e}")
    print(f"(e) 25-model base-anchored sweep, 2 workers: {min(walls):.2f} s (best of 3; "
          f"goal <= {GOAL_SWEEP_S:g} s)")


if __name__ == "__main__":
    main()
