"""A deliberately plain scipy reference for the photosphere-anchored Model B solve.

Solves the problem of :func:`windsolve.models.diffusion.shooting.solve_photosphere_anchor`,
from the same vectors ``P, O`` (``model.kernel_arrays``), the way a one-off
shooting script would: a plain-Python right-hand side (floats, :mod:`math`)
in :func:`scipy.integrate.solve_ivp` (``DOP853``) with terminal events, and
:func:`scipy.optimize.brentq` for scalar roots.  Nothing compiled is called
(only slot numbers and constants are imported): an independent check of the
kernels and the baseline ``bench_diffusion.py`` times.  Equations: docs/physics.md,
section 5, state (r, v, T), L_r from the energy integral, y = (ln v, ln T)
against x = ln r, d ln v / d ln r = r N / (v^2 - c_T^2), d ln T / d ln r = r T'/T.

The algorithm is windsolve's: bracket ln Mdot stepping up from just above the
smallest escaping Mdot (steps 0.25, x1.5 per shot, at most 2), each trial an
inward shot from the photosphere (tau = 2/3 fixes v_ph) that is "sonic side"
if it reaches v^2 - c_T^2 < SONIC_GAP c_T^2 with N > 0 (or its step collapses,
a near miss: docs/physics.md, section 8) and "turn side" otherwise (N turns from + to -
moving inward, c_T is met with N < 0, or the inner end is reached); bisect to
1e-14 (1 + |ln Mdot|); re-shoot the sonic-side end; project its stop onto
N = 0 at v = c_T (same Mdot, Edot) and step back along the slope p+ of
2 p^2 - (N_v + k1) p - (N_r + N_T T') = 0 (central differences); tie the
critical point to the stored point TIE_DISTANCE in ln r outside the stop by a
secant on r_c (short outward legs from r_c (1 + DELTA)).

Tolerances.  windsolve's integrator gets a pure absolute tolerance ``rtol`` on
ln v and ln T; ``solve_ivp`` raises a zero relative tolerance to 100 eps (with
a warning), so here ``rtol = RTOL_SCIPY = 1e-13`` and ``atol = rtol``: the
error scale atol + 1e-13 |y| is windsolve's to 1e-11 (|y| < 100).  With the
same first steps (1e-6, DELTA), no step limit and the step control the kernel
copied from scipy's DOP853, both take (nearly) the same steps.

Deliberate differences: a shot stops at the root of its event function (dense
output) and is classified by the sign of N there, where the kernel uses the
first accepted point past v^2 - c_T^2 = SONIC_GAP c_T^2 (after a step that
jumps across v = c_T that point lies beyond it: ~1e-9 in ln Mdot, rarely);
the "N turned" event is also checked on the first step; ``brentq`` finds T_c
at fixed r; only electron scattering, the bump law and an unclamped table
(the same bicubic Hermite cells on the node data of ``O``, evaluated in plain
Python, NaN off the table's cells), without porosity.  A trial whose
photosphere lies off the table is neither side (as in windsolve's scan); the
reference does not bracket between off-table trials and one side.
"""

import bisect
import copy
import math

import numpy as np
from scipy.integrate import solve_ivp
from scipy.optimize import brentq

