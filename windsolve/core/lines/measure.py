"""What an observer quotes, measured on the line kernels' profiles (cgs floats): FWHM and
HWZI of the emission line (on the exact profile where v(r) rises outward, else on the
grid), and :func:`line_widths`, the whole measurement of one profile in one call."""

import math

import numpy as np
from numba import njit

from .broadening import gaussian_broaden
from .emission import TWO_PI, _emission_loop, _emission_nodes, _emission_prefix, _suffix_sums
from .grid import NSUB, _refine, monotonic_outside, nondecreasing, velocity_grid
from .sobolev import _pcygni_edge_refined, pcygni_edge, sobolev_strength


@njit(cache=True, error_model="numpy")
def outermost_crossings(w, f, level):
    """Smallest and largest w where f >= level, refined by linear interpolation.

    Each is nan when f never reaches ``level``, or when f is still at or
    above it at that end of the grid (the crossing is not on the grid).

    Parameters
    ----------
    w : ndarray
        Velocity grid [cm s^-1], increasing.
    f : ndarray
        Profile on the grid [normalised flux].
    level : float
        The flux level [same unit as f].

    Returns
    -------
    w_lo, w_hi : float
        The outermost crossings [cm s^-1].
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

    Parameters
    ----------
    r, v, rho : ndarray
        Radius [cm] (increasing), velocity [cm s^-1] (> 0), density [g cm^-3].
    n : float
        Emissivity power, j = rho^n.
    Rc : float
        Core radius [cm].
    occult : bool
        Hide the gas behind and inside the core.
    w : ndarray
        Velocity grid [cm s^-1].
    sigma : float
        Broadening standard deviation [cm s^-1]; <= 0 for none.
    hwzi_fraction : float
        Fraction of the peak at which the HWZI is measured.

    Returns
    -------
    f : ndarray
        Profile normalised to peak 1.
    fwhm, hwzi : float
        [cm s^-1], NaN where not measurable.
    ok : bool
        The line has flux.

    References
    ----------
    docs/physics.md, section 7 (eq. 27, "Observables").
    """
    rf, vf, lf, lv = _refine(r, v, rho, Rc if occult else r[0], NSUB)
    return _emission_line_refined(rf, vf, lf, lv, n, Rc, occult, w, sigma, hwzi_fraction)


@njit(cache=True, error_model="numpy")
def _emission_line_refined(rf, vf, lf, lv, n, Rc, occult, w, sigma, hwzi_fraction,
                           profile=True):
    """:func:`emission_line` on a grid from :func:`grid._refine`.  With ``profile`` False
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
def line_widths(r, v, rho, Rc, n, occult, fwhm, sigma, hwzi_fraction, edge_depth, k0,
                n_velocity, rtol):
    """(FWHM, HWZI, blue-edge velocity) [cm/s] of one profile, nan where not measurable.

    The whole of :func:`windsolve.lines.line_widths` after units: the grid of
    :func:`grid.velocity_grid`; the emission line of :func:`emission_line` (nan
    widths when ``occult`` and Rc >= r[-1], or no flux); the P Cygni edge of
    :func:`sobolev.pcygni_edge` with K from :func:`sobolev.sobolev_strength`, nan when
    Rc >= r[-1]; where v(r) falls outward outside Rc (:func:`grid.monotonic_outside`)
    the edge sums every resonance point (:func:`sobolev.pcygni_flux_any`).

    Parameters
    ----------
    r, v, rho : ndarray
        Radius [cm] (increasing), velocity [cm s^-1] (> 0), density [g cm^-3] (> 0).
    Rc : float
        Core radius [cm].
    n : float
        Emissivity power.
    occult : bool
        Occultation by the core.
    fwhm, sigma : float
        FWHM and standard deviation of the broadening Gaussian [cm s^-1].
    hwzi_fraction : float
        Fraction of the peak for the HWZI.
    edge_depth : float
        Absorption depth 1 - F/F_c that marks the blue edge.
    k0 : float
        Line strength [dimensionless].
    n_velocity : int
        Points of the velocity grid.
    rtol : float
        Relative size of an outward fall of v counted as noise.

    Returns
    -------
    tuple of float
        (fwhm, hwzi, edge_velocity) [cm s^-1].

    References
    ----------
    docs/physics.md, section 7 (eqs. 27-30, "Observables").
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
        if bad >= 0:  # v really falls outward: every resonance point (pcygni_flux_any)
            K = sobolev_strength(r, v, rho, Rc, k0)
            edge = _pcygni_edge_refined(rf, vf, lf, r, v, K, Rc, occult, w, sigma, edge_depth)
        else:
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
