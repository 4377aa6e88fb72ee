"""Model B kernels: the optically thick wind with radiative diffusion.

Gas plus radiation in LTE, diffusion approximation, steady and spherical
(docs/physics.md, section 5, eqs. 19-21).  With c_T^2 = k T / (mu m_u) and
rho = Mdot / (4 pi r^2 v):

.. math::

    \\frac{dT}{dr} = -\\frac{3 \\kappa \\rho L_r}{16 \\pi a c r^2 T^3}

    (v - c_T^2/v) \\frac{dv}{dr} = N \\equiv \\frac{2 c_T^2}{r} - \\frac{GM}{r^2}
        + \\frac{\\kappa L_r}{4 \\pi r^2 c} - \\frac{k}{\\mu m_u} \\frac{dT}{dr}

    \\dot E = L_r + \\dot M \\left[\\frac{v^2}{2} + \\frac{5}{2} c_T^2
        + \\frac{4}{3} \\frac{a T^4}{\\rho} - \\frac{GM}{r}\\right] = {\\rm const}

The energy integral gives L_r algebraically, so the state is (r, v, T) and
the kernels integrate y = (ln v, ln T) against x = ln r with the same DOP853
integrator as Model A.  The equations are those of the optically thick wind
theory of Kato & Iben (1992, ApJ 394, 305) and Kato & Hachisu (1994, ApJ
437, 802) in the form of docs/physics.md, section 5 (references from memory).

A regular solution is fixed by its critical point (Mdot, r_c, T_c): v_c =
c_T(T_c), and N = 0 is linear in L_r, which gives L_c and then Edot
(:func:`critical_state`).  Legs run a short way outward from the critical
point (:func:`short_outward`) and inward to the
base (:func:`inward_leg`); :func:`shoot_from_photosphere` integrates inward
from a photospheric state, the robust way to bracket Mdot (outward
integration of the diffusion equation amplifies errors, see
:mod:`windsolve.models.diffusion.shooting`).

Parameter vector ``P`` (slots ``I_*``); the user layer builds it.
"""

import math

import numpy as np
from numba import njit

from ...core.constants import A_RAD, C_LIGHT, SIGMA_SB
from ...core.critical import classify
from ...core.integrate import REACHED_END, STEP_TOO_SMALL, make_integrator
from ...core.opacity import effective_opacity, table_margin
from ...core.roots import make_illinois

FOUR_PI = 4.0 * math.pi

# --- parameter slots -------------------------------------------------------
I_GM = 0  # G M [cm3 s-2]
I_KG = 1  # k / (mu m_u): c_T^2 = I_KG * T [erg g-1 K-1]
I_MDOT = 2  # mass-loss rate [g s-1]
I_EDOT = 3  # energy flux Edot [erg s-1]
I_KES = 4  # electron-scattering opacity of the thin flow [cm2 g-1]
I_R_IN = 5  # inner radius where inward legs stop [cm] (0: none)
I_T_IN = 6  # base temperature where inward legs stop [K] (inf: none)
I_PREV_X = 7  # monitor bookkeeping: last accepted ln r
I_PREV_Y0 = 8  # ... and ln v
I_PREV_Y1 = 9  # ... and ln T
I_PREV_N = 10  # ... and the sign of N (shooting from the photosphere)
N_PARAMS = 11

TAU_PH = 2.0 / 3.0  # optical depth of the photosphere
SONIC_GAP = 1e-4  # |v^2 - c_T^2| / c_T^2 below which an inward shot is at the sonic point

# --- leg status codes ------------------------------------------------------
OK = 0
STALLED = 2  # L_r <= 0: the radiation is used up
SINGULAR = 3  # v reached c_T with N != 0
OFF_TABLE = 4  # (rho, T) left the opacity table
BASE = 6  # inward leg reached the base (R0 or T_base)
FALLBACK = 7  # v_inf^2 <= 0 above the photosphere: the matter does not escape
INVALID = 8  # no critical point for these (Mdot, r_c, T_c): L_c <= 0 or not a saddle
FAILED = 9  # integration failed
SIDE_SONIC = 10  # shooting inward: v reached c_T with N > 0
SIDE_TURN = 11  # shooting inward: N turned from + to - before the sonic point