from windsolve.core import opacity as op
from windsolve.core.constants import A_RAD, C_LIGHT, SIGMA_SB
from windsolve.models.diffusion import kernels as D
from windsolve.models.diffusion import shooting as B

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
        if (self.law not in (op.LAW_ELECTRON_SCATTERING, op.LAW_BUMP, op.LAW_TABLE)
                or O[op.SLOT_H0] > 0.0):
            raise ValueError("reference: electron scattering, bump or table law, no porosity")
        self.kes, self.A, self.rho_ref, self.s, self.log_tb, self.width = map(float, O[1:7])
        self.mdot = self.edot = math.nan
        if self.law == op.LAW_TABLE:
            self._table(O)

    def _table(self, O):
        """The table block of O as Python lists (layout: windsolve.core.opacity)."""
        if O[op.SLOT_CLAMP] != 0.0:
            raise ValueError("reference: an unclamped table")
        nT, nR = int(O[op.SLOT_NT]), int(O[op.SLOT_NR])
        g = op.SLOT_GRID
        self.tT = [float(x) for x in O[g:g + nT]]
        self.tR = [float(x) for x in O[g + nT:g + nT + nR]]
        f = g + nT + nR
        nodes = O[f:f + 4 * nT * nR].reshape(nT, nR, 4)
        self.nodes = [[[float(v) for v in nodes[i, j]] for j in range(nR)] for i in range(nT)]
        strips = O[f + 4 * nT * nR:f + 4 * nT * nR + 2 * (nT - 1)].reshape(nT - 1, 2)
        self.strips = ([(float(a), float(b)) for a, b in strips] if O[op.SLOT_HOLES] != 0.0
                       else [(self.tR[0], self.tR[-1])] * (nT - 1))

    def table_opacity(self, rho, T):
        """Bicubic Hermite on the node values and derivatives of O; NaN off the table
        (outside the grid or the valid strip of log R of the log T cell)."""
        x = math.log10(T)
        y = math.log10(rho) - 3.0 * x + 18.0
        tT, tR, tol = self.tT, self.tR, op.EDGE_TOL
        if not (tT[0] - tol <= x <= tT[-1] + tol):
            return math.nan
        i = min(max(bisect.bisect_right(tT, x) - 1, 0), len(tT) - 2)
        lo, hi = self.strips[i]
        if not (lo - tol <= y <= hi + tol):
            return math.nan
        j = min(max(bisect.bisect_right(tR, y) - 1, 0), len(tR) - 2)
        if j > 0 and tR[j] >= hi - tol:
            j -= 1
        hx, hy = tT[i + 1] - tT[i], tR[j + 1] - tR[j]
        t, s = (x - tT[i]) / hx, (y - tR[j]) / hy

        def basis(u, h):
            return ((2 * u**3 - 3 * u**2 + 1, h * (u**3 - 2 * u**2 + u)),
                    (3 * u**2 - 2 * u**3, h * (u**3 - u**2)))

        bt, bs = basis(t, hx), basis(s, hy)
        total = 0.0
        for a in (0, 1):
            for b in (0, 1):
                v, vx, vy, vxy = self.nodes[i + a][j + b]
                (Ht, Kt), (Hs, Ks) = bt[a], bs[b]
                total += v * Ht * Hs + vx * Kt * Hs + vy * Ht * Ks + vxy * Kt * Ks
        return 10.0 ** total

    def opacity(self, rho, T):
        """kappa_es [1 + A (rho/rho_ref)^s exp(-(log10 T - log10 T_b)^2 / (2 w^2))],
        or the table's."""
        if self.law == op.LAW_ELECTRON_SCATTERING:
            return self.kes
        if self.law == op.LAW_TABLE:
            return self.table_opacity(rho, T)
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
    fn.terminal, fn.direction = True, direction
    return fn


def shoot(w, ln_mdot, R, L, T, rtol):
    """Inward shot from the photosphere: (code, solve_ivp result or None)."""
    v = w.set_photosphere(math.exp(ln_mdot), R, L, T)
    if not math.isfinite(v):
        return D.FALLBACK, None
    if not math.isfinite(w.opacity(math.exp(ln_mdot) / (FOUR_PI * R * R * v), T)):
        return D.OFF_TABLE, None  # the photosphere itself lies off the table
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
    """(lo, hi, code at lo) in ln Mdot, as windsolve.models.diffusion.shooting._bracket."""
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
    d = B.DELTA
    sol = solve_ivp(c.rhs, (math.log(rc * (1.0 + d)), math.log(r_target)),
                    [math.log(vc + p * d * rc), math.log(Tc + dTdr * d * rc)],
                    method="DOP853", rtol=RTOL_SCIPY, atol=rtol, first_step=d)
    return float(sol.y[0, -1]) if sol.status == 0 else math.nan


def refine_critical(w, ln_mdot, stop, tie, rtol):
    """(r_c, T_c) nearest the stop, tied to the shot
    (as windsolve.models.diffusion.shooting._refine_critical)."""
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
        rc, rc_old = r_s - (v_s - crit[1]) / crit[2], rc
        if abs(rc / rc_old - 1.0) < 1e-13:
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
    """Regular Model B wind with photosphere (L_ph [erg s-1], T_eff [K]), the scipy way.

    ``P, O`` are ``model.kernel_arrays`` (Mdot, Edot slots ignored); ``rtol`` is
    windsolve's ``numerics.rtol`` (used as ``atol`` on ln v and ln T).  Returns
    a dict: ``mass_loss_rate`` [g s-1], ``sonic_radius`` [cm],
    ``sonic_temperature`` [K] and ``n_shots`` (inward shots from the photosphere).
    """
    # A right-hand side that overflows returns NaN so that solve_ivp rejects
    # the step (as the kernel's integrator does); numpy need not warn then.
    with np.errstate(invalid="ignore", over="ignore", divide="ignore"):
        return _solve(P, O, float(L_ph), float(T_eff), float(rtol))


def _solve(P, O, L_ph, T_eff, rtol):
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
