"""Model A's solver: the shooting of the compiled kernels, its status words, WindResult."""

import math
import time

import numpy as np

from ...core.critical import KIND_NAMES
from ...result import (
    HYDROSTATIC_EFOLDS,
    SolutionCGS,
    WindResult,
    base_density_efolds,
)
from ..base import (
    CAPACITY,
    DELTA,
    FOUR_PI,
    INWARD_PROFILE_FAILED,
    MAX_STEP,
    MSUN_YR,
    RSUN,
)
from . import kernels as K

SURVEY_POINTS = 400  # trial mass-loss rates scanned to explain a failure


# What the flow does at mass-loss rates just outside the admissible window.
_EDGE_WORDS = {
    K.NO_CRITICAL_POINT_BOUND: "gravity wins everywhere, so there is no critical point",
    K.NO_CRITICAL_POINT_UNBOUND: "the gas is unbound from the base out, so there is no "
                                 "critical point",
    K.NO_SADDLE: "the critical points are nodes or foci, not saddles",
    K.INWARD_SINGULAR: "the subsonic solution turns back to the sound speed before R0",
    K.LEFT_TABLE: "the solution leaves the opacity table",
}


def _window(P, O, rtol, x, x_lo, x_hi):
    """The admissible window of ln Mdot around the admissible trial x.

    Returns ``(lo, hi, code_lo, code_hi, g, rc)``: its edges (to 1e-9),
    the kernel codes just outside them (OK where the search range ends),
    and g = ln rho(R0) - ln rho0 and r_c at 41 rates across it.  Costs
    about 150 shots (a few ms): only used to explain a failure.
    """
    def ok(xt):
        return K.shoot(xt, P, O, rtol, DELTA)[0] == K.OK

    edges = []
    for sgn, limit in ((-1.0, x_lo), (1.0, x_hi)):
        inside, step, outside = x, 1e-3, None
        while outside is None:
            xt = x + sgn * step
            if sgn * (xt - limit) >= 0.0:
                if ok(limit):
                    inside = limit
                    break
                xt = limit
            if ok(xt):
                inside = xt
                step *= 2.0
            else:
                outside = xt
        code = K.OK
        if outside is not None:
            for _ in range(60):
                if abs(outside - inside) < 1e-9:
                    break
                m = 0.5 * (inside + outside)
                if ok(m):
                    inside = m
                else:
                    outside = m
            code = int(K.shoot(outside, P, O, rtol, DELTA)[0])
        edges.append((inside, code))
    (lo, code_lo), (hi, code_hi) = edges
    gs, rcs = [], []
    for xt in np.linspace(lo, hi, 41):
        c, g, rc, _ = K.shoot(xt, P, O, rtol, DELTA)
        if c == K.OK:
            gs.append(g)
            rcs.append(rc)
    return lo, hi, code_lo, code_hi, np.array(gs), np.array(rcs)


def _no_bracket_message(code, model, P, O, x):
    """The words for NO_BRACKET_DENSE / NO_BRACKET_THIN, with the numbers."""
    R0 = P[K.I_R0]
    rho0 = P[K.I_RHO0]
    xmax = math.log(FOUR_PI * R0**2 * rho0 * model.a)
    lo, hi, c_lo, c_hi, g, rc = _window(P, O, model.rtol, x, xmax - K.LN_RANGE, xmax - 1e-9)
    dense = code == K.NO_BRACKET_DENSE
    if g.size == 0:
        g = np.array([math.nan])
        rc = np.array([math.nan])
    near = float(np.min(g)) if dense else float(np.max(g))
    factor = math.exp(abs(near)) if abs(near) < 700 else math.inf
    side = "above" if dense else "below"
    times = f"{factor:.3g}" if math.isfinite(factor) else f"10^{abs(near) / math.log(10):.0f}"
    text = (f"no transonic solution: every mass-loss rate with a saddle point "
            f"({math.exp(lo) / MSUN_YR:.4g} to {math.exp(hi) / MSUN_YR:.4g} Msun/yr, "
            f"sonic point at {np.nanmin(rc) / R0:.4g} to {np.nanmax(rc) / R0:.4g} R0) gives a "
            f"base density {side} base_density, by a factor of {'at least ' if dense else ''}"
            f"{times} at the nearest")
    outside = []
    if c_lo in _EDGE_WORDS:
        outside.append(f"below that range {_EDGE_WORDS[c_lo]}")
    if c_hi in _EDGE_WORDS:
        words = _EDGE_WORDS[c_hi]
        if c_hi == K.NO_CRITICAL_POINT_BOUND and P[K.I_TIRING] > 0.0:
            words = ("photon tiring leaves gravity winning everywhere, so there is no "
                     "critical point")
        outside.append(f"above it {words}")
    if outside:
        text += " (" + "; ".join(outside) + ")"
    if factor < 1e3:
        need = rho0 * factor if dense else rho0 / factor
        verb = "raise" if dense else "lower"
        return text + f"; {verb} base_density to about {need:.3g} g/cm3"
    return (text + "; the subsonic layer is near-hydrostatic, so no base density within "
                   "reason meets it: this model has no steady transonic wind")


