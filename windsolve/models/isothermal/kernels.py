"""Model A kernels: the steady, spherical, isothermal continuum-driven wind.

Equations (cgs), with rho = Mdot / (4 pi r^2 v):

.. math::

    (v - a^2/v) \\frac{dv}{dr} = N(r, v) \\equiv \\frac{2a^2}{r} - \\frac{GM}{r^2}
        + \\frac{\\kappa_{\\rm eff}(\\rho, T, r) L(r, v)}{4\\pi r^2 c}

    L = L_0 \\quad\\text{or, with photon tiring,}\\quad
    L = L_0 - \\dot M\\,[(v^2 - v_0^2)/2 + GM/R_0 - GM/r]

This is Parker's (1958, ApJ 128, 664) isothermal wind with a radiative force;
photon tiring (the luminosity spent lifting the flow) follows Owocki &
Gayley (1997, ASP Conf. Ser. 120, 121; reference from memory), porosity
Owocki, Gayley & Shaviv (2004, ApJ 616, 525).
The kernels integrate y = ln v, because v spans many decades below the sonic
point: against x = ln r outward (the wind spans decades in r) and against r
itself inward (the subsonic layer is usually thin, and r costs two
exponentials less per evaluation than ln r).

The mass-loss rate is the eigenvalue: for a trial Mdot the innermost saddle
(v = a, N = 0) beyond the base is found, the solution is started a small
step off it along the accelerating slope and integrated inward to R0, and
ln rho(R0) - ln rho0 is driven to zero by a bracketed root-find in ln Mdot.

Parameter vector ``P`` (slots ``I_*``) and status codes are listed below; the
user layer (:mod:`windsolve.solve`) builds ``P`` and turns codes into words.
"""

import math

import numpy as np
from numba import njit

from ...core.constants import C_LIGHT
from ...core.critical import SADDLE, classify
from ...core.integrate import REACHED_END, STEP_TOO_SMALL, make_scalar_integrator
from ...core.opacity import (
    LAW_ELECTRON_SCATTERING,
    SLOT_H0,
    SLOT_KES,
    SLOT_LAW,
    effective_opacity,
    table_margin,
)
from ...core.roots import ROOT_F_FAILED, ROOT_JUMP, ROOT_MAX_EVALS, make_brent, make_illinois

FOUR_PI = 4.0 * math.pi
INV_FOUR_PI = 1.0 / FOUR_PI
INV_FOUR_PI_C = 1.0 / (FOUR_PI * C_LIGHT)

# --- parameter slots -------------------------------------------------------
I_GM = 0  # G M [cm3 s-2]
I_A2 = 1  # isothermal sound speed squared [cm2 s-2]
I_R0 = 2  # base radius [cm]
I_RHO0 = 3  # base density [g cm-3]
I_L0 = 4  # luminosity at the base [erg s-1]
I_T = 5  # gas temperature (for the opacity) [K]
I_TIRING = 6  # 1.0 with photon tiring, 0.0 without
I_ROUT = 7  # outer radius [cm]
I_MDOT = 8  # trial mass-loss rate [g s-1] (set by the shooting)
I_V0 = 9  # base velocity Mdot / (4 pi R0^2 rho0) [cm s-1] (set with Mdot)
I_LNRHO_STOP = 10  # inward legs stop once ln rho exceeds this
I_RHO_STOP = 11  # ... that is, once rho exceeds this [g cm-3]
N_PARAMS = 12

# --- status codes (the user layer has the words) ---------------------------
OK = 0
NO_CRITICAL_POINT_BOUND = 1  # N(r, a) < 0 on the whole range
NO_CRITICAL_POINT_UNBOUND = 2  # N(r, a) > 0 on the whole range
NO_SADDLE = 3  # critical points exist, none is a saddle
INWARD_SINGULAR = 4  # subsonic branch returns to v = a before R0
OUTWARD_SINGULAR = 5  # supersonic branch falls back to v = a with N != 0
STALLED = 6  # photon tiring used up the luminosity
NO_BRACKET_DENSE = 7  # rho(R0) > rho0 for every admissible Mdot
NO_BRACKET_THIN = 8  # rho(R0) < rho0 for every admissible Mdot
INTEGRATION_FAILED = 9
ROOT_NOT_CONVERGED = 10
LEFT_TABLE = 11  # (rho, T) left an (unclamped) opacity table
SONIC_ON_BASE = 12  # the only root of g puts the sonic point on the base (no subsonic part)
NO_ROOT_JUMP = 13  # g changes sign with Mdot only by a jump: no mass-loss rate meets rho0

TABLE_EDGE = 1e-6  # dex: a failed step this close to a table edge left the table

# Codes returned by the monitors through ``integrate`` (positive).
STOP_SINGULAR = 1
STOP_STALL = 2
STOP_DENSE = 3

N_GRID = 256  # points of the ln r scan for roots of N(r, a)
SONIC_GAP = 1e-3  # |v^2 - a^2| / a^2 below which a turning flow is singular
DENSE_MARGIN = 10.0  # an inward leg stops once ln rho > ln rho0 + this
LN_RANGE = 690.0  # Mdot is searched down to Mdot_max * exp(-LN_RANGE)
MAX_SHOTS = 400
SUBSONIC_POINTS = 100  # a stored profile has at least this many points below r_c
PROFILE_STEPS = 2000  # room for the integration steps of one stored leg
FIRST_STEP = 10.0  # the inward leg's first trial step, in units of its offset delta r_c
MIN_WALK = 1e-6  # smallest step [in ln Mdot] of the walk toward a sign change
JUMP_TOL = 1e-3  # |ln rho(R0) - ln rho0| above which a collapsed bracket holds a jump, not a root
BASE_EMERGE = 1e-3  # (r_c - R0)/R0 just inside the window below which the saddle leaves the base


@njit(cache=True, error_model="numpy")
def set_mass_loss_rate(P, ln_mdot):
    """Copy of P with the trial Mdot and the quantities that follow from it.

    Parameters
    ----------
    P : ndarray
        Model A parameter vector.
    ln_mdot : float
        ln of the trial mass-loss rate [ln(g s^-1)].

    Returns
    -------
    ndarray
        The copy, with Mdot, v0 and the density stop set.
    """
    return fill_mass_loss_rate(P.copy(), P, ln_mdot)


