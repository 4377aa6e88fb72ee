"""Model B drivers: find the regular solution by shooting from the photosphere.

The compiled legs live in :mod:`windsolve.models.diffusion.kernels`; this module only
decides which legs to run.  Everything here is plain floats in cgs.

Photosphere anchor (given L_ph, T_eff, hence R_ph)
    For a trial Mdot the photospheric state is complete (tau = 2/3 fixes
    v_ph), so an inward integration from the photosphere either reaches the
    sound speed with N > 0 or turns away with N < 0: bisection in ln Mdot
    between the two outcomes converges on the regular solution
    (docs/physics.md, section 8).  Its critical point is then located on the critical curve of
    the same (Mdot, Edot) and tied to the converged shot by a short outward
    leg, where the two bracketing shots still agree (:func:`_agreement_limit`);
    the subsonic part is integrated inward from it.  Integrating the
    diffusion equation outward over long distances is avoided: it amplifies
    errors by about (T_c / T_ph)^3.
Base anchor (given R0, L0 and T0 or rho0)
    Two nested one-dimensional root-finds over photosphere-anchored solves:
    T_eff that gives the base value at R0 for a photospheric luminosity, and
    L_ph (secant) that makes L(R0) = L0.
"""

import math
import threading
from dataclasses import dataclass

import numpy as np

from ...core.constants import C_LIGHT, L_SUN, R_SUN
from ...core.critical import SADDLE
from ...core.opacity import LAW_TABLE, SLOT_LAW, describe_off_table
from . import kernels as D

DELTA = 1e-6  # start this fraction of r_c off the critical point
MAX_SHOTS = 200
SHOT_CAPACITY = 100000
TIE_DISTANCE = 1e-3  # tie the critical point to the shot at least this far (ln r) outside it
TIE_AGREEMENT = 10.0  # ... and where the two bracketing shots agree to this many rtol
AGREEMENT_DX = 0.005  # spacing in ln r of the points where the bracketing shots are compared
PROFILE_STEP = 0.02  # largest step in ln r of stored profiles (as windsolve.solve.MAX_STEP)
NEAR_STEP = 1e-4  # a bracket around a guessed ln Mdot: first this far either side ...
NEAR_TRIES = 6  # ... then 4, 16, ... 1024 times as far, before the scan from the smallest Mdot
NO_X = np.empty(0)
NO_Y = np.empty((0, 2))


_shots = threading.local()  # per thread: dask workers may solve in several threads at once


def reset_shots():
    """Start counting the inward shots from the photosphere (of this thread) at 0."""
    _shots.n = 0


def shots():
    """Inward shots from the photosphere run (by this thread) since :func:`reset_shots`."""
    return getattr(_shots, "n", 0)


def _count_shot():
    _shots.n = getattr(_shots, "n", 0) + 1


class ModelBFailure(Exception):
    """A Model B solve failed; ``code`` is a kernel status, ``where`` a radius or None."""

    def __init__(self, code, text):
        super().__init__(text)
        self.code = code
        self.text = text


@dataclass
class Critical:
    """A regular trial solution fixed by its critical point."""

    mdot: float
    rc: float
    Tc: float
    vc: float
    P: np.ndarray  # parameter vector with Mdot and Edot set
    slope: float  # dv/dr on the wind branch
    dTdr: float
    kind: int


photosphere_radius = D.photosphere_radius


def critical(P, O, ln_mdot, ln_rc, ln_Tc):
    """The regular solution through (Mdot, r_c, T_c), or None if there is none.

    Parameters
    ----------
    P : ndarray
        Model B parameter vector (copied; the copy gets Mdot and Edot).
    O : ndarray
        Opacity vector.
    ln_mdot : float
        ln of the mass-loss rate [ln(g s^-1)].
    ln_rc : float
        ln of the critical radius [ln cm].
    ln_Tc : float
        ln of the critical temperature [ln K].

    Returns
    -------
    Critical or None
        None when the point has no valid state or is not a saddle.

    References
    ----------
    docs/physics.md, eqs. 22, 25 and 26.
    """
    Q = P.copy()
    mdot, rc, Tc = math.exp(ln_mdot), math.exp(ln_rc), math.exp(ln_Tc)
    ok, vc, rho, Lc = D.critical_state(mdot, rc, Tc, Q, O)
    if not ok:
        return None
    kind, pp, pm, dTdr, k1 = D.critical_slopes(rc, vc, Tc, Q, O)
    if kind != SADDLE:
        return None
    return Critical(mdot, rc, Tc, vc, Q, pp, dTdr, kind)


def inward(c, O, rtol, out_x=NO_X, out_y=NO_Y, max_step=np.inf):
    """Integrate the subsonic branch of ``c`` inward to the inner end (kernel
    :func:`~windsolve.models.diffusion.kernels.inward_leg`).

    Parameters
    ----------
    c : Critical
        The critical point (its P holds Mdot and Edot).
    O : ndarray
        Opacity vector.
    rtol : float
        Relative tolerance of the integration.
    out_x, out_y : ndarray
        Storage for ln r and (ln v, ln T) of the accepted points (empty: none).
    max_step : float
        Largest step in ln r.

    Returns
    -------
    tuple
        (status, r [cm], v [cm s^-1], T [K], L [erg s^-1], n_stored) at the inner end.
    """
    return D.inward_leg(c.rc, c.vc, c.Tc, c.slope, c.dTdr, DELTA, c.P, O, rtol, max_step,
                        out_x, out_y)


@dataclass
class PhotosphereSolution:
    """A regular solution found from its photosphere."""

    crit: Critical  # the critical point (with Mdot, Edot in crit.P)
    R_ph: float
    L_ph: float
    T_ph: float
    v_ph: float
    ln_mdot: float
    outer_x: np.ndarray = None  # ln r from r_c (1 + DELTA) to the photosphere, increasing
    outer_y: np.ndarray = None  # (ln v, ln T) there


def _bracket_near(Q, O, R_ph, L_ph, T_eff, rtol, guess):
    """ln Mdot bracket (lo, hi, code at lo, code at hi) around ``guess``; None if not near."""
    sides = (D.SIDE_SONIC, D.SIDE_TURN)
    _count_shot()
    code0 = D.shoot_from_photosphere(guess, R_ph, L_ph, T_eff, Q, O, rtol)[0]
    if code0 not in sides:
        return None
    step = NEAR_STEP
    for _ in range(NEAR_TRIES):
        for sign in (1.0, -1.0):
            x = guess + sign * step
            _count_shot()
            code = D.shoot_from_photosphere(x, R_ph, L_ph, T_eff, Q, O, rtol)[0]
            if code in sides and code != code0:
                return (guess, x, code0, code) if sign > 0 else (x, guess, code, code0)
        step *= 4.0
    return None


