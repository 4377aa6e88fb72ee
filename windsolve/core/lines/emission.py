"""Optically thin emission lines (cgs floats): F(w) = 2 pi * integral of j r^2 / v dr.

Two evaluations of the same sum (:func:`emission_flux`): suffix sums of the
per-sub-interval integrals when v(r) and the occultation edge rise outward,
and the general loop over every sub-interval otherwise; the occultation edge
v sqrt(1 - (R_c / r)^2) is crossed on the exact curve.  The grid and its
interpolation are those of :mod:`windsolve.core.lines.grid`.
"""

import math

import numpy as np
from numba import njit

from ..profile import loglinear_segment
from .grid import NSUB, _refine, nondecreasing

TWO_PI = 2.0 * math.pi
BY_EITHER, BY_SUFFIX, BY_LOOP = 0, 1, 2  # how _emission_flux_refined sums


@njit(cache=True, error_model="numpy")
def _clip_negative(fa, fb, t0, t1):
    """Part of [t0, t1] where the linear f(t) = fa + (fb - fa) t is < 0."""
    if fa < 0.0 and fb < 0.0:
        return t0, t1
    if fa >= 0.0 and fb >= 0.0:
        return t0, t0
    tc = fa / (fa - fb)
    if fa < 0.0:
        return t0, min(t1, tc)
    return max(t0, tc), t1


@njit(cache=True, error_model="numpy")
def _loglinear_integral(dr, lga, lgb, t0, t1):
    """Integral over t in [t0, t1] (r = r_a + t dr) of exp(lga + t (lgb - lga)) dr."""
    k = lgb - lga
    return loglinear_segment(dr, math.exp(lga + k * t0), k, t1 - t0)


@njit(cache=True, error_model="numpy")
def _occultation_crossing(ra, rb, va, vb, Rc, w):
    """t in [0, 1] where v(t) sqrt(1 - (Rc / r(t))^2) = w, by bisection (one sign change)."""
    lo = 0.0
    hi = 1.0
    q = 1.0 - (Rc / ra) ** 2
    f_lo = w - va * math.sqrt(q if q > 0.0 else 0.0)
    for _ in range(60):
        mid = 0.5 * (lo + hi)
        r = ra + mid * (rb - ra)
        q = 1.0 - (Rc / r) ** 2
        f = w - (va + mid * (vb - va)) * math.sqrt(q if q > 0.0 else 0.0)
        if (f < 0.0) == (f_lo < 0.0):
            lo = mid
            f_lo = f
        else:
            hi = mid
        if hi - lo < 1e-13:
            break
    return 0.5 * (lo + hi)


@njit(cache=True, error_model="numpy")
def _emission_nodes(rf, vf, lf, lv, n, Rc, occult):
    """ln(j r^2 / v), the occultation edge hi(r) and the whole-sub-interval integrals."""
    m = rf.shape[0]
    lg = np.empty(m)
    hi = np.empty(m)
    for i in range(m):
        lg[i] = n * lf[i] + 2.0 * math.log(rf[i]) - lv[i]
        if occult:
            q = 1.0 - (Rc / rf[i]) ** 2
            hi[i] = vf[i] * math.sqrt(q) if q > 0.0 else 0.0
        else:
            hi[i] = vf[i]
    full = np.empty(max(m - 1, 0))  # the whole sub-interval, computed once
    ga = math.exp(lg[0]) if m > 0 else 0.0
    for i in range(m - 1):
        # = _loglinear_integral(dr, lg[i], lg[i + 1], 0, 1), sharing exp(lg) between intervals
        gb = math.exp(lg[i + 1])
        full[i] = loglinear_segment(rf[i + 1] - rf[i], ga, lg[i + 1] - lg[i], 1.0)
        ga = gb
    return lg, hi, full