@njit(cache=True, error_model="numpy")
def fill_mass_loss_rate(Q, P, ln_mdot):
    """:func:`set_mass_loss_rate` into the work vector Q (a copy of P); returns Q.

    Parameters
    ----------
    Q : ndarray
        Work vector, written in place.
    P : ndarray
        Model A parameter vector.
    ln_mdot : float
        ln Mdot [ln(g s^-1)].

    Returns
    -------
    ndarray
        Q.
    """
    mdot = math.exp(ln_mdot)
    Q[I_MDOT] = mdot
    Q[I_V0] = mdot / (FOUR_PI * P[I_R0] ** 2 * P[I_RHO0])
    Q[I_LNRHO_STOP] = math.log(P[I_RHO0]) + DENSE_MARGIN
    Q[I_RHO_STOP] = P[I_RHO0] * math.exp(DENSE_MARGIN)
    return Q


@njit(cache=True, error_model="numpy")
def luminosity(r, v, P):
    """Radiative luminosity L(r, v) [erg s-1] (constant without tiring).

    Parameters
    ----------
    r : float
        Radius [cm].
    v : float
        Velocity [cm s^-1].
    P : ndarray
        Parameter vector (Mdot set).

    Returns
    -------
    float
        L [erg s^-1].

    References
    ----------
    docs/physics.md, eq. 15.
    """
    if P[I_TIRING] > 0.0:
        GM = P[I_GM]
        return P[I_L0] - P[I_MDOT] * (0.5 * (v * v - P[I_V0] ** 2)
                                      + GM / P[I_R0] - GM / r)
    return P[I_L0]


@njit(cache=True, error_model="numpy")
def density(r, v, P):
    """rho = Mdot / (4 pi r^2 v) [g cm-3].

    Parameters
    ----------
    r : float
        Radius [cm].
    v : float
        Velocity [cm s^-1].
    P : ndarray
        Parameter vector (Mdot set).

    Returns
    -------
    float
        [g cm^-3].

    References
    ----------
    docs/physics.md, eq. 13.
    """
    return P[I_MDOT] / (FOUR_PI * r * r * v)


@njit(cache=True, error_model="numpy", inline="always")
def force_balance_inv(r, inv_r, v, inv_v, P, O):
    """N(r, v) given the reciprocals 1/r and 1/v as well.

    The innermost call of every integration stage.  The stages of a
    Runge-Kutta step run one after another, so what counts is latency; with
    the reciprocals computed independently (as exp(-x), exp(-y)) the chain
    of dependent divisions shrinks to none.

    Parameters
    ----------
    r, inv_r : float
        Radius [cm] and 1/r [cm^-1].
    v, inv_v : float
        Velocity [cm s^-1] and 1/v [s cm^-1].
    P, O : ndarray
        Parameter (Mdot set) and opacity vectors.

    Returns
    -------
    float
        N [cm s^-2].

    References
    ----------
    docs/physics.md, eq. 14.
    """
    inv_r2 = inv_r * inv_r
    if O[SLOT_LAW] == LAW_ELECTRON_SCATTERING and O[SLOT_H0] <= 0.0:
        k = O[SLOT_KES]  # constant opacity: skip the density (Parker-like flows)
    else:
        rho = P[I_MDOT] * INV_FOUR_PI * inv_r2 * inv_v
        k = effective_opacity(O, rho, P[I_T], r)
    L = P[I_L0] if P[I_TIRING] <= 0.0 else luminosity(r, v, P)
    return inv_r * (2.0 * P[I_A2]) + inv_r2 * (k * L * INV_FOUR_PI_C - P[I_GM])


@njit(cache=True, error_model="numpy")
def force_balance(r, v, P, O):
    """N(r, v) [cm s-2]: pressure gradient + radiative force - gravity.

    Parameters
    ----------
    r : float
        Radius [cm].
    v : float
        Velocity [cm s^-1].
    P, O : ndarray
        Parameter (Mdot set) and opacity vectors.

    Returns
    -------
    float
        N [cm s^-2].

    References
    ----------
    docs/physics.md, eq. 14.
    """
    return force_balance_inv(r, 1.0 / r, v, 1.0 / v, P, O)


@njit(cache=True, error_model="numpy")
def sonic_force_balance(x, P, O):
    """N(e^x, a): its roots in x = ln r are the critical points.

    Parameters
    ----------
    x : float
        ln r [ln cm].
    P, O : ndarray
        Parameter (Mdot set) and opacity vectors.

    Returns
    -------
    float
        N [cm s^-2].

    References
    ----------
    docs/physics.md, eq. 16.
    """
    return force_balance(math.exp(x), math.sqrt(P[I_A2]), P, O)


@njit(cache=True, error_model="numpy", inline="always")
def rhs(x, y, P, O):
    """d ln v / d ln r = r N / (v^2 - a^2), y = ln v.

    Parameters
    ----------
    x : float
        ln r [ln cm].
    y : float
        ln v [ln(cm s^-1)].
    P, O : ndarray
        Parameter (Mdot set) and opacity vectors.

    Returns
    -------
    float
        [dimensionless].
    """
    r = math.exp(x)
    v = math.exp(y)
    n = force_balance_inv(r, math.exp(-x), v, math.exp(-y), P, O)
    return r * n / (v * v - P[I_A2])


@njit(cache=True, error_model="numpy", inline="always")
def rhs_radius(x, y, P, O):
    """d ln v / d r = N / (v^2 - a^2): the inward legs, with x = r itself.

    Below the sonic point the flow spans a short range of r (often a few
    per cent of R0), so r serves as well as ln r as the variable and saves
    two exponentials per evaluation.

    Parameters
    ----------
    x : float
        r [cm].
    y : float
        ln v [ln(cm s^-1)].
    P, O : ndarray
        Parameter (Mdot set) and opacity vectors.

    Returns
    -------
    float
        [cm^-1].
    """
    v = math.exp(y)
    n = force_balance_inv(x, 1.0 / x, v, math.exp(-y), P, O)
    return n / (v * v - P[I_A2])