@njit(cache=True, error_model="numpy", inline="always")
def specific_energy(r, v, T, rho, P):
    """(Edot - L_r) / Mdot: kinetic energy, gas enthalpy, radiation enthalpy and
    potential per gram at (r, v, T, rho) [erg g-1] (the energy integral).

    Parameters
    ----------
    r, v, T, rho : float
        Radius [cm], velocity [cm s^-1], temperature [K], density [g cm^-3].
    P : ndarray
        Model B parameter vector.

    Returns
    -------
    float
        [erg g^-1].

    References
    ----------
    docs/physics.md, eq. 20.
    """
    return (0.5 * v * v + 2.5 * P[I_KG] * T
            + (4.0 / 3.0) * A_RAD * T**4 / rho - P[I_GM] / r)


@njit(cache=True, error_model="numpy", inline="always")
def luminosity(r, v, T, rho, P):
    """L_r from the energy integral [erg s-1].

    Parameters
    ----------
    r, v, T, rho : float
        Radius [cm], velocity [cm s^-1], temperature [K], density [g cm^-3].
    P : ndarray
        Model B parameter vector (Mdot and Edot set).

    Returns
    -------
    float
        Comoving radiative luminosity [erg s^-1].

    References
    ----------
    docs/physics.md, eq. 20.
    """
    return P[I_EDOT] - P[I_MDOT] * specific_energy(r, v, T, rho, P)


@njit(cache=True, error_model="numpy")
def state(r, v, T, P, O):
    """(rho, L_r, kappa, dT/dr, N) at (r, v, T).

    Parameters
    ----------
    r, v, T : float
        Radius [cm], velocity [cm s^-1], temperature [K].
    P : ndarray
        Model B parameter vector (Mdot and Edot set).
    O : ndarray
        Opacity vector.

    Returns
    -------
    tuple of float
        rho [g cm^-3], L_r [erg s^-1], kappa_eff [cm^2 g^-1], dT/dr [K cm^-1],
        N [cm s^-2].

    References
    ----------
    docs/physics.md, eqs. 13 and 19-21.
    """
    rho = P[I_MDOT] / (FOUR_PI * r * r * v)
    L = luminosity(r, v, T, rho, P)
    k = effective_opacity(O, rho, T, r)
    dTdr = -3.0 * k * rho * L / (4.0 * FOUR_PI * A_RAD * C_LIGHT * r * r * T**3)
    N = (2.0 * P[I_KG] * T / r - P[I_GM] / (r * r) + k * L / (FOUR_PI * C_LIGHT * r * r)
         - P[I_KG] * dTdr)
    return rho, L, k, dTdr, N


@njit(cache=True, error_model="numpy")
def rhs(x, y, P, O, dydx):
    """d(ln v, ln T)/d ln r.

    Parameters
    ----------
    x : float
        ln r [ln cm].
    y : ndarray (2,)
        (ln v, ln T) [ln(cm s^-1), ln K].
    P, O : ndarray
        Parameter and opacity vectors.
    dydx : ndarray (2,)
        Output, written in place [dimensionless].

    References
    ----------
    docs/physics.md, eqs. 19 and 21.
    """
    r = math.exp(x)
    v = math.exp(y[0])
    T = math.exp(y[1])
    rho, L, k, dTdr, N = state(r, v, T, P, O)
    dydx[0] = r * N / (v * v - P[I_KG] * T)
    dydx[1] = r * dTdr / T


@njit(cache=True, error_model="numpy")
def terminal_velocity_squared(r, v, L, P):
    """v_inf^2 of the ballistic thin flow above r (docs/physics.md, eq. 23).

    Parameters
    ----------
    r : float
        Radius [cm] (the photosphere).
    v : float
        Velocity there [cm s^-1].
    L : float
        Luminosity there [erg s^-1].
    P : ndarray
        Model B parameter vector.

    Returns
    -------
    float
        v_inf^2 [cm^2 s^-2]; <= 0 when the gas falls back.
    """
    gamma_thin = P[I_KES] * L / (FOUR_PI * C_LIGHT * P[I_GM])
    return v * v - 2.0 * P[I_GM] * (1.0 - gamma_thin) / r


