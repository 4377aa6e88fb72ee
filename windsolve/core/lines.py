"""Line-profile kernels (cgs floats): optically thin emission, Sobolev P Cygni, broadening.

These are the compiled twins of :mod:`windsolve.lines`, which validates input,
converts units once and calls them.  Every kernel takes plain float64 arrays in
cgs: radius ``r`` [cm], velocity ``v`` [cm/s], density ``rho`` [g/cm3] on one
increasing radial grid, and observed Doppler velocities ``w`` [cm/s] (positive
= red-shifted, away from the observer).

Geometry.  The observer lies along +z.  A parcel at radius r moving radially
outward with speed v(r), at direction cosine mu = z / r, is seen at
w = -v mu, at impact parameter p = r sqrt(1 - mu^2).  A shell of radius r
therefore spreads its light uniformly over -v(r) < w < v(r) (Lamers &
Cassinelli 1999, Introduction to Stellar Winds, ch. 2, from memory).  Parcels
behind the opaque core of radius R_c (z < 0 and p < R_c) are hidden: for a
shell with r > R_c that is its red part w > v(r) sqrt(1 - (R_c / r)^2).

Interpolation.  Between tabulated points ln v and ln rho are linear in r
(exact for the exponential, nearly hydrostatic base of a solved profile,
where rho v r^2 = const makes v grow exponentially; second-order close to
linear v where v changes slowly).  Each tabulated interval can be cut into
``NSUB`` sub-intervals; between those the integration bounds (v, and the
occultation edge) are linear in r, and the emission integrand j r^2 / v is
exponential in r.  A solved profile is dense enough that ``NSUB = 1`` does:
on the demo wind with porosity lengths of 1 and 10 Rsun the unbroadened
FWHM and HWZI at NSUB = 1 differ from NSUB = 64 by at most 5e-6 relative,
the blue edge by 3e-10; with 60 Rsun, where the line is a spike from the
hydrostatic base 0.03 km/s wide, by 8e-4 of that width (2e-5 km/s).
The emitting region is the tabulated profile: nothing is extrapolated
beyond its last point.
"""

import math

import numpy as np
from numba import njit

from .roots import search_left, search_right

TWO_PI = 2.0 * math.pi
SQRT_TWO_PI = math.sqrt(2.0 * math.pi)
SQRT_TWO = math.sqrt(2.0)
BY_EITHER, BY_SUFFIX, BY_LOOP = 0, 1, 2  # how _emission_flux_refined sums
NSUB = 1  # sub-intervals per tabulated interval (see the module docstring)
N_MU = 16  # Gauss-Legendre nodes of the angle averages in the escape probabilities
TAU_SATURATED = 40.0  # 1 - exp(-tau) == 1 to double precision above this
TAU_THIN = 1e-8  # (1 - exp(-tau)) / tau == 1 - tau/2 below this
KERNEL_SIGMAS = 7.0  # the broadening kernel is cut this many sigma out
N_EDGE_SCAN = 24  # P Cygni edge: points at -v_max + gap / 2^j, j = 24..1, before the grid
EDGE_XTOL = 1e-9  # ... and the crossing is located to this fraction of v_max
MONOTONIC_RTOL = 1e-6  # an outward fall of v by less than this * v_max is noise

_x, _wt = np.polynomial.legendre.leggauss(N_MU)
MU_NODES = 0.5 * (_x + 1.0)  # Gauss-Legendre on [0, 1]
MU_WEIGHTS = 0.5 * _wt


@njit(cache=True, error_model="numpy")
def refine(r, v, rho, r_start, nsub):
    """Sub-divided grid from ``max(r_start, r[0])`` to ``r[-1]``.

    Returns ``(rf, vf, lnrho_f)``; ln v and ln rho are linear in r inside
    each tabulated interval.  Empty arrays when ``r_start >= r[-1]``.
    """
    rf, vf, lf, _ = _refine(r, v, rho, r_start, nsub)
    return rf, vf, lf