@njit(cache=True, error_model="numpy")
def _emission_loop(rf, vf, lg, hi, full, Rc, occult, w):
    """F(w) visiting every sub-interval for every w (any v(r))."""
    m = rf.shape[0]
    out = np.zeros(w.shape[0])
    for k in range(w.shape[0]):
        wk = w[k]
        acc = 0.0
        for i in range(m - 1):
            # visible where -v(t) - w < 0 and w - w_max(t) < 0
            t0, t1 = _clip_negative(-vf[i] - wk, -vf[i + 1] - wk, 0.0, 1.0)
            if t1 <= t0:
                continue
            fa = wk - hi[i]
            fb = wk - hi[i + 1]
            if occult and (fa < 0.0) != (fb < 0.0):
                # the occultation edge v sqrt(1 - (Rc/r)^2) is far from linear
                # just outside Rc: find where it equals w on the exact curve
                tc = _occultation_crossing(rf[i], rf[i + 1], vf[i], vf[i + 1], Rc, wk)
                if fa < 0.0:
                    t1 = min(t1, tc)
                else:
                    t0 = max(t0, tc)
            else:
                t0, t1 = _clip_negative(fa, fb, t0, t1)
            if t1 <= t0:
                continue
            if t0 == 0.0 and t1 == 1.0:
                acc += full[i]
            else:
                acc += _loglinear_integral(rf[i + 1] - rf[i], lg[i], lg[i + 1], t0, t1)
        out[k] = TWO_PI * acc
    return out


@njit(cache=True, error_model="numpy", inline="always")
def _edge_polynomial(t, xa, ea, dx, va, dv, w2):
    """(P, dP/dt) of :func:`_occultation_root` at t: P = v^2 (x^2 - 1) - w^2 x^2."""
    x = xa + t * dx
    e = ea + t * dx
    v = va + t * dv
    p = v * v * e * (x + 1.0) - w2 * x * x
    dp = 2.0 * v * dv * e * (x + 1.0) + v * v * 2.0 * x * dx - 2.0 * w2 * x * dx
    return p, dp


@njit(cache=True, error_model="numpy")
def _occultation_root(ra, rb, va, vb, Rc, w, t_guess):
    """t in [0, 1] where v(t) sqrt(1 - (Rc / r(t))^2) = w, by safeguarded Newton.

    The same crossing as :func:`_occultation_crossing` (v and r linear in t),
    found as the root of the smooth polynomial
    P(t) = v^2 (x^2 - 1) - w^2 x^2, x = r / Rc (P has the sign of the edge
    minus w and no square-root singularity at r = Rc).  Expects the edge
    <= w at t = 0 and > w at t = 1; keeps a bracket and bisects whenever a
    Newton step would leave it.
    """
    xa = ra / Rc
    dx = (rb - ra) / Rc
    ea = (ra - Rc) / Rc  # x - 1 at t = 0, without cancellation
    dv = vb - va
    w2 = w * w
    lo = 0.0
    hi = 1.0
    # start from the straight line through the end values of P
    p0 = va * va * ea * (xa + 1.0) - w2 * xa * xa
    x1 = xa + dx
    p1 = vb * vb * (ea + dx) * (x1 + 1.0) - w2 * x1 * x1
    if p0 >= 0.0:
        return 0.0
    if p1 <= 0.0:
        return 1.0
    t = t_guess if 0.0 < t_guess < 1.0 else p0 / (p0 - p1)
    for _ in range(60):
        p, dp = _edge_polynomial(t, xa, ea, dx, va, dv, w2)
        if p > 0.0:
            hi = t
        elif p < 0.0:
            lo = t
        else:
            return t
        tn = t - p / dp if dp > 0.0 else 0.5 * (lo + hi)
        if not (lo < tn < hi):
            tn = 0.5 * (lo + hi)
        if abs(tn - t) <= 1e-12 or hi - lo <= 1e-15:
            # converging quadratically: one more Newton step from here is exact
            p, dp = _edge_polynomial(tn, xa, ea, dx, va, dv, w2)
            if dp > 0.0:
                tf = tn - p / dp
                if lo <= tf <= hi:
                    return tf
            return tn
        t = tn
    return t