def _other_side(code):
    return D.SIDE_TURN if code == D.SIDE_SONIC else D.SIDE_SONIC


def _bracket(P, O, R_ph, L_ph, T_eff, rtol, guess=None):
    """ln Mdot bracket (lo, hi, code at lo, code at hi) between two ways of missing.

    With ``guess`` (a nearby solution's ln Mdot) the bracket is sought around
    it first (:func:`_bracket_near`).  A trial that leaves the opacity table
    below every trial with a side (on a real table a low Mdot puts the
    photosphere itself at log R < -8) is a miss on the low side: when no two
    sides are found, the last such trial and the first trial with a side
    above it bracket Mdot, with ``OFF_TABLE`` as the low code
    (:func:`_solve_photosphere_anchor` bisects on, and an on-table trial
    below takes its side from there).
    """
    Q = P.copy()
    if guess is not None and math.isfinite(guess):
        near = _bracket_near(Q, O, R_ph, L_ph, T_eff, rtol, guess)
        if near is not None:
            return near
    gamma_thin = Q[D.I_KES] * L_ph / (4.0 * math.pi * C_LIGHT * Q[D.I_GM])
    W = 2.0 * Q[D.I_GM] * (1.0 - gamma_thin) / R_ph
    mdot_min = 4.0 * math.pi * R_ph * math.sqrt(W) / (3.0 * Q[D.I_KES]) if W > 0 else 1e-30
    x = math.log(mdot_min) + 1e-6
    failures = {}
    sides = (D.SIDE_SONIC, D.SIDE_TURN)
    _count_shot()
    code_prev = D.shoot_from_photosphere(x, R_ph, L_ph, T_eff, Q, O, rtol)[0]
    off_low = x if code_prev == D.OFF_TABLE else None  # highest off-table trial below ...
    first_side = None  # ... the first trial with a side: (ln Mdot, code)
    step = 0.25
    xs = x
    for _ in range(MAX_SHOTS):
        xs += step
        _count_shot()
        code, r, v, T = D.shoot_from_photosphere(xs, R_ph, L_ph, T_eff, Q, O, rtol)
        if code not in sides:
            failures[code] = (r, Q[D.I_MDOT] / (4.0 * math.pi * r * r * v), T)
        if code in sides and code_prev in sides and code != code_prev:
            return xs - step, xs, code_prev, code
        if first_side is None:
            if code in sides and code_prev in sides:
                first_side = (xs - step, code_prev)
            elif code in sides:
                first_side = (xs, code)
            elif code == D.OFF_TABLE:
                off_low = xs
        code_prev = code
        if xs - x > 60.0:
            break
        step = min(step * 1.5, 2.0)
    if off_low is not None and first_side is not None and first_side[0] > off_low:
        return off_low, first_side[0], D.OFF_TABLE, first_side[1]
    if D.OFF_TABLE in failures:
        r, rho, T = failures[D.OFF_TABLE]
        raise ModelBFailure(D.OFF_TABLE, f"below the photosphere the solution leaves the "
                                         f"opacity table (e.g. at r = {r / R_SUN:.4g} Rsun, "
                                         f"{describe_off_table(O, rho, T)}); extend "
                                         f"the table or set [opacity] clamp = true")
    raise ModelBFailure(D.INVALID, "no mass-loss rate gives a solution that passes smoothly "
                                   "through a sonic point below this photosphere (Gamma never "
                                   "exceeds 1 on the way in, or the flow stalls)")


def _project_critical(P, O, ln_mdot, stop):
    """First guess (r_c, T_c) of the critical point nearest an inward shot's stop.

    Project the stop onto the critical curve of the (Mdot, Edot) in P
    (N = 0 at v = c_T) and step back along the saddle's slope:
    v_s - c_T(T_c) = p (r_s - r_c), iterated until r_c settles.  Good to
    O(d^2) only if the shot follows the separatrix to a distance d of the
    saddle, which a weakly repelling saddle does not: :func:`_refine_critical`
    then ties the guess to the shot further out.
    """
    r_s, v_s, T_s = stop
    rc = r_s
    Tc = T_s
    for _ in range(8):
        Tp = D.critical_temperature_at(rc, Tc, P, O)
        if not math.isfinite(Tp):
            break
        Tc = Tp
        c = critical(P, O, ln_mdot, math.log(rc), math.log(Tc))
        if c is None:
            break
        rc_new = r_s - (v_s - c.vc) / c.slope
        if abs(rc_new / rc - 1.0) < 1e-13:
            rc = rc_new
            break
        rc = rc_new
    return rc, Tc


def _refine_critical(P, O, ln_mdot, guess, tie, rtol):
    """Critical point of the (Mdot, Edot) in P whose wind branch passes through ``tie``.

    ``guess`` = (r_c, T_c) from :func:`_project_critical`; ``tie`` = (r, v, T)
    a point of the inward shot where it is still on the separatrix.  Secant on
    r_c along the critical curve until the wind branch leaving (r_c, T_c)
    meets the tie point's ln v.
    """
    rc, Tc = guess
    r_t, v_t, T_t = tie

    def miss(rc_try, Tc_guess):
        if not rc_try > 0.0:  # a secant step past r = 0: no critical point there
            return math.nan, Tc_guess
        Tt = D.critical_temperature_at(rc_try, Tc_guess, P, O)
        if not math.isfinite(Tt):
            return math.nan, Tt
        ct = critical(P, O, ln_mdot, math.log(rc_try), math.log(Tt))
        if ct is None or rc_try * (1.0 + DELTA) >= r_t:
            return math.nan, Tt
        lnv, lnT = D.short_outward(ct.rc, ct.vc, ct.Tc, ct.slope, ct.dTdr, DELTA, r_t, ct.P,
                                   O, rtol)
        return lnv - math.log(v_t), Tt

    f0, T0 = miss(rc, Tc)
    if math.isfinite(f0):
        rc1 = rc * (1.0 - 1e-6)
        f1, T1 = miss(rc1, T0)
        for _ in range(20):
            if not math.isfinite(f1) or f1 == f0:
                break
            rc2 = rc1 - f1 * (rc1 - rc) / (f1 - f0)
            rc, f0, T0 = rc1, f1, T1
            rc1 = rc2
            f1, T1 = miss(rc1, T0)
            if abs(rc1 / rc - 1.0) < 1e-14 or abs(f1) < 1e-13:
                break
        if math.isfinite(f1) and abs(f1) < abs(f0):
            rc, Tc = rc1, T1
        else:
            Tc = T0
    Tc = D.critical_temperature_at(rc, Tc, P, O)
    c = critical(P, O, ln_mdot, math.log(rc), math.log(Tc)) if math.isfinite(Tc) else None
    if c is None:
        raise ModelBFailure(D.INVALID, "the sonic point the photosphere leads to is not a "
                                       "saddle (no transonic wind through it)")
    return c