@njit(cache=True, error_model="numpy")
def monitor_inward(x, y, P, O):
    """Stop test of the inward legs from the critical point.

    Parameters
    ----------
    x : float
        ln r [ln cm].
    y : ndarray (2,)
        (ln v, ln T).
    P, O : ndarray
        Parameter and opacity vectors; the accepted point is kept in P's
        I_PREV_* slots.

    Returns
    -------
    int
        0 to go on, else OFF_TABLE, STALLED (L_r <= 0), SINGULAR (v near c_T
        with N > 0) or BASE (T reached P[I_T_IN]).
    """
    r = math.exp(x)
    v = math.exp(y[0])
    T = math.exp(y[1])
    rho, L, k, dTdr, N = state(r, v, T, P, O)
    if not math.isfinite(k):
        return OFF_TABLE
    if L <= 0.0:
        return STALLED
    cT2 = P[I_KG] * T
    if v * v - cT2 > -1e-3 * cT2 and N > 0.0:
        return SINGULAR
    if T >= P[I_T_IN]:
        return BASE
    P[I_PREV_X] = x
    P[I_PREV_Y0] = y[0]
    P[I_PREV_Y1] = y[1]
    return 0


@njit(cache=True, error_model="numpy")
def monitor_shoot(x, y, P, O):
    """Inward from the photosphere: which side of the critical solution?

    Parameters
    ----------
    x : float
        ln r [ln cm].
    y : ndarray (2,)
        (ln v, ln T).
    P, O : ndarray
        Parameter and opacity vectors; the sign of N and the accepted point
        are kept in P's I_PREV_* slots.

    Returns
    -------
    int
        0 to go on, else OFF_TABLE, STALLED, SIDE_SONIC (runs into the sound
        speed with N > 0), SIDE_TURN (bends away, N < 0) or BASE.

    References
    ----------
    docs/physics.md, section 8.
    """
    r = math.exp(x)
    v = math.exp(y[0])
    T = math.exp(y[1])
    rho, L, k, dTdr, N = state(r, v, T, P, O)
    if not math.isfinite(k):
        return OFF_TABLE
    if L <= 0.0:
        return STALLED
    cT2 = P[I_KG] * T
    if v * v - cT2 < SONIC_GAP * cT2:
        if v * v < cT2 and P[I_PREV_N] != 0.0:
            # One step jumped across v = c_T instead of landing in the gap:
            # N on this side of the line says nothing; the last point decides.
            return SIDE_SONIC if P[I_PREV_N] > 0.0 else SIDE_TURN
        return SIDE_SONIC if N > 0.0 else SIDE_TURN
    # N from + to - moving inward: the flow turns away from the sonic point.
    # (From - to + is the velocity maximum outside an opacity bump.)
    if N < 0.0 and P[I_PREV_N] > 0.0:
        return SIDE_TURN
    P[I_PREV_N] = 1.0 if N > 0.0 else -1.0
    P[I_PREV_X] = x
    P[I_PREV_Y0] = y[0]
    P[I_PREV_Y1] = y[1]
    if T >= P[I_T_IN]:
        return BASE
    return 0


@njit(cache=True, error_model="numpy")
def monitor_none(x, y, P, O):
    """A stop test that never stops.

    Parameters
    ----------
    x : float
        ln r.
    y : ndarray (2,)
        (ln v, ln T).
    P, O : ndarray
        Parameter and opacity vectors (unused).

    Returns
    -------
    int
        0.
    """
    return 0


TABLE_EDGE = 1e-6  # dex: a failed step this close to a table edge left the table