@njit(cache=True, error_model="numpy")
def monitor_outward(x, y, P, O):
    """Stop the supersonic leg when tiring exhausts L or v falls back to a.

    Parameters
    ----------
    x : float
        ln r [ln cm].
    y : float
        ln v.
    P, O : ndarray
        Parameter and opacity vectors.

    Returns
    -------
    int
        0, STOP_STALL or STOP_SINGULAR.
    """
    r = math.exp(x)
    v = math.exp(y)
    if P[I_TIRING] > 0.0 and luminosity(r, v, P) <= 0.0:
        return STOP_STALL
    if v * v - P[I_A2] < SONIC_GAP * P[I_A2] and force_balance(r, v, P, O) < 0.0:
        return STOP_SINGULAR
    return 0


@njit(cache=True, error_model="numpy")
def monitor_inward(x, y, P, O):
    """Stop the subsonic leg (x = r) when it turns back to v = a or is far too dense.

    Parameters
    ----------
    x : float
        r [cm].
    y : float
        ln v.
    P, O : ndarray
        Parameter and opacity vectors.

    Returns
    -------
    int
        0, STOP_DENSE or STOP_SINGULAR.
    """
    r = x
    v = math.exp(y)
    if density(r, v, P) > P[I_RHO_STOP]:
        return STOP_DENSE
    if v * v - P[I_A2] > -SONIC_GAP * P[I_A2] and force_balance(r, v, P, O) > 0.0:
        return STOP_SINGULAR
    return 0


@njit(cache=True, error_model="numpy")
def base_sonic_balance(ln_mdot, P, O):
    """N(R0, a) for the mass-loss rate e^ln_mdot.

    Where it is positive the gas at the base is unbound at the sonic
    density, so no critical point lies just beyond R0; its root in ln Mdot is
    the smallest (or largest) Mdot whose saddle can sit on the base.

    Parameters
    ----------
    ln_mdot : float
        ln Mdot [ln(g s^-1)].
    P, O : ndarray
        Parameter and opacity vectors.

    Returns
    -------
    float
        N [cm s^-2].
    """
    Q = set_mass_loss_rate(P, ln_mdot)
    return force_balance(Q[I_R0], math.sqrt(Q[I_A2]), Q, O)


@njit(cache=True, error_model="numpy")
def left_table(x, y, P, O):
    """Did a leg that gave up at (x, y) run into the edge of an opacity table?

    An adaptive step never accepts an off-table point (its stages give NaN
    and the step shrinks), so the sign is a last accepted point hugging an
    edge.

    Parameters
    ----------
    x : float
        ln r [ln cm].
    y : float
        ln v.
    P, O : ndarray
        Parameter and opacity vectors.

    Returns
    -------
    bool
    """
    r = math.exp(x)
    return table_margin(O, density(r, math.exp(y), P), P[I_T]) < TABLE_EDGE


integrate_outward = make_scalar_integrator(rhs, monitor_outward)  # x = ln r, y = ln v
integrate_inward = make_scalar_integrator(rhs_radius, monitor_inward)  # x = r, y = ln v
refine_sonic = make_illinois(sonic_force_balance)
refine_base = make_illinois(base_sonic_balance)


@njit(cache=True, error_model="numpy")
def critical_point_partials(r, P, O):
    """(dN/dr, dN/dv) at (r, a), fixed Mdot, by central differences.

    Parameters
    ----------
    r : float
        Radius [cm].
    P, O : ndarray
        Parameter (Mdot set) and opacity vectors.

    Returns
    -------
    n_r : float
        [s^-2].
    n_v : float
        [s^-1].
    """
    a = math.sqrt(P[I_A2])
    hr = 1e-5 * r
    hv = 1e-5 * a
    n_r = (force_balance(r + hr, a, P, O) - force_balance(r - hr, a, P, O)) / (2.0 * hr)
    n_v = (force_balance(r, a + hv, P, O) - force_balance(r, a - hv, P, O)) / (2.0 * hv)
    return n_r, n_v


@njit(cache=True, error_model="numpy")
def classify_point(r, P, O):
    """(kind, p_plus, p_minus) of the critical point at r (Model A quadratic).

    Parameters
    ----------
    r : float
        Radius of the critical point [cm].
    P, O : ndarray
        Parameter (Mdot set) and opacity vectors.

    Returns
    -------
    kind : int
    p_plus, p_minus : float
        Slopes dv/dr [s^-1].

    References
    ----------
    docs/physics.md, eqs. 25 and 26.
    """
    n_r, n_v = critical_point_partials(r, P, O)
    # 2 p^2 - N_v p - N_r = 0  (d(v - a^2/v)/dr = 2 p at v = a)
    return classify(n_v, n_r, 0.0)


@njit(cache=True, error_model="numpy")
def critical_points(P, O, out_r, out_kind, out_pp, out_pm):
    """All roots of N(r, a) on [R0, r_out], classified; returns their count.

    Parameters
    ----------
    P, O : ndarray
        Parameter (Mdot set) and opacity vectors.
    out_r : ndarray
        Radii of the critical points [cm], written in place (its length caps the count).
    out_kind : ndarray
        Their topology codes.
    out_pp, out_pm : ndarray
        Their slopes dv/dr [s^-1].

    Returns
    -------
    int
        Number of points written.

    References
    ----------
    docs/physics.md, eqs. 16, 25 and 26.
    """
    x_lo = math.log(P[I_R0])
    x_hi = math.log(P[I_ROUT])
    dx = (x_hi - x_lo) / (N_GRID - 1)
    f_prev = sonic_force_balance(x_lo, P, O)
    count = 0
    for i in range(1, N_GRID):
        x = x_lo + i * dx
        f = sonic_force_balance(x, P, O)
        if (f_prev < 0.0 and f >= 0.0) or (f_prev > 0.0 and f <= 0.0):
            xr = refine_sonic(x - dx, x, f_prev, f, P, O, 1e-15)
            if count < out_r.shape[0]:
                r = math.exp(xr)
                kind, pp, pm = classify_point(r, P, O)
                out_r[count] = r
                out_kind[count] = kind
                out_pp[count] = pp
                out_pm[count] = pm
                count += 1
        f_prev = f
    return count