class BelowBase(ModelBFailure):
    """The sonic point lies at or below the requested inner end (no subsonic part)."""


def _check_above_base(c, T_in, R_in):
    """Raise BelowBase unless the critical point c lies above the inner end."""
    if c.Tc >= T_in:
        where = (f"the sonic point (T_c = {c.Tc:.4g} K) is hotter than the requested base "
                 f"temperature {T_in:.4g} K")
        fix = "raise [boundary] base_temperature above T_c"
    elif c.rc <= R_in:
        where = (f"the sonic point (r_c = {c.rc / R_SUN:.4g} Rsun) lies inside "
                 f"[star] radius = {R_in / R_SUN:.4g} Rsun")
        fix = "lower [star] radius below r_c"
    else:
        return
    raise BelowBase(D.INVALID, f"{where}, so the wind has no subsonic part down to the "
                               f"base; {fix} (or change the photosphere or the opacity)")


def solve_photosphere_anchor(P, O, L_ph, T_eff, rtol, out_x=NO_X, out_y=NO_Y,
                             max_step=np.inf, diagnose=False, guess=None, xtol=1e-14):
    """The regular solution with photosphere (L_ph, T_eff); stores the outer path.

    Returns (PhotosphereSolution, n_stored).  Raises ModelBFailure, or its
    BelowBase when the sonic point is hotter than P[I_T_IN] or inside
    P[I_R_IN].  Inward shots stop at that inner end, so a sonic point below
    it shows as some other failure; with ``diagnose`` such a failure is
    retried without the inner end, to say so instead.

    Parameters
    ----------
    P : ndarray
        Model B parameter vector.
    O : ndarray
        Opacity vector.
    L_ph : float
        Photospheric luminosity [erg s^-1].
    T_eff : float
        Effective temperature [K].
    rtol : float
        Relative tolerance.
    out_x, out_y : ndarray
        Storage for the outer path, ln r and (ln v, ln T) (empty: none).
    max_step : float
        Largest spacing in ln r of the stored outer path (from the dense
        output: the steps themselves are not limited).
    diagnose : bool
        Retry a failure without the inner end, to tell a sonic point below it.
    guess : float, optional
        ln Mdot [ln(g s^-1)] of a nearby solution: the bracket is sought
        around it first (a few shots) instead of scanning up from the
        smallest Mdot the photosphere allows.
    xtol : float
        The bracket in ln Mdot is bisected down to xtol (1 + |ln Mdot|).

    Returns
    -------
    solution : PhotosphereSolution
    n_stored : int

    Raises
    ------
    ModelBFailure
        No regular solution (BelowBase: its sonic point lies below the inner end).

    References
    ----------
    docs/physics.md, section 5 ("Boundary conditions", photosphere anchor) and
    section 8.
    """
    try:
        return _solve_photosphere_anchor(P, O, L_ph, T_eff, rtol, out_x, out_y, max_step,
                                         guess, xtol)
    except BelowBase:
        raise
    except ModelBFailure as failure:
        if not diagnose or (P[D.I_T_IN] == np.inf and P[D.I_R_IN] <= 0.0):
            raise
        Q = P.copy()
        Q[D.I_T_IN] = np.inf
        Q[D.I_R_IN] = 0.0
        try:
            sol = _solve_photosphere_anchor(Q, O, L_ph, T_eff, rtol, NO_X, NO_Y, max_step)[0]
        except ModelBFailure:
            raise failure from None
        _check_above_base(sol.crit, P[D.I_T_IN], P[D.I_R_IN])
        raise


def limited_steps(O):
    """Whether photosphere shots through the opacity O keep their step limit.

    A tabulated opacity's interpolant has jumps in its third derivative at
    the table's grid lines, which the error control does not see: on the
    bump wind with configs/invented_bump_table.txt, shots without a step
    limit moved Mdot by 9e-8 from its rtol = 1e-11 value, against 3e-10 with
    the stored profile's limit (0.02 in ln r).  Analytic laws are smooth,
    and their shots run without one (half the right-hand-side evaluations).

    Parameters
    ----------
    O : ndarray
        Opacity vector.

    Returns
    -------
    bool
        True for the table law.
    """
    return O[SLOT_LAW] == LAW_TABLE


def _solve_photosphere_anchor(P, O, L_ph, T_eff, rtol, out_x, out_y, max_step, guess=None,
                              xtol=1e-14):
    R_ph = photosphere_radius(L_ph, T_eff)
    if P[D.I_R_IN] > 0.0 and R_ph <= P[D.I_R_IN]:
        raise ModelBFailure(D.INVALID, "the photosphere lies inside the base radius")
    lo, hi, code_lo, code_hi = _bracket(P, O, R_ph, L_ph, T_eff, rtol, guess)
    Q = P.copy()
    # Bisect with the step limit of the stored shot below: a different step
    # sequence is a (slightly) different integration, and at a bracket of
    # 1e-14 that can flip the side the stored shot falls on.  Analytic
    # opacities need no step limit (the stored shot's points every max_step
    # come from its dense output); a table's does (see limited_steps).  A
    # trial off the table (below the solution: the photosphere at log R
    # under the table) counts as the low side; the first on-table trial
    # there that misses on the other side than hi's becomes the low code.
    limit = max_step if limited_steps(O) else np.inf
    lo, hi, code_lo = _bisect(Q, O, R_ph, L_ph, T_eff, rtol, limit, lo, hi, code_lo, code_hi,
                              xtol)
    try:
        return _tie_critical(P, O, Q, R_ph, L_ph, T_eff, rtol, out_x, out_y, max_step, limit,
                             lo, hi, code_lo)
    except BelowBase:
        raise
    except ModelBFailure:
        if xtol <= 1e-14:
            raise
    # A coarse bracket: its shots may leave a weakly repelling saddle's
    # separatrix too early to tie the critical point; bisect on, to 1e-14.
    lo, hi, code_lo = _bisect(Q, O, R_ph, L_ph, T_eff, rtol, limit, lo, hi, code_lo, code_hi,
                              1e-14)
    return _tie_critical(P, O, Q, R_ph, L_ph, T_eff, rtol, out_x, out_y, max_step, limit,
                         lo, hi, code_lo)


