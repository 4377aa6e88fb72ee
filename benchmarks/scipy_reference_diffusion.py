"""A deliberately plain scipy reference for the photosphere-anchored Model B solve.

This module solves the same problem as
:func:`windsolve._diffusion.solve_photosphere_anchor`, from the same parameter
vectors ``P`` and ``O`` (``model.kernel_arrays``), the way a one-off shooting
script would: a plain-Python right-hand side (floats and :mod:`math`) handed
to :func:`scipy.integrate.solve_ivp` (``DOP853``) with terminal events, and
:func:`scipy.optimize.brentq` for the one-dimensional roots.  Nothing compiled
is called from here (only slot numbers and constants are imported), so it is
an independent check of the kernels and the baseline ``bench_diffusion.py``
times.

Equations (SPEC.md section 5): the state is (r, v, T), rho = Mdot / (4 pi r^2 v),
L_r from the energy integral with Edot, and y = (ln v, ln T) against x = ln r:

    d ln v / d ln r = r N / (v^2 - c_T^2),   d ln T / d ln r = r T' / T.

The algorithm is windsolve's, step by step:

1. bracket ln Mdot stepping up from just above the smallest Mdot whose thin
   flow escapes (first step 0.25, times 1.5 per shot, at most 2), each trial
   an inward shot from the photosphere (L_ph, T_eff; tau = 2/3 fixes v_ph)
   classified as "sonic side" (reached v^2 - c_T^2 < SONIC_GAP c_T^2 with
   N > 0, or the step size collapsed: a near miss, SPEC section 8) or "turn
   side" (N turned from + to - moving inward, reached the sound speed with
   N < 0, or reached the inner end);
2. bisect ln Mdot to a bracket of 1e-14 (1 + |ln Mdot|);
3. re-shoot the sonic-side end, storing its accepted points;
4. project its stop onto the critical curve (N = 0 at v = c_T, at the same
   Mdot and Edot), step back along the saddle's slope from l'Hopital's
   quadratic 2 p^2 - (N_v + k1) p - (N_r + N_T T') = 0 (central differences),
   and finally tie the critical point to the stored point TIE_DISTANCE in
   ln r outside the stop by a secant on r_c, each trial a short outward
   integration from r_c (1 + DELTA).

Tolerances.  The kernels call their integrator with a pure absolute
tolerance ``rtol`` on ln v and ln T (relative tolerance 0).  ``solve_ivp``
does not accept a zero relative tolerance (it raises it to 100 eps with a
warning), so the reference passes ``rtol = RTOL_SCIPY = 1e-13`` and
``atol = rtol``: its error scale atol + 1e-13 |y| differs from windsolve's by
under 1e-11 relative (|y| < 100).  With the same first step (1e-6 in ln r,
DELTA for the short outward legs), no step limit, and scipy's DOP853 step
control being the one the kernel's integrator copies, the two take (nearly)
the same steps, so they agree far below the tolerance.

Deliberate differences, none of which changes the converged answer:

- the stop of a shot is the root of the event function (scipy's dense
  output), not the first accepted point past it;
- scipy checks the "N turned" event on the first step as well, where the
  kernel's monitor has no previous sign yet;
- the one-dimensional roots (critical temperature at fixed r) use ``brentq``
  instead of the kernel's Illinois iteration;
- only the electron-scattering and bump opacity laws, without porosity.
"""

import copy
import math

from scipy.integrate import solve_ivp
from scipy.optimize import brentq

from windsolve import _diffusion as B
from windsolve.core import diffusion as D
from windsolve.core import opacity as op
from windsolve.core.constants import A_RAD, C_LIGHT, SIGMA_SB

FOUR_PI = 4.0 * math.pi
RTOL_SCIPY = 1e-13  # solve_ivp's relative tolerance (the kernel uses 0; see above)
SADDLE, NODE, FOCUS, DEGENERATE = 1, 2, 3, 4  # as windsolve.core.critical
SIDES = (D.SIDE_SONIC, D.SIDE_TURN)
XTOL_T = 1e-14  # brentq tolerance on ln T_c


