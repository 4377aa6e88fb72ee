"""``solve(model) -> WindResult``: the user-facing entry to the kernels.

Units are converted once (the model's :attr:`kernel_arrays`), the compiled
solver runs, and its status codes become words here.
"""

import math
import time

import astropy.units as u
import numpy as np

from .core import isothermal as K
from .core.critical import KIND_NAMES
from .result import PROFILE_UNITS, SUMMARY_UNITS, WindResult

__all__ = ["solve", "SOLVERS"]

FOUR_PI = 4.0 * math.pi
# Units built once: composing them on every call costs more than a solve.
# (the profile's are the very objects of PROFILE_UNITS: readers that find
# them can skip the conversion)
G_S = u.g / u.s
CM_S = PROFILE_UNITS["velocity"]
G_CM3 = PROFILE_UNITS["density"]
CM2_G = PROFILE_UNITS["opacity"]
ERG_S = PROFILE_UNITS["luminosity"]
DELTA = 1e-6  # start this fraction of r_c off the critical point (SPEC section 8)
MAX_STEP = 0.02  # largest step in ln r of a stored profile (~115 points per decade)
CAPACITY = 200000  # stored points per leg
SURVEY_POINTS = 400  # trial mass-loss rates scanned to explain a failure


INWARD_PROFILE_FAILED = ("the stored inward profile did not reach R0 although the shooting "
                         "did; tighten numerics.rtol")


def _isothermal_failure(code, model):
    """(status, message) for a Model A kernel failure code."""
    if code == K.NO_CRITICAL_POINT_BOUND:
        return ("no_critical_point",
                "no critical point between R0 and the outer radius: Gamma_eff stays "
                "below 1 - 2a^2 r/GM everywhere for every mass-loss rate tried (gravity "
                "wins, the flow never becomes transonic); raise the luminosity or sound "
                "speed, or move numerics.outer_radius out")
    if code == K.NO_CRITICAL_POINT_UNBOUND:
        return ("no_critical_point",
                "no critical point beyond R0: Gamma_eff exceeds 1 - 2a^2 r/GM everywhere "
                "from the base out for every mass-loss rate tried (the base is unbound "
                "at the sonic density, so no steady transonic wind starts there); a "
                "super-Eddington base needs porosity or a density-dependent opacity")
    if code == K.NO_SADDLE:
        return ("no_saddle", "no transonic solution: for some mass-loss rates the flow has "
                             "critical points, but only nodes or foci, never a saddle (X-type) "
                             "point through which a wind could pass")
    if code == K.INWARD_SINGULAR:
        return ("failed", "the subsonic solution turns back to the sound speed between "
                          "the base and the critical point for every admissible mass-loss "
                          "rate; no smooth solution reaches R0")
    if code == K.NO_BRACKET_DENSE:
        return ("no_bracket", "every mass-loss rate with a critical point gives a base "
                              "density above base_density; raise base_density")
    if code == K.NO_BRACKET_THIN:
        return ("no_bracket", "every mass-loss rate with a critical point gives a base "
                              "density below base_density; lower base_density")
    if code == K.LEFT_TABLE:
        return ("off_table", "the solution leaves the opacity table (no opacity at the "
                             "(rho, T) it reaches) for every mass-loss rate tried; extend the "
                             "table or set [opacity] clamp = true")
    if code == K.ROOT_NOT_CONVERGED:
        return ("failed", "the mass-loss rate did not converge; loosen numerics.rtol")
    return ("failed", f"the integration failed (code {code}); try a different "
                      f"numerics.rtol")