def _bisect(Q, O, R_ph, L_ph, T_eff, rtol, limit, lo, hi, code_lo, code_hi, xtol):
    """Bisect the ln Mdot bracket to xtol (1 + |lo|); returns (lo, hi, code at lo)."""
    while hi - lo > xtol * (1.0 + abs(lo)):
        m = 0.5 * (lo + hi)
        _count_shot()
        code = D.shoot_stored(m, R_ph, L_ph, T_eff, Q, O, rtol, limit, NO_X, NO_Y)[0]
        if code == code_hi:
            hi = m
        elif code == _other_side(code_hi):
            lo = m
            code_lo = code
        elif code == D.OFF_TABLE and code_lo == D.OFF_TABLE:
            lo = m
        else:
            raise ModelBFailure(code, "the inward integration from the photosphere failed "
                                      "while bracketing the mass-loss rate")
    if code_lo == D.OFF_TABLE:
        code, r, v, T = D.shoot_from_photosphere(lo, R_ph, L_ph, T_eff, Q, O, rtol)
        rho = Q[D.I_MDOT] / (4.0 * math.pi * r * r * v)
        raise ModelBFailure(D.OFF_TABLE, f"no solution on the opacity table for this "
                                         f"photosphere: the mass-loss rate converges onto "
                                         f"the table's edge, below it every trial leaves the "
                                         f"table ({describe_off_table(O, rho, T)})")
    return lo, hi, code_lo


def _tie_critical(P, O, Q, R_ph, L_ph, T_eff, rtol, out_x, out_y, max_step, limit, lo, hi,
                  code_lo):
    """The critical point and outer path of the solution bracketed by [lo, hi] in ln Mdot."""
    # The sonic-side shot hugs the separatrix down to the sound speed; the
    # other bracketing shot tells how far in it still follows the separatrix.
    x_sonic, x_other = (lo, hi) if code_lo == D.SIDE_SONIC else (hi, lo)
    if out_x.shape[0] == 0:
        out_x = np.empty(SHOT_CAPACITY)
        out_y = np.empty((SHOT_CAPACITY, 2))
    _count_shot()
    code, r, v, T, n = D.shoot_dense(x_sonic, R_ph, L_ph, T_eff, Q, O, rtol, limit,
                                     0.0 if math.isfinite(limit) or not math.isfinite(max_step)
                                     else max_step, out_x, out_y)
    if code != D.SIDE_SONIC or n < 2:
        raise ModelBFailure(D.FAILED, "the converged inward solution did not reach the "
                                      "sonic point; try another numerics.rtol")
    v_ph = D.photospheric_state(math.exp(x_sonic), R_ph, L_ph, T_eff, Q)
    guess = _project_critical(Q, O, x_sonic, (r, v, T))
    x_agree = _agreement_limit(P, O, R_ph, L_ph, T_eff, x_sonic, x_other, rtol, limit)
    x_floor = max(math.log(max(r, guess[0])) + TIE_DISTANCE, x_agree)
    k = max(int(np.count_nonzero(out_x[:n] >= x_floor)) - 1, 0)
    tie = (math.exp(out_x[k]), math.exp(out_y[k, 0]), math.exp(out_y[k, 1]))
    c = _refine_critical(Q, O, x_sonic, guess, tie, rtol)
    _check_above_base(c, Q[D.I_T_IN], Q[D.I_R_IN])
    # The outer profile: the wind branch from the critical point out to the
    # tie point, then the shot outside it (where it is on the separatrix).
    leg_x = np.empty(SHOT_CAPACITY)
    leg_y = np.empty((SHOT_CAPACITY, 2))
    ok, n_leg = D.outward_leg(c.rc, c.vc, c.Tc, c.slope, c.dTdr, DELTA, out_x[k], c.P, O,
                              rtol, max_step, leg_x, leg_y)
    if not ok or n_leg < 1:
        raise ModelBFailure(D.FAILED, "the wind branch from the sonic point could not be "
                                      "followed out to the converged inward solution; try "
                                      "another numerics.rtol")
    leg_x[n_leg - 1] = out_x[k]  # the leg ends on the tie point (to rounding)
    outer_x = np.concatenate([leg_x[:n_leg], out_x[:k][::-1]])
    outer_y = np.concatenate([leg_y[:n_leg], out_y[:k][::-1]])
    return PhotosphereSolution(c, R_ph, L_ph, T_eff, v_ph, x_sonic, outer_x, outer_y), n


def _agreement_limit(P, O, R_ph, L_ph, T_eff, x_sonic, x_other, rtol, max_step):
    """Innermost ln r down to which the two bracketing shots agree.

    Near a weakly repelling saddle the converged shot leaves the separatrix
    far outside its stop.  The two shots that bracket Mdot lie on either side
    of the separatrix, so where they still agree (to TIE_AGREEMENT rtol in
    ln v and ln T) both are on it.  They are compared at the abscissae
    ln R_ph - k AGREEMENT_DX of their dense output, which both share exactly
    (their own steps differ once the step control decides differently).
    """
    tol = TIE_AGREEMENT * rtol
    xs, ys = [], []
    for x in (x_sonic, x_other):
        ox = np.empty(SHOT_CAPACITY)
        oy = np.empty((SHOT_CAPACITY, 2))
        _count_shot()
        n = D.shoot_dense(x, R_ph, L_ph, T_eff, P.copy(), O, rtol, max_step, AGREEMENT_DX,
                          ox, oy)[4]
        xs.append(ox[:n])
        ys.append(oy[:n])
    common, ia, ib = np.intersect1d(xs[0], xs[1], return_indices=True)
    order = np.argsort(-common)  # outward first, as the shots run
    common, ia, ib = common[order], ia[order], ib[order]
    apart = np.any(np.abs(ys[0][ia] - ys[1][ib]) > tol, axis=1)
    if not apart.any():
        return common[-1]
    first = int(np.argmax(apart))
    return common[max(first - 1, 0)]


def base_values(P, O, L_ph, T_eff, rtol, guess=None, xtol=1e-14):
    """(solution, L, T, rho) at the inner end for the photosphere (L_ph, T_eff).

    Parameters
    ----------
    P : ndarray
        Model B parameter vector.
    O : ndarray
        Opacity vector.
    L_ph : float
        Photospheric luminosity [erg s^-1].
    T_eff : float
        Effective temperature [K].
    rtol : float
        Relative tolerance.
    guess, xtol : float, optional
        As for :func:`solve_photosphere_anchor`.

    Returns
    -------
    tuple
        (PhotosphereSolution, L [erg s^-1], T [K], rho [g cm^-3]) at the inner end.

    Raises
    ------
    ModelBFailure
        No solution, or its subsonic part does not reach the inner end.
    """
    # The same step limits as the stored profile, so that the base values a
    # result reports are the ones matched here.
    sol, n = solve_photosphere_anchor(P, O, L_ph, T_eff, rtol, max_step=PROFILE_STEP,
                                      guess=guess, xtol=xtol)
    st, rb, vb, Tb, Lb, n = inward(sol.crit, O, rtol, max_step=PROFILE_STEP)
    if st != D.OK or Lb <= 0.0:
        raise ModelBFailure(st if st != D.OK else D.STALLED,
                            "the subsonic solution does not reach the base")
    return sol, Lb, Tb, sol.crit.mdot / (4.0 * math.pi * rb * rb * vb)


