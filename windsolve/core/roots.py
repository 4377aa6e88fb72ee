"""Bracketed root-finders and binary searches shared by the kernels (compiled).

One copy of each algorithm; the model kernels call these instead of writing
their own.  numba, plain floats, ``cache=True, error_model="numpy"``.

* :func:`make_illinois` -- a factory: the Illinois variant of regula falsi
  for ``f(x, P, O)`` (a compiled function of the kernels' flat parameter
  vectors), returned as a compiled ``refine(lo, hi, f_lo, f_hi, P, O, xtol)``.
  A factory, not a function taking ``f`` as an argument, so that its callers
  stay cacheable on disk (DEVELOPERS.md: compiled functions are composed by
  closures).
* :func:`search_left`, :func:`search_right` -- ``numpy.searchsorted`` on a
  slice ``a[lo:hi]`` of a sorted array, returning an index into ``a``.
"""

import math

from numba import njit


def make_illinois(f):
    """Return a compiled bracketed root-finder for ``f(x, P, O)``.

    The Illinois variant of regula falsi (Dowell & Jarratt 1971, BIT 11, 168):
    superlinear on smooth N(r) and, unlike plain secant steps, it never
    leaves the bracket, so the steep N(r) an opacity bump can give cannot
    throw it off.  A factory, like
    :func:`windsolve.core.integrate.make_integrator`, so that callers stay
    cacheable on disk.
    """

    @njit(cache=True, error_model="numpy")
    def refine_root(lo, hi, f_lo, f_hi, P, O, xtol):
        """Root of f in [lo, hi] given f(lo) = f_lo, f(hi) = f_hi of opposite sign."""
        if f_lo == 0.0:
            return lo
        if f_hi == 0.0:
            return hi
        side = 0
        m = math.nan  # no estimate yet: the first one is never "converged"
        for _ in range(200):
            if f_hi == f_lo:
                m_new = 0.5 * (lo + hi)
            else:
                m_new = (lo * f_hi - hi * f_lo) / (f_hi - f_lo)
                if not lo < m_new < hi:
                    m_new = 0.5 * (lo + hi)
            converged = abs(m_new - m) <= xtol * (1.0 + abs(m_new)) or \
                hi - lo <= xtol * (1.0 + abs(lo))
            m = m_new
            if converged:
                break
            fm = f(m, P, O)
            if fm == 0.0:
                break
            if (fm > 0.0) == (f_lo > 0.0):
                lo = m
                f_lo = fm
                if side == -1:
                    f_hi *= 0.5
                side = -1
            else:
                hi = m
                f_hi = fm
                if side == 1:
                    f_lo *= 0.5
                side = 1
        return m

    return refine_root


@njit(cache=True, error_model="numpy", inline="always")
def search_left(a, x, lo, hi):
    """First i in [lo, hi) with a[i] >= x, else hi (a[lo:hi] non-decreasing).

    ``lo + numpy.searchsorted(a[lo:hi], x, side="left")``, without the slice.
    """
    while lo < hi:
        mid = (lo + hi) // 2
        if a[mid] < x:
            lo = mid + 1
        else:
            hi = mid
    return lo


@njit(cache=True, error_model="numpy", inline="always")
def search_right(a, x, lo, hi):
    """First i in [lo, hi) with a[i] > x, else hi (a[lo:hi] non-decreasing).

    ``lo + numpy.searchsorted(a[lo:hi], x, side="right")``, without the slice.
    """
    while lo < hi:
        mid = (lo + hi) // 2
        if a[mid] <= x:
            lo = mid + 1
        else:
            hi = mid
    return lo
