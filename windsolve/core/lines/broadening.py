"""Gaussian broadening of a profile on a uniform velocity grid (cgs floats): the exact
convolution of the piecewise-linear sampled profile."""

import math

import numpy as np
from numba import njit

SQRT_TWO_PI = math.sqrt(2.0 * math.pi)
SQRT_TWO = math.sqrt(2.0)
KERNEL_SIGMAS = 7.0  # the broadening kernel is cut this many sigma out


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

    Parameters
    ----------
    dw : float
        Grid step [cm s^-1] (any speed unit shared with sigma).
    sigma : float
        Standard deviation of the Gaussian, same unit, > 0.

    Returns
    -------
    ndarray
        2 half + 1 weights for offsets -half..half, half = ceil(7 sigma / dw) + 1.

    References
    ----------
    docs/physics.md, eq. 30.
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

    Parameters
    ----------
    f : ndarray
        The profile on the grid [any flux unit].
    dw : float
        Grid step [speed].
    sigma : float
        Standard deviation of the Gaussian [speed], FWHM / (2 sqrt(2 ln 2)).
    continuum : float
        The profile's value outside the grid.

    Returns
    -------
    ndarray
        The broadened profile.

    References
    ----------
    docs/physics.md, eq. 30.
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