def _sonic_point_beyond(model, P, O):
    """r_c [cm] of the solution when the outer radius lies inside its sonic point, else None.

    The same model solved with a far larger outer radius: if that converges
    with r_c beyond numerics.outer_radius, the outer radius is what failed.
    """
    r_out = P[K.I_ROUT]
    P2 = P.copy()
    P2[K.I_ROUT] = max(100.0 * r_out, 1e4 * P[K.I_R0])
    code, ln_mdot, rc, slope, shots, reason = K.solve(P2, O, model.rtol, DELTA)
    if code == K.OK and rc > r_out:
        return rc
    return None


def _isothermal_failure(code, model, P=None, O=None, ln_mdot=math.nan, rc=math.nan):
    """(status, message) for a Model A kernel failure code."""
    if P is not None and code in (K.NO_CRITICAL_POINT_BOUND, K.NO_BRACKET_THIN,
                                  K.NO_BRACKET_DENSE, K.NO_SADDLE):
        rc_far = _sonic_point_beyond(model, P, O)
        if rc_far is not None:
            R0 = P[K.I_R0]
            return ("no_critical_point" if code == K.NO_CRITICAL_POINT_BOUND else
                    "no_bracket" if code != K.NO_SADDLE else "no_saddle",
                    f"the outer radius lies inside the sonic point: the transonic solution "
                    f"through base_density has its sonic point at r_c = {rc_far / R0:.5g} R0 "
                    f"({rc_far / RSUN:.5g} Rsun), beyond numerics.outer_radius = "
                    f"{P[K.I_ROUT] / R0:.5g} R0; raise numerics.outer_radius well above r_c "
                    f"(e.g. \"{10.0 * rc_far / RSUN:.3g} Rsun\")")
    if code == K.NO_CRITICAL_POINT_BOUND:
        return ("no_critical_point",
                "no critical point between R0 and the outer radius: Gamma_eff stays "
                "below 1 - 2a^2 r/GM everywhere for every mass-loss rate tried (gravity "
                "wins, the flow never becomes transonic); raise the luminosity or sound "
                "speed, or move numerics.outer_radius out")
    if code == K.NO_CRITICAL_POINT_UNBOUND:
        GM = model.kernel_arrays[0][K.I_GM]
        R0 = model.cgs("radius")
        a = model.a
        Pm, Om = model.kernel_arrays
        gamma = K.base_eddington_factor(Pm, Om)
        if 2.0 * a * a * R0 >= GM:
            return ("no_critical_point",
                    f"no critical point beyond R0: the gas is thermally unbound at the base, "
                    f"whatever the radiation does: the sound speed a = {a / 1e5:.4g} km/s is "
                    f"at least half the escape speed sqrt(2GM/R0)/2 = "
                    f"{math.sqrt(GM / (2.0 * R0)) / 1e5:.4g} km/s, so Parker's sonic point "
                    f"GM/(2a^2) = {GM / (2.0 * a * a * R0):.4g} R0 lies inside the base; "
                    f"lower the sound speed (temperature) or raise the mass")
        if gamma < 1.0:
            return ("no_critical_point",
                    f"no critical point beyond R0: the gas is thermally unbound at the base: "
                    f"the sound speed a = {a / 1e5:.4g} km/s exceeds sqrt(GM(1 - Gamma)/(2 R0)) "
                    f"= {math.sqrt(GM * (1.0 - gamma) / (2.0 * R0)) / 1e5:.4g} km/s (half the "
                    f"escape speed with gravity reduced by Gamma = {gamma:.4g}), so the sonic "
                    f"point GM(1 - Gamma)/(2a^2) = {GM * (1.0 - gamma) / (2.0 * a * a * R0):.4g}"
                    f" R0 lies inside the base; lower the sound speed (temperature) or the "
                    f"luminosity")
        fix = "a super-Eddington base needs porosity or a density-dependent opacity"
        if model.porosity_length is not None:
            fix = ("the porosity does not reduce the opacity enough at densities up to "
                   "base_density: raise base_density or shorten porosity.length")
        return ("no_critical_point",
                "no critical point beyond R0: Gamma_eff exceeds 1 - 2a^2 r/GM everywhere "
                "from the base out for every mass-loss rate tried (the base is unbound "
                "at the sonic density, so no steady transonic wind starts there); " + fix)
    if code == K.NO_SADDLE:
        return ("no_saddle", "no transonic solution: for some mass-loss rates the flow has "
                             "critical points, but only nodes or foci, never a saddle (X-type) "
                             "point through which a wind could pass")
    if code == K.INWARD_SINGULAR:
        return ("failed", "the subsonic solution turns back to the sound speed between "
                          "the base and the critical point for every admissible mass-loss "
                          "rate; no smooth solution reaches R0")
    if code in (K.NO_BRACKET_DENSE, K.NO_BRACKET_THIN):
        if P is not None and math.isfinite(ln_mdot):
            return ("no_bracket", _no_bracket_message(code, model, P, O, ln_mdot))
        side = "above" if code == K.NO_BRACKET_DENSE else "below"
        return ("no_bracket", f"no transonic solution: every mass-loss rate with a critical "
                              f"point gives a base density {side} base_density (solve this "
                              f"model alone for the reason and what to change)")
    if code == K.SONIC_ON_BASE:
        where = f" (Mdot = {math.exp(ln_mdot) / MSUN_YR:.4g} Msun/yr)" if math.isfinite(
            ln_mdot) else ""
        return ("sonic_point_on_base",
                f"no transonic solution: the only mass-loss rate that meets base_density"
                f"{where} puts the sonic point on the base, so base_density is the sonic "
                f"density and the flow has no subsonic part (not a wind launched from a "
                f"subsonic base); put the base below the sonic point: a smaller [star] "
                f"radius, or (with a density-dependent opacity or porosity) a larger "
                f"base_density")
    if code == K.NO_ROOT_JUMP:
        where = f" at Mdot = {math.exp(ln_mdot) / MSUN_YR:.4g} Msun/yr" if math.isfinite(
            ln_mdot) else ""
        return ("no_solution",
                f"no transonic solution: the base density of the solutions jumps across "
                f"base_density{where}, where the innermost saddle point changes, instead of "
                f"passing through it; no mass-loss rate meets base_density")
    if code == K.LEFT_TABLE:
        return ("off_table", "the solution leaves the opacity table (no opacity at the "
                             "(rho, T) it reaches) for every mass-loss rate tried; extend the "
                             "table or set [opacity] clamp = true")
    if code == K.ROOT_NOT_CONVERGED:
        return ("failed", "the mass-loss rate did not converge; loosen numerics.rtol")
    return ("failed", f"the integration failed (code {code}); try a different "
                      f"numerics.rtol")


