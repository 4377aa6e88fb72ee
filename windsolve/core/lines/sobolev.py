"""Sobolev P Cygni profiles (cgs floats): optical depth, escape probabilities, the
profile of a pure-scattering resonance line and its blue edge.

Core-halo geometry, pure scattering, the Sobolev approximation (Castor 1970,
MNRAS 149, 111; Lamers & Cassinelli 1999, Introduction to Stellar Winds,
ch. 2 and ch. 8; from memory).  The grid and its interpolation are those of
:mod:`windsolve.core.lines.grid`.
"""

import math

import numpy as np
from numba import njit

from ..roots import search_left, search_right
from .broadening import gaussian_weights
from .grid import NSUB, nondecreasing, refine

N_MU = 16  # Gauss-Legendre nodes of the angle averages in the escape probabilities
TAU_SATURATED = 40.0  # 1 - exp(-tau) == 1 to double precision above this
TAU_THIN = 1e-8  # (1 - exp(-tau)) / tau == 1 - tau/2 below this
N_EDGE_SCAN = 24  # P Cygni edge: points at -v_max + gap / 2^j, j = 24..1, before the grid
EDGE_XTOL = 1e-9  # ... and the crossing is located to this fraction of v_max

_x, _wt = np.polynomial.legendre.leggauss(N_MU)
MU_NODES = 0.5 * (_x + 1.0)  # Gauss-Legendre on [0, 1]
MU_WEIGHTS = 0.5 * _wt


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
    (Castor 1970, MNRAS 149, 111; from memory).  The gradient along the ray
    enters by its magnitude (a decelerating flow, dv/dr < 0, scatters as
    well as an accelerating one); a zero gradient gives tau = inf.

    Parameters
    ----------
    K : float
        Line strength [cm^3 g^-1 s^-1].
    rho : float
        Density [g cm^-3].
    r : float
        Radius [cm].
    v : float
        Velocity [cm s^-1].
    dvdr : float
        dv/dr [s^-1].
    mu : float
        Cosine of the angle between the ray and the radius.

    Returns
    -------
    float
        tau [dimensionless]; inf where the projected gradient is 0.

    References
    ----------
    docs/physics.md, eq. 28.
    """
    Q = abs(mu * mu * dvdr + (1.0 - mu * mu) * v / r)
    if Q == 0.0:
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

    Parameters
    ----------
    K : float
        Line strength [cm^3 g^-1 s^-1].
    rho : float
        Density [g cm^-3].
    r : float
        Radius [cm].
    v : float
        Velocity [cm s^-1].
    dvdr : float
        dv/dr [s^-1].
    Rc : float
        Core radius [cm].

    Returns
    -------
    beta, beta_c : float
        [dimensionless].

    References
    ----------
    docs/physics.md, eqs. 28 and 29.
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
    """dv/dr on a non-uniform grid: 3-point centred inside, 3-point one-sided at the ends.

    Parameters
    ----------
    r : ndarray
        Radius [cm], increasing, at least 2 points (2 points: one difference).
    v : ndarray
        Velocity [cm s^-1].

    Returns
    -------
    ndarray
        dv/dr [s^-1] at every point.
    """
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
def sobolev_strength(r, v, rho, Rc, k0):
    """K = k0 v_max / (Rc rho_ref), rho_ref = median(r^2 rho v) / (Rc^2 v_max).

    The line strength of :func:`sobolev_tau` for the dimensionless k0 of
    :mod:`windsolve.lines` (radially tau = k0 / (x^2 w dw/dx) in a steady wind).

    Parameters
    ----------
    r : ndarray
        Radius [cm].
    v : ndarray
        Velocity [cm s^-1].
    rho : ndarray
        Density [g cm^-3].
    Rc : float
        Core radius [cm].
    k0 : float
        Dimensionless line strength.

    Returns
    -------
    float
        K [cm^3 g^-1 s^-1].

    References
    ----------
    docs/physics.md, eq. 28.
    """
    v_max = v.max()
    rho_ref = np.median(r * r * rho * v) / (Rc * Rc * v_max)
    return k0 * v_max / (Rc * rho_ref)


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
def _pcygni_nodes(r, dv_tab, rf, vf, lf, K, Rc, df, rhof, s, lo, hi, clip=True):
    """Fill the gradient, density and source function S/I_c at fine nodes lo..hi-1.

    The gradient is linear in r between tabulated points (clipped at 0 when
    ``clip``: the one-resonance-point path, where v is non-decreasing and a
    negative difference is noise); S / I_c = beta_c / beta
    (:func:`escape_probabilities`), the dilution factor where beta = 0.
    """
    n = r.shape[0]
    # tabulated interval of node lo: the first j with r[j+1] >= rf[lo], at most n - 2
    a = search_left(r, rf[lo], 0, n - 1)
    j = min(max(a - 1, 0), n - 2)
    for i in range(lo, hi):
        while j < n - 2 and r[j + 1] < rf[i]:
            j += 1
        f = (rf[i] - r[j]) / (r[j + 1] - r[j])
        df[i] = dv_tab[j] + f * (dv_tab[j + 1] - dv_tab[j])
        if clip and df[i] < 0.0:
            df[i] = 0.0
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


# -- every resonance point: flows that decelerate, or accelerate and decelerate ------

# rows of the float workspace of _pcygni_any_at (one column per surface vertex)
_P, _Z, _G, _S = 0, 1, 2, 3


@njit(cache=True, error_model="numpy")
def any_flow_workspace(m):
    """Scratch arrays for :func:`_pcygni_any_at` on a fine grid of m nodes.

    Parameters
    ----------
    m : int
        Nodes of the fine grid.

    Returns
    -------
    fw : ndarray
        float64, shape (4, 2 m + 2): p^2, z, 1 - exp(-tau), S/I_c per vertex.
    iw : ndarray
        int64, shape (2, 2 m + 2): first vertex and last vertex of each branch.
    """
    return np.empty((4, 2 * m + 2)), np.empty((2, 2 * m + 2), dtype=np.int64)


@njit(cache=True, error_model="numpy")
def _surface_vertex(fw, nv, aw, r, v, d, rho, s, K):
    """Append the resonance-surface vertex at (r, v, dv/dr, rho, S) for |w| = aw."""
    mu2 = (aw / v) ** 2 if aw < v else 1.0
    Q = abs(mu2 * d + (1.0 - mu2) * v / r)
    tau = K * rho / Q if Q > 0.0 else np.inf
    fw[_P, nv] = r * r * (1.0 - mu2)
    fw[_Z, nv] = r * math.sqrt(mu2)
    fw[_G, nv] = 1.0 if tau > TAU_SATURATED else -math.expm1(-tau)
    fw[_S, nv] = s
    return nv + 1


@njit(cache=True, error_model="numpy")
def _surface_crossing(fw, nv, aw, i, rf, vf, lf, df, s, K):
    """Append the vertex between fine nodes i and i+1 where v = aw (p = 0 there)."""
    va = vf[i]
    vb = vf[i + 1]
    t = (aw - va) / (vb - va)
    rt = rf[i] + t * (rf[i + 1] - rf[i])
    dt = df[i] + t * (df[i + 1] - df[i])
    rhot = math.exp(lf[i] + t * (lf[i + 1] - lf[i]))
    st = s[i] + t * (s[i + 1] - s[i])
    return _surface_vertex(fw, nv, aw, rt, aw, dt, rhot, st, K)


@njit(cache=True, error_model="numpy")
def _surface_branches(aw, rf, vf, lf, df, rhof, s, K, fw, iw):
    """The resonance surface mu = -w / v(r) at |w| = aw, cut into branches.

    Vertices are the fine nodes with v > aw and the points between nodes where
    v = aw, in order of r; a piece is a run of vertices with v > aw; a
    branch is a run inside a piece along which p^2 is monotonic (consecutive
    branches share their turning vertex).  On a branch each ray p meets the
    surface once.  Returns the number of branches (first and last vertex in
    ``iw[0]``, ``iw[1]``).
    """
    m = rf.shape[0]
    nv = 0
    nb = 0
    start = 0
    for i in range(m):
        on = vf[i] > aw
        before = i > 0 and vf[i - 1] > aw
        if on and not before:
            start = nv
            if i > 0:
                nv = _surface_crossing(fw, nv, aw, i - 1, rf, vf, lf, df, s, K)
        if on:
            nv = _surface_vertex(fw, nv, aw, rf[i], vf[i], df[i], rhof[i], s[i], K)
        elif before:
            nv = _surface_crossing(fw, nv, aw, i - 1, rf, vf, lf, df, s, K)
        if (before or on) and (not on or i == m - 1):  # the piece ends: split it
            nb = _split_monotonic(fw, iw, nb, start, nv - 1)
    return nb


@njit(cache=True, error_model="numpy")
def _split_monotonic(fw, iw, nb, a, b):
    """Append the runs of vertices a..b along which p^2 is monotonic as branches."""
    if b <= a:
        return nb
    first = a
    sign = 0
    for k in range(a, b):
        dp = fw[_P, k + 1] - fw[_P, k]
        step = 1 if dp > 0.0 else (-1 if dp < 0.0 else 0)
        if step == 0:
            continue
        if sign == 0:
            sign = step
        elif step != sign:
            iw[0, nb] = first
            iw[1, nb] = k
            nb += 1
            first = k
            sign = step
    iw[0, nb] = first
    iw[1, nb] = b
    return nb + 1


@njit(cache=True, error_model="numpy")
def _pcygni_any_at(wk, rf, vf, lf, df, rhof, s, K, Rc, occult, fw, iw):
    """F(w) / F_c at one velocity, every resonance point on every ray.

    The surface at |w| is cut into branches (:func:`_surface_branches`); the
    p^2 axis is cut at every vertex of every branch and at Rc^2, so inside
    each cut the branches that cross the ray are fixed and each is linear in
    p^2.  At both ends of a cut the intensity of the ray is summed over its
    resonance points in order from the observer,

    .. math::

        \\frac{I}{I_c} = \\sum_k S_k g_k \\prod_{j < k} (1 - g_j)
            + \\mathbb{1}_{\\rm core\\ in\\ front} \\prod_k (1 - g_k),
        \\qquad g = 1 - e^{-\\tau},

    and the cut is integrated by the trapezoid rule in p^2.  With one branch
    (v non-decreasing) this is the sum of :func:`_pcygni_at`.
    """
    nb = _surface_branches(abs(wk), rf, vf, lf, df, rhof, s, K, fw, iw)
    if nb == 0:
        return 1.0
    front = wk < 0.0
    Rc2 = Rc * Rc
    # the cuts: every vertex's p^2 and Rc^2, in increasing order
    nv = iw[1, nb - 1] + 1
    cuts = np.empty(nv + 1)
    cuts[:nv] = fw[_P, :nv]
    cuts[nv] = Rc2
    cuts = np.sort(cuts)
    # each branch as (lo, hi, step): vertices in order of increasing p^2, and a cursor
    lo = np.empty(nb, dtype=np.int64)
    hi = np.empty(nb, dtype=np.int64)
    step = np.empty(nb, dtype=np.int64)
    cur = np.empty(nb, dtype=np.int64)
    for b in range(nb):
        a = iw[0, b]
        e = iw[1, b]
        if fw[_P, e] >= fw[_P, a]:
            lo[b], hi[b], step[b] = a, e, 1
        else:
            lo[b], hi[b], step[b] = e, a, -1
        cur[b] = lo[b]
    zs = np.empty(nb)
    gs = np.empty(nb)
    ss = np.empty(nb)
    acc = 0.0
    for c in range(nv):
        pa = cuts[c]
        pb = cuts[c + 1]
        if not pb > pa:
            continue
        inside = 0.5 * (pa + pb) < Rc2
        if inside and not front and occult:
            continue  # every resonance point of these rays lies behind the core
        ends = 0.0
        for end in range(2):
            pe = pa if end == 0 else pb
            n = 0
            for b in range(nb):
                if not (fw[_P, lo[b]] <= pa and fw[_P, hi[b]] >= pb):
                    continue
                k = cur[b]
                while k != hi[b] and fw[_P, k + step[b]] <= pa:
                    k += step[b]
                cur[b] = k
                k2 = k + step[b] if k != hi[b] else k
                dp = fw[_P, k2] - fw[_P, k]
                lam = (pe - fw[_P, k]) / dp if dp > 0.0 else 0.0
                z = fw[_Z, k] + lam * (fw[_Z, k2] - fw[_Z, k])
                g = fw[_G, k] + lam * (fw[_G, k2] - fw[_G, k])
                sv = fw[_S, k] + lam * (fw[_S, k2] - fw[_S, k])
                # insert in order from the observer: largest z first in front
                # (z > 0), smallest |z| first behind (z < 0)
                j = n
                while j > 0 and (zs[j - 1] < z if front else zs[j - 1] > z):
                    zs[j] = zs[j - 1]
                    gs[j] = gs[j - 1]
                    ss[j] = ss[j - 1]
                    j -= 1
                zs[j] = z
                gs[j] = g
                ss[j] = sv
                n += 1
            through = 1.0
            val = 0.0
            for j in range(n):
                val += ss[j] * gs[j] * through
                through *= 1.0 - gs[j]
            if inside and front:
                val += through - 1.0
            ends += val
        acc += 0.5 * ends * (pb - pa)
    return 1.0 + acc / Rc2


@njit(cache=True, error_model="numpy")
def pcygni_flux_any(r, v, rho, K, Rc, occult, w):
    """Sobolev P Cygni profile F(w) / F_c in any velocity field (several resonance points per ray).

    Parameters
    ----------
    r, v, rho : ndarray
        Radius [cm] (increasing), velocity [cm/s] (> 0; may rise and fall
        outward), density [g/cm3].
    K : float
        Line strength [cm^3 g^-1 s^-1] in tau = K rho / |Q| (:func:`sobolev_tau`).
    Rc : float
        Radius of the uniformly bright core [cm]; only gas at r >= Rc takes part.
    occult : bool
        Hide the scattered light from behind the core.
    w : ndarray
        Observed velocities [cm/s].

    Returns
    -------
    ndarray
        F(w) / F_c (continuum = 1).

    Notes
    -----
    The Sobolev approximation at every resonance point of every ray, in the
    form Rybicki & Hummer (1978, ApJ 219, 654; from memory) give for
    non-monotonic flows, without their non-local coupling: each point's
    source function is the local S = beta_c / beta
    (:func:`escape_probabilities`, with |dv/dl| in tau), and the core light
    that reaches it is not dimmed by the other resonance surfaces; along
    the ray the points dim each other's light and the core's by
    exp(-tau) each (:func:`_pcygni_any_at`).  Where v rises outward there
    is one point per ray and the result is that of :func:`pcygni_flux`
    to rounding.  Where v falls outward, dp^2/dr = 2 r^2 Q / v changes
    sign with Q, and the surface folds: a ray meets it two or more times.
    docs/physics.md, section 7.
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
    _pcygni_nodes(r, dv_tab, rf, vf, lf, K, Rc, df, rhof, s, 0, m, False)
    fw, iw = any_flow_workspace(m)
    for k in range(w.shape[0]):
        out[k] = _pcygni_any_at(w[k], rf, vf, lf, df, rhof, s, K, Rc, occult, fw, iw)
    return out


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
        As for :func:`pcygni_flux`.  Where v is non-decreasing outside
        ``Rc`` (as :func:`grid.monotonic_outside` makes it) the fast
        one-resonance-point sums of :func:`pcygni_flux` are used, otherwise
        every resonance point (:func:`pcygni_flux_any`); the edge then lies
        near -v_max, the fastest gas in front of the core.
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
          :func:`measure.outermost_crossings` does.

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
        fw, iw = any_flow_workspace(0)
    else:  # v falls somewhere outward: every node, every resonance point
        _pcygni_nodes(r, dv_tab, rf, vf, lf, K, Rc, df, rhof, s, 0, m, False)
        ready = 0
        vtop = vf.max()
        fw, iw = any_flow_workspace(m)
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
                                     mono, ready, fw, iw)
            fb = (1.0 - Fb) - depth
            if fb >= 0.0:
                return _edge_root(a, fa, b, fb, depth, EDGE_XTOL * vtop, rf, vf, lf, r,
                                  dv_tab, df, rhof, s, K, Rc, occult, mono, ready, fw, iw)
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
                                                   K, Rc, occult, mono, ready, fw, iw)
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
def _pcygni_lazy(wk, rf, vf, lf, r, dv_tab, df, rhof, s, K, Rc, occult, mono, ready, fw, iw):
    """F(w)/F_c at one w, preparing the nodes it needs; returns (F, new ready).

    Not ``mono``: every node is ready, and every resonance point is summed
    (:func:`_pcygni_any_at`, workspace ``fw``, ``iw``)."""
    if not mono:
        return _pcygni_any_at(wk, rf, vf, lf, df, rhof, s, K, Rc, occult, fw, iw), ready
    i0 = _first_on_surface(vf, abs(wk))
    if i0 < ready:
        _pcygni_nodes(r, dv_tab, rf, vf, lf, K, Rc, df, rhof, s, i0, ready)
        ready = i0
    return _pcygni_at(wk, i0, rf, vf, lf, df, rhof, s, K, Rc, occult), ready


@njit(cache=True, error_model="numpy")
def _edge_root(a, fa, b, fb, depth, xtol, rf, vf, lf, r, dv_tab, df, rhof, s, K, Rc,
               occult, mono, ready, fw, iw):
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
                                 ready, fw, iw)
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
