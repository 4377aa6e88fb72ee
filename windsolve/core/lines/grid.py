"""The radial grid the line kernels work on (cgs floats): refinement, the velocity grid,
and the checks of v(r) the fast paths rely on.

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

from ..roots import search_right

NSUB = 1  # sub-intervals per tabulated interval (see the module docstring)
MONOTONIC_RTOL = 1e-6  # an outward fall of v by less than this * v_max is noise
GRID_MARGIN = 1.2  # the velocity grid spans this many v_max ...
BROADENING_MARGIN = 2.0  # ... plus this many broadening FWHM (about 4.7 sigma)


@njit(cache=True, error_model="numpy")
def refine(r, v, rho, r_start, nsub):
    """Sub-divided grid from ``max(r_start, r[0])`` to ``r[-1]``.

    Parameters
    ----------
    r : ndarray
        Radius [cm], increasing.
    v : ndarray
        Velocity [cm s^-1], > 0.
    rho : ndarray
        Density [g cm^-3], > 0.
    r_start : float
        Inner end of the refined grid [cm].
    nsub : int
        Sub-intervals per tabulated interval.

    Returns
    -------
    rf, vf, lnrho_f : ndarray
        Radius [cm], velocity [cm s^-1] and ln density [ln(g cm^-3)] at the
        fine nodes; ln v and ln rho are linear in r inside each tabulated
        interval.  Empty arrays when ``r_start >= r[-1]``.
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
def nondecreasing(a):
    """True when a[i+1] >= a[i] everywhere.

    Parameters
    ----------
    a : ndarray
        A 1-D array.

    Returns
    -------
    bool
    """
    for i in range(a.shape[0] - 1):
        if a[i + 1] < a[i]:
            return False
    return True


@njit(cache=True, error_model="numpy")
def velocity_grid(v_max, fwhm, n):
    """n evenly spaced w [cm/s] over +-(1.2 v_max + 2 fwhm) (fwhm of the broadening).

    Parameters
    ----------
    v_max : float
        Largest speed of the profile [cm s^-1].
    fwhm : float
        FWHM of the broadening Gaussian [cm s^-1].
    n : int
        Number of grid points.

    Returns
    -------
    ndarray
        Doppler velocities w [cm s^-1], increasing.
    """
    half = GRID_MARGIN * v_max + BROADENING_MARGIN * fwhm
    return np.linspace(-half, half, n)


@njit(cache=True, error_model="numpy")
def monotonic_outside(r, v, Rc, rtol):
    """v with outward falls below rtol * max(v) outside Rc removed (running maximum).

    Returns ``(v_clean, i0, k)``: the tail from tabulated point i0 (the
    interval holding Rc) is replaced by its running maximum; k = -1, or the
    index into the tail of the first point that falls by more than
    rtol * max(v) below the running maximum (then v(r) really falls outward).

    Parameters
    ----------
    r : ndarray
        Radius [cm], increasing.
    v : ndarray
        Velocity [cm s^-1].
    Rc : float
        Core radius [cm].
    rtol : float
        Relative size of a fall counted as noise [dimensionless].

    Returns
    -------
    v_clean : ndarray
        v [cm s^-1], the tail replaced by its running maximum.
    i0 : int
        First tabulated point of the tail.
    k : int
        -1, or the tail index of the first real fall.
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