class _Wind:
    """Model B at one (Mdot, Edot), on plain Python floats."""

    def __init__(self, P, O):
        self.GM, self.KG, self.KES, self.R_in, self.T_in = (
            float(P[i]) for i in (D.I_GM, D.I_KG, D.I_KES, D.I_R_IN, D.I_T_IN))
        self.law = int(O[op.SLOT_LAW])
        if self.law not in (op.LAW_ELECTRON_SCATTERING, op.LAW_BUMP) or O[op.SLOT_H0] > 0.0:
            raise ValueError("the reference knows electron scattering and the bump law, "
                             "without porosity")
        self.kes = float(O[op.SLOT_KES])
        self.A, self.rho_ref, self.s, self.log_tb, self.width = (float(O[i])
                                                                 for i in range(2, 7))
        self.mdot = self.edot = math.nan

    def opacity(self, rho, T):
        """kappa_es [1 + A (rho/rho_ref)^s exp(-(log10 T - log10 T_b)^2 / (2 w^2))]."""
        if self.law == op.LAW_ELECTRON_SCATTERING:
            return self.kes
        d = (math.log10(T) - self.log_tb) / self.width
        return self.kes * (1.0 + self.A * (rho / self.rho_ref) ** self.s * math.exp(-0.5 * d * d))

    def luminosity(self, r, v, T, rho):
        return self.edot - self.mdot * (0.5 * v * v + 2.5 * self.KG * T
                                        + (4.0 / 3.0) * A_RAD * T**4 / rho - self.GM / r)

    def state(self, r, v, T):
        """(rho, L_r, kappa, dT/dr, N) at (r, v, T)."""
        rho = self.mdot / (FOUR_PI * r * r * v)
        L = self.luminosity(r, v, T, rho)
        k = self.opacity(rho, T)
        dTdr = -3.0 * k * rho * L / (4.0 * FOUR_PI * A_RAD * C_LIGHT * r * r * T**3)
        N = (2.0 * self.KG * T / r - self.GM / (r * r) + k * L / (FOUR_PI * C_LIGHT * r * r)
             - self.KG * dTdr)
        return rho, L, k, dTdr, N

    def rhs(self, x, y):
        """d(ln v, ln T)/d ln r; NaN (a rejected step) where a wild stage overflows."""
        try:
            r = math.exp(x)
            v = math.exp(y[0])
            T = math.exp(y[1])
            rho, L, k, dTdr, N = self.state(r, v, T)
            return [r * N / (v * v - self.KG * T), r * dTdr / T]
        except (OverflowError, ZeroDivisionError, ValueError):
            return [math.nan, math.nan]

    def n_of(self, r, v, T):
        return self.state(r, v, T)[4]

    def set_photosphere(self, mdot, R, L, T):
        """Mdot, Edot from the photosphere (R, L, T); returns v_ph (NaN: bound)."""
        W = 2.0 * self.GM * (1.0 - self.KES * L / (FOUR_PI * C_LIGHT * self.GM)) / R
        S = 3.0 * self.KES * mdot / (FOUR_PI * R)
        if S * S <= W:
            return math.nan
        v = (S * S + W) / (2.0 * S)  # tau = KES Mdot / (2 pi R (v + v_inf)) = 2/3
        rho = mdot / (FOUR_PI * R * R * v)
        self.mdot = mdot
        self.edot = L + mdot * (0.5 * v * v + 2.5 * self.KG * T
                                + (4.0 / 3.0) * A_RAD * T**4 / rho - self.GM / R)
        return v


def classify(b, c, k1):
    """(kind, p+, p-) of 2 p^2 - b p - c = 0 (as windsolve.core.critical.classify)."""
    disc = b * b + 8.0 * c
    if disc < 0.0:
        return FOCUS, math.nan, math.nan
    sq = math.sqrt(disc)
    p1 = (b + sq) / 4.0 if b >= 0.0 else (b - sq) / 4.0
    p2 = -c / (2.0 * p1) if p1 != 0.0 else 0.0
    pp, pm = max(p1, p2), min(p1, p2)
    prod = (2.0 * pp - k1) * (2.0 * pm - k1)
    return (SADDLE if prod < 0.0 else NODE if prod > 0.0 else DEGENERATE), pp, pm


def critical(w, mdot, rc, Tc):
    """(wind with Edot of the critical point, v_c, p+, T') or None (no saddle)."""
    c = copy.copy(w)
    KG = c.KG
    vc = math.sqrt(KG * Tc)
    rho = mdot / (FOUR_PI * rc * rc * vc)
    k = c.opacity(rho, Tc)
    A = k / (FOUR_PI * C_LIGHT * rc * rc)
    Bc = KG * 3.0 * k * rho / (4.0 * FOUR_PI * A_RAD * C_LIGHT * rc * rc * Tc**3)
    Lc = (c.GM / (rc * rc) - 2.0 * KG * Tc / rc) / (A + Bc)  # N = 0 is linear in L
    c.mdot = mdot
    c.edot = Lc + mdot * (0.5 * vc * vc + 2.5 * KG * Tc + (4.0 / 3.0) * A_RAD * Tc**4 / rho
                          - c.GM / rc)
    if not (math.isfinite(Lc) and Lc > 0.0):
        return None
    hr, hv, hT = 1e-5 * rc, 1e-5 * vc, 1e-5 * Tc
    n_r = (c.n_of(rc + hr, vc, Tc) - c.n_of(rc - hr, vc, Tc)) / (2.0 * hr)
    n_v = (c.n_of(rc, vc + hv, Tc) - c.n_of(rc, vc - hv, Tc)) / (2.0 * hv)
    n_T = (c.n_of(rc, vc, Tc + hT) - c.n_of(rc, vc, Tc - hT)) / (2.0 * hT)
    dTdr = c.state(rc, vc, Tc)[3]
    k1 = KG * dTdr / vc
    kind, pp, pm = classify(n_v + k1, n_r + n_T * dTdr, k1)
    if kind != SADDLE:
        return None
    return c, vc, pp, dTdr