@njit(cache=True, error_model="numpy")
def left_table(x, y, P, O):
    """Did a leg that gave up at (x, y) run into the edge of an opacity table?

    Parameters
    ----------
    x : float
        ln r [ln cm].
    y : ndarray (2,)
        (ln v, ln T).
    P, O : ndarray
        Parameter and opacity vectors.

    Returns
    -------
    bool
        The point lies within TABLE_EDGE dex of a table edge.
    """
    r = math.exp(x)
    v = math.exp(y[0])
    rho = P[I_MDOT] / (FOUR_PI * r * r * v)
    return table_margin(O, rho, math.exp(y[1])) < TABLE_EDGE


integrate_inward = make_integrator(rhs, monitor_inward)
integrate_shoot = make_integrator(rhs, monitor_shoot)
integrate_plain = make_integrator(rhs, monitor_none)


@njit(cache=True, error_model="numpy")
def critical_state(mdot, rc, Tc, P, O):
    """Set Mdot and Edot in P for the critical point (rc, Tc).

    Returns ``(ok, vc, rho_c, L_c)``; ok is False when N = 0 needs L_c <= 0
    (r_c beyond GM / (2 c_T^2)) or the opacity is undefined there.

    Parameters
    ----------
    mdot : float
        Mass-loss rate [g s^-1].
    rc : float
        Critical radius [cm].
    Tc : float
        Critical temperature [K].
    P : ndarray
        Model B parameter vector; Mdot and Edot are set in place.
    O : ndarray
        Opacity vector.

    Returns
    -------
    ok : bool
    vc : float
        c_T(T_c) [cm s^-1].
    rho_c : float
        [g cm^-3].
    L_c : float
        [erg s^-1].

    References
    ----------
    docs/physics.md, eqs. 20 and 22.
    """
    KG = P[I_KG]
    vc = math.sqrt(KG * Tc)
    rho = mdot / (FOUR_PI * rc * rc * vc)
    k = effective_opacity(O, rho, Tc, rc)
    A = k / (FOUR_PI * C_LIGHT * rc * rc)
    B = KG * 3.0 * k * rho / (4.0 * FOUR_PI * A_RAD * C_LIGHT * rc * rc * Tc**3)
    Lc = (P[I_GM] / (rc * rc) - 2.0 * KG * Tc / rc) / (A + B)
    P[I_MDOT] = mdot
    P[I_EDOT] = Lc + mdot * specific_energy(rc, vc, Tc, rho, P)
    ok = math.isfinite(Lc) and Lc > 0.0
    return ok, vc, rho, Lc


@njit(cache=True, error_model="numpy")
def n_of(r, v, T, P, O):
    """The numerator N of eq. 21 (docs/physics.md) at (r, v, T).

    Parameters
    ----------
    r, v, T : float
        Radius [cm], velocity [cm s^-1], temperature [K].
    P, O : ndarray
        Parameter and opacity vectors (Mdot and Edot set).

    Returns
    -------
    float
        N [cm s^-2].
    """
    return state(r, v, T, P, O)[4]


@njit(cache=True, error_model="numpy")
def critical_slopes(rc, vc, Tc, P, O):
    """(kind, p_plus, p_minus, T', k1) at a critical point (Mdot, Edot in P).

    L'Hopital with D = v - c_T^2/v: dD/dr = 2p - k1, k1 = (k/mu m_u) T'/v,
    so 2p^2 - (N_v + k1) p - (N_r + N_T T') = 0 (docs/physics.md, eq. 25), with the
    partials of N at fixed Mdot and Edot by central differences.

    Parameters
    ----------
    rc, vc, Tc : float
        Critical radius [cm], velocity [cm s^-1], temperature [K].
    P, O : ndarray
        Parameter and opacity vectors (Mdot and Edot set).

    Returns
    -------
    kind : int
        Topology (:func:`windsolve.core.critical.classify`).
    p_plus, p_minus : float
        Slopes dv/dr [s^-1].
    dTdr : float
        T' [K cm^-1].
    k1 : float
        [s^-1].

    References
    ----------
    docs/physics.md, eqs. 25 and 26.
    """
    hr = 1e-5 * rc
    hv = 1e-5 * vc
    hT = 1e-5 * Tc
    n_r = (n_of(rc + hr, vc, Tc, P, O) - n_of(rc - hr, vc, Tc, P, O)) / (2.0 * hr)
    n_v = (n_of(rc, vc + hv, Tc, P, O) - n_of(rc, vc - hv, Tc, P, O)) / (2.0 * hv)
    n_T = (n_of(rc, vc, Tc + hT, P, O) - n_of(rc, vc, Tc - hT, P, O)) / (2.0 * hT)
    dTdr = state(rc, vc, Tc, P, O)[3]
    k1 = P[I_KG] * dTdr / vc
    kind, pp, pm = classify(n_v + k1, n_r + n_T * dTdr, k1)
    return kind, pp, pm, dTdr, k1


