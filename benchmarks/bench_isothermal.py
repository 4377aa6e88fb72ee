"""Time windsolve's compiled Model A solve against a plain scipy reference.

Run by hand from the repository root::

    PYTHONPATH=. python benchmarks/bench_isothermal.py

Three cases, all as kernel parameter vectors:

``demo``
    the built-in demo model (``configs/demo.toml``): M = 50 Msun, R0 = 100 Rsun,
    L0 = 4e6 Lsun, a = 20 km/s, rho0 = 1e-9 g cm-3, electron scattering with
    porosity h0 = 0.1 R0, q = 1, r_out = 100 R0 (super-Eddington in kappa_es;
    porosity sets the sonic point).
``porosity``
    ``configs/porous_tiring.toml``: a much more porous, denser base with
    photon tiring on (Mdot about half the tiring limit).
``parker``
    ``configs/parker_reference.toml``: electron scattering at Gamma = 0.5,
    a = 100 km/s, r_c = 3.9 R0, no porosity: Parker's wind with gravity
    GM(1 - Gamma), so the exact Mdot (Lambert W, docs/physics.md, eq. 18) is printed
    as well, and the two solvers are also compared at equal accuracy.

Both solvers get the same ``P``, ``O``, ``rtol`` and ``delta``; the reference
(:mod:`scipy_reference`) searches its own bracket, so both timings include the
whole shooting root-find.  Timings are medians of ``time.perf_counter``.
"""

import functools
import math
import os
import subprocess
import sys
import time

import numpy as np
from scipy.special import lambertw
from scipy_reference import effective_opacity, solve_reference  # this script's folder
from timing import median_ms  # this script's folder

from windsolve.core import opacity as op
from windsolve.core.constants import C_LIGHT, M_U, SIGMA_T, G
from windsolve.models.isothermal import kernels as iso

RTOL = 1e-8
DELTA = 1e-6
N_WINDSOLVE = 200
N_SCIPY = 7
GOAL_MS = 2.0
GOAL_RATIO = 100.0
TRUTH_RTOL = 1e-12  # the converged Mdot that errors are measured against


def make_case(M, R0, L0, a, rho0, X, T, r_out, h0=0.0, q=0.0):
    """Kernel vectors ``(P, O)`` for Model A, electron scattering (cgs inputs)."""
    P = np.zeros(iso.N_PARAMS)
    P[iso.I_GM] = G * M
    P[iso.I_A2] = a * a
    P[iso.I_R0] = R0
    P[iso.I_RHO0] = rho0
    P[iso.I_L0] = L0
    P[iso.I_T] = T
    P[iso.I_TIRING] = 0.0
    P[iso.I_ROUT] = r_out
    kes = SIGMA_T / M_U * (1.0 + X) / 2.0
    O = op.pack(op.LAW_ELECTRON_SCATTERING, kes, porosity=(h0, R0, q))
    return P, O


def cases():
    """The benchmark cases as ``{name: (P, O)}``."""
    import windsolve

    demo = windsolve.load_model(windsolve.demo_model_path()).kernel_arrays
    root = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
    porosity = windsolve.load_model(os.path.join(root, "configs", "porous_tiring.toml"))
    parker = windsolve.load_model(os.path.join(root, "configs", "parker_reference.toml"))
    return {"demo": demo, "porosity": porosity.kernel_arrays, "parker": parker.kernel_arrays}


def parker_mass_loss_rate(P, O):
    """Exact Mdot [g s-1] of the constant-Gamma case (Cranmer 2004, AJP 72, 1397).

    v/a = sqrt(-W_0(-D)), D = (r_c/r)^4 exp(4 (1 - r_c/r) - 1), evaluated at R0.
    """
    GM, a2, R0, rho0 = P[iso.I_GM], P[iso.I_A2], P[iso.I_R0], P[iso.I_RHO0]
    gamma = O[op.SLOT_KES] * P[iso.I_L0] / (4.0 * math.pi * C_LIGHT * GM)
    u = GM * (1.0 - gamma) / (2.0 * a2) / R0
    D = math.exp(4.0 * math.log(u) + 4.0 * (1.0 - u) - 1.0)
    return 4.0 * math.pi * R0 ** 2 * rho0 * math.sqrt(a2) * math.sqrt(-lambertw(-D, 0).real)


def opacity_agreement():
    """Largest relative difference between the reference's and the kernel's
    effective opacity, over all three laws with and without porosity."""
    kes = SIGMA_T / M_U * (0.7 / 1.008 + 2 * 0.28 / 4.002602 + 0.02 / 2)  # X = 0.7, Z = 0.02
    laws = [(op.LAW_ELECTRON_SCATTERING, ()), (op.LAW_KRAMERS, (3.68e22 * 1.7,)),
            (op.LAW_BUMP, (5.0, 1e-9, 0.5, 5.25, 0.1))]
    worst = 0.0
    for law, params in laws:
        for porosity in ((0.0, 1.0, 0.0), (7e11, 7e12, 1.0)):
            O = op.pack(law, kes, params, porosity)
            for rho in np.logspace(-18.0, -6.0, 9):
                for T in (1e4, 1.8e5, 1e6):
                    for r in (7e12, 3e13):
                        k_ws = op.effective_opacity(O, rho, T, r)
                        k_sp = effective_opacity(O, rho, T, r)
                        worst = max(worst, abs(k_sp / k_ws - 1.0))
    return worst