def solve_base_anchor(P, O, L0, base_kind, base_value, rtol, start=None):
    """(L_ph, T_eff, ln Mdot, solution) whose base R0 = P[I_R_IN] has L0 and T0 (or rho0).

    A two-dimensional quasi-Newton (Broyden) iteration on x = (ln L_ph,
    ln T_eff) for the log residuals F = (ln L(R0) - ln L0, ln b(R0) - ln b0),
    b the base temperature or density, each evaluation a photosphere-anchored
    solve and the inward leg to R0: the first Jacobian fitted to the first
    guess's evaluations (:func:`_secant_jacobian`) or from forward
    differences, then Broyden's rank-one updates (Broyden 1965, Math. Comp.
    19, 577; Dennis & Schnabel 1983, Numerical Methods for Unconstrained
    Optimization and Nonlinear Equations, ch. 8; from memory), each step
    shortened by backtracking until |F| falls (or the trial has a solution
    at all).  Each photosphere solve starts its Mdot bracket next to the Mdot
    extrapolated from the previous solves, and bisects it only as finely as
    the current residual needs (1e-6 |F|, 1e-14 once |F| < 1e-6).  The first
    guess comes from ``start`` shifted by the change of L0
    (:func:`_first_guess`), else from :func:`_cold_start`.  Should the
    iteration not converge, the nested root-finds of
    :func:`solve_base_anchor_nested` take over.

    Parameters
    ----------
    P : ndarray
        Model B parameter vector (R0 in P[I_R_IN]).
    O : ndarray
        Opacity vector.
    L0 : float
        Base luminosity [erg s^-1].
    base_kind : str
        ``"temperature"`` or ``"density"``.
    base_value : float
        T0 [K] or rho0 [g cm^-3].
    rtol : float
        Relative tolerance.
    start : tuple, optional
        (L_ph [erg s^-1], T_eff [K], ln Mdot [ln(g s^-1)], L(R0) [erg s^-1])
        of a nearby solution (the previous model of a sweep or family): no
        cold start.

    Returns
    -------
    L_ph, T_eff, ln_mdot : float
        [erg s^-1], [K], [ln(g s^-1)].
    solution : PhotosphereSolution or None
        The photosphere solve at (L_ph, T_eff) with its bracket bisected to
        1e-14 and the stored profile's step limit, when the iteration made
        one there (the caller need not solve it again); else None.

    Raises
    ------
    ModelBFailure
        No wind reaches R0 with these base values, or L0 is matched only roughly.

    References
    ----------
    docs/physics.md, section 5 ("Boundary conditions", base anchor).
    """
    target = np.array([math.log(L0), math.log(base_value)])
    # ln Mdot of the last solve at x_last and a secant (Broyden) estimate of
    # its gradient in x: each solve's bracket starts at the extrapolated ln Mdot
    hist = {"x": None, "lnm": None if start is None else start[2], "grad": np.zeros(2),
            "exact": {},  # x.tobytes() -> the PhotosphereSolution of a solve bisected to 1e-14
            "evals": []}  # (x, F) of every evaluation

    def residual(x, xtol):
        guess = hist["lnm"]
        if guess is not None and hist["x"] is not None:
            guess = guess + float(hist["grad"] @ (x - hist["x"]))
        sol, Lb, Tb, rhob = base_values(P, O, math.exp(x[0]), math.exp(x[1]), rtol, guess,
                                        xtol)
        lnm = math.log(sol.crit.mdot)
        if hist["x"] is not None:
            s = x - hist["x"]
            if s @ s > 0.0:
                g = hist["grad"]
                hist["grad"] = g + (lnm - hist["lnm"] - g @ s) * s / (s @ s)
        hist["x"], hist["lnm"] = x.copy(), lnm
        if xtol <= 1e-14:
            hist["exact"][x.tobytes()] = sol
        b = Tb if base_kind == "temperature" else rhob
        F = np.array([math.log(Lb), math.log(b)]) - target
        hist["evals"].append((x.copy(), F))
        return F

    for warm in ((True, False) if start is not None else (False,)):
        try:
            if warm:
                # L(R0) follows L_ph nearly one to one: shift the previous L_ph
                u = math.log(start[0]) + math.log(L0) - math.log(start[3])
                x = _first_guess(residual, u, math.log(start[1]))
            else:
                hist.update(x=None, lnm=None, grad=np.zeros(2), evals=[])
                try:
                    x = _cold_start(residual, L0, P[D.I_R_IN])
                except ModelBFailure as failure:
                    # the scan at L_ph = L0 found no crossing: the nested
                    # root-finds would begin with the same scan
                    raise _NoBase(failure.code, failure.text) from None
            x, F = _broyden(residual, x, base_ftol(rtol), _secant_jacobian(hist["evals"], x))
        except _NoBase as failure:
            raise ModelBFailure(failure.code, f"no wind reaches R0 with L0 and the given "
                                              f"base {base_kind}: {failure.text}") from None
        except ModelBFailure:
            continue
        if np.max(np.abs(F)) <= BASE_NOISE * base_ftol(rtol):
            return (math.exp(x[0]), math.exp(x[1]), hist["lnm"],
                    hist["exact"].get(x.tobytes()))
    L_ph, T_eff = solve_base_anchor_nested(P, O, L0, base_kind, base_value, rtol)
    return L_ph, T_eff, None, None


class _NoBase(ModelBFailure):
    """The cold start's scan found no T_eff that reaches the base value."""


BASE_FD_XTOL = 1e-11  # Mdot brackets of the forward-difference solves
SECANT_RADIUS = 0.05  # the first guess's evaluations this near (ln units) give the Jacobian
COLD_RADIUS = 30.0  # a cold base-anchor start: first T_eff where R_ph = this many R0
COLD_FTOL = 0.02  # ... secant steps down to residuals this small
COLD_XTOL = 1e-6  # ... with Mdot brackets this coarse
BASE_FTOL = 1.0  # the base anchor's log residuals are converged at this many rtol ...
BASE_FTOL_MIN = 1e-11  # ... or this, if larger
BASE_XTOL_PER_F = 1e-6  # Mdot brackets bisected to this times the residual (at most 1e-8)
BASE_NOISE = 10.0  # a step that no longer lowers |F| < this many ftol: converged (noise)
BASE_FD_STEP = 1e-5  # forward-difference step in ln L_ph and ln T_eff
BASE_MAX_STEP = (0.1, 0.2)  # largest step in ln L_ph, ln T_eff
BASE_ITERATIONS = 40