@njit(cache=True, error_model="numpy")
def _refine(r, v, rho, r_start, nsub):
    """:func:`refine`, also returning ln v at the fine nodes.

    Inside a whole tabulated interval the sub-nodes are evenly spaced, so v
    there is v[i] q^j with q = (v[i+1] / v[i])^(1/nsub): one exp per interval.
    """
    n = r.shape[0]
    if r_start >= r[n - 1]:
        return np.empty(0), np.empty(0), np.empty(0), np.empty(0)
    i0 = 0
    if r_start > r[0]:
        while r[i0 + 1] <= r_start:
            i0 += 1
    else:
        r_start = r[0]
    m = (n - 1 - i0) * nsub + 1
    rf = np.empty(m)
    vf = np.empty(m)
    lf = np.empty(m)
    lv = np.empty(m)
    k = 0
    lb = math.log(rho[i0])
    lvb = math.log(v[i0])
    for i in range(i0, n - 1):
        a = r[i]
        b = r[i + 1]
        la = lb
        lb = math.log(rho[i + 1])
        lva = lvb
        lvb = math.log(v[i + 1])
        if i == i0 and r_start > a:
            lo = r_start
            for j in range(nsub):
                x = lo + (b - lo) * j / nsub
                f = (x - a) / (b - a)
                rf[k] = x
                lv[k] = lva + f * (lvb - lva)
                vf[k] = math.exp(lv[k])
                lf[k] = la + f * (lb - la)
                k += 1
        else:
            q = math.exp((lvb - lva) / nsub)
            vj = v[i]
            for j in range(nsub):
                f = j / nsub
                rf[k] = a + (b - a) * j / nsub
                lv[k] = lva + f * (lvb - lva)
                vf[k] = vj
                vj *= q
                lf[k] = la + f * (lb - la)
                k += 1
    rf[k] = r[n - 1]
    vf[k] = v[n - 1]
    lf[k] = lb
    lv[k] = lvb
    return rf, vf, lf, lv


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
    ga = math.exp(lga + k * t0)
    x = k * (t1 - t0)
    if abs(x) < 1e-12:
        return dr * ga * (t1 - t0)
    return dr * ga * math.expm1(x) / k


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
        x = lg[i + 1] - lg[i]
        dr = rf[i + 1] - rf[i]
        full[i] = dr * ga if abs(x) < 1e-12 else dr * ga * math.expm1(x) / x
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
def _exact_crossing(level, rf, vf, lg, full, suffix, Rc, occult):
    """(w_-, w_+) where the unbroadened line, v and hi non-decreasing, has fallen to
    ``level`` times its peak: exactly, on the unsampled profile.

    The peak is F(0) (everything from the first node out is seen; F falls
    on both sides, as the seen region only shrinks with |w|).  At a level
    the seen region is r > r(t_c) for the same t_c on both sides -- the
    blue side ends where v = |w|, the red side (with occultation) where
    the occultation edge v sqrt(1 - (Rc/r)^2) = w -- so t_c follows from the
    flux alone: the sub-interval j where the suffix sums pass level * F(0),
    then the fraction q of its (exponential) integrand that must lie
    beyond t_c, e^(k t_c) = 1 + (e^k - 1)(1 - q).  Then w_- = -v(t_c) and
    w_+ = v(t_c), or v(t_c) sqrt(1 - (Rc / r(t_c))^2) with occultation
    (v and r linear in t, as the flux sums take them).
    """
    m = rf.shape[0]
    target = level * suffix[0]
    lo = 0  # suffix[lo] >= target > suffix[up]; suffix[m - 1] = 0
    up = m - 1
    while up - lo > 1:
        mid = (lo + up) // 2
        if suffix[mid] >= target:
            lo = mid
        else:
            up = mid
    j = lo
    q = (target - suffix[j + 1]) / full[j] if full[j] > 0.0 else 1.0
    q = min(max(q, 0.0), 1.0)
    k = lg[j + 1] - lg[j]
    if abs(k) < 1e-12:
        tc = 1.0 - q
    else:
        tc = math.log1p(math.expm1(k) * (1.0 - q)) / k
    tc = min(max(tc, 0.0), 1.0)
    vt = vf[j] + tc * (vf[j + 1] - vf[j])
    if not occult:
        return -vt, vt
    rt = rf[j] + tc * (rf[j + 1] - rf[j])
    x = 1.0 - (Rc / rt) ** 2
    return -vt, (vt * math.sqrt(x) if x > 0.0 else 0.0)


@njit(cache=True, error_model="numpy")
def _exact_widths(rf, vf, lg, full, Rc, occult, hwzi_fraction):
    """(peak, FWHM, HWZI) of the unbroadened line on the exact profile (v and hi
    non-decreasing; :func:`_exact_crossing`); FWHM and HWZI nan without flux."""
    suffix = _suffix_sums(full)
    peak = TWO_PI * suffix[0]
    if not peak > 0.0:
        return peak, np.nan, np.nan
    lo, hi = _exact_crossing(0.5, rf, vf, lg, full, suffix, Rc, occult)
    zlo, zhi = _exact_crossing(hwzi_fraction, rf, vf, lg, full, suffix, Rc, occult)
    return peak, hi - lo, max(-zlo, zhi)


@njit(cache=True, error_model="numpy")
def nondecreasing(a):
    """True when a[i+1] >= a[i] everywhere."""
    for i in range(a.shape[0] - 1):
        if a[i + 1] < a[i]:
            return False
    return True


@njit(cache=True, error_model="numpy")
def emission_flux_general(r, v, rho, n, Rc, occult, w):
    """:func:`emission_flux` by the general loop (every w x every sub-interval)."""
    rf, vf, lf, lv = _refine(r, v, rho, Rc if occult else r[0], NSUB)
    return _emission_flux_refined(rf, vf, lf, lv, n, Rc, occult, w, BY_LOOP)


@njit(cache=True, error_model="numpy")
def emission_flux_monotonic(r, v, rho, n, Rc, occult, w):
    """:func:`emission_flux` by suffix sums; only valid when v is non-decreasing
    outside the start radius (no check: :func:`emission_flux` checks)."""
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
    """:func:`emission_flux` on a grid from :func:`_refine` (started at Rc if occult);
    ``method`` BY_EITHER (suffix sums when they apply), BY_SUFFIX or BY_LOOP."""
    if rf.shape[0] < 2:
        return np.zeros(w.shape[0])
    lg, hi, full = _emission_nodes(rf, vf, lf, lv, n, Rc, occult)
    if method == BY_SUFFIX or (method == BY_EITHER and nondecreasing(vf)
                               and nondecreasing(hi)):
        return _emission_prefix(rf, vf, lg, hi, full, Rc, occult, w)
    return _emission_loop(rf, vf, lg, hi, full, Rc, occult, w)