@njit(cache=True, error_model="numpy")
def _suffix_sums(full):
    """suffix[i] = sum of full[i:] (m = len(full) + 1 entries, suffix[m - 1] = 0)."""
    m = full.shape[0] + 1
    suffix = np.empty(m)
    suffix[m - 1] = 0.0
    for i in range(m - 2, -1, -1):
        suffix[i] = suffix[i + 1] + full[i]
    return suffix


@njit(cache=True, error_model="numpy")
def _seen_from(i, a, red, rf, vf, lg, hi, full, suffix, Rc):
    """F(w) / 2 pi when the last node with g <= a is i (g = hi if red else v).

    The suffix sum beyond node i + 1 plus the seen part of sub-interval i:
    from where v = a (blue side, or no occultation) or where the occultation
    edge hi = a (red side, on the exact curve) to node i + 1.
    """
    if red:
        # start from hi^2 linear in t (exact as r -> Rc, where hi ~ sqrt(r - Rc))
        h0 = hi[i] * hi[i]
        tc = _occultation_root(rf[i], rf[i + 1], vf[i], vf[i + 1], Rc, a,
                               (a * a - h0) / (hi[i + 1] * hi[i + 1] - h0))
    else:
        fa = a - vf[i]
        tc = fa / (fa - (a - vf[i + 1]))
    if tc <= 0.0:
        part = full[i]
    elif tc >= 1.0:
        part = 0.0
    else:
        part = _loglinear_integral(rf[i + 1] - rf[i], lg[i], lg[i + 1], tc, 1.0)
    return suffix[i + 1] + part


@njit(cache=True, error_model="numpy")
def _emission_prefix(rf, vf, lg, hi, full, Rc, occult, w):
    """F(w) as a suffix sum + one partial sub-interval (v and hi non-decreasing)."""
    m = rf.shape[0]
    out = np.zeros(w.shape[0])
    suffix = _suffix_sums(full)
    # last node with g <= a, for g = v and g = hi: found by walking from the
    # previous w's answer (w is sorted, so each walk is a step or two)
    at_v = m - 1
    at_hi = 0
    for k in range(w.shape[0]):
        wk = w[k]
        red = occult and wk >= 0.0
        # seen where g(r) > a: g = v, a = |w| (blue side, or no occultation)
        # or g = hi, a = w (red side behind the core); g non-decreasing, so
        # that is everything outside the last node with g <= a
        a = wk if red else abs(wk)
        g = hi if red else vf
        if g[0] > a:
            out[k] = TWO_PI * suffix[0]
            continue
        if g[m - 1] <= a:
            continue
        i = at_hi if red else at_v  # g[0] <= a < g[m - 1] here
        while g[i] > a:
            i -= 1
        while g[i + 1] <= a:
            i += 1
        if red:
            at_hi = i
        else:
            at_v = i
        out[k] = TWO_PI * _seen_from(i, a, red, rf, vf, lg, hi, full, suffix, Rc)
    return out


@njit(cache=True, error_model="numpy")
def emission_flux_general(r, v, rho, n, Rc, occult, w):
    """:func:`emission_flux` by the general loop (every w x every sub-interval).

    Parameters
    ----------
    r, v, rho, n, Rc, occult, w
        As :func:`emission_flux`: radius [cm], velocity [cm/s], density [g/cm3],
        emissivity power, core radius [cm], occultation flag, velocities [cm/s].

    Returns
    -------
    ndarray
        F(w) [cgs, unnormalised] (docs/physics.md, eq. 27).
    """
    rf, vf, lf, lv = _refine(r, v, rho, Rc if occult else r[0], NSUB)
    return _emission_flux_refined(rf, vf, lf, lv, n, Rc, occult, w, BY_LOOP)


