"""The wind profile: optical depth and the optical-core radius (cgs floats).

Between tabulated points a positive profile quantity f (kappa rho here, j r^2 / v in
the emission kernels of :mod:`windsolve.core.lines.emission`) is taken with ln f linear
in r, exact for a hydrostatic layer, so each interval integrates exactly:
:func:`loglinear_segment` from the logarithms, :func:`_exponential_segment` from the end
values (the optical depth's form, which falls back to the trapezoid; the two are the same
integral but not the same rounding, so each caller keeps its own).

:func:`optical_core_radius_cgs` and :func:`default_core_radius_cgs` are the plain-float
core-radius rules of line synthesis (numpy only, for the registry's line rules, sweep
workers and :mod:`windsolve.lines`).
"""

import math

import numpy as np
from numba import njit


@njit(cache=True, error_model="numpy")
def loglinear_segment(dr, ga, k, span):
    """Integral over t in [t0, t0 + span] (r = r_a + t dr) of ga exp(k (t - t0)) dr.

    The one integral of a function whose logarithm is linear in r over (part
    of) an interval, used by every caller that has the logarithms.

    Parameters
    ----------
    dr : float
        Width of the whole interval [cm].
    ga : float
        The function's value at t0 (its unit times cm is the result's).
    k : float
        Change of the function's natural logarithm over the whole interval.
    span : float
        Fraction of the interval integrated, t1 - t0 (1 for the whole interval).

    Returns
    -------
    float
        ``dr * ga * span`` when ``k * span`` is all but zero (below 1e-12),
        else ``dr * ga * expm1(k span) / k``.
    """
    x = k * span
    if abs(x) < 1e-12:
        return dr * ga * span
    return dr * ga * math.expm1(x) / k


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
    interpolation the line kernels use for rho (:mod:`windsolve.core.lines.grid`), exact for
    a hydrostatic layer -- so each interval is integrated exactly and the
    crossing is solved for within its interval.  (A trapezoid sum on the
    same points misplaces the radius by a few 1e-4 of itself on a solved
    wind, which moved a FWHM dominated by gas just outside it by up to 1 %.)

    Parameters
    ----------
    r : ndarray
        Radius [cm], increasing.
    rho : ndarray
        Density [g cm^-3].
    kappa : ndarray
        Opacity [cm^2 g^-1].

    Returns
    -------
    float
        The tau = 2/3 radius [cm], or NaN.

    References
    ----------
    docs/physics.md, section 7 ("Core radius").
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


def optical_core_radius_cgs(r, rho, kappa):
    """Radius [cm] where tau = integral of kappa rho dr from outside reaches 2/3, or None.

    Parameters
    ----------
    r, rho, kappa : ndarray
        Radius [cm] (increasing), density [g/cm3] and opacity [cm2/g] of a
        profile, float64.

    Returns
    -------
    float or None
        The tau = 2/3 radius (summed from the outer end inward with kappa rho
        exponential in r between points, as the line kernels interpolate
        rho), the default core radius of a Model A result;
        None if the whole profile is optically thin (tau(r[0]) <= 2/3).
        Kernel :func:`optical_core_radius`.
    """
    rc = optical_core_radius(np.ascontiguousarray(r, dtype=np.float64),
                             np.ascontiguousarray(rho, dtype=np.float64),
                             np.ascontiguousarray(kappa, dtype=np.float64))
    return None if math.isnan(rc) else float(rc)


def default_core_radius_cgs(r, optical, photosphere_radius, model_radius, base_radius):
    """The default R_c [cm] of a solved wind (rules of :func:`windsolve.lines.line_widths`).

    The photosphere when finite (Model B); else the tau = 2/3 radius of
    ``optical`` = (radius, density, opacity) arrays of the profile (Model A,
    :func:`optical_core_radius_cgs`; None to skip); else the model's radius;
    else ``base_radius``; else r[0].  Plain floats (NaN = absent), for sweep
    workers as well as :func:`windsolve.lines.line_widths`.

    Parameters
    ----------
    r : ndarray
        Radius of the profile [cm], increasing.
    optical : tuple of ndarray or None
        (radius [cm], density [g cm^-3], opacity [cm^2 g^-1]), or None.
    photosphere_radius : float
        R_ph [cm], NaN for none.
    model_radius : float
        The model's radius [cm], NaN for none.
    base_radius : float
        The summary's base radius [cm], NaN for none.

    Returns
    -------
    float
        R_c [cm].

    References
    ----------
    docs/physics.md, section 7 ("Core radius").
    """
    if math.isfinite(photosphere_radius):
        return photosphere_radius
    if optical is not None:
        rc = optical_core_radius_cgs(*optical)
        if rc is not None:
            return rc
    if math.isfinite(model_radius):
        return model_radius
    if math.isfinite(base_radius):
        return base_radius
    return float(r[0])