def base_ftol(rtol):
    """Converged size of the base anchor's log residuals for the tolerance rtol.

    The residuals come from integrations to rtol, and from Mdot brackets
    bisected only as finely as the current residual needs.  On the bump
    wind's base twin they are smooth down to about 1e-11 once the bracket is
    bisected to 1e-14, but at other luminosities they scatter by up to about
    3 rtol: the iteration aims at rtol and, when a step no longer lowers
    the residuals, accepts anything below BASE_NOISE times that (ln T0 has a
    slope of about -16 in ln T_eff there: ln T_eff within about 0.6 rtol of
    the root; tests/test_base_anchor.py shows answers from different starts
    agreeing to about rtol, 1e-8 at rtol = 1e-8 and 2e-11 at 1e-10).

    Parameters
    ----------
    rtol : float
        The model's relative tolerance.

    Returns
    -------
    float
        max |F| at which the iteration stops [dimensionless, ln units].
    """
    return max(BASE_FTOL * rtol, BASE_FTOL_MIN)


def _cold_start(residual, L0, R0):
    """A first (ln L_ph, ln T_eff) for the base anchor without a previous solution.

    :func:`_first_guess` from L_ph = L0 and the T_eff that puts the
    photosphere at COLD_RADIUS R0; should that fail, the coarse scan of
    :func:`_scan_bracket` at L_ph = L0.
    """
    try:
        return _first_guess(residual, math.log(L0),
                            math.log(D.effective_temperature(L0, COLD_RADIUS * R0)))
    except ModelBFailure:
        pass

    def scan_miss(L_ph, T_eff):
        return residual(np.array([math.log(L_ph), math.log(T_eff)]), COLD_XTOL)[1], None

    lo, hi, d_lo, d_hi = _scan_bracket(scan_miss, L0, R0)
    return np.array([math.log(L0), lo - d_lo * (hi - lo) / (d_hi - d_lo)])


def _first_guess(residual, u, t):
    """(ln L_ph, ln T_eff) near the base anchor's root, from (u, t).

    A one-dimensional search in ln T_eff on the base residual
    (:func:`_search_temperature`); then ln L_ph moves by -f_L (L(R0) follows
    L_ph nearly one to one; halved back while the new L_ph has no solution)
    and the search is repeated from there, until both residuals are below
    COLD_FTOL.  Raises ModelBFailure when it does not get there.
    """
    slope = None
    F = None
    for _ in range(4):
        t, F, slope = _search_temperature(residual, u, t, slope, F)
        if abs(F[0]) < COLD_FTOL:
            return np.array([u, t])
        du = -max(min(F[0], 0.2), -0.2)
        for _ in range(4):
            try:
                F = residual(np.array([u + du, t]), COLD_XTOL)
                break
            except ModelBFailure:
                du *= 0.5
        else:
            break
        u += du
    raise ModelBFailure(D.INVALID, "no first guess for the base anchor")


def _search_temperature(residual, u, t, slope, F=None):
    """ln T_eff at ln L_ph = u where the base residual is below COLD_FTOL: (t, F, slope).

    ``F``, if given, is the residual at (u, t).  Secant steps (the first
    slope by a finite difference unless given; steps
    of at most 0.3, halved back towards the last trial with a solution when a
    trial has none), then regula falsi (Illinois) once the residual changes
    sign.  Raises ModelBFailure when it does not get there in 16 trials.
    """
    def f(t):
        return residual(np.array([u, t]), COLD_XTOL)

    if F is None:
        F = f(t)
    if slope is None:
        h = 0.02
        slope = (f(t + h)[1] - F[1]) / h
    bracket = None  # ((t, f_b), (t, f_b)) on either side of the root
    for _ in range(16):
        if abs(F[1]) < COLD_FTOL:
            return t, F, slope
        if bracket is not None:
            (ta, fa), (tb, fb) = bracket
            t_new = tb - fb * (tb - ta) / (fb - fa)
        else:
            step = -F[1] / slope if slope != 0.0 else 0.3
            t_new = t + max(min(step, 0.3), -0.3)
        for _ in range(6):
            try:
                F_new = f(t_new)
                break
            except ModelBFailure:
                t_new = 0.5 * (t_new + t)
        else:
            break
        if bracket is None and (F_new[1] > 0) != (F[1] > 0):
            bracket = ((t, F[1]), (t_new, F_new[1]))
        elif bracket is not None:
            (ta, fa), (tb, fb) = bracket
            if (F_new[1] > 0) == (fb > 0):
                bracket = ((ta, 0.5 * fa), (t_new, F_new[1]))  # Illinois
            else:
                bracket = ((tb, fb), (t_new, F_new[1]))
        if t_new != t:
            slope = (F_new[1] - F[1]) / (t_new - t)
        t, F = t_new, F_new
    raise ModelBFailure(D.INVALID, "no effective temperature found for the base value")


def _secant_jacobian(evals, x):
    """dF/dx fitted to the evaluations near x the first guess made, or None.

    Least squares on the differences to the evaluation at x of the last four
    others within SECANT_RADIUS of it (in ln L_ph and ln T_eff; further out
    the base residual is too curved): the first guess steps
    in ln T_eff and in ln L_ph, so they span both directions.  None when
    they do not (a singular-value ratio below 1e-2), and the Jacobian comes
    from forward differences instead.
    """
    at = [F for xi, F in evals if np.array_equal(xi, x)]
    if not at:
        return None
    near = [(xi - x, F - at[-1]) for xi, F in evals
            if not np.array_equal(xi, x) and np.max(np.abs(xi - x)) < SECANT_RADIUS][-4:]
    if len(near) < 2:
        return None
    dX = np.array([d for d, _ in near])
    dF = np.array([f for _, f in near])
    sv = np.linalg.svd(dX, compute_uv=False)
    if sv[-1] < 1e-2 * sv[0]:
        return None
    return np.linalg.lstsq(dX, dF, rcond=None)[0].T


def _jacobian(residual, x, F):
    """dF/dx by forward differences (backward where the forward trial has no solution)."""
    J = np.empty((2, 2))
    for i in range(2):
        e = np.zeros(2)
        e[i] = BASE_FD_STEP
        try:
            J[:, i] = (residual(x + e, BASE_FD_XTOL) - F) / BASE_FD_STEP
        except ModelBFailure:
            J[:, i] = (F - residual(x - e, BASE_FD_XTOL)) / BASE_FD_STEP
    return J