@njit(cache=True, error_model="numpy")
def innermost_saddle(P, O):
    """First saddle of N(r, a) outward from R0: (code, r_c, slope dv/dr).

    Parameters
    ----------
    P, O : ndarray
        Parameter (Mdot set) and opacity vectors.

    Returns
    -------
    code : int
        OK, NO_SADDLE, NO_CRITICAL_POINT_BOUND, NO_CRITICAL_POINT_UNBOUND or LEFT_TABLE.
    r_c : float
        [cm] (where the table was left, for LEFT_TABLE; NaN for none).
    slope : float
        Accelerating slope dv/dr [s^-1].

    References
    ----------
    docs/physics.md, section 4 ("Critical point").
    """
    x_lo = math.log(P[I_R0])
    x_hi = math.log(P[I_ROUT])
    dx = (x_hi - x_lo) / (N_GRID - 1)
    f_prev = sonic_force_balance(x_lo, P, O)
    if math.isnan(f_prev):
        return LEFT_TABLE, P[I_R0], math.nan
    any_root = False
    any_pos = f_prev > 0.0
    for i in range(1, N_GRID):
        x = x_lo + i * dx
        f = sonic_force_balance(x, P, O)
        if math.isnan(f):
            # Only an opacity table without clamping gives NaN here.
            return LEFT_TABLE, math.exp(x), math.nan
        if f > 0.0:
            any_pos = True
        if f_prev < 0.0 and f >= 0.0:
            # N rising through zero: dN/dr > 0 at v = a, a saddle candidate.
            xr = refine_sonic(x - dx, x, f_prev, f, P, O, 1e-15)
            r = math.exp(xr)
            kind, pp, pm = classify_point(r, P, O)
            if kind == SADDLE:
                return OK, r, pp
            any_root = True
        elif f_prev > 0.0 and f <= 0.0:
            any_root = True
        f_prev = f
    if any_root:
        return NO_SADDLE, math.nan, math.nan
    if any_pos:
        return NO_CRITICAL_POINT_UNBOUND, math.nan, math.nan
    return NO_CRITICAL_POINT_BOUND, math.nan, math.nan


@njit(cache=True, error_model="numpy")
def survey(P, O, x_lo, x_hi, codes):
    """Critical-point code of innermost_saddle at len(codes) values of ln Mdot.

    Cheap (no integration); used to explain a failed search, e.g. that some
    mass-loss rates do have critical points, but only nodes or foci.

    Parameters
    ----------
    P, O : ndarray
        Parameter and opacity vectors.
    x_lo, x_hi : float
        Range of ln Mdot [ln(g s^-1)].
    codes : ndarray of int
        Output, written in place (at least 2 entries).
    """
    n = codes.shape[0]
    for i in range(n):
        x = x_lo + (x_hi - x_lo) * i / (n - 1)
        codes[i] = innermost_saddle(set_mass_loss_rate(P, x), O)[0]


@njit(cache=True, error_model="numpy")
def dense_estimate(x, y, Q, O, ln_rho0):
    """g at R0 extrapolated from an inward leg stopped as too dense at (x, y).

    ln rho(x) - ln rho0 + |d ln rho / d ln r| (x - ln R0): an estimate (about
    a lower bound, since rho climbs ever faster inward in a near-hydrostatic
    layer), always above DENSE_MARGIN, used only to steer the root-find.

    Parameters
    ----------
    x : float
        ln r of the stop [ln cm].
    y : float
        ln v there.
    Q, O : ndarray
        Parameter (Mdot set) and opacity vectors.
    ln_rho0 : float
        ln of the base density [ln(g cm^-3)].

    Returns
    -------
    float
        Estimated g [dimensionless].
    """
    r = math.exp(x)
    v = math.exp(y)
    g_stop = math.log(density(r, v, Q)) - ln_rho0
    dydx = r * force_balance(r, v, Q, O) / (v * v - Q[I_A2])
    steep = 2.0 + dydx  # -d ln rho / d ln r
    if not (steep > 0.0 and math.isfinite(steep)):
        return g_stop
    return g_stop + steep * (x - math.log(Q[I_R0]))


@njit(cache=True, error_model="numpy")
def shoot(ln_mdot, P, O, rtol, delta):
    """One trial: (code, ln rho(R0) - ln rho0, r_c, slope) for this Mdot.

    Parameters
    ----------
    ln_mdot : float
        ln Mdot [ln(g s^-1)].
    P, O : ndarray
        Parameter and opacity vectors.
    rtol : float
        Relative tolerance.
    delta : float
        Start this fraction of r_c off the critical point (docs/physics.md, section 8).

    Returns
    -------
    code : int
    g : float
        ln rho(R0) - ln rho0 [dimensionless], NaN on failure.
    r_c : float
        [cm].
    slope : float
        [s^-1].
    """
    return shoot_work(ln_mdot, P, O, rtol, delta, P.copy(), np.empty(0))


@njit(cache=True, error_model="numpy")
def shoot_work(ln_mdot, P, O, rtol, delta, Q, none):
    """:func:`shoot` with the work vector Q (a copy of P, overwritten) and an
    empty array ``none`` given: a search allocates them once, not per shot.

    Parameters
    ----------
    ln_mdot, P, O, rtol, delta
        As :func:`shoot`.
    Q : ndarray
        Work vector, overwritten.
    none : ndarray
        An empty array (no output stored).

    Returns
    -------
    tuple
        As :func:`shoot`.
    """
    fill_mass_loss_rate(Q, P, ln_mdot)
    code, rc, slope = innermost_saddle(Q, O)
    if code != OK:
        return code, math.nan, rc, slope
    a = math.sqrt(Q[I_A2])
    R0 = Q[I_R0]
    ln_rho0 = math.log(Q[I_RHO0])
    if rc * (1.0 - delta) <= R0:
        # The sonic point sits (within delta) on the base.
        v_base = a - slope * (rc - R0)
        return OK, math.log(density(R0, v_base, Q)) - ln_rho0, rc, slope
    y0 = math.log(a - slope * delta * rc)
    # (dx_out given, not left to its default: numba would compile a second
    # copy of the integrator for the call without it)
    status, r, y, n_out, nfev = integrate_inward(
        rc * (1.0 - delta), y0, R0, Q, O, 0.0, rtol, FIRST_STEP * delta * rc, np.inf, none, none,
        0.0)
    x = math.log(r)
    if status == REACHED_END:
        g = math.log(density(R0, math.exp(y), Q)) - ln_rho0
        return OK, g, rc, slope
    if status == STOP_DENSE:
        # Far too dense already: g > DENSE_MARGIN for certain.  Only its sign
        # matters for the bracket, but a value that keeps growing with Mdot
        # lets the root-find interpolate instead of bisecting: extrapolate
        # ln rho linearly in ln r from the stop down to R0.
        return OK, dense_estimate(x, y, Q, O, ln_rho0), rc, slope
    if status == STEP_TOO_SMALL and left_table(x, y, Q, O):
        return LEFT_TABLE, math.nan, math.exp(x), slope
    if status == STOP_SINGULAR or status == STEP_TOO_SMALL:
        return INWARD_SINGULAR, math.nan, rc, slope
    return INTEGRATION_FAILED, math.nan, rc, slope