@njit(cache=True, error_model="numpy")
def _escape(tau):
    """beta(tau) = (1 - exp(-tau)) / tau, with its limits 1 and 0."""
    if tau < TAU_THIN:
        return 1.0 - 0.5 * tau
    if tau == np.inf:
        return 0.0
    if tau > TAU_SATURATED:  # 1 - exp(-tau) == 1 exactly: skip expm1
        return 1.0 / tau
    return -math.expm1(-tau) / tau


@njit(cache=True, error_model="numpy")
def sobolev_tau(K, rho, r, v, dvdr, mu):
    """Sobolev optical depth tau = K rho / (mu^2 dv/dr + (1 - mu^2) v / r).

    ``K`` [cm^3 g^-1 s^-1] holds the line's cross-section and population
    (Castor 1970, MNRAS 149, 111; from memory).  A zero velocity gradient
    along the ray gives tau = inf.
    """
    Q = mu * mu * dvdr + (1.0 - mu * mu) * v / r
    if Q <= 0.0:
        return np.inf
    return K * rho / Q


@njit(cache=True, error_model="numpy")
def escape_probabilities(K, rho, r, v, dvdr, Rc):
    """Angle-averaged escape and core-penetration probabilities (beta, beta_c).

    .. math::

        \\beta = \\frac12 \\int_{-1}^{1} \\frac{1 - e^{-\\tau(\\mu)}}{\\tau(\\mu)} d\\mu,
        \\qquad
        \\beta_c = \\frac12 \\int_{\\mu_*}^{1} \\frac{1 - e^{-\\tau(\\mu)}}{\\tau(\\mu)} d\\mu,
        \\qquad \\mu_* = \\sqrt{1 - (R_c / r)^2}

    (Castor 1970, MNRAS 149, 111, from memory).  For a pure-scattering line
    lit by a uniform core of intensity I_c the Sobolev source function is
    S = (beta_c / beta) I_c; in the optically thin limit beta -> 1 and
    beta_c -> W = (1 - mu_*) / 2, the dilution factor.
    """
    q = 1.0 - (Rc / r) ** 2
    mu_s = math.sqrt(q) if q > 0.0 else 0.0
    beta = 0.0
    beta_c = 0.0
    for k in range(N_MU):
        beta += MU_WEIGHTS[k] * _escape(sobolev_tau(K, rho, r, v, dvdr, MU_NODES[k]))
        mu = mu_s + (1.0 - mu_s) * MU_NODES[k]
        beta_c += MU_WEIGHTS[k] * _escape(sobolev_tau(K, rho, r, v, dvdr, mu))
    beta_c *= 0.5 * (1.0 - mu_s)
    return beta, beta_c


@njit(cache=True, error_model="numpy")
def velocity_gradient(r, v):
    """dv/dr on a non-uniform grid: 3-point centred inside, 3-point one-sided at the ends."""
    n = r.shape[0]
    d = np.empty(n)
    if n == 2:
        d[0] = d[1] = (v[1] - v[0]) / (r[1] - r[0])
        return d
    for i in range(1, n - 1):
        h1 = r[i] - r[i - 1]
        h2 = r[i + 1] - r[i]
        d[i] = (-h2 / (h1 * (h1 + h2)) * v[i - 1] + (h2 - h1) / (h1 * h2) * v[i]
                + h1 / (h2 * (h1 + h2)) * v[i + 1])
    h1 = r[1] - r[0]
    h2 = r[2] - r[1]
    d[0] = (-(2.0 * h1 + h2) / (h1 * (h1 + h2)) * v[0] + (h1 + h2) / (h1 * h2) * v[1]
            - h1 / (h2 * (h1 + h2)) * v[2])
    h1 = r[n - 2] - r[n - 3]
    h2 = r[n - 1] - r[n - 2]
    d[n - 1] = (h2 / (h1 * (h1 + h2)) * v[n - 3] - (h1 + h2) / (h1 * h2) * v[n - 2]
                + (2.0 * h2 + h1) / (h2 * (h1 + h2)) * v[n - 1])
    return d