def solve_isothermal_cgs(model, profile=True, critical=True, widths=None):
    """Model A in plain cgs floats: what :func:`solve_isothermal` wraps in units.

    Returns a dict with ``converged``, ``status``, ``message``, ``summary``
    (floats in the cgs units of :data:`~windsolve.result.SUMMARY_UNITS`),
    ``profile`` (float arrays in those of ``PROFILE_UNITS``, temperature
    left out as it is the model's T; empty without ``profile``),
    ``critical`` (the critical points, only with ``critical``), ``ln_mdot``
    and ``counters``.  Sweep workers use it directly, so that a model's row
    costs no unit handling.

    With ``widths`` (a :class:`~windsolve.lines.LineSettingsCGS`) and no
    ``profile``, a converged result also has ``widths``: (FWHM, HWZI, blue
    edge) [cm/s], the numbers ``line_widths(solve(model), settings)`` gives,
    measured in one compiled call
    (:func:`windsolve.core.isothermal_lines.outer_state_and_widths`).
    """
    t0 = time.perf_counter()
    P, O = model.kernel_arrays
    rtol = model.rtol
    code, ln_mdot, rc, slope, shots, reason = K.solve(P, O, rtol, DELTA)
    R0 = model.cgs("radius")
    nan = math.nan
    summary = {
        "mass_loss_rate": nan,
        "terminal_velocity": nan,
        "sonic_radius": nan,
        "sonic_velocity": model.a,
        "outer_radius": model.cgs("outer_radius"),
        "base_eddington_factor": K.base_eddington_factor(P, O),
    }
    out = {"converged": False, "summary": summary, "profile": {}, "critical": [],
           "counters": {"shots": int(shots)}}
    if code != K.OK:
        if code in (K.NO_CRITICAL_POINT_BOUND, K.NO_CRITICAL_POINT_UNBOUND):
            # The search met no saddle; say so more precisely when some
            # mass-loss rates do have critical points, only not X-type ones.
            codes = np.empty(SURVEY_POINTS, dtype=np.int64)
            x_max = math.log(4 * math.pi * R0**2 * model.cgs("base_density") * model.a)
            K.survey(P, O, x_max - K.LN_RANGE, x_max, codes)
            if np.any(codes == K.NO_SADDLE):
                code = K.NO_SADDLE
        out["status"], out["message"] = _isothermal_failure(code, model)
        out["counters"]["seconds"] = time.perf_counter() - t0
        return out
    out["ln_mdot"] = ln_mdot
    v0 = math.exp(ln_mdot) / (FOUR_PI * R0**2 * model.cgs("base_density"))
    if profile:
        st_in, st_out, r, v = K.profile(ln_mdot, P, O, rtol, DELTA, MAX_STEP, CAPACITY)
    elif widths is not None:  # the outer end and the widths (sweeps measuring lines)
        from .core.isothermal_lines import outer_state_and_widths
        st_in, st_out, r_end, v_end, *measured = outer_state_and_widths(
            ln_mdot, P, O, rtol, DELTA, MAX_STEP, CAPACITY, *widths)
    else:  # the outer end only (sweeps): no stored profile
        st_in = K.OK
        st_out, r_end, v_end = K.end_state(ln_mdot, P, O, rtol, DELTA)
    if not profile:  # the base and the outer end
        r = np.array([R0, r_end])
        v = np.array([v0, v_end])
    rho, L, kappa, gamma = K.profile_quantities(ln_mdot, r, v, P, O)
    summary["mass_loss_rate"] = math.exp(ln_mdot)
    summary["sonic_radius"] = rc
    summary["base_eddington_factor"] = float(gamma[0])
    if profile:
        out["profile"] = {"radius": r, "velocity": v, "density": rho, "luminosity": L,
                          "opacity": kappa, "eddington_factor": gamma}
    if critical:
        Q = K.set_mass_loss_rate(P, ln_mdot)
        cr = np.empty(64)
        ck = np.empty(64, dtype=np.int64)
        cpp = np.empty(64)
        cpm = np.empty(64)
        n = K.critical_points(Q, O, cr, ck, cpp, cpm)
        out["critical"] = [{"radius": float(cr[i]), "kind": KIND_NAMES[int(ck[i])],
                            "slope_plus": float(cpp[i]), "slope_minus": float(cpm[i])}
                           for i in range(n)]
    r_end = r[-1] / R0
    converged = False
    if st_in != K.OK:
        # The shooting reached R0 with this Mdot; a profile that does not is
        # an integration problem, not physics: say so rather than guess.
        status, message = "failed", INWARD_PROFILE_FAILED
    elif st_out == K.OK:
        converged, status = True, "converged"
        summary["terminal_velocity"] = float(v[-1])
        if widths is not None and not profile:
            out["widths"] = tuple(measured)
        message = (f"converged: transonic solution through the saddle at "
                   f"r_c = {rc / R0:.5g} R0")
    elif st_out == K.STALLED:
        status = "stalled"
        message = (f"photon tiring uses up the luminosity at r = {r_end:.5g} R0: the flow "
                   f"stalls there and does not reach the outer radius")
    elif st_out == K.LEFT_TABLE:
        status = "off_table"
        message = (f"the outward solution leaves the opacity table at r = {r_end:.5g} R0 "
                   f"(rho = {rho[-1]:.4g} g/cm3, T = {model.T:.4g} K); extend the table or "
                   f"set [opacity] clamp = true")
    elif st_out == K.OUTWARD_SINGULAR:
        status = "second_singular_point"
        message = (f"the supersonic solution falls back to the sound speed at "
                   f"r = {r_end:.5g} R0 (a second singular point, N != 0); the profile "
                   f"ends there")
    else:
        status = "failed"
        message = f"the outward integration failed at r = {r_end:.5g} R0"
    out.update(converged=converged, status=status, message=message)
    out["counters"]["seconds"] = time.perf_counter() - t0
    return out


