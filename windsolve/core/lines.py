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
linear v where v changes slowly).  Each tabulated interval is cut into
``NSUB`` sub-intervals; between those the integration bounds (v, and the
occultation edge) are linear in r, and the emission integrand j r^2 / v is
exponential in r.
The emitting region is the tabulated profile: nothing is extrapolated
beyond its last point.
"""

import math

import numpy as np
from numba import njit

TWO_PI = 2.0 * math.pi
SQRT_TWO_PI = math.sqrt(2.0 * math.pi)
SQRT_TWO = math.sqrt(2.0)
NSUB = 4  # sub-intervals per tabulated interval (converged to < 1e-4 on the demo)
N_MU = 16  # Gauss-Legendre nodes of the angle averages in the escape probabilities
TAU_SATURATED = 40.0  # 1 - exp(-tau) == 1 to double precision above this
TAU_THIN = 1e-8  # (1 - exp(-tau)) / tau == 1 - tau/2 below this
KERNEL_SIGMAS = 7.0  # the broadening kernel is cut this many sigma out

_x, _wt = np.polynomial.legendre.leggauss(N_MU)
MU_NODES = 0.5 * (_x + 1.0)  # Gauss-Legendre on [0, 1]
MU_WEIGHTS = 0.5 * _wt


@njit(cache=True, error_model="numpy")
def refine(r, v, rho, r_start, nsub):
    """Sub-divided grid from ``max(r_start, r[0])`` to ``r[-1]``.

    Returns ``(rf, vf, lnrho_f)``; ln v and ln rho are linear in r inside
    each tabulated interval.  Empty arrays when ``r_start >= r[-1]``.
    """
    n = r.shape[0]
    if r_start >= r[n - 1]:
        return np.empty(0), np.empty(0), np.empty(0)
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
    k = 0
    for i in range(i0, n - 1):
        a = r[i]
        b = r[i + 1]
        la = math.log(rho[i])
        lb = math.log(rho[i + 1])
        lva = math.log(v[i])
        lvb = math.log(v[i + 1])
        lo = r_start if i == i0 else a
        for j in range(nsub):
            x = lo + (b - lo) * j / nsub
            f = (x - a) / (b - a)
            rf[k] = x
            vf[k] = math.exp(lva + f * (lvb - lva))
            lf[k] = la + f * (lb - la)
            k += 1
    rf[k] = r[n - 1]
    vf[k] = v[n - 1]
    lf[k] = math.log(rho[n - 1])
    return rf, vf, lf


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
    shell (SPEC section 6; Lamers & Cassinelli 1999, ch. 2, from memory).
    Inside each sub-interval the bound -v(r) < w is linear in r, the
    occultation edge w < v sqrt(1 - (Rc/r)^2) is found on the exact curve,
    and j r^2 / v is exponential in r, so each piece is integrated exactly
    and F(w) is continuous in w.  A constant-velocity shell is exact.
    """
    r_start = Rc if occult else r[0]
    rf, vf, lf = refine(r, v, rho, r_start, NSUB)
    m = rf.shape[0]
    out = np.zeros(w.shape[0])
    if m < 2:
        return out
    lg = np.empty(m)
    hi = np.empty(m)
    for i in range(m):
        lg[i] = n * lf[i] + 2.0 * math.log(rf[i]) - math.log(vf[i])
        if occult:
            q = 1.0 - (Rc / rf[i]) ** 2
            hi[i] = vf[i] * math.sqrt(q) if q > 0.0 else 0.0
        else:
            hi[i] = vf[i]
    full = np.empty(m - 1)  # the whole sub-interval, computed once
    for i in range(m - 1):
        full[i] = _loglinear_integral(rf[i + 1] - rf[i], lg[i], lg[i + 1], 0.0, 1.0)
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


@njit(cache=True, error_model="numpy")
def _escape(tau):
    """beta(tau) = (1 - exp(-tau)) / tau, with its limits 1 and 0."""
    if tau < TAU_THIN:
        return 1.0 - 0.5 * tau
    if tau == np.inf:
        return 0.0
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
    # the gradient at the fine nodes, linear in r between tabulated points
    df = np.empty(m)
    rhof = np.empty(m)
    s = np.empty(m)
    j = 0
    for i in range(m):
        while j < r.shape[0] - 2 and r[j + 1] < rf[i]:
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
    Rc2 = Rc * Rc
    for k in range(w.shape[0]):
        aw = abs(w[k])
        front = w[k] < 0.0
        acc = 0.0
        have = False  # node i values valid (on the surface)
        pa = 0.0
        sa = 0.0
        ga = 0.0
        for i in range(m - 1):
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
        out[k] = 1.0 + acc / Rc2
    return out


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
            if 0 <= j < n:
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
