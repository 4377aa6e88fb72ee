"""Model B's solver: the photosphere- and base-anchored shooting, WindResult."""

import math
import time

import numpy as np

from ...core.constants import R_SUN
from ...core.critical import KIND_NAMES
from ...result import SolutionCGS, WindResult
from ..base import CAPACITY, MAX_STEP


def _diffusion_failure_result(model, summary, code, text, t0):
    from . import kernels as D
    status = {D.OFF_TABLE: "off_table", D.STALLED: "stalled", D.FALLBACK: "fallback",
              D.INVALID: "no_solution", D.SINGULAR: "no_solution"}.get(code, "failed")
    from . import shooting as B
    return WindResult.from_cgs(model, SolutionCGS(
        False, status, text, summary,
        counters={"shots": B.shots(), "seconds": time.perf_counter() - t0}))


def _start(result):
    """(L_ph [erg/s], T_eff [K], ln Mdot, L(R0) [erg/s]) of a converged Model B result, or None."""
    if result is None or not getattr(result, "converged", False):
        return None
    try:
        values = [result.summary[key].to_value(unit) for key, unit in (
            ("photosphere_luminosity", "erg/s"), ("photosphere_temperature", "K"),
            ("mass_loss_rate", "g/s"), ("base_luminosity", "erg/s"))]
    except (KeyError, AttributeError, TypeError):
        return None
    if not all(math.isfinite(v) and v > 0 for v in values):
        return None
    return values[0], values[1], math.log(values[2]), values[3]


def diffusion_hint(model, budget=3.0):
    """Which way to move a Model B model that has no solution: a sentence, or "".

    Photosphere anchor: the range of T_eff (or, failing that, L_ph) near the
    model's that has solutions.  Base anchor: the base values the solutions
    with L_ph near L0 reach at R0, and which way to move T0 (or rho0) or R0.
    A quick scan of coarse solves, stopped after ``budget`` seconds.

    Parameters
    ----------
    model : DiffusionWind
        The model (one without a solution: nothing is checked).
    budget : float
        Seconds at most [s].

    Returns
    -------
    str
        The sentence ("" when the scan found nothing to say).

    References
    ----------
    docs/physics.md, section 5 ("Boundary conditions").
    """
    from . import shooting as B
    P, O = model.kernel_arrays
    if model.anchor == "photosphere":
        return B.photosphere_hint(P, O, model.cgs("photosphere_luminosity"),
                                  model.cgs("photosphere_temperature"), model.rtol, budget)
    kind = "temperature" if model.base_temperature is not None else "density"
    return B.base_hint(P, O, model.cgs("luminosity"), kind, model.cgs(f"base_{kind}"),
                       model.rtol, budget)