@njit(cache=True, error_model="numpy")
def sonic_balance_lnT(lnT, P, O):
    """N at v = c_T(T) and r = P[I_PREV_X] (Mdot, Edot fixed), as a function of ln T.

    Parameters
    ----------
    lnT : float
        ln T [ln K].
    P, O : ndarray
        Parameter vector (the radius [cm] in slot I_PREV_X) and opacity vector.

    Returns
    -------
    float
        N [cm s^-2].
    """
    T = math.exp(lnT)
    return n_of(P[I_PREV_X], math.sqrt(P[I_KG] * T), T, P, O)


refine_sonic_T = make_illinois(sonic_balance_lnT)


@njit(cache=True, error_model="numpy")
def critical_temperature_at(r, T_guess, P, O):
    """T_c with N(r, c_T(T_c), T_c) = 0 for the Mdot and Edot in P, near T_guess.

    Projects a point where an inward shot came close to the sonic point onto
    the critical curve of the same (Mdot, Edot); NaN if no root is bracketed
    within a factor 1.5 of T_guess.

    Parameters
    ----------
    r : float
        Radius [cm].
    T_guess : float
        Starting temperature [K].
    P, O : ndarray
        Parameter vector (Mdot, Edot set; copied) and opacity vector.

    Returns
    -------
    float
        T_c [K], or NaN.
    """
    Q = P.copy()
    Q[I_PREV_X] = r
    lo = math.log(T_guess)
    f0 = sonic_balance_lnT(lo, Q, O)
    if f0 == 0.0:
        return T_guess
    d = 1e-7
    for _ in range(40):
        # Widen geometrically from a tiny step: the root sought is the one
        # nearest T_guess (the critical curve can have another branch a few
        # per cent away).
        d *= 1.5
        if d > 0.4:
            break
        a = lo - d
        b = lo + d
        fa = sonic_balance_lnT(a, Q, O)
        fb = sonic_balance_lnT(b, Q, O)
        if (fa > 0.0) != (f0 > 0.0):
            return math.exp(refine_sonic_T(a, lo, fa, f0, Q, O, 1e-14))
        if (fb > 0.0) != (f0 > 0.0):
            return math.exp(refine_sonic_T(lo, b, f0, fb, Q, O, 1e-14))
    return math.nan