def _broyden(residual, x, ftol, J=None):
    """Broyden's method with backtracking on residual(x, xtol); returns (x, F).

    Starts from the Jacobian ``J`` if given, else from forward differences.
    Stops when max |F| < ftol, or when a step no longer lowers it.  Raises
    ModelBFailure when no trial along a step has a solution.
    """
    F = residual(x, BASE_FD_XTOL)
    fresh = J is None
    if J is None:
        J = _jacobian(residual, x, F)
    for _ in range(BASE_ITERATIONS):
        norm = np.max(np.abs(F))
        if norm < ftol:
            break
        try:
            dx = -np.linalg.solve(J, F)
        except np.linalg.LinAlgError:
            break
        scale = max(abs(dx[0]) / BASE_MAX_STEP[0], abs(dx[1]) / BASE_MAX_STEP[1], 1.0)
        dx /= scale
        lam = 1.0
        xtol = 1e-14 if norm < 1e-6 else min(1e-8, BASE_XTOL_PER_F * norm)
        solved = False
        for _ in range(12):
            try:
                F_new = residual(x + lam * dx, xtol)
            except ModelBFailure:
                lam *= 0.25
                continue
            solved = True
            if np.max(np.abs(F_new)) < (1.0 - 1e-4 * lam) * norm:
                break
            lam *= 0.5
            if lam < (0.9 if norm < BASE_NOISE * ftol else 1e-2):  # one try in the noise
                break
        if not solved:
            raise ModelBFailure(D.INVALID, "no trial along the quasi-Newton step has a "
                                           "solution")
        if lam < (0.9 if norm < BASE_NOISE * ftol else 1e-2):  # no descent along this step
            if fresh or norm < BASE_NOISE * ftol:
                return x, F  # as good as it gets (the residuals' noise)
            J = _jacobian(residual, x, F)  # a stale Broyden Jacobian: start afresh
            fresh = True
            continue
        fresh = False
        s = lam * dx
        J += np.outer(F_new - F - J @ s, s) / (s @ s)
        x = x + s
        F = F_new
    return x, F


def solve_base_anchor_nested(P, O, L0, base_kind, base_value, rtol):
    """(L_ph, T_eff) of the solution whose inner end (R0 = P[I_R_IN]) has L0 and T0 (or rho0).

    The fallback of :func:`solve_base_anchor` (slow, about 200 photosphere
    solves): two nested one-dimensional root-finds, each trial a photosphere-anchored
    solve (inward integrations are the numerically stable direction of an
    optically thick envelope; the base temperature is a steep function of
    T_eff): the inner one
    finds T_eff that gives the base value for a photospheric luminosity, the
    outer one (secant in ln L_ph) makes L(R0) = L0.

    Parameters
    ----------
    P : ndarray
        Model B parameter vector (R0 in P[I_R_IN]).
    O : ndarray
        Opacity vector.
    L0 : float
        Base luminosity [erg s^-1].
    base_kind : str
        ``"temperature"`` or ``"density"``.
    base_value : float
        T0 [K] or rho0 [g cm^-3].
    rtol : float
        Relative tolerance.

    Returns
    -------
    L_ph, T_eff : float
        [erg s^-1], [K].

    Raises
    ------
    ModelBFailure
        No wind reaches R0 with these base values, or L0 is matched only roughly.

    References
    ----------
    docs/physics.md, section 5 ("Boundary conditions", base anchor).
    """
    def base_miss(L_ph, T_eff):
        sol, Lb, Tb, rhob = base_values(P, O, L_ph, T_eff, rtol)
        b = Tb if base_kind == "temperature" else rhob
        return math.log(b) - math.log(base_value), Lb

    def match(L_ph, lt_guess):
        """ln T_eff giving the base value at this L_ph, and L(R0) there."""
        try:
            if lt_guess is None:
                raise ModelBFailure(D.INVALID, "no guess")
            lo, hi, d_lo, d_hi = _local_bracket(base_miss, L_ph, lt_guess)
        except ModelBFailure:
            lo, hi, d_lo, d_hi = _scan_bracket(base_miss, L_ph, P[D.I_R_IN])
        Lb = None
        for _ in range(80):
            m = lo - d_lo * (hi - lo) / (d_hi - d_lo)
            if not lo < m < hi:
                m = 0.5 * (lo + hi)
            try:
                dm, Lb = base_miss(L_ph, math.exp(m))
            except ModelBFailure:
                m = 0.5 * (lo + hi)  # a failed trial: fall back on bisection
                dm, Lb = base_miss(L_ph, math.exp(m))
            if abs(dm) < 1e-11 or hi - lo < 1e-14:
                return m, Lb
            if (dm > 0) == (d_lo > 0):
                lo, d_lo = m, dm
                d_hi *= 0.5  # Illinois: keep the stale end from stalling
            else:
                hi, d_hi = m, dm
                d_lo *= 0.5
        return m, Lb

    try:
        u0 = math.log(L0)
        lt0, Lb0 = match(L0, None)
        f0 = math.log(Lb0) - u0
        u1 = u0 - max(min(f0, 0.05), -0.05)  # L(R0) ~ L_ph (1 + f0): a cautious first step
        lt1, Lb1 = match(math.exp(u1), lt0)
        f1 = math.log(Lb1) - u0
        for _ in range(30):
            if abs(f1) < 1e-10 or f1 == f0:
                break
            u2 = u1 - f1 * (u1 - u0) / (f1 - f0)
            u0, f0, lt0 = u1, f1, lt1
            u1 = u2
            lt1, Lb1 = match(math.exp(u1), lt0)
            f1 = math.log(Lb1) - math.log(L0)
    except ModelBFailure as failure:
        raise ModelBFailure(failure.code, f"no wind reaches R0 with L0 and the given base "
                                          f"{base_kind}: {failure.text}") from None
    if abs(f1) > 1e-6:
        raise ModelBFailure(D.FAILED, f"the base luminosity could only be matched to "
                                      f"{abs(f1):.1e}")
    return math.exp(u1), math.exp(lt1)


def _scan_bracket(base_miss, L_ph, R0):
    """Bracket ln T_eff on a coarse grid; raises if the family never crosses."""
    prev = None
    for lt in np.linspace(math.log(2e3), math.log(2e6), 31):
        if photosphere_radius(L_ph, math.exp(lt)) <= 1.02 * R0:
            break
        try:
            d, Lb = base_miss(L_ph, math.exp(lt))
        except ModelBFailure:
            # Past the edge of the family: look between the last good point
            # and here, where the crossing often sits.
            if prev is not None:
                a, b = prev[0], lt
                for _ in range(12):
                    m = 0.5 * (a + b)
                    try:
                        dm, Lb = base_miss(L_ph, math.exp(m))
                    except ModelBFailure:
                        b = m
                        continue
                    if (dm > 0) != (prev[1] > 0):
                        return prev[0], m, prev[1], dm
                    a = m
                    prev = (m, dm)
            prev = None
            continue
        if prev is not None and (d > 0) != (prev[1] > 0):
            return prev[0], lt, prev[1], d
        prev = (lt, d)
    raise ModelBFailure(D.INVALID, "the photospherically consistent solutions never reach "
                                   "that base value at R0")