@njit(cache=True, error_model="numpy")
def base_eddington_factor(P, O):
    """Gamma_eff = kappa_eff(rho0, T, R0) L0 / (4 pi G M c) at the base.

    Parameters
    ----------
    P, O : ndarray
        Parameter and opacity vectors.

    Returns
    -------
    float
        [dimensionless].

    References
    ----------
    docs/physics.md, eq. 12.
    """
    k0 = effective_opacity(O, P[I_RHO0], P[I_T], P[I_R0])
    return k0 * P[I_L0] / (FOUR_PI * C_LIGHT * P[I_GM])


@njit(cache=True, error_model="numpy")
def first_guess(P, O):
    """ln Mdot from Parker's subsonic asymptote with the base Eddington factor.

    v/a ~ (r_c/r)^2 exp(3/2 - 2 r_c/r) far below the sonic point (Lamers &
    Cassinelli 1999, ch. 3, from memory), with GM reduced by (1 - Gamma_0).
    Only a starting point: the bracket search does not depend on it.

    Parameters
    ----------
    P, O : ndarray
        Parameter and opacity vectors.

    Returns
    -------
    guess : float
        ln Mdot [ln(g s^-1)].
    ln_mdot_max : float
        ln(4 pi R0^2 rho0 a), the largest rate searched.

    References
    ----------
    docs/physics.md, eq. 17 (r_c with reduced gravity).
    """
    a2 = P[I_A2]
    R0 = P[I_R0]
    ln_mdot_max = math.log(FOUR_PI * R0 * R0 * P[I_RHO0] * math.sqrt(a2))
    gamma0 = base_eddington_factor(P, O)
    guess = ln_mdot_max - 1.0
    if gamma0 < 1.0:
        rcg = P[I_GM] * (1.0 - gamma0) / (2.0 * a2)
        if rcg > R0:
            guess = ln_mdot_max + min(2.0 * math.log(rcg / R0) + 1.5 - 2.0 * rcg / R0, -1.0)
    return max(guess, ln_mdot_max - LN_RANGE), ln_mdot_max


@njit(cache=True, error_model="numpy")
def find_admissible(P, O, rtol, delta, guess, x_min, x_max, shots):
    """An admissible Mdot (a saddle, and a leg that reaches R0) near ``guess``.

    Returns ``(found, x, g, rc, slope, shots, reason)``.  The failures on
    either side of the admissible window usually differ (porosity: too
    little Mdot leaves the base super-Eddington at the sonic density, too
    much buries the critical point below R0), so bisect between two trials
    that failed for different reasons; fall back on a widening search
    around the guess.

    Parameters
    ----------
    P, O : ndarray
        Parameter and opacity vectors.
    rtol, delta : float
        As :func:`shoot`.
    guess : float
        Starting ln Mdot.
    x_min, x_max : float
        Range of ln Mdot.
    shots : int
        Trials so far.

    Returns
    -------
    tuple
        (found, ln Mdot, g, r_c [cm], slope [s^-1], shots, reason).
    """
    xtol_b = 1e-9
    Q = P.copy()
    none = np.empty(0)
    shots += 1
    code, g, rc, slope = shoot_work(guess, P, O, rtol, delta, Q, none)
    reason = code
    if code == OK:
        return True, guess, g, rc, slope, shots, reason
    xs = np.array([x_min, guess, x_max])
    cs = np.array([OK, code, OK])
    gs = np.array([math.nan, g, math.nan])
    rcs = np.array([math.nan, rc, math.nan])
    ss = np.array([math.nan, slope, math.nan])
    for k in (0, 2):
        cs[k], gs[k], rcs[k], ss[k] = shoot_work(xs[k], P, O, rtol, delta, Q, none)
        shots += 1
    for k in (0, 2):
        if cs[k] == OK:
            return True, xs[k], gs[k], rcs[k], ss[k], shots, reason
    for k in (0, 1):
        left = xs[k]
        right = xs[k + 1]
        c_left = cs[k]
        if c_left == cs[k + 1]:
            continue
        while right - left > xtol_b and shots < MAX_SHOTS:
            m = 0.5 * (left + right)
            c2, g2, rc2, s2 = shoot_work(m, P, O, rtol, delta, Q, none)
            shots += 1
            if c2 == OK:
                return True, m, g2, rc2, s2, shots, reason
            if c2 == c_left:
                left = m
            else:
                right = m
    step = 0.5
    x = guess
    while step < 2.0 * LN_RANGE:
        for sgn in (1.0, -1.0):
            xt = x + sgn * step
            if xt >= x_max or xt <= x_min:
                continue
            c2, g2, rc2, s2 = shoot_work(xt, P, O, rtol, delta, Q, none)
            shots += 1
            if c2 == OK:
                return True, xt, g2, rc2, s2, shots, reason
        step *= 2.0
    return False, x, math.nan, math.nan, math.nan, shots, reason


@njit(cache=True, error_model="numpy")
def _shot_for_brent(x, args):
    """shoot_work for :data:`brent_shots`: (code, g, r_c, slope) at ln Mdot = x."""
    P, O, rtol, delta, Q, none = args
    return shoot_work(x, P, O, rtol, delta, Q, none)


brent_shots = make_brent(_shot_for_brent)