@njit(cache=True, error_model="numpy")
def inward_leg(rc, vc, Tc, p, dTdr, delta, P, O, rtol, max_step, out_x, out_y):
    """From just inside the critical point down to R_in (or T_in).

    Parameters
    ----------
    rc, vc, Tc : float
        Critical radius [cm], velocity [cm s^-1], temperature [K].
    p : float
        Wind-branch slope dv/dr [s^-1].
    dTdr : float
        T' there [K cm^-1].
    delta : float
        Start this fraction of r_c inside the point (docs/physics.md, section 8).
    P, O : ndarray
        Parameter and opacity vectors (Mdot and Edot set).
    rtol : float
        Relative tolerance.
    max_step : float
        Largest step in ln r.
    out_x, out_y : ndarray
        Storage for ln r and (ln v, ln T) (empty: none).

    Returns
    -------
    tuple
        (status, r [cm], v [cm s^-1], T [K], L [erg s^-1], n_stored) at the inner end.
    """
    y0 = np.empty(2)
    x0 = math.log(rc * (1.0 - delta))
    y0[0] = math.log(vc - p * delta * rc)
    y0[1] = math.log(Tc - dTdr * delta * rc)
    P[I_PREV_X] = x0
    P[I_PREV_Y0] = y0[0]
    P[I_PREV_Y1] = y0[1]
    x_end = math.log(P[I_R_IN]) if P[I_R_IN] > 0.0 else x0 - 30.0
    st, x, y, n, nfev = integrate_inward(x0, y0, x_end, P, O, 0.0, rtol, delta, max_step,
                                         out_x, out_y)
    if st == BASE:
        # Refine to T = T_in exactly (bisection on short plain legs).
        lo = x
        hi = P[I_PREV_X]
        y_hi = np.empty(2)
        y_hi[0] = P[I_PREV_Y0]
        y_hi[1] = P[I_PREV_Y1]
        lnT_in = math.log(P[I_T_IN])
        no_x = np.empty(0)
        no_y = np.empty((0, 2))
        for _ in range(60):
            xm = 0.5 * (lo + hi)
            s2, xx, ym, nn, nf = integrate_plain(hi, y_hi, xm, P, O, 0.0, rtol,
                                                 0.5 * (hi - xm), np.inf, no_x, no_y)
            x = xm
            y = ym
            if ym[1] > lnT_in:
                lo = xm
            else:
                hi = xm
                y_hi = ym.copy()
            if hi - lo < 1e-13 * (1.0 + abs(lo)):
                break
        if n > 0:
            out_x[n - 1] = x
            out_y[n - 1, 0] = y[0]
            out_y[n - 1, 1] = y[1]
        st = OK
    elif st == REACHED_END:
        st = OK if P[I_R_IN] > 0.0 else FAILED
    elif st == STEP_TOO_SMALL and left_table(x, y, P, O):
        st = OFF_TABLE
    elif st == STEP_TOO_SMALL:
        st = SINGULAR
    elif st < 0:
        st = FAILED
    r = math.exp(x)
    v = math.exp(y[0])
    T = math.exp(y[1])
    rho = P[I_MDOT] / (FOUR_PI * r * r * v)
    return st, r, v, T, luminosity(r, v, T, rho, P), n


@njit(cache=True, error_model="numpy")
def short_outward(rc, vc, Tc, p, dTdr, delta, r_target, P, O, rtol):
    """(ln v, ln T) at r_target > r_c on the wind branch of the critical point.

    Only a short way out, so the outward growth of errors in an optically
    thick envelope does not matter; used to tie a critical point to an
    inward shot that stopped near it.

    Parameters
    ----------
    rc, vc, Tc : float
        Critical radius [cm], velocity [cm s^-1], temperature [K].
    p : float
        Wind-branch slope dv/dr [s^-1].
    dTdr : float
        T' [K cm^-1].
    delta : float
        Start this fraction of r_c outside the point.
    r_target : float
        Radius to reach [cm].
    P, O : ndarray
        Parameter and opacity vectors (Mdot and Edot set).
    rtol : float
        Relative tolerance.

    Returns
    -------
    ln_v, ln_T : float
        At r_target; ln_v is NaN when the leg does not get there.
    """
    y0 = np.empty(2)
    x0 = math.log(rc * (1.0 + delta))
    y0[0] = math.log(vc + p * delta * rc)
    y0[1] = math.log(Tc + dTdr * delta * rc)
    st, x, y, n, nfev = integrate_plain(x0, y0, math.log(r_target), P, O, 0.0, rtol, delta,
                                        np.inf, np.empty(0), np.empty((0, 2)))
    if st != REACHED_END:
        y[0] = math.nan
    return y[0], y[1]