def solve_isothermal(model, profile=True):
    """Solve Model A (:class:`~windsolve.models.IsothermalWind`)."""
    raw = solve_isothermal_cgs(model, profile)
    summary = {key: value * SUMMARY_UNITS[key] for key, value in raw["summary"].items()}
    summary["outer_radius"] = model.outer_radius.to(u.cm)
    prof = {}
    if raw["profile"]:  # isothermal: T is the model's everywhere
        arrays = dict(raw["profile"], temperature=np.full_like(raw["profile"]["radius"], model.T))
        prof = {key: arrays[key] << unit for key, unit in PROFILE_UNITS.items() if key in arrays}
    return WindResult(model, raw["converged"], raw["status"], raw["message"], summary,
                      prof, raw["critical"], raw["counters"])


def _diffusion_failure_result(model, summary, code, text, t0):
    from .core import diffusion as D
    status = {D.OFF_TABLE: "off_table", D.STALLED: "stalled", D.FALLBACK: "fallback",
              D.INVALID: "no_solution", D.SINGULAR: "no_solution"}.get(code, "failed")
    return WindResult(model, False, status, text, summary,
                      counters={"shots": 0, "seconds": time.perf_counter() - t0})


def solve_diffusion(model, profile=True):
    """Solve Model B (:class:`~windsolve.models.DiffusionWind`).

    ``profile`` is accepted for symmetry; the profile is always computed
    (the base values come from it).
    """
    from scipy.integrate import cumulative_trapezoid

    from . import _diffusion as B
    from .core import diffusion as D
    from .core.constants import C_LIGHT, G

    t0 = time.perf_counter()
    P, O = model.kernel_arrays
    rtol = model.rtol
    M = model.cgs("mass")
    nan = np.nan
    summary = {key: nan * unit for key, unit in (
        ("mass_loss_rate", G_S), ("terminal_velocity", CM_S),
        ("sonic_radius", u.cm), ("sonic_velocity", CM_S),
        ("photosphere_radius", u.cm), ("photosphere_temperature", u.K),
        ("photosphere_luminosity", ERG_S), ("energy_flux", ERG_S))}
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
        else:
            kind = "temperature" if model.base_temperature is not None else "density"
            L_ph, T_ph = B.solve_base_anchor(P, O, model.cgs("luminosity"), kind,
                                             model.cgs(f"base_{kind}"), rtol)
        sol, no = B.solve_photosphere_anchor(P, O, L_ph, T_ph, rtol, xo, yo, MAX_STEP,
                                             diagnose=model.anchor == "photosphere")
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
        "mass_loss_rate": c.mdot * G_S,
        "terminal_velocity": math.sqrt(w2) * CM_S,
        "sonic_radius": c.rc * u.cm,
        "sonic_velocity": c.vc * CM_S,
        "photosphere_radius": R_ph * u.cm,
        "photosphere_temperature": D.effective_temperature(L_ph, R_ph) * u.K,
        "photosphere_luminosity": L_ph * ERG_S,
        "energy_flux": c.P[D.I_EDOT] * ERG_S,
        "photosphere_velocity": v_ph * CM_S,
        "sonic_temperature": c.Tc * u.K,
        "base_radius": r[0] * u.cm,
        "base_temperature": T[0] * u.K,
        "base_density": rho[0] * G_CM3,
        "base_luminosity": L[0] * ERG_S,
    })
    profile = {
        "radius": r << u.cm,
        "velocity": v << CM_S,
        "density": rho << G_CM3,
        "temperature": T << u.K,
        "luminosity": L << ERG_S,
        "opacity": kappa << CM2_G,
        "eddington_factor": gamma << u.one,
        "optical_depth": tau << u.one,
    }
    kind, pp, pm, dTdr, k1 = D.critical_slopes(c.rc, c.vc, c.Tc, c.P, O)
    critical = [{"radius": c.rc, "kind": KIND_NAMES[int(kind)], "slope_plus": float(pp),
                 "slope_minus": float(pm)}]
    R0 = r[0]
    message = (f"converged: transonic solution through the saddle at r_c = "
               f"{c.rc / R0:.5g} R_base (T_c = {c.Tc:.4g} K); photosphere at "
               f"{R_ph / 6.957e10:.4g} Rsun")
    return WindResult(model, True, "converged", message, summary, profile, critical,
                      {"shots": 0, "seconds": time.perf_counter() - t0})


SOLVERS = {"isothermal": solve_isothermal, "diffusion": solve_diffusion}


def solve(model, profile=True):
    """Solve a wind model; returns a :class:`~windsolve.result.WindResult`.

    Parameters
    ----------
    model : WindModel
        For example from :func:`windsolve.load_model` or
        ``IsothermalWind(...)``.
    profile : bool
        Store the profiles (default).  Sweeps that only need the summary
        pass False, which skips the stored profile (Model A: the second
        inward integration and the dense output); the summary values agree
        to the integration tolerance.

    Returns
    -------
    WindResult
        Always returned; ``result.converged`` says whether the transonic
        solution was found out to the outer radius, ``result.message`` why not.
    """
    return SOLVERS[model.kind](model, profile)