@njit(cache=True, error_model="numpy")
def converge(P, O, rtol, delta, x, g, rc, slope, step0, x_min, x_max, shots, reason):
    """From an admissible trial (x, g): walk to a sign change of g, then Brent.

    Returns ``(code, ln_mdot, r_c, slope, shots, reason, seen_ok)``;
    ``seen_ok`` is False when no trial of the walk was admissible (the start
    may have been a boundary value computed without a shot).

    The walk: each step is the secant prediction of the root from the last
    two trials (Newton with unit slope from the first one: for a constant
    opacity g = ln Mdot + const exactly); from a start on the admissible
    boundary, where g is steep and unknown, the first step is ``step0``.
    The step is kept between MIN_WALK and 4x the previous one.  A trial
    that lands within the tolerance ends the search; one that fails (no
    saddle, no reach) means the admissible boundary lies in between:
    bisect onto it.

    Parameters
    ----------
    P, O : ndarray
        Parameter and opacity vectors.
    rtol, delta : float
        As :func:`shoot`.
    x, g : float
        The admissible start: ln Mdot and its g.
    rc, slope : float
        Its critical point [cm] and slope [s^-1].
    step0 : float
        First step in ln Mdot from a boundary start.
    x_min, x_max : float
        Range of ln Mdot.
    shots : int
        Trials so far (0: the start was computed without a shot).
    reason : int
        First failure met so far.

    Returns
    -------
    tuple
        (code, ln_mdot, r_c, slope, shots, reason, seen_ok).

    References
    ----------
    docs/physics.md, section 8; Brent (1973), ch. 4 (:func:`windsolve.core.roots.make_brent`).
    """
    xtol_b = 1e-9
    Q = P.copy()
    none = np.empty(0)
    seen_ok = shots > 0
    if seen_ok and abs(g) < rtol:
        return OK, x, rc, slope, shots, reason, seen_ok
    sgn = 1.0 if g < 0.0 else -1.0  # walk toward larger g when g < 0
    x_prev = math.nan
    g_prev = math.nan
    step = step0 if step0 < 1.0 else min(max(abs(g), MIN_WALK), 2.0)
    bracket = False
    x_far = math.nan
    g_far = math.nan
    rc_far = math.nan
    slope_far = math.nan
    while not bracket:
        if not math.isnan(x_prev):
            d = -g * (x - x_prev) / (g - g_prev)
            if math.isfinite(d) and d * sgn > 0.0:
                step = min(max(abs(d), MIN_WALK), 4.0 * step)
            else:
                step *= 2.0
        xt = min(max(x + sgn * step, x_min), x_max)
        if xt == x:
            break
        c2, g2, rc2, s2 = shoot_work(xt, P, O, rtol, delta, Q, none)
        shots += 1
        if c2 == OK:
            seen_ok = True
            if abs(g2) < rtol:
                return OK, xt, rc2, s2, shots, reason, seen_ok
            if (g2 > 0.0) == (g > 0.0):
                x_prev, g_prev = x, g
                x, g, rc, slope = xt, g2, rc2, s2
            else:
                x_far, g_far, rc_far, slope_far = xt, g2, rc2, s2
                bracket = True
        else:
            reason = c2
            bad = xt
            while abs(bad - x) > xtol_b and shots < MAX_SHOTS:
                m = 0.5 * (x + bad)
                c3, g3, rc3, s3 = shoot_work(m, P, O, rtol, delta, Q, none)
                shots += 1
                if c3 != OK:
                    bad = m
                    continue
                seen_ok = True
                if abs(g3) < rtol:
                    return OK, m, rc3, s3, shots, reason, seen_ok
                if (g3 > 0.0) != (g > 0.0):
                    x_far, g_far, rc_far, slope_far = m, g3, rc3, s3
                    bracket = True
                    break
                x_prev, g_prev = x, g
                x, g, rc, slope = m, g3, rc3, s3
            if not bracket:
                break
        if x <= x_min or x >= x_max or shots >= MAX_SHOTS:
            break
    if not bracket:
        code = NO_BRACKET_DENSE if g > 0.0 else NO_BRACKET_THIN
        # (the last admissible trial, for the user layer to describe)
        return code, x, rc, slope, shots, reason, seen_ok
    # Brent's method on ln Mdot (roots.make_brent), keeping r_c and the slope
    # of every trial so that the answer needs no extra shot.  It stops when
    # the bracket or the interpolated step falls below xtol = 0.1 rtol (a
    # relative tolerance on Mdot), or once |g| < rtol (the mismatch is within
    # the integration noise).
    outcome, c4, x, rc, slope, shots = brent_shots(
        x, g, rc, slope, x_far, g_far, rc_far, slope_far, (P, O, rtol, delta, Q, none),
        rtol, 0.1 * rtol, JUMP_TOL, shots, MAX_SHOTS)
    if outcome == ROOT_MAX_EVALS:
        return ROOT_NOT_CONVERGED, x, math.nan, math.nan, shots, reason, seen_ok
    if outcome == ROOT_JUMP:
        # The bracket collapsed onto a sign change that is no root: g jumps
        # there (the innermost saddle changes), so no Mdot near it meets the
        # base density.
        return NO_ROOT_JUMP, x, math.nan, math.nan, shots, reason, seen_ok
    if outcome == ROOT_F_FAILED:
        return c4, x, math.nan, math.nan, shots, c4, seen_ok
    return OK, x, rc, slope, shots, reason, seen_ok