@njit(cache=True, error_model="numpy")
def outward_leg(rc, vc, Tc, p, dTdr, delta, x_target, P, O, rtol, max_step, out_x, out_y):
    """The wind branch from r_c (1 + delta) out to ln r = x_target, stored.

    As :func:`short_outward` (same start, same tolerance) but storing the
    accepted points (at most max_step apart in ln r); returns (ok, n_stored).

    Parameters
    ----------
    rc, vc, Tc, p, dTdr, delta
        As :func:`short_outward`.
    x_target : float
        ln r to reach [ln cm].
    P, O : ndarray
        Parameter and opacity vectors.
    rtol : float
        Relative tolerance.
    max_step : float
        Largest step in ln r.
    out_x, out_y : ndarray
        Storage for ln r and (ln v, ln T).

    Returns
    -------
    ok : bool
    n_stored : int
    """
    y0 = np.empty(2)
    x0 = math.log(rc * (1.0 + delta))
    y0[0] = math.log(vc + p * delta * rc)
    y0[1] = math.log(Tc + dTdr * delta * rc)
    st, x, y, n, nfev = integrate_plain(x0, y0, x_target, P, O, 0.0, rtol, delta, max_step,
                                        out_x, out_y)
    return st == REACHED_END, n


@njit(cache=True, error_model="numpy")
def photospheric_state(mdot, R, L, T, P):
    """Set Mdot and Edot in P from a photosphere (R, L, T); returns v_ph.

    tau = kappa_es Mdot / (2 pi R (v + v_inf)) = 2/3 with v_inf^2 = v^2 - W,
    W = 2 GM (1 - Gamma_thin) / R, gives v = (S^2 + W) / (2 S) with
    S = 3 kappa_es Mdot / (4 pi R); NaN when v_inf would not be positive.

    Parameters
    ----------
    mdot : float
        Mass-loss rate [g s^-1].
    R : float
        Photosphere radius [cm].
    L : float
        Photospheric luminosity [erg s^-1].
    T : float
        Effective temperature [K].
    P : ndarray
        Model B parameter vector; Mdot and Edot are set in place.

    Returns
    -------
    float
        v_ph [cm s^-1], or NaN.

    References
    ----------
    docs/physics.md, eqs. 20, 23 and 24.
    """
    gamma_thin = P[I_KES] * L / (FOUR_PI * C_LIGHT * P[I_GM])
    W = 2.0 * P[I_GM] * (1.0 - gamma_thin) / R
    S = 3.0 * P[I_KES] * mdot / (FOUR_PI * R)
    if S * S <= W:
        return math.nan
    v = (S * S + W) / (2.0 * S)
    rho = mdot / (FOUR_PI * R * R * v)
    P[I_MDOT] = mdot
    P[I_EDOT] = L + mdot * specific_energy(R, v, T, rho, P)
    return v


@njit(cache=True, error_model="numpy")
def shoot_from_photosphere(ln_mdot, R, L, T, P, O, rtol):
    """As :func:`shoot_stored` without storing the path.

    Parameters
    ----------
    ln_mdot, R, L, T, P, O, rtol
        As :func:`shoot_stored`.

    Returns
    -------
    tuple
        (code, r [cm], v [cm s^-1], T [K]) at the stop.
    """
    return shoot_stored(ln_mdot, R, L, T, P, O, rtol, np.inf, np.empty(0),
                        np.empty((0, 2)))[:4]


@njit(cache=True, error_model="numpy")
def shoot_stored(ln_mdot, R, L, T, P, O, rtol, max_step, out_x, out_y):
    """Integrate inward from the photosphere (R, L, T) for Mdot = e^ln_mdot.

    Returns (code, r, v, T, n_stored) at the stop: SIDE_SONIC or SIDE_TURN
    say on which side of the critical solution Mdot lies; others are failures.

    Parameters
    ----------
    ln_mdot : float
        ln Mdot [ln(g s^-1)].
    R : float
        Photosphere radius [cm].
    L : float
        Photospheric luminosity [erg s^-1].
    T : float
        Effective temperature [K].
    P, O : ndarray
        Parameter and opacity vectors (Mdot and Edot are set in P).
    rtol : float
        Relative tolerance.
    max_step : float
        Largest step in ln r.
    out_x, out_y : ndarray
        Storage for ln r and (ln v, ln T).

    Returns
    -------
    tuple
        (code, r [cm], v [cm s^-1], T [K], n_stored).

    References
    ----------
    docs/physics.md, section 8.
    """
    return shoot_dense(ln_mdot, R, L, T, P, O, rtol, max_step, 0.0, out_x, out_y)