def critical_temperature_at(w, r, T_guess):
    """T_c with N(r, c_T(T_c), T_c) = 0 nearest T_guess (NaN if none within a factor 1.5)."""
    def f(lnT):
        T = math.exp(lnT)
        return w.n_of(r, math.sqrt(w.KG * T), T)

    lo = math.log(T_guess)
    f0 = f(lo)
    d = 1e-7
    for _ in range(40):  # widen geometrically: the nearest root is wanted
        d *= 1.5
        if d > 0.4:
            break
        a, b = lo - d, lo + d
        if (f(a) > 0.0) != (f0 > 0.0):
            return math.exp(brentq(f, a, lo, xtol=XTOL_T))
        if (f(b) > 0.0) != (f0 > 0.0):
            return math.exp(brentq(f, lo, b, xtol=XTOL_T))
    return math.nan


def _event(fn, direction):
    fn.terminal = True
    fn.direction = direction
    return fn


def shoot(w, ln_mdot, R, L, T, rtol):
    """Inward shot from the photosphere: (code, solve_ivp result or None)."""
    v = w.set_photosphere(math.exp(ln_mdot), R, L, T)
    if not math.isfinite(v):
        return D.FALLBACK, None
    KG, GM, gap = w.KG, w.GM, D.SONIC_GAP

    def sonic(x, y):  # v^2 - c_T^2 falls below SONIC_GAP c_T^2
        return math.exp(2.0 * y[0] - y[1]) / KG - 1.0 - gap

    def turn(x, y):  # N from + to - moving inward (scaled by gravity)
        try:
            r = math.exp(x)
            return w.n_of(r, math.exp(y[0]), math.exp(y[1])) * r * r / GM
        except (OverflowError, ZeroDivisionError, ValueError):
            return math.nan

    def stalled(x, y):  # L_r reaches 0
        r, v, T = math.exp(x), math.exp(y[0]), math.exp(y[1])
        return w.luminosity(r, v, T, w.mdot / (FOUR_PI * r * r * v)) / abs(w.edot)

    events = [_event(sonic, -1.0), _event(turn, -1.0), _event(stalled, -1.0)]
    if math.isfinite(w.T_in):
        ln_T_in = math.log(w.T_in)
        events.append(_event(lambda x, y: y[1] - ln_T_in, 1.0))  # base temperature
    x0 = math.log(R)
    x_end = math.log(w.R_in) if w.R_in > 0.0 else x0 - 30.0
    sol = solve_ivp(w.rhs, (x0, x_end), [math.log(v), math.log(T)], method="DOP853",
                    rtol=RTOL_SCIPY, atol=rtol, first_step=1e-6, events=events)
    if sol.status == 0:
        return D.SIDE_TURN, sol  # down to the inner end without meeting c_T
    if sol.status == -1:  # a collapsing step: a near miss on the sonic side
        return (D.SIDE_SONIC if "step size" in sol.message else D.FAILED), sol
    fired = [i for i, t in enumerate(sol.t_events) if t.size]
    if fired[0] == 0:
        r, v, T = math.exp(sol.t[-1]), math.exp(sol.y[0, -1]), math.exp(sol.y[1, -1])
        return (D.SIDE_SONIC if w.n_of(r, v, T) > 0.0 else D.SIDE_TURN), sol
    return (D.STALLED if fired[0] == 2 else D.SIDE_TURN), sol


def bracket(w, R, L, T, rtol, count):
    """(lo, hi, code at lo) in ln Mdot, as windsolve._diffusion._bracket."""
    W = 2.0 * w.GM * (1.0 - w.KES * L / (FOUR_PI * C_LIGHT * w.GM)) / R
    mdot_min = FOUR_PI * R * math.sqrt(W) / (3.0 * w.KES) if W > 0 else 1e-30
    x = xs = math.log(mdot_min) + 1e-6
    code_prev = count(shoot(w, x, R, L, T, rtol))[0]
    step = 0.25
    for _ in range(B.MAX_SHOTS):
        xs += step
        code = count(shoot(w, xs, R, L, T, rtol))[0]
        if code in SIDES and code_prev in SIDES and code != code_prev:
            return xs - step, xs, code_prev
        code_prev = code
        if xs - x > 60.0:
            break
        step = min(step * 1.5, 2.0)
    raise RuntimeError("no ln Mdot bracket between the two ways of missing the sonic point")