@njit(cache=True, error_model="numpy")
def pcygni_flux(r, v, rho, K, Rc, occult, w):
    """Sobolev P Cygni profile F(w) / F_c of a pure-scattering resonance line.

    Parameters
    ----------
    r, v, rho : ndarray
        Radius [cm] (increasing), velocity [cm/s] (> 0, non-decreasing in r
        outside ``Rc``: one resonance point per ray), density [g/cm3].
    K : float
        Line strength [cm^3 g^-1 s^-1] in tau = K rho / Q (:func:`sobolev_tau`).
    Rc : float
        Radius of the uniformly bright core [cm]; only gas at r >= Rc takes part.
    occult : bool
        Hide the scattered light from behind the core.
    w : ndarray
        Observed velocities [cm/s].

    Returns
    -------
    ndarray
        F(w) / F_c, where F_c = pi Rc^2 I_c is the core's flux (continuum = 1).

    Notes
    -----
    Core-halo, pure scattering, Sobolev approximation (Castor 1970; Lamers &
    Cassinelli 1999, ch. 2 and ch. 8, from memory).  At velocity w the
    resonance surface is mu = -w / v(r); on it p^2 = r^2 (1 - w^2 / v^2), and
    for dv/dr >= 0, dp^2/dr = 2 r^2 Q / v > 0, so each ray p meets it once.
    With that surface as the integration variable,

    .. math::

        \\frac{F(w)}{F_c} = 1 + \\frac{1}{R_c^2} \\int \\left[
            \\frac{S}{I_c} - \\mathbb{1}_{\\rm front\\ of\\ core} \\right]
            \\left(1 - e^{-\\tau(r, \\mu)}\\right) dp^2

    over the surface outside the core, where the indicator is 1 for p < Rc
    with w < 0 (the gas in front of the disk absorbs the core's light), the
    part with p < Rc and w > 0 is dropped when ``occult`` (behind the disk),
    and S / I_c = beta_c / beta (:func:`escape_probabilities`).  The
    integrand is interpolated linearly in p^2 between nodes (trapezoid), the
    surface is cut exactly at p^2 = Rc^2 and where v(r) = |w| (p = 0).
    """
    rf, vf, lf = refine(r, v, rho, Rc, NSUB)
    m = rf.shape[0]
    out = np.ones(w.shape[0])
    if m < 2:
        return out
    dv_tab = velocity_gradient(r, v)
    df = np.empty(m)
    rhof = np.empty(m)
    s = np.empty(m)
    _pcygni_nodes(r, dv_tab, rf, vf, lf, K, Rc, df, rhof, s, 0, m)
    for k in range(w.shape[0]):
        out[k] = _pcygni_at(w[k], 0, rf, vf, lf, df, rhof, s, K, Rc, occult)
    return out


@njit(cache=True, error_model="numpy")
def _pcygni_nodes(r, dv_tab, rf, vf, lf, K, Rc, df, rhof, s, lo, hi):
    """Fill the gradient, density and source function S/I_c at fine nodes lo..hi-1.

    The gradient is linear in r between tabulated points; S / I_c =
    beta_c / beta (:func:`escape_probabilities`), the dilution factor where
    beta = 0.
    """
    n = r.shape[0]
    # tabulated interval of node lo: the first j with r[j+1] >= rf[lo], at most n - 2
    a = search_left(r, rf[lo], 0, n - 1)
    j = min(max(a - 1, 0), n - 2)
    for i in range(lo, hi):
        while j < n - 2 and r[j + 1] < rf[i]:
            j += 1
        f = (rf[i] - r[j]) / (r[j + 1] - r[j])
        df[i] = max(0.0, dv_tab[j] + f * (dv_tab[j + 1] - dv_tab[j]))
        rhof[i] = math.exp(lf[i])
        beta, beta_c = escape_probabilities(K, rhof[i], rf[i], vf[i], df[i], Rc)
        if beta > 0.0:
            s[i] = beta_c / beta
        else:
            q = 1.0 - (Rc / rf[i]) ** 2
            s[i] = 0.5 * (1.0 - (math.sqrt(q) if q > 0.0 else 0.0))


@njit(cache=True, error_model="numpy")
def _pcygni_at(wk, i_first, rf, vf, lf, df, rhof, s, K, Rc, occult):
    """F(w) / F_c at one velocity, summing the resonance surface from node i_first.

    Sub-intervals before i_first must lie wholly at v <= |w| (off the
    surface); node values df, rhof, s are needed from i_first on.
    """
    m = rf.shape[0]
    Rc2 = Rc * Rc
    aw = abs(wk)
    front = wk < 0.0
    acc = 0.0
    have = False  # node i values valid (on the surface)
    pa = 0.0
    sa = 0.0
    ga = 0.0
    for i in range(i_first, m - 1):
        vb = vf[i + 1]
        if aw >= vb:
            have = False
            continue
        # values at node i+1
        mu2 = (aw / vb) ** 2
        pb = rf[i + 1] ** 2 * (1.0 - mu2)
        Q = mu2 * df[i + 1] + (1.0 - mu2) * vb / rf[i + 1]
        tau = K * rhof[i + 1] / Q if Q > 0.0 else np.inf
        gb = 1.0 if tau > TAU_SATURATED else -math.expm1(-tau)
        sb = s[i + 1]
        if not have:
            # start where v(t) = |w| (p = 0), or at node i if it is already on
            va = vf[i]
            if aw < va:
                t = 0.0
            else:
                t = (aw - va) / (vb - va)
            rt = rf[i] + t * (rf[i + 1] - rf[i])
            vt = va + t * (vb - va)
            dt = df[i] + t * (df[i + 1] - df[i])
            rhot = math.exp(lf[i] + t * (lf[i + 1] - lf[i]))
            mu2 = (aw / vt) ** 2 if aw < vt else 1.0
            pa = rt * rt * (1.0 - mu2)
            Q = mu2 * dt + (1.0 - mu2) * vt / rt
            tau = K * rhot / Q if Q > 0.0 else np.inf
            ga = 1.0 if tau > TAU_SATURATED else -math.expm1(-tau)
            sa = s[i] + t * (s[i + 1] - s[i])
        # trapezoid in p^2 on the inner (p < Rc) and outer parts
        if pb <= Rc2 or pa >= Rc2:
            if pa < Rc2:  # wholly over the core
                if front:
                    acc += 0.5 * ((sa - 1.0) * ga + (sb - 1.0) * gb) * (pb - pa)
                elif not occult:
                    acc += 0.5 * (sa * ga + sb * gb) * (pb - pa)
            else:
                acc += 0.5 * (sa * ga + sb * gb) * (pb - pa)
        else:
            lam = (Rc2 - pa) / (pb - pa)
            sc = sa + lam * (sb - sa)
            gc = ga + lam * (gb - ga)
            if front:
                acc += 0.5 * ((sa - 1.0) * ga + (sc - 1.0) * gc) * (Rc2 - pa)
            elif not occult:
                acc += 0.5 * (sa * ga + sc * gc) * (Rc2 - pa)
            acc += 0.5 * (sc * gc + sb * gb) * (pb - Rc2)
        pa = pb
        sa = sb
        ga = gb
        have = True
    return 1.0 + acc / Rc2