@njit(cache=True, error_model="numpy")
def solve(P, O, rtol, delta):
    """Find the mass-loss rate of the transonic solution through rho(R0) = rho0.

    Returns ``(code, ln_mdot, r_c, slope, n_shots, reason)`` where ``reason``
    is the first failure met while searching (useful when code != OK).  With
    NO_BRACKET_DENSE / NO_BRACKET_THIN, ln_mdot and r_c are those of the last
    admissible trial.  An answer is never one whose sonic point sits on the
    base (SONIC_ON_BASE) or a sign change of g by a jump (NO_ROOT_JUMP).

    Parameters
    ----------
    P, O : ndarray
        Parameter and opacity vectors.
    rtol : float
        Relative tolerance.
    delta : float
        Start offset from the critical point, in units of r_c.

    Returns
    -------
    tuple
        (code, ln_mdot, r_c [cm], slope [s^-1], n_shots, reason).

    References
    ----------
    docs/physics.md, section 4 ("Boundary conditions") and section 8.
    """
    guess, ln_mdot_max = first_guess(P, O)
    x_min = ln_mdot_max - LN_RANGE
    x_max = ln_mdot_max - 1e-9
    shots = 0
    # 0. When N(R0, a) changes sign with Mdot (density-dependent opacity,
    #    porosity, tiring), the admissible window starts where the saddle
    #    sits on the base (docs/physics.md, section 8).  There v(R0) = a, so
    #    g = ln rho(R0) - ln rho0 = ln Mdot - ln(4 pi R0^2 rho0 a) is known
    #    without a shot; ln rho(R0) climbs steeply inside the window, so the
    #    walk starts from the boundary with a small step.  N costs
    #    nanoseconds; a shot costs microseconds.
    n_lo = base_sonic_balance(x_min, P, O)
    n_hi = base_sonic_balance(x_max, P, O)
    if (n_lo > 0.0) != (n_hi > 0.0) and n_lo != 0.0 and n_hi != 0.0:
        xb = refine_base(x_min, x_max, n_lo, n_hi, P, O, 1e-14)
        side = 1.0 if n_hi < 0.0 else -1.0
        # The known boundary value holds only if the saddle really leaves the
        # base there (r_c -> R0 as Mdot -> the boundary).  N(R0, a) can also
        # change sign where the root at the base is not the innermost saddle
        # (that sits far out, e.g. under photon tiring); then g jumps at the
        # boundary and a "root" next to it would be that jump.  One real
        # shot just inside the window tells which.
        x_in = min(max(xb + side * 1e-9 * (1.0 + abs(xb)), x_min), x_max)
        c_in, g_in, rc_in, s_in = shoot_work(x_in, P, O, rtol, delta, P.copy(), np.empty(0))
        shots += 1
        if c_in == OK and rc_in <= P[I_R0] * (1.0 + BASE_EMERGE):
            # (np.int64: a literal 0 would make numba compile converge once
            # more, for Literal[int](0); likewise below)
            res = converge(P, O, rtol, delta, xb, xb - ln_mdot_max, P[I_R0], math.nan,
                           0.02, x_min, x_max, np.int64(0), np.int64(OK))
            if res[6]:
                return checked(res[0], res[1], res[2], res[3], res[4] + shots, res[5], P, delta)
            shots += res[4]
        elif c_in == OK:
            res = converge(P, O, rtol, delta, x_in, g_in, rc_in, s_in, 1.0, x_min, x_max,
                           shots, np.int64(OK))
            return checked(res[0], res[1], res[2], res[3], res[4], res[5], P, delta)
        # Nothing admissible next to the boundary: search as below.
        guess = min(max(xb + side * 1e-6 * (1.0 + abs(xb)), x_min), x_max)
    # 1. Find any admissible Mdot; 2. walk to a sign change and refine.
    found, x, g, rc, slope, shots, reason = find_admissible(P, O, rtol, delta, guess,
                                                            x_min, x_max, shots)
    if not found:
        return reason, math.nan, math.nan, math.nan, shots, reason
    res = converge(P, O, rtol, delta, x, g, rc, slope, 1.0, x_min, x_max, shots, reason)
    return checked(res[0], res[1], res[2], res[3], res[4], res[5], P, delta)


@njit(cache=True, error_model="numpy")
def checked(code, x, rc, slope, shots, reason, P, delta):
    """The answer of :func:`solve`, refused when it is not a transonic solution.

    A mass-loss rate whose sonic point lies within ``delta`` of the base has
    no subsonic part: the base density is then the sonic density and the
    "solution" is not a wind launched from a subsonic base (SONIC_ON_BASE).

    Parameters
    ----------
    code, x, rc, slope, shots, reason
        What the search found (as :func:`solve` returns them).
    P : ndarray
        Parameter vector.
    delta : float
        Start offset, in units of r_c.

    Returns
    -------
    tuple
        As :func:`solve`.
    """
    if code == OK and not rc * (1.0 - delta) > P[I_R0]:
        return SONIC_ON_BASE, x, rc, slope, shots, reason
    return code, x, rc, slope, shots, reason


@njit(cache=True, error_model="numpy")
def outward_leg(Q, O, rc, slope, rtol, delta, dx_out, xo, yo):
    """The wind branch from just outside r_c to r_out: (status, x, y, n_stored).

    status is OK, STALLED, OUTWARD_SINGULAR, LEFT_TABLE or INTEGRATION_FAILED;
    (x, y) is the last accepted point.  With ``dx_out`` > 0 the points stored
    in (xo, yo) are dx_out apart in ln r (dense output), else every step.

    Parameters
    ----------
    Q, O : ndarray
        Parameter (Mdot set) and opacity vectors.
    rc : float
        Critical radius [cm].
    slope : float
        Accelerating slope [s^-1].
    rtol, delta : float
        Relative tolerance; start offset in units of r_c.
    dx_out : float
        Output spacing in ln r (0: every step).
    xo, yo : ndarray
        Storage for ln r and ln v.

    Returns
    -------
    tuple
        (status, x, y, n_stored).
    """
    y0 = math.log(math.sqrt(Q[I_A2]) + slope * delta * rc)
    st, x, y, no, nfev = integrate_outward(
        math.log(rc * (1.0 + delta)), y0, math.log(Q[I_ROUT]),
        Q, O, 0.0, rtol, delta, np.inf, xo, yo, dx_out)
    status = OK
    if st == STEP_TOO_SMALL and left_table(x, y, Q, O):
        status = LEFT_TABLE
    elif st == STOP_STALL:
        status = STALLED
    elif st == STOP_SINGULAR or st == STEP_TOO_SMALL:
        status = OUTWARD_SINGULAR
    elif st != REACHED_END:
        status = INTEGRATION_FAILED
    return status, x, y, no


@njit(cache=True, error_model="numpy")
def profile(ln_mdot, P, O, rtol, delta, max_step, capacity):
    """Integrate the converged solution from R0 to r_out, storing it.

    Returns ``(status_in, status_out, r, v)``; ``status_out`` is OK,
    OUTWARD_SINGULAR or STALLED (the profile then ends where the flow did).
    Besides the integration steps, points are stored (from the integrator's
    dense output, so the steps themselves are not limited) every
    ``max_step`` in ln r outward and every min(max_step R0, (r_c - R0) /
    SUBSONIC_POINTS) in r inward, so that a thin subsonic layer is resolved
    too; at most ``capacity`` points a leg.

    Parameters
    ----------
    ln_mdot : float
        Converged ln Mdot.
    P, O : ndarray
        Parameter and opacity vectors.
    rtol, delta : float
        Relative tolerance; start offset in units of r_c.
    max_step : float
        Output spacing in ln r (outward).
    capacity : int
        Most points stored per leg.

    Returns
    -------
    tuple
        (status_in, status_out, r [cm], v [cm s^-1]).
    """
    Q = set_mass_loss_rate(P, ln_mdot)
    code, rc, slope = innermost_saddle(Q, O)
    status_in, ri, vi = inward_part(Q, O, rc, slope, rtol, delta, max_step, capacity)
    status_out, ro, vo = outward_part(Q, O, rc, slope, rtol, delta, max_step, capacity)
    return status_in, status_out, np.concatenate((ri, ro)), np.concatenate((vi, vo))