def _local_bracket(base_miss, L_ph, lt):
    """Bracket ln T_eff around a previous root by widening steps."""
    d0, Lb = base_miss(L_ph, math.exp(lt))
    step = 1e-3
    for _ in range(40):
        for s in (1.0, -1.0):
            lt2 = lt + s * step
            try:
                d2, Lb2 = base_miss(L_ph, math.exp(lt2))
            except ModelBFailure:
                continue
            if (d2 > 0) != (d0 > 0):
                return (lt, lt2, d0, d2) if lt < lt2 else (lt2, lt, d2, d0)
        step *= 2.0
        if step > 1.0:
            break
    raise ModelBFailure(D.INVALID, "lost the base value while adjusting the luminosity")


# -- which way to move: where solutions are, when the model has none --------------

HINT_BUDGET = 3.0  # seconds a hint may take at most (it stops scanning after this)
HINT_STEPS = 6  # T_eff and L_ph times 2^(+-k/2), k = 1..HINT_STEPS (up to a factor 8)


def _g(x):
    """A number in 3 digits, exponents without '+' and leading zeros (7.5e4, 3.1e-5)."""
    text = f"{x:.3g}"
    if "e" in text:
        mantissa, exponent = text.split("e")
        text = f"{mantissa}e{int(exponent)}"
    return text


def photosphere_hint(P, O, L_ph, T_eff, rtol, budget=HINT_BUDGET):
    """Where photosphere-anchored solutions are near (L_ph, T_eff): a sentence, or "".

    Tries T_eff and L_ph (the other held) times 2^(+-k/2), k = 6 .. 1 (the
    widest first, so that a short budget still spans the range), alternating,
    with coarse Mdot brackets, until ``budget`` seconds of CPU time are spent;
    says which values had solutions.

    Parameters
    ----------
    P, O : ndarray
        Model B parameter and opacity vectors.
    L_ph, T_eff : float
        The photosphere without a solution [erg s^-1], [K].
    rtol : float
        Relative tolerance.
    budget : float
        CPU seconds at most [s] (a solve under way is finished).

    Returns
    -------
    str
        E.g. "at this L_ph, T_eff from 7.5e4 to 1.5e5 K has solutions (of 6 values
        from 7.5e4 to 4.8e6 K tried)"; "" when nothing was found.
    """
    import time
    t0 = time.process_time()  # CPU time: the same bound on a busy machine
    tried = {"T_eff": [], "L_ph": []}
    good = {"T_eff": [], "L_ph": []}
    for k in range(HINT_STEPS, 0, -1):
        for sign in (-1.0, 1.0):
            for what in ("T_eff", "L_ph"):
                if time.process_time() - t0 > budget:
                    break
                f = 2.0 ** (sign * k / 2.0)
                L, T = (L_ph, T_eff * f) if what == "T_eff" else (L_ph * f, T_eff)
                tried[what].append(f)
                try:
                    solve_photosphere_anchor(P, O, L, T, rtol, xtol=1e-6)
                    good[what].append(f)
                except ModelBFailure:
                    continue
    notes = []
    for what, value, unit, scale, held in (("T_eff", T_eff, "K", 1.0, "L_ph"),
                                           ("L_ph", L_ph, "Lsun", 1.0 / L_SUN, "T_eff")):
        if not good[what]:
            continue
        lo, hi = min(good[what]), max(good[what])
        below = " or lower" if lo == min(tried[what]) else ""
        above = " or higher" if hi == max(tried[what]) else ""
        notes.append(f"at this {held}, {what} from {_g(lo * value * scale)}{below} to "
                     f"{_g(hi * value * scale)}{above} {unit} has solutions (of "
                     f"{len(tried[what])} values from {_g(min(tried[what]) * value * scale)} "
                     f"to {_g(max(tried[what]) * value * scale)} {unit} tried)")
    if not notes and (tried["T_eff"] or tried["L_ph"]):
        return (f"no T_eff or L_ph within a factor {_g(2.0 ** (HINT_STEPS / 2.0))} of these "
                f"({len(tried['T_eff']) + len(tried['L_ph'])} tried) has a solution")
    return "; ".join(notes)


def base_hint(P, O, L0, base_kind, base_value, rtol, budget=HINT_BUDGET):
    """Which way to move R0, L0 or the base value of a base anchor without a solution.

    At L_ph = L0, photosphere-anchored solutions over T_eff (the scan of
    :func:`_scan_bracket`, coarse Mdot brackets) give the base values they
    reach at R0: when the asked-for value lies outside that range, say so,
    with the range and the direction to move R0 (the envelope's temperature
    and density rise inward).

    Parameters
    ----------
    P, O : ndarray
        Model B parameter and opacity vectors (R0 in P[I_R_IN]).
    L0 : float
        Base luminosity [erg s^-1].
    base_kind : str
        ``"temperature"`` or ``"density"``.
    base_value : float
        T0 [K] or rho0 [g cm^-3].
    rtol : float
        Relative tolerance.
    budget : float
        CPU seconds at most [s] (a solve under way is finished).

    Returns
    -------
    str
        A sentence, or "" when nothing was found.
    """
    import time
    t0 = time.process_time()  # CPU time: the same bound on a busy machine
    R0 = P[D.I_R_IN]
    reached = []
    for lt in np.linspace(math.log(2e3), math.log(2e6), 31):
        if time.process_time() - t0 > budget:
            break
        T_eff = math.exp(lt)
        if photosphere_radius(L0, T_eff) <= 1.02 * R0:
            break
        try:
            sol, Lb, Tb, rhob = base_values(P, O, L0, T_eff, rtol, xtol=1e-6)
        except ModelBFailure:
            continue
        reached.append((T_eff, Tb if base_kind == "temperature" else rhob))
    if not reached:
        return ("no photosphere with L_ph = L0 and T_eff from 2e3 K up to where R_ph nears R0 "
                "has a solution reaching R0: try another L0 or R0")
    lo = min(b for _, b in reached)
    hi = max(b for _, b in reached)
    unit = "K" if base_kind == "temperature" else "g/cm3"
    span = (f"with L_ph = L0 the solutions reach base {base_kind}s from {_g(lo)} to "
            f"{_g(hi)} {unit} at R0 (T_eff {_g(reached[0][0])} to {_g(reached[-1][0])} K)")
    if base_value > hi:
        return (f"{span}: the given {_g(base_value)} {unit} is above them; lower it below "
                f"{_g(hi)} {unit}, or move R0 inward (the {base_kind} rises inward)")
    if base_value < lo:
        return (f"{span}: the given {_g(base_value)} {unit} is below them; raise it above "
                f"{_g(lo)} {unit}, or move R0 outward (the {base_kind} falls outward)")
    return (f"{span}, which include the given {_g(base_value)} {unit}: the base luminosity "
            f"is what no solution meets; try L0 a few per cent higher or lower")