@njit(cache=True, error_model="numpy")
def _first_on_surface(vf, aw):
    """The first sub-interval i with vf[i+1] > aw (vf non-decreasing); m - 1 if none."""
    return search_right(vf, aw, 1, vf.shape[0]) - 1


@njit(cache=True, error_model="numpy")
def pcygni_edge(r, v, rho, K, Rc, occult, w, sigma, depth):
    """Blue-edge velocity [cm/s] of the Sobolev P Cygni profile (nan if not reached).

    Parameters
    ----------
    r, v, rho, K, Rc, occult
        As for :func:`pcygni_flux`; v must be non-decreasing outside ``Rc``
        (as :func:`monotonic_outside` makes it).
    w : ndarray
        The evenly spaced velocity grid [cm/s] of the profile.
    sigma : float
        Gaussian broadening [cm/s] (standard deviation); 0 for none.
    depth : float
        The absorption depth 1 - F/F_c that defines the edge.

    Returns
    -------
    float
        The most negative w at which 1 - F/F_c reaches ``depth``:

        * ``sigma == 0``: the exact (unsampled) profile of
          :func:`pcygni_flux` is scanned from -v_max (beyond which F = F_c
          exactly) inward, at -v_max + g / 2^j (j = 24, ..., 1; g the
          distance from -v_max to the first grid point inside it) and then
          at the grid points up to w = 0 (the red side is never below the
          continuum); the first scan point with depth >= ``depth``
          brackets the edge with the point before it, and the crossing
          between them is found by a safeguarded regula falsi (Illinois)
          to 1e-9 v_max;
        * ``sigma > 0``: the broadened profile exists only on the grid, so
          the crossing is linearly interpolated between w_{k-1} and w_k of
          ``gaussian_broaden(pcygni_flux(...))``, as
          :func:`outermost_crossings` does.

        nan when no grid point reaches ``depth`` (or the first one does).

    Notes
    -----
    Same numbers as measuring the full grid profile, for a fraction of the
    cost: the profile is evaluated only at the velocities the search needs
    (beyond -v_max it is exactly 1), each evaluation sums only the part of
    the resonance surface with v(r) > |w| (an outer part of the grid when v
    is non-decreasing), and the source function at a node is computed the
    first time a velocity reaches it.
    """
    rf, vf, lf = refine(r, v, rho, Rc, NSUB)
    return _pcygni_edge_refined(rf, vf, lf, r, v, K, Rc, occult, w, sigma, depth)


@njit(cache=True, error_model="numpy")
def _pcygni_edge_refined(rf, vf, lf, r, v, K, Rc, occult, w, sigma, depth):
    """:func:`pcygni_edge` on the grid of ``refine(r, v, rho, Rc, NSUB)``."""
    m = rf.shape[0]
    N = w.shape[0]
    if m < 2 or N < 2:
        return np.nan
    dv_tab = velocity_gradient(r, v)
    df = np.empty(m)
    rhof = np.empty(m)
    s = np.empty(m)
    mono = nondecreasing(vf)
    if mono:
        ready = m  # nodes ready..m-1 hold df, rhof, s
        vtop = vf[m - 1]
    else:  # not the documented use: evaluate every node, sum from the start
        _pcygni_nodes(r, dv_tab, rf, vf, lf, K, Rc, df, rhof, s, 0, m)
        ready = 0
        vtop = vf.max()
    if sigma <= 0.0:
        # scan from -v_max inward: first geometrically closer points in the
        # first grid cell inside -v_max, then the grid points
        k = 0
        while k < N and -w[k] >= vtop:
            k += 1
        if k == 0 or k == N:
            return np.nan
        a = -vtop  # depth(-v_max) = 0 exactly
        fa = -depth
        gap = w[k] + vtop
        for j in range(N_EDGE_SCAN + (N - k)):
            if j < N_EDGE_SCAN:
                b = -vtop + gap * 0.5 ** (N_EDGE_SCAN - j)
                if not b > a:
                    continue
            else:
                b = w[k + j - N_EDGE_SCAN]
                if b >= 0.0:
                    break  # the red side is at or above the continuum (emission only)
            Fb, ready = _pcygni_lazy(b, rf, vf, lf, r, dv_tab, df, rhof, s, K, Rc, occult,
                                     mono, ready)
            fb = (1.0 - Fb) - depth
            if fb >= 0.0:
                return _edge_root(a, fa, b, fb, depth, EDGE_XTOL * vtop, rf, vf, lf, r,
                                  dv_tab, df, rhof, s, K, Rc, occult, mono, ready)
            a = b
            fa = fb
        return np.nan
    # broadened: the grid profile, evaluated lazily, convolved point by point
    wts = gaussian_weights(w[1] - w[0], sigma)
    half = (wts.shape[0] - 1) // 2
    F = np.ones(N)
    known = np.zeros(N, dtype=np.bool_)
    dprev = 0.0
    for i in range(N):
        acc = 0.0
        for kk in range(-half, half + 1):
            j = i - kk
            if 0 <= j < N:
                if not known[j]:
                    if -w[j] < vtop:
                        F[j], ready = _pcygni_lazy(w[j], rf, vf, lf, r, dv_tab, df, rhof, s,
                                                   K, Rc, occult, mono, ready)
                    known[j] = True
                if F[j] != 1.0:
                    acc += wts[kk + half] * (F[j] - 1.0)
        di = 1.0 - (1.0 + acc)
        if di >= depth:
            if i == 0:
                return np.nan
            return w[i - 1] + (depth - dprev) / (di - dprev) * (w[i] - w[i - 1])
        dprev = di
    return np.nan


