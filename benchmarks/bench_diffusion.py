"""Time windsolve's photosphere-anchored Model B solve against a plain scipy reference.

Run by hand from the repository root::

    python benchmarks/bench_diffusion.py

The case is ``configs/bump_wind.toml`` (an invented hot star: M = 10 Msun,
L_ph = 2e5 Lsun, T_eff = 5e4 K, X = 0.7, Z = 0.02, bump opacity with A = 3 at
1.8e5 K, w = 0.15 dex, s = 0; rtol = 1e-8), loaded with
:func:`windsolve.load_model`.  Timed, as medians of ``time.perf_counter``
after a warm-up call:

(a) :func:`windsolve.models.diffusion.shooting.solve_photosphere_anchor` (the compiled
    shooting, bisection and critical-point refinement; no step limit),
(b) :func:`windsolve.solve` on the model (the same solve with the stored
    profile's step limit, plus the subsonic leg, profile and units),
(c) :func:`scipy_reference_diffusion.solve_reference`, the same algorithm on
    ``solve_ivp`` with a plain-Python right-hand side,
(d) a family of N_FAMILY photosphere-anchored solves with T_eff log-spaced in
    FAMILY_T at the config's L_ph (one pass, wall time), with every
    SPOT_EVERY-th member checked against the reference.

(a) and (c) get the same ``P, O`` (``model.kernel_arrays``), L_ph, T_eff and
rtol.  "N(c)/g" is |N| at (r_c, v = c_T(T_c), T_c) over GM/r_c^2, with the
Mdot and Edot of the photosphere: how well the reported critical point sits
on the critical curve (plain-Python evaluation, as in the reference).
"""

import collections
import functools
import math
import os
import time

import numpy as np
from scipy_reference_diffusion import _Wind, solve_reference  # this script's folder
from timing import median_ms  # this script's folder

import windsolve
from windsolve.models.diffusion import kernels as D
from windsolve.models.diffusion import shooting as B

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
CONFIG = os.path.join(ROOT, "configs", "bump_wind.toml")
N_WINDSOLVE = 50
N_API = 30
N_SCIPY = 5
N_FAMILY = 100
FAMILY_T = (3e4, 8e4)  # K
SPOT_EVERY = 10
GOAL_MS = 50.0
GOAL_RATIO = 30.0
GOAL_FAMILY_S = 5.0
GOAL_AGREE = 1e-7


def windsolve_shots(P, O, L_ph, T_eff, rtol):
    """Inward shots from the photosphere in one windsolve solve (untimed, counted)."""
    count = [0]
    originals = {name: getattr(D, name) for name in ("shoot_from_photosphere", "shoot_stored")}

    def counted(fn):
        def call(*args):
            count[0] += 1
            return fn(*args)
        return call

    try:
        for name, fn in originals.items():
            setattr(D, name, counted(fn))
        B.solve_photosphere_anchor(P, O, L_ph, T_eff, rtol)
    finally:
        for name, fn in originals.items():
            setattr(D, name, fn)
    return count[0]


def critical_residual(P, O, L_ph, T_eff, mdot, rc, Tc):
    """|N(r_c, c_T(T_c), T_c)| / (GM / r_c^2) at the photosphere's Mdot and Edot."""
    w = _Wind(P, O)
    w.set_photosphere(float(mdot), B.photosphere_radius(L_ph, T_eff), float(L_ph),
                      float(T_eff))
    return abs(w.n_of(rc, math.sqrt(w.KG * Tc), Tc)) * rc * rc / w.GM


def rel(a, b):
    return abs(a / b - 1.0)


def family(P, O, L_ph, rtol):
    """Time N_FAMILY anchored solves; spot-check every SPOT_EVERY-th against scipy."""
    temps = np.geomspace(FAMILY_T[0], FAMILY_T[1], N_FAMILY)
    solutions = {}
    failures = collections.Counter()
    t0 = time.perf_counter()
    for i, T_eff in enumerate(temps):
        try:
            solutions[i] = B.solve_photosphere_anchor(P, O, L_ph, T_eff, rtol)[0].crit
        except B.ModelBFailure as failure:
            failures[failure.code] += 1
    seconds = time.perf_counter() - t0
    worst = np.zeros(3)
    checked = 0
    for i in range(0, N_FAMILY, SPOT_EVERY):
        if i not in solutions:
            continue
        c = solutions[i]
        ref = solve_reference(P, O, L_ph, temps[i], rtol)
        diffs = (rel(ref["mass_loss_rate"], c.mdot), rel(ref["sonic_radius"], c.rc),
                 rel(ref["sonic_temperature"], c.Tc))
        worst = np.maximum(worst, diffs)
        checked += 1
    mdots = [c.mdot for c in solutions.values()]
    return seconds, len(solutions), failures, mdots, checked, worst