def solve_isothermal_cgs(model, profile=True, critical=True, widths=None, explain=True):
    """Model A in plain cgs floats: what :func:`solve_isothermal` wraps in units.

    Returns a :class:`~windsolve.result.SolutionCGS`: the summary in the cgs
    units of :data:`~windsolve.result.SUMMARY_UNITS`, the profile (empty
    without ``profile``; the temperature is the model's T everywhere) in those
    of ``PROFILE_UNITS``, the critical points only with ``critical``.  Sweep
    workers use it directly, so that a model's row costs no unit handling.

    With ``widths`` (a :class:`~windsolve.lines.LineSettingsCGS`) and no
    ``profile``, a converged solution also has ``widths``: (FWHM, HWZI, blue
    edge) [cm/s], the numbers ``line_widths(solve(model), settings)`` gives,
    measured in one compiled call
    (:func:`windsolve.models.isothermal.width_kernels.outer_state_and_widths`).

    ``explain=False`` (sweep rows) skips the failure diagnostics that tell a
    single solve why no rate works and what to change: they re-solve the model
    or scan its admissible rates, about 50 times the cost of a converged row.

    Parameters
    ----------
    model : IsothermalWind
        The model.
    profile : bool
        Store the profile.
    critical : bool
        Report the critical points.
    widths : LineSettingsCGS or None
        Measure the line widths (only without ``profile``).
    explain : bool
        Run the failure diagnostics.

    Returns
    -------
    SolutionCGS
        As described above (cgs floats and arrays).
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
        "base_density_efolds": nan,
    }
    counters = {"shots": int(shots)}
    if code != K.OK:
        if code in (K.NO_CRITICAL_POINT_BOUND, K.NO_CRITICAL_POINT_UNBOUND):
            # The search met no saddle; say so more precisely when some
            # mass-loss rates do have critical points, only not X-type ones.
            codes = np.empty(SURVEY_POINTS, dtype=np.int64)
            x_max = math.log(4 * math.pi * R0**2 * model.cgs("base_density") * model.a)
            K.survey(P, O, x_max - K.LN_RANGE, x_max, codes)
            if np.any(codes == K.NO_SADDLE):
                code = K.NO_SADDLE
        status, message = _isothermal_failure(code, model, P if explain else None, O,
                                              ln_mdot, rc)
        counters["seconds"] = time.perf_counter() - t0
        return SolutionCGS(False, status, message, summary, counters=counters)
    v0 = math.exp(ln_mdot) / (FOUR_PI * R0**2 * model.cgs("base_density"))
    if profile:
        st_in, st_out, r, v = K.profile(ln_mdot, P, O, rtol, DELTA, MAX_STEP, CAPACITY)
    elif widths is not None:  # the outer end and the widths (sweeps measuring lines)
        from .width_kernels import outer_state_and_widths
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
    efolds = base_density_efolds(summary["mass_loss_rate"], rc, model.a,
                                 model.cgs("base_density"))
    summary["base_density_efolds"] = efolds
    hydrostatic = bool(efolds > HYDROSTATIC_EFOLDS)
    arrays = {}
    if profile:  # isothermal: T is the model's everywhere
        arrays = {"radius": r, "velocity": v, "density": rho,
                  "temperature": np.full_like(r, model.T), "luminosity": L,
                  "opacity": kappa, "eddington_factor": gamma}
    points = []
    if critical:
        Q = K.set_mass_loss_rate(P, ln_mdot)
        cr = np.empty(64)
        ck = np.empty(64, dtype=np.int64)
        cpp = np.empty(64)
        cpm = np.empty(64)
        n = K.critical_points(Q, O, cr, ck, cpp, cpm)
        points = [{"radius": float(cr[i]), "kind": KIND_NAMES[int(ck[i])],
                            "slope_plus": float(cpp[i]), "slope_minus": float(cpm[i])}
                           for i in range(n)]
    r_end = r[-1] / R0
    converged = False
    measured_widths = None
    if st_in != K.OK:
        # The shooting reached R0 with this Mdot; a profile that does not is
        # an integration problem, not physics: say so rather than guess.
        status, message = "failed", INWARD_PROFILE_FAILED
    elif st_out == K.OK:
        converged, status = True, "converged"
        summary["terminal_velocity"] = float(v[-1])
        if widths is not None and not profile:
            measured_widths = tuple(measured)
        message = (f"converged: transonic solution through the saddle at "
                   f"r_c = {rc / R0:.5g} R0")
        if hydrostatic:
            message += (f"; but the base lies {efolds:.4g} density e-folds below it (more "
                        f"than {HYDROSTATIC_EFOLDS:g}): a hydrostatic atmosphere, not a wind")
    elif st_out == K.STALLED:
        status = "stalled"
        message = (f"photon tiring uses up the luminosity at r = {r_end:.5g} R0: the flow "
                   f"stalls there and does not reach the outer radius")
    elif st_out == K.LEFT_TABLE:
        status = "off_table"
        from ...core.opacity import describe_off_table
        message = (f"the outward solution leaves the opacity table at r = {r_end:.5g} R0 "
                   f"({describe_off_table(O, float(rho[-1]), float(model.T))}); extend the "
                   f"table or set [opacity] clamp = true")
    elif st_out == K.OUTWARD_SINGULAR:
        status = "second_singular_point"
        message = (f"the supersonic solution falls back to the sound speed at "
                   f"r = {r_end:.5g} R0 (a second singular point, N != 0); the profile "
                   f"ends there")
    else:
        status = "failed"
        message = f"the outward integration failed at r = {r_end:.5g} R0"
    counters["seconds"] = time.perf_counter() - t0
    return SolutionCGS(converged, status, message, summary, arrays, points, counters, ln_mdot,
                       measured_widths)


def solve_isothermal(model, profile=True):
    """Solve Model A (:class:`~windsolve.models.IsothermalWind`): :func:`solve_isothermal_cgs`
    with units (:meth:`~windsolve.result.WindResult.from_cgs`).

    Parameters
    ----------
    model : IsothermalWind
        The model (docs/physics.md, section 4).
    profile : bool
        Store the profile (False: summary only).

    Returns
    -------
    WindResult
        Converged or not; ``status`` and ``message`` say what happened.
    """
    return WindResult.from_cgs(model, solve_isothermal_cgs(model, profile))