@njit(cache=True, error_model="numpy")
def _pcygni_lazy(wk, rf, vf, lf, r, dv_tab, df, rhof, s, K, Rc, occult, mono, ready):
    """F(w)/F_c at one w, preparing the nodes it needs; returns (F, new ready)."""
    if not mono:
        return _pcygni_at(wk, 0, rf, vf, lf, df, rhof, s, K, Rc, occult), ready
    i0 = _first_on_surface(vf, abs(wk))
    if i0 < ready:
        _pcygni_nodes(r, dv_tab, rf, vf, lf, K, Rc, df, rhof, s, i0, ready)
        ready = i0
    return _pcygni_at(wk, i0, rf, vf, lf, df, rhof, s, K, Rc, occult), ready


@njit(cache=True, error_model="numpy")
def _edge_root(a, fa, b, fb, depth, xtol, rf, vf, lf, r, dv_tab, df, rhof, s, K, Rc,
               occult, mono, ready):
    """Crossing of 1 - F(w)/F_c = depth in [a, b] (fa < 0 <= fb): Illinois regula
    falsi, with a bisection step whenever two steps have not halved the bracket."""
    if fb == 0.0:
        return b
    side = 0
    width = b - a
    count = 0
    for _ in range(200):
        if b - a <= xtol:
            break
        c = b - fb * (b - a) / (fb - fa)
        count += 1
        if count == 3:  # safeguard: the bracket must halve every two steps
            if b - a > 0.5 * width:
                c = 0.5 * (a + b)
            width = b - a
            count = 1
        if not (a < c < b):
            c = 0.5 * (a + b)
        Fc, ready = _pcygni_lazy(c, rf, vf, lf, r, dv_tab, df, rhof, s, K, Rc, occult, mono,
                                 ready)
        fc = (1.0 - Fc) - depth
        if fc >= 0.0:
            b = c
            fb = fc
            if side == 1:
                fa *= 0.5
            side = 1
            if fc == 0.0:
                return c
        else:
            a = c
            fa = fc
            if side == -1:
                fb *= 0.5
            side = -1
    return 0.5 * (a + b)


@njit(cache=True, error_model="numpy")
def _psi(y, sigma):
    """psi'' = Gaussian of width sigma: psi = y Phi(y / sigma) + sigma^2 phi(y)."""
    return (y * 0.5 * math.erfc(-y / (sigma * SQRT_TWO))
            + sigma / SQRT_TWO_PI * math.exp(-0.5 * (y / sigma) ** 2))


@njit(cache=True, error_model="numpy")
def gaussian_weights(dw, sigma):
    """Weights of the exact convolution of a piecewise-linear profile with a Gaussian.

    On a uniform grid of step ``dw`` the profile is a sum of hat functions;
    a hat convolved with a unit Gaussian of standard deviation ``sigma``,
    sampled k steps away, is the second difference (psi(y+h) - 2 psi(y) +
    psi(y-h)) / h with y = k h, h = dw (psi as in :func:`_psi`).  The weights
    sum to one and stay exact for sigma much smaller than the step.
    """
    half = int(math.ceil(KERNEL_SIGMAS * sigma / dw)) + 1
    wts = np.empty(2 * half + 1)
    total = 0.0
    for k in range(-half, half + 1):
        y = k * dw
        x = (_psi(y + dw, sigma) - 2.0 * _psi(y, sigma) + _psi(y - dw, sigma)) / dw
        wts[k + half] = x
        total += x
    for k in range(2 * half + 1):
        wts[k] /= total
    return wts


@njit(cache=True, error_model="numpy")
def gaussian_broaden(f, dw, sigma, continuum):
    """Convolve a profile on a uniform grid with a Gaussian of standard deviation sigma.

    Outside the grid the profile is taken to equal ``continuum``.  sigma and
    dw in the same unit; sigma <= 0 returns a copy.
    """
    n = f.shape[0]
    out = f.copy()
    if sigma <= 0.0:
        return out
    wts = gaussian_weights(dw, sigma)
    half = (wts.shape[0] - 1) // 2
    for i in range(n):
        acc = 0.0
        for k in range(-half, half + 1):
            j = i - k
            if 0 <= j < n and f[j] != continuum:  # (skipping exact zeros changes nothing)
                acc += wts[k + half] * (f[j] - continuum)
        out[i] = continuum + acc
    return out