def main():
    model = windsolve.load_model(CONFIG)
    P, O = model.kernel_arrays
    L_ph = float(model.cgs("photosphere_luminosity"))
    T_eff = float(model.cgs("photosphere_temperature"))
    rtol = float(model.rtol)
    print(f"windsolve Model B (photosphere anchor) vs plain scipy reference: {model.name}")
    print(f"  L_ph = {L_ph:.4e} erg/s, T_eff = {T_eff:g} K, R_ph = "
          f"{B.photosphere_radius(L_ph, T_eff):.6e} cm, rtol = {rtol:g}")

    t0 = time.perf_counter()
    B.solve_photosphere_anchor(P, O, L_ph, T_eff, rtol)  # load numba's cache
    first_ms = 1e3 * (time.perf_counter() - t0)
    t_ws, (sol, n_stored) = median_ms(
        functools.partial(B.solve_photosphere_anchor, P, O, L_ph, T_eff, rtol), N_WINDSOLVE)
    c = sol.crit
    shots_ws = windsolve_shots(P, O, L_ph, T_eff, rtol)

    windsolve.solve(model)
    t_api, result = median_ms(functools.partial(windsolve.solve, model), N_API)
    if not result.converged:
        raise RuntimeError(f"windsolve.solve failed: {result.message}")
    s = result.summary
    api = (s["mass_loss_rate"].to_value("g/s"), s["sonic_radius"].to_value("cm"),
           s["sonic_temperature"].to_value("K"))

    t_sp, ref = median_ms(functools.partial(solve_reference, P, O, L_ph, T_eff, rtol), N_SCIPY)

    header = (f"{'solver':<34} {'median [ms]':>11} {'runs':>4} {'shots':>5} "
              f"{'Mdot [g/s]':>22} {'r_c [cm]':>22} {'T_c [K]':>19}")
    print(header)
    print("-" * len(header))
    rows = [("(a) windsolve anchor (compiled)", t_ws, N_WINDSOLVE, shots_ws,
             (c.mdot, c.rc, c.Tc)),
            ("(b) windsolve.solve(model)", t_api, N_API, None, api),
            ("(c) scipy reference (solve_ivp)", t_sp, N_SCIPY, ref["n_shots"],
             (ref["mass_loss_rate"], ref["sonic_radius"], ref["sonic_temperature"]))]
    for name, t, runs, shots, (mdot, rc, Tc) in rows:
        shots = "" if shots is None else str(shots)
        print(f"{name:<34} {t:11.3f} {runs:4d} {shots:>5} {mdot:22.15e} {rc:22.15e} "
              f"{Tc:19.12f}")
    ratio = t_sp / t_ws
    d_mdot = rel(ref["mass_loss_rate"], c.mdot)
    d_rc = rel(ref["sonic_radius"], c.rc)
    d_Tc = rel(ref["sonic_temperature"], c.Tc)
    print(f"  speed-up (c)/(a): {ratio:.1f}x; (b)/(a): {t_api / t_ws:.2f}; first windsolve "
          f"call in process {first_ms:.1f} ms; {n_stored} stored points on the final shot")
    print(f"  agreement (a) vs (c): Mdot {d_mdot:.1e}, r_c {d_rc:.1e}, T_c {d_Tc:.1e}")
    print(f"  (b) vs (a) (profile step limit {B.PROFILE_STEP} in ln r changes the steps): "
          f"Mdot {rel(api[0], c.mdot):.1e}, r_c {rel(api[1], c.rc):.1e}, "
          f"T_c {rel(api[2], c.Tc):.1e}")
    res = [critical_residual(P, O, L_ph, T_eff, m, r, T) for m, r, T in
           ((c.mdot, c.rc, c.Tc), api, (ref["mass_loss_rate"], ref["sonic_radius"],
                                       ref["sonic_temperature"]))]
    print(f"  N(c)/g: (a) {res[0]:.1e}, (b) {res[1]:.1e}, (c) {res[2]:.1e}")
    if max(res) > 1e-10:
        print("  NOTE: a reported T_c is off the critical curve N = 0 at its r_c (N(c)/g > "
              "1e-10): a final T_c projection that stopped early")
    worst_agree = max(d_mdot, d_rc)
    if worst_agree > GOAL_AGREE or d_Tc > GOAL_AGREE:
        print(f"  WARNING: (a) and (c) differ by more than {GOAL_AGREE:g}")

    seconds, n_ok, failures, mdots, checked, worst = family(P, O, L_ph, rtol)
    print(f"(d) family: {N_FAMILY} anchored solves, T_eff {FAMILY_T[0]:g}..{FAMILY_T[1]:g} K "
          f"(log-spaced), L_ph as above: {seconds:.3f} s ({1e3 * seconds / N_FAMILY:.2f} ms "
          f"each); converged {n_ok}/{N_FAMILY}"
          + (f", failures by code {dict(failures)}" if failures else ""))
    if mdots:
        print(f"  Mdot {min(mdots):.4e} .. {max(mdots):.4e} g/s; reference spot check on "
              f"{checked} members, worst rel diff: Mdot {worst[0]:.1e}, r_c {worst[1]:.1e}, "
              f"T_c {worst[2]:.1e}")

    ok = [t_ws <= GOAL_MS, ratio >= GOAL_RATIO, seconds <= GOAL_FAMILY_S,
          max(worst_agree, worst[0], worst[1]) <= GOAL_AGREE]
    print(f"goal: photosphere-anchored solve <= {GOAL_MS:g} ms median, >= {GOAL_RATIO:g}x vs "
          f"scipy: {t_ws:.3f} ms, {ratio:.1f}x "
          f"[{'met' if ok[0] and ok[1] else 'NOT met'}]")
    print(f"goal: {N_FAMILY}-member family <= {GOAL_FAMILY_S:g} s: {seconds:.3f} s "
          f"[{'met' if ok[2] else 'NOT met'}]")
    print(f"goal: Mdot and r_c agree to <= {GOAL_AGREE:g}: "
          f"[{'met' if ok[3] else 'NOT met'}]")


if __name__ == "__main__":
    main()