def import_time_s():
    """Wall time [s] of a fresh interpreter importing the isothermal kernels."""
    env = dict(os.environ)
    root = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
    env["PYTHONPATH"] = root + os.pathsep + env.get("PYTHONPATH", "")
    t0 = time.perf_counter()
    subprocess.run([sys.executable, "-c", "import windsolve.models.isothermal.kernels"],
                   check=True, env=env)
    return time.perf_counter() - t0


def main():
    print(f"windsolve Model A vs plain scipy reference (rtol = {RTOL:g}, delta = {DELTA:g})")
    print(f"medians: windsolve over {N_WINDSOLVE} runs, scipy over {N_SCIPY} runs")
    header = (f"{'case':<9} {'ws [ms]':>8} {'scipy [ms]':>10} {'ratio':>6} "
              f"{'shots ws/sp':>11} {'Mdot ws [g/s]':>22} {'Mdot scipy [g/s]':>22} {'rel diff':>9}")
    print(header)
    print("-" * len(header))
    worst = 0.0
    notes = []
    for name, (P, O) in cases().items():
        t0 = time.perf_counter()
        iso.solve(P, O, RTOL, DELTA)  # compile or load numba's cache
        warm = time.perf_counter() - t0
        t_ws, res = median_ms(functools.partial(iso.solve, P, O, RTOL, DELTA), N_WINDSOLVE)
        code, ln_mdot, r_c, slope, n_shots, reason = res
        if code != iso.OK:
            raise RuntimeError(f"{name}: windsolve failed with code {code}")
        t_sp, ref = median_ms(functools.partial(solve_reference, P, O, RTOL, DELTA), N_SCIPY)
        mdot = math.exp(ln_mdot)
        rel = abs(ref["mass_loss_rate"] / mdot - 1.0)
        worst = max(worst, t_ws)
        print(f"{name:<9} {t_ws:8.3f} {t_sp:10.2f} {t_sp / t_ws:6.1f} "
              f"{n_shots:>5d}/{ref['n_shots']:<5d} {mdot:22.15e} "
              f"{ref['mass_loss_rate']:22.15e} {rel:9.1e}")
        notes.append(f"  {name}: first call in process {1e3 * warm:.1f} ms; r_c ws {r_c:.10e} cm,"
                     f" scipy {ref['sonic_radius']:.10e} cm (rel diff "
                     f"{abs(ref['sonic_radius'] / r_c - 1.0):.1e})")
        # Equal accuracy: errors against an exact or converged Mdot, and the
        # loosest windsolve tolerance whose error is no larger than the
        # reference's at rtol = RTOL (the reference's tolerance is the looser
        # one on ln v; see scipy_reference).
        if name == "parker":
            truth, source = parker_mass_loss_rate(P, O), "exact (Lambert W)"
        else:
            truth = solve_reference(P, O, TRUTH_RTOL, DELTA)["mass_loss_rate"]
            source = f"scipy reference at rtol {TRUTH_RTOL:g}"
            tight = math.exp(iso.solve(P, O, TRUTH_RTOL, DELTA)[1])
            source += f", windsolve there within {abs(tight / truth - 1.0):.0e}"
        err_ws = abs(mdot / truth - 1.0)
        err_sp = abs(ref["mass_loss_rate"] / truth - 1.0)
        notes.append(f"  {name}: Mdot {source}; rel err ws {err_ws:.1e}, scipy {err_sp:.1e}")
        for rtol in (1e-6, 3e-7, 1e-7, 3e-8, RTOL):
            res_eq = iso.solve(P, O, rtol, DELTA)
            if abs(math.exp(res_eq[1]) / truth - 1.0) <= err_sp:
                t_eq, res_eq = median_ms(functools.partial(iso.solve, P, O, rtol, DELTA),
                                         N_WINDSOLVE)
                notes.append(f"  {name} at equal accuracy: windsolve rtol {rtol:g} gives rel "
                             f"err {abs(math.exp(res_eq[1]) / truth - 1.0):.1e} in "
                             f"{t_eq:.3f} ms: ratio {t_sp / t_eq:.1f}")
                break
        if rel > 1e-6:
            notes.append(f"  WARNING {name}: Mdot differs by {rel:.1e} (> 1e-6)")
    print("\n".join(notes))
    print("  (shots: integrations of the inward leg; windsolve's walk uses secant steps from an"
          " analytic start, the reference's doubling steps)")
    print(f"  opacity laws, reference vs kernel: max rel diff {opacity_agreement():.1e}")
    print(f"goal: <= {GOAL_MS:g} ms median, >= {GOAL_RATIO:g}x "
          f"(slowest windsolve median here: {worst:.3f} ms)")
    print(f"subprocess 'import windsolve.models.isothermal.kernels': "
          f"{import_time_s():.2f} s (info)")
    api_ms()


def api_ms():
    """The full public call on the demo: solve + profile + critical points."""
    import windsolve

    model = windsolve.load_model(windsolve.demo_model_path())
    windsolve.solve(model)
    t, result = median_ms(functools.partial(windsolve.solve, model), N_WINDSOLVE)
    print(f"windsolve.solve(demo) (kernel solve + stored profile + critical points + "
          f"units): {t:.3f} ms median, {len(result.profile['radius'])} profile points")


if __name__ == "__main__":
    main()