@njit(cache=True, error_model="numpy")
def outermost_crossings(w, f, level):
    """Smallest and largest w where f >= level, refined by linear interpolation.

    Each is nan when f never reaches ``level``, or when f is still at or
    above it at that end of the grid (the crossing is not on the grid).
    """
    n = w.shape[0]
    lo = -1
    hi = -1
    for i in range(n):
        if f[i] >= level:
            if lo < 0:
                lo = i
            hi = i
    w_lo = np.nan
    w_hi = np.nan
    if lo > 0:
        w_lo = w[lo - 1] + (level - f[lo - 1]) / (f[lo] - f[lo - 1]) * (w[lo] - w[lo - 1])
    if 0 <= hi < n - 1:
        w_hi = w[hi] + (f[hi] - level) / (f[hi] - f[hi + 1]) * (w[hi + 1] - w[hi])
    return w_lo, w_hi


# -- the pieces shared by the profiles and the widths ------------------------------

GRID_MARGIN = 1.2  # the velocity grid spans this many v_max ...
BROADENING_MARGIN = 2.0  # ... plus this many broadening FWHM (about 4.7 sigma)


@njit(cache=True, error_model="numpy")
def velocity_grid(v_max, fwhm, n):
    """n evenly spaced w [cm/s] over +-(1.2 v_max + 2 fwhm) (fwhm of the broadening)."""
    half = GRID_MARGIN * v_max + BROADENING_MARGIN * fwhm
    return np.linspace(-half, half, n)


@njit(cache=True, error_model="numpy")
def emission_line(r, v, rho, n, Rc, occult, w, sigma, hwzi_fraction):
    """The emission line on the grid w and its widths.

    Returns ``(f, fwhm, hwzi, ok)``: the broadened profile f normalised to
    peak 1, FWHM = w_+ - w_- of the outermost crossings of f = 0.5, HWZI =
    max(-w_-, w_+) at f = ``hwzi_fraction`` (nan when a crossing is off the
    grid), all by :func:`outermost_crossings`; ``ok`` is False (and the
    widths nan) when the line has no flux.  Unbroadened (sigma <= 0), with v
    and the occultation edge non-decreasing outward (the normal case), the
    widths are those of the exact profile instead (:func:`_exact_crossing`)
    and f is normalised to its peak F(0), which the grid may miss.
    """
    rf, vf, lf, lv = _refine(r, v, rho, Rc if occult else r[0], NSUB)
    return _emission_line_refined(rf, vf, lf, lv, n, Rc, occult, w, sigma, hwzi_fraction)


@njit(cache=True, error_model="numpy")
def _emission_line_refined(rf, vf, lf, lv, n, Rc, occult, w, sigma, hwzi_fraction,
                           profile=True):
    """:func:`emission_line` on a grid from :func:`_refine`.  With ``profile`` False
    only the widths are wanted: when they come from the exact profile, f is left empty
    (the grid profile is not computed)."""
    if rf.shape[0] < 2:
        return np.zeros(w.shape[0]), np.nan, np.nan, False
    lg, hi, full = _emission_nodes(rf, vf, lf, lv, n, Rc, occult)
    mono = nondecreasing(vf) and nondecreasing(hi)
    if mono and sigma <= 0.0:  # measured on the exact profile, normalised to its peak F(0)
        peak, fwhm, hwzi = _exact_widths(rf, vf, lg, full, Rc, occult, hwzi_fraction)
        ok = peak > 0.0
        if not profile:
            return np.empty(0), fwhm, hwzi, ok
        F = _emission_prefix(rf, vf, lg, hi, full, Rc, occult, w)
        return (F / peak if ok else F), fwhm, hwzi, ok
    if mono:
        F = _emission_prefix(rf, vf, lg, hi, full, Rc, occult, w)
    else:
        F = _emission_loop(rf, vf, lg, hi, full, Rc, occult, w)
    F = gaussian_broaden(F, w[1] - w[0], sigma, 0.0)
    peak = F.max()
    if not peak > 0.0:
        return F, np.nan, np.nan, False
    f = F / peak
    lo, hi = outermost_crossings(w, f, 0.5)
    zlo, zhi = outermost_crossings(w, f, hwzi_fraction)
    hwzi = np.nan if (np.isnan(zlo) or np.isnan(zhi)) else max(-zlo, zhi)
    return f, hi - lo, hwzi, True


@njit(cache=True, error_model="numpy")
def monotonic_outside(r, v, Rc, rtol):
    """v with outward falls below rtol * max(v) outside Rc removed (running maximum).

    Returns ``(v_clean, i0, k)``: the tail from tabulated point i0 (the
    interval holding Rc) is replaced by its running maximum; k = -1, or the
    index into the tail of the first point that falls by more than
    rtol * max(v) below the running maximum (then v(r) really falls outward).
    """
    n = r.shape[0]
    i0 = max(search_right(r, Rc, 0, n) - 1, 0)
    tol = rtol * v.max()
    out = v.copy()
    running = v[i0]
    for i in range(i0, n):
        if v[i] > running:
            running = v[i]
        if running - v[i] > tol:
            return out, i0, i - i0
        out[i] = running
    return out, i0, -1