@njit(cache=True, error_model="numpy")
def inward_part(Q, O, rc, slope, rtol, delta, max_step, capacity):
    """:func:`profile` below r_c: ``(status_in, r, v)`` from R0 up to, not including, r_c.

    Parameters
    ----------
    Q, O : ndarray
        Parameter (Mdot set) and opacity vectors.
    rc, slope : float
        Critical radius [cm] and slope [s^-1].
    rtol, delta, max_step, capacity
        As :func:`profile`.

    Returns
    -------
    tuple
        (status_in, r [cm], v [cm s^-1]).
    """
    a = math.sqrt(Q[I_A2])
    R0 = Q[I_R0]
    if not rc * (1.0 - delta) > R0:
        return OK, np.empty(0), np.empty(0)
    dr_in = min(max_step * R0, (rc - R0) / SUBSONIC_POINTS)
    # Grid points, plus the integration steps (a few tens; capacity caps them).
    n_in = min(capacity, int((rc - R0) / dr_in) + PROFILE_STEPS)
    xi = np.empty(n_in)
    yi = np.empty(n_in)
    y0 = math.log(a - slope * delta * rc)
    st, r_last, y, ni, nfev = integrate_inward(
        rc * (1.0 - delta), y0, R0, Q, O, 0.0, rtol, FIRST_STEP * delta * rc, np.inf, xi, yi, dr_in)
    if ni == xi.shape[0] and ni < capacity:  # full: once more with all the room
        xi = np.empty(capacity)
        yi = np.empty(capacity)
        st, r_last, y, ni, nfev = integrate_inward(
            rc * (1.0 - delta), y0, R0, Q, O, 0.0, rtol, FIRST_STEP * delta * rc, np.inf, xi, yi,
            dr_in)
    status_in = OK
    if st != REACHED_END:
        status_in = LEFT_TABLE if left_table(math.log(r_last), y, Q, O) else INWARD_SINGULAR
    r = np.empty(ni)
    v = np.empty(ni)
    for i in range(ni):
        r[i] = xi[ni - 1 - i]
        v[i] = math.exp(yi[ni - 1 - i])
    if ni > 0:
        r[0] = R0
    return status_in, r, v


@njit(cache=True, error_model="numpy")
def outward_part(Q, O, rc, slope, rtol, delta, max_step, capacity):
    """:func:`profile` from r_c (v = a, the first point) out: ``(status_out, r, v)``.

    Parameters
    ----------
    Q, O : ndarray
        Parameter (Mdot set) and opacity vectors.
    rc, slope : float
        Critical radius [cm] and slope [s^-1].
    rtol, delta, max_step, capacity
        As :func:`profile`.

    Returns
    -------
    tuple
        (status_out, r [cm], v [cm s^-1]).
    """
    n_out = min(capacity, int(math.log(Q[I_ROUT] / rc) / max_step) + PROFILE_STEPS)
    xo = np.empty(n_out)
    yo = np.empty(n_out)
    status_out, x, y, no = outward_leg(Q, O, rc, slope, rtol, delta, max_step, xo, yo)
    if no == xo.shape[0] and no < capacity:  # full: once more with all the room
        xo = np.empty(capacity)
        yo = np.empty(capacity)
        status_out, x, y, no = outward_leg(Q, O, rc, slope, rtol, delta, max_step, xo, yo)
    r = np.empty(no + 1)
    v = np.empty(no + 1)
    r[0] = rc
    v[0] = math.sqrt(Q[I_A2])
    for i in range(no):
        r[1 + i] = math.exp(xo[i])
        v[1 + i] = math.exp(yo[i])
    return status_out, r, v


@njit(cache=True, error_model="numpy")
def end_state(ln_mdot, P, O, rtol, delta):
    """(status_out, r_end, v_end) of the outward leg, nothing stored.

    What a sweep needs when it does not keep profiles: the velocity at the
    outer radius and whether the flow got there.

    Parameters
    ----------
    ln_mdot, P, O, rtol, delta
        As :func:`shoot`.

    Returns
    -------
    tuple
        (status_out, r_end [cm], v_end [cm s^-1]).
    """
    Q = set_mass_loss_rate(P, ln_mdot)
    code, rc, slope = innermost_saddle(Q, O)
    status_out, x, y, no = outward_leg(Q, O, rc, slope, rtol, delta, 0.0, np.empty(0),
                                       np.empty(0))
    return status_out, math.exp(x), math.exp(y)


@njit(cache=True, error_model="numpy")
def profile_quantities(ln_mdot, r, v, P, O):
    """rho, L, kappa_eff and Gamma_eff along a profile (cgs arrays).

    Parameters
    ----------
    ln_mdot : float
        ln Mdot [ln(g s^-1)].
    r, v : ndarray
        Radius [cm] and velocity [cm s^-1].
    P, O : ndarray
        Parameter and opacity vectors.

    Returns
    -------
    tuple of ndarray
        rho [g cm^-3], L [erg s^-1], kappa_eff [cm^2 g^-1], Gamma_eff [dimensionless].

    References
    ----------
    docs/physics.md, eqs. 12, 13 and 15.
    """
    Q = set_mass_loss_rate(P, ln_mdot)
    n = r.shape[0]
    rho = np.empty(n)
    L = np.empty(n)
    kappa = np.empty(n)
    gamma = np.empty(n)
    for i in range(n):
        rho[i] = density(r[i], v[i], Q)
        L[i] = luminosity(r[i], v[i], Q)
        kappa[i] = effective_opacity(O, rho[i], Q[I_T], r[i])
        gamma[i] = kappa[i] * L[i] / (FOUR_PI * C_LIGHT * Q[I_GM])
    return rho, L, kappa, gamma