@njit(cache=True, error_model="numpy")
def shoot_dense(ln_mdot, R, L, T, P, O, rtol, max_step, dx_out, out_x, out_y):
    """As :func:`shoot_stored`, also storing the points ln R - k dx_out (dense output).

    Two shots with the same dx_out then share those abscissae exactly, so
    they can be compared point by point without interpolating.

    Parameters
    ----------
    ln_mdot, R, L, T, P, O, rtol, max_step, out_x, out_y
        As :func:`shoot_stored`.
    dx_out : float
        Spacing of the dense output in ln r (0: accepted steps only).

    Returns
    -------
    tuple
        (code, r [cm], v [cm s^-1], T [K], n_stored).
    """
    v = photospheric_state(math.exp(ln_mdot), R, L, T, P)
    if not math.isfinite(v):
        return FALLBACK, R, math.nan, T, 0
    y0 = np.empty(2)
    y0[0] = math.log(v)
    y0[1] = math.log(T)
    P[I_PREV_N] = 0.0
    x0 = math.log(R)
    x_end = math.log(P[I_R_IN]) if P[I_R_IN] > 0.0 else x0 - 30.0
    st, x, y, n, nfev = integrate_shoot(x0, y0, x_end, P, O, 0.0, rtol, 1e-6, max_step,
                                        out_x, out_y, dx_out)
    if st == STEP_TOO_SMALL and left_table(x, y, P, O):
        st = OFF_TABLE
    elif st == STEP_TOO_SMALL:
        # A near miss on the sonic side shows as a collapsing step (docs/physics.md, section 8).
        st = SIDE_SONIC
    elif st == REACHED_END or st == BASE:
        # Down to the base without meeting the sound speed: the solution
        # missed the sonic point on the supersonic side, like a turn.
        st = SIDE_TURN
    elif st < 0:
        st = FAILED
    return st, math.exp(x), math.exp(y[0]), math.exp(y[1]), n


@njit(cache=True, error_model="numpy")
def photosphere_radius(L, T):
    """R_ph = sqrt(L / (4 pi sigma T_eff^4)) [cm].

    ``T ** 4.0`` (a call of pow, as Python's float power makes) rather than
    numba's repeated multiplication for ``T ** 4``: the Python callers' numbers
    stay bit for bit.

    Parameters
    ----------
    L : float
        Photospheric luminosity [erg s^-1].
    T : float
        Effective temperature [K].

    Returns
    -------
    float
        R_ph [cm].
    """
    return math.sqrt(L / (4.0 * math.pi * SIGMA_SB * T ** 4.0))


@njit(cache=True, error_model="numpy")
def effective_temperature(L, R):
    """T_eff = [L / (4 pi sigma R^2)]^(1/4) [K].

    Parameters
    ----------
    L : float
        Luminosity [erg s^-1].
    R : float
        Radius [cm].

    Returns
    -------
    float
        T_eff [K].
    """
    return (L / (FOUR_PI * SIGMA_SB * R * R)) ** 0.25


@njit(cache=True, error_model="numpy")
def profile_quantities(r, v, T, P, O):
    """rho, L_r, kappa, Gamma = kappa L_r / (4 pi G M c) along a profile.

    Parameters
    ----------
    r, v, T : ndarray
        Radius [cm], velocity [cm s^-1], temperature [K].
    P, O : ndarray
        Parameter and opacity vectors (Mdot and Edot set).

    Returns
    -------
    tuple of ndarray
        rho [g cm^-3], L_r [erg s^-1], kappa_eff [cm^2 g^-1], Gamma [dimensionless].

    References
    ----------
    docs/physics.md, eqs. 12 and 20.
    """
    n = r.shape[0]
    rho = np.empty(n)
    L = np.empty(n)
    kappa = np.empty(n)
    gamma = np.empty(n)
    for i in range(n):
        rho[i], L[i], kappa[i], dTdr, N = state(r[i], v[i], T[i], P, O)
        gamma[i] = kappa[i] * L[i] / (FOUR_PI * C_LIGHT * P[I_GM])
    return rho, L, kappa, gamma