def solve_diffusion(model, profile=True, start_from=None):
    """Solve Model B (:class:`~windsolve.models.DiffusionWind`).

    ``profile`` is accepted for symmetry; the profile is always computed
    (the base values come from it).

    Parameters
    ----------
    model : DiffusionWind
        The model (photosphere or base anchor, docs/physics.md, section 5).
    profile : bool
        Ignored (see above).
    start_from : WindResult, optional
        A converged Model B result of a nearby model: the base anchor starts
        from its photosphere and mass-loss rate (no initial search).

    Returns
    -------
    WindResult
        Converged or not; ``status`` and ``message`` say what happened.
    """
    from scipy.integrate import cumulative_trapezoid

    from ...core.constants import C_LIGHT, G
    from . import kernels as D
    from . import shooting as B

    t0 = time.perf_counter()
    B.reset_shots()  # every photosphere shot of this solve, base-anchor trials included
    P, O = model.kernel_arrays
    rtol = model.rtol
    M = model.cgs("mass")
    summary = dict.fromkeys(  # cgs floats (SUMMARY_UNITS); NaN until known
        ("mass_loss_rate", "terminal_velocity", "sonic_radius", "sonic_velocity",
         "photosphere_radius", "photosphere_temperature", "photosphere_luminosity",
         "energy_flux"), math.nan)
    kes = P[D.I_KES]
    if model.opacity.law == "electron_scattering" and model.porosity_length is None:
        L = (model.cgs("photosphere_luminosity") if model.anchor == "photosphere"
             else model.cgs("luminosity"))
        gamma = kes * L / (4 * math.pi * G * M * C_LIGHT)
        if gamma < 1.0:
            return _diffusion_failure_result(
                model, summary, D.INVALID,
                f"no wind: with electron scattering alone Gamma = {gamma:.4g} < 1 "
                f"everywhere, so radiation cannot lift the gas; a continuum-driven wind "
                f"needs Gamma > 1 somewhere (a larger luminosity or an opacity that rises "
                f"inward, e.g. the bump law or a table)", t0)
    xo = np.empty(CAPACITY)
    yo = np.empty((CAPACITY, 2))
    try:
        if model.anchor == "photosphere":
            L_ph = model.cgs("photosphere_luminosity")
            T_ph = model.cgs("photosphere_temperature")
            guess = sol = None
        else:
            kind = "temperature" if model.base_temperature is not None else "density"
            L_ph, T_ph, guess, sol = B.solve_base_anchor(P, O, model.cgs("luminosity"), kind,
                                                         model.cgs(f"base_{kind}"), rtol,
                                                         _start(start_from))
        if sol is None or B.PROFILE_STEP != MAX_STEP:
            sol, _ = B.solve_photosphere_anchor(P, O, L_ph, T_ph, rtol, xo, yo, MAX_STEP,
                                                diagnose=model.anchor == "photosphere",
                                                guess=guess)
    except B.ModelBFailure as failure:
        return _diffusion_failure_result(model, summary, failure.code, failure.text, t0)
    c = sol.crit
    R_ph, v_ph, L_ph = sol.R_ph, sol.v_ph, sol.L_ph
    # Profile: inward leg from the critical point (reversed), the critical
    # point, then the wind branch and the shot outside it (sol.outer_*):
    # strictly increasing in r by construction.
    xi = np.empty(CAPACITY)
    yi = np.empty((CAPACITY, 2))
    st_in, r_b, v_b, T_b, L_b, ni = B.inward(c, O, rtol, xi, yi, MAX_STEP)
    if st_in == D.OFF_TABLE:
        from ...core.opacity import describe_off_table
        rho_b = c.mdot / (4.0 * math.pi * r_b * r_b * v_b)
        return _diffusion_failure_result(
            model, summary, st_in,
            f"the subsonic solution below the sonic point leaves the opacity table before "
            f"the base (at r = {r_b / R_SUN:.4g} Rsun, {describe_off_table(O, rho_b, T_b)}); "
            f"raise the base or set [opacity] clamp = true", t0)
    if st_in != D.OK:
        return _diffusion_failure_result(
            model, summary, st_in,
            "the subsonic solution below the sonic point does not reach the base "
            f"({'the radiation is used up' if st_in == D.STALLED else f'code {st_in}'})", t0)
    x = np.concatenate([xi[:ni][::-1], [math.log(c.rc)], sol.outer_x])
    lnv = np.concatenate([yi[:ni, 0][::-1], [math.log(c.vc)], sol.outer_y[:, 0]])
    lnT = np.concatenate([yi[:ni, 1][::-1], [math.log(c.Tc)], sol.outer_y[:, 1]])
    keep = x > np.maximum.accumulate(np.concatenate([[-np.inf], x[:-1]]))
    r, v, T = np.exp(x[keep]), np.exp(lnv[keep]), np.exp(lnT[keep])
    rho, L, kappa, gamma = D.profile_quantities(r, v, T, c.P, O)
    # tau(r) = 2/3 + integral of kappa rho dr from r to R_ph (in ln r).
    integrand = kappa * rho * r
    from_out = cumulative_trapezoid(integrand[::-1], -np.log(r[::-1]), initial=0.0)
    tau = D.TAU_PH + from_out[::-1]
    w2 = D.terminal_velocity_squared(R_ph, v_ph, L_ph, c.P)
    summary.update({
        "mass_loss_rate": c.mdot,
        "terminal_velocity": math.sqrt(w2),
        "sonic_radius": c.rc,
        "sonic_velocity": c.vc,
        "photosphere_radius": R_ph,
        "photosphere_temperature": D.effective_temperature(L_ph, R_ph),
        "photosphere_luminosity": L_ph,
        "energy_flux": c.P[D.I_EDOT],
        "photosphere_velocity": v_ph,
        "sonic_temperature": c.Tc,
        "base_radius": r[0],
        "base_temperature": T[0],
        "base_density": rho[0],
        "base_luminosity": L[0],
    })
    profile = {"radius": r, "velocity": v, "density": rho, "temperature": T, "luminosity": L,
               "opacity": kappa, "eddington_factor": gamma, "optical_depth": tau}
    kind, pp, pm, dTdr, k1 = D.critical_slopes(c.rc, c.vc, c.Tc, c.P, O)
    critical = [{"radius": c.rc, "kind": KIND_NAMES[int(kind)], "slope_plus": float(pp),
                 "slope_minus": float(pm)}]
    R0 = r[0]
    message = (f"converged: transonic solution through the saddle at r_c = "
               f"{c.rc / R0:.5g} R_base (T_c = {c.Tc:.4g} K); photosphere at "
               f"{R_ph / R_SUN:.4g} Rsun")
    return WindResult.from_cgs(model, SolutionCGS(
        True, "converged", message, summary, profile, critical,
        {"shots": B.shots(), "seconds": time.perf_counter() - t0}, math.log(c.mdot)))