@njit(cache=True, error_model="numpy")
def sobolev_strength(r, v, rho, Rc, k0):
    """K = k0 v_max / (Rc rho_ref), rho_ref = median(r^2 rho v) / (Rc^2 v_max).

    The line strength of :func:`sobolev_tau` for the dimensionless k0 of
    :mod:`windsolve.lines` (radially tau = k0 / (x^2 w dw/dx) in a steady wind).
    """
    v_max = v.max()
    rho_ref = np.median(r * r * rho * v) / (Rc * Rc * v_max)
    return k0 * v_max / (Rc * rho_ref)


@njit(cache=True, error_model="numpy")
def _exponential_segment(fa, fb, dr):
    """Integral over one interval of f with ln f linear in r (f > 0 at both ends); the
    trapezoid where f is not positive or all but constant."""
    if fa > 0.0 and fb > 0.0:
        q = math.log(fb / fa)
        if abs(q) > 1e-6:
            return dr * (fb - fa) / q
    return 0.5 * dr * (fa + fb)


@njit(cache=True, error_model="numpy")
def optical_core_radius(r, rho, kappa):
    """Radius where tau = integral of kappa rho dr from the outer end reaches 2/3; nan if
    tau(r[0]) <= 2/3.

    kappa rho is taken as exponential in r between tabulated points -- the
    interpolation the line kernels use for rho (module docstring), exact for
    a hydrostatic layer -- so each interval is integrated exactly and the
    crossing is solved for within its interval.  (A trapezoid sum on the
    same points misplaces the radius by a few 1e-4 of itself on a solved
    wind, which moved a FWHM dominated by gas just outside it by up to 1 %.)
    """
    n = r.shape[0]
    tau = np.empty(n)
    tau[n - 1] = 0.0
    for i in range(n - 2, -1, -1):
        tau[i] = tau[i + 1] + _exponential_segment(kappa[i] * rho[i], kappa[i + 1] * rho[i + 1],
                                                   r[i + 1] - r[i])
    target = 2.0 / 3.0
    if not tau[0] > target:
        return np.nan
    i = n - 1
    while not tau[i] >= target:
        i -= 1
    fa = kappa[i] * rho[i]
    fb = kappa[i + 1] * rho[i + 1]
    dr = r[i + 1] - r[i]
    need = target - tau[i + 1]  # the integral from the crossing out to r[i + 1]
    if fa > 0.0 and fb > 0.0:
        q = math.log(fb / fa)
        if abs(q) > 1e-6:
            k = q / dr  # f = fa exp(k (x - r[i])): (fb - f(x)) / k = need
            e = (fb - need * k) / fa
            if e > 0.0:
                return min(max(r[i] + math.log(e) / k, r[i]), r[i + 1])
    t0 = tau[i]
    t1 = tau[i + 1]
    return r[i] + (t0 - target) / (t0 - t1) * dr


@njit(cache=True, error_model="numpy")
def line_widths(r, v, rho, Rc, n, occult, fwhm, sigma, hwzi_fraction, edge_depth, k0,
                n_velocity, rtol):
    """(FWHM, HWZI, blue-edge velocity) [cm/s] of one profile, nan where not measurable.

    The whole of :func:`windsolve.lines.line_widths` after units: the grid of
    :func:`velocity_grid`; the emission line of :func:`emission_line` (nan
    widths when ``occult`` and Rc >= r[-1], or no flux); the P Cygni edge of
    :func:`pcygni_edge` with K from :func:`sobolev_strength`, nan when
    Rc >= r[-1] or v(r) falls outward outside Rc (:func:`monotonic_outside`).
    """
    w = velocity_grid(v.max(), fwhm, n_velocity)
    outside = Rc < r[r.shape[0] - 1]
    e_fwhm = np.nan
    e_hwzi = np.nan
    # the sub-divided grid from Rc, shared by both lines when they start there
    rf, vf, lf, lv = _refine(r, v, rho, Rc, NSUB)
    if occult:
        if outside:
            _, e_fwhm, e_hwzi, _ = _emission_line_refined(rf, vf, lf, lv, n, Rc, occult, w,
                                                          sigma, hwzi_fraction, False)
    else:  # every shell seen whole, from r[0]
        rf0, vf0, lf0, lv0 = _refine(r, v, rho, r[0], NSUB)
        _, e_fwhm, e_hwzi, _ = _emission_line_refined(rf0, vf0, lf0, lv0, n, Rc, occult, w,
                                                      sigma, hwzi_fraction, False)
    edge = np.nan
    if outside:
        vc, i0, bad = monotonic_outside(r, v, Rc, rtol)
        if bad < 0:
            K = sobolev_strength(r, vc, rho, Rc, k0)
            same = True  # v was already non-decreasing: the shared grid is the same
            for i in range(i0, r.shape[0]):
                if vc[i] != v[i]:
                    same = False
                    break
            if same:
                edge = _pcygni_edge_refined(rf, vf, lf, r, vc, K, Rc, occult, w, sigma,
                                            edge_depth)
            else:
                edge = pcygni_edge(r, vc, rho, K, Rc, occult, w, sigma, edge_depth)
    return e_fwhm, e_hwzi, edge