@njit(cache=True, error_model="numpy")
def emission_flux_monotonic(r, v, rho, n, Rc, occult, w):
    """:func:`emission_flux` by suffix sums; only valid when v is non-decreasing
    outside the start radius (no check: :func:`emission_flux` checks).

    Parameters
    ----------
    r, v, rho, n, Rc, occult, w
        As :func:`emission_flux`: radius [cm], velocity [cm/s], density [g/cm3],
        emissivity power, core radius [cm], occultation flag, velocities [cm/s].

    Returns
    -------
    ndarray
        F(w) [cgs, unnormalised] (docs/physics.md, eq. 27).
    """
    rf, vf, lf, lv = _refine(r, v, rho, Rc if occult else r[0], NSUB)
    return _emission_flux_refined(rf, vf, lf, lv, n, Rc, occult, w, BY_SUFFIX)


@njit(cache=True, error_model="numpy")
def emission_flux(r, v, rho, n, Rc, occult, w):
    """Optically thin line flux F(w) for an emissivity j = rho^n (per unit volume).

    Parameters
    ----------
    r, v, rho : ndarray
        Radius [cm] (increasing), velocity [cm/s] (> 0), density [g/cm3].
    n : float
        Emissivity power, j = rho^n.
    Rc : float
        Core radius [cm]; used only when ``occult`` is true.
    occult : bool
        Hide what lies behind the core and all gas inside it (r < Rc).
        When false, every tabulated shell is seen whole.
    w : ndarray
        Observed velocities [cm/s].

    Returns
    -------
    ndarray
        F(w) = 2 pi * integral of rho^n r^2 / v dr, in cgs (callers normalise).

    Notes
    -----
    .. math::

        F(w) = 2\\pi \\int_{v(r) > |w|} j(r) \\frac{r^2}{v(r)} \\, dr

    less, with occultation, the red part w > v sqrt(1 - (Rc/r)^2) of every
    shell (docs/physics.md, eq. 27; Lamers & Cassinelli 1999, ch. 2, from memory).
    Inside each sub-interval the bound -v(r) < w is linear in r, the
    occultation edge w < v sqrt(1 - (Rc/r)^2) is found on the exact curve,
    and j r^2 / v is exponential in r, so each piece is integrated exactly
    and F(w) is continuous in w.  A constant-velocity shell is exact.

    Two evaluations of the same sum: when v(r) and the occultation edge are
    non-decreasing outward on the sub-divided grid (the normal case) the
    region seen at w is one outer part of the grid, and F(w) is a suffix sum
    of the per-sub-interval integrals plus one partial sub-interval, found by
    walking from the previous velocity's (:func:`emission_flux_monotonic`,
    O(m + N_w));
    otherwise every velocity visits every sub-interval
    (:func:`emission_flux_general`, O(m N_w)).  Both give the same numbers
    to rounding.
    """
    rf, vf, lf, lv = _refine(r, v, rho, Rc if occult else r[0], NSUB)
    return _emission_flux_refined(rf, vf, lf, lv, n, Rc, occult, w, BY_EITHER)


@njit(cache=True, error_model="numpy")
def _emission_flux_refined(rf, vf, lf, lv, n, Rc, occult, w, method):
    """:func:`emission_flux` on a grid from :func:`grid._refine` (started at Rc if occult);
    ``method`` BY_EITHER (suffix sums when they apply), BY_SUFFIX or BY_LOOP."""
    if rf.shape[0] < 2:
        return np.zeros(w.shape[0])
    lg, hi, full = _emission_nodes(rf, vf, lf, lv, n, Rc, occult)
    if method == BY_SUFFIX or (method == BY_EITHER and nondecreasing(vf)
                               and nondecreasing(hi)):
        return _emission_prefix(rf, vf, lg, hi, full, Rc, occult, w)
    return _emission_loop(rf, vf, lg, hi, full, Rc, occult, w)