def short_outward(c, vc, p, dTdr, rc, Tc, r_target, rtol):
    """ln v at r_target on the wind branch leaving (r_c, T_c) (NaN on failure)."""
    delta = B.DELTA
    y0 = [math.log(vc + p * delta * rc), math.log(Tc + dTdr * delta * rc)]
    sol = solve_ivp(c.rhs, (math.log(rc * (1.0 + delta)), math.log(r_target)), y0,
                    method="DOP853", rtol=RTOL_SCIPY, atol=rtol, first_step=delta)
    return float(sol.y[0, -1]) if sol.status == 0 else math.nan


def refine_critical(w, ln_mdot, stop, tie, rtol):
    """(r_c, T_c) nearest the stop, tied to the shot (as windsolve._diffusion._refine_critical)."""
    mdot = math.exp(ln_mdot)
    r_s, v_s, T_s = stop
    rc, Tc = r_s, T_s
    for _ in range(8):  # projection onto N = 0 at v = c_T, back along the slope
        Tp = critical_temperature_at(w, rc, Tc)
        if not math.isfinite(Tp):
            break
        Tc = Tp
        crit = critical(w, mdot, rc, Tc)
        if crit is None:
            break
        rc_new = r_s - (v_s - crit[1]) / crit[2]
        done = abs(rc_new / rc - 1.0) < 1e-13
        rc = rc_new
        if done:
            break
    r_t, v_t, T_t = tie

    def miss(rc_try, Tc_guess):
        Tt = critical_temperature_at(w, rc_try, Tc_guess)
        if not math.isfinite(Tt):
            return math.nan, Tt
        crit = critical(w, mdot, rc_try, Tt)
        if crit is None or rc_try * (1.0 + B.DELTA) >= r_t:
            return math.nan, Tt
        c, vc, p, dTdr = crit
        return short_outward(c, vc, p, dTdr, rc_try, Tt, r_t, rtol) - math.log(v_t), Tt

    f0, T0 = miss(rc, Tc)
    if math.isfinite(f0):  # secant on r_c
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
    Tc = critical_temperature_at(w, rc, Tc)
    if not math.isfinite(Tc) or critical(w, mdot, rc, Tc) is None:
        raise RuntimeError("the sonic point the photosphere leads to is not a saddle")
    return rc, Tc


def solve_reference(P, O, L_ph, T_eff, rtol):
    """Regular Model B wind with photosphere (L_ph, T_eff), the plain scipy way.

    Parameters
    ----------
    P, O : ndarray of float64
        Model B and opacity vectors (``model.kernel_arrays``); Mdot and Edot
        slots are ignored.
    L_ph : float
        Photospheric luminosity [erg s-1].
    T_eff : float
        Effective temperature [K].
    rtol : float
        windsolve's ``numerics.rtol``, used as ``atol`` on ln v and ln T.

    Returns
    -------
    dict
        ``mass_loss_rate`` [g s-1], ``sonic_radius`` [cm], ``sonic_temperature``
        [K] and ``n_shots`` (inward shots from the photosphere).
    """
    L_ph, T_eff, rtol = float(L_ph), float(T_eff), float(rtol)  # no numpy scalars
    R = math.sqrt(L_ph / (FOUR_PI * SIGMA_SB * T_eff**4))
    w = _Wind(P, O)
    shots = [0]

    def count(result):
        shots[0] += 1
        return result

    lo, hi, code_lo = bracket(w, R, L_ph, T_eff, rtol, count)
    while hi - lo > 1e-14 * (1.0 + abs(lo)):
        m = 0.5 * (lo + hi)
        code = count(shoot(w, m, R, L_ph, T_eff, rtol))[0]
        if code == code_lo:
            lo = m
        elif code in SIDES:
            hi = m
        else:
            raise RuntimeError(f"shot at ln Mdot = {m} failed with code {code}")
    x_sonic = lo if code_lo == D.SIDE_SONIC else hi
    code, sol = count(shoot(w, x_sonic, R, L_ph, T_eff, rtol))
    if code != D.SIDE_SONIC or sol.t.size < 2:
        raise RuntimeError("the converged inward solution did not reach the sonic point")
    stop = (math.exp(sol.t[-1]), math.exp(sol.y[0, -1]), math.exp(sol.y[1, -1]))
    k = sol.t.size - 1
    while k > 0 and sol.t[k] < sol.t[-1] + B.TIE_DISTANCE:
        k -= 1
    tie = (math.exp(sol.t[k]), math.exp(sol.y[0, k]), math.exp(sol.y[1, k]))
    rc, Tc = refine_critical(w, x_sonic, stop, tie, rtol)
    return dict(mass_loss_rate=math.exp(x_sonic), sonic_radius=rc, sonic_temperature=Tc,
                n_shots=shots[0])
