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

    Parameters
    ----------
    f : numba dispatcher
        Compiled ``f(x, P, O) -> float``.

    Returns
    -------
    numba dispatcher
        ``refine_root(lo, hi, f_lo, f_hi, P, O, xtol) -> x``: at most 200 steps,
        ending when the estimate moves, or the bracket shrinks, by at most
        ``xtol (1 + |x|)``.

    References
    ----------
    docs/physics.md, section 8.
    """

    @njit(cache=True, error_model="numpy")
    def refine_root(lo, hi, f_lo, f_hi, P, O, xtol):
        """Root of f in [lo, hi] given f(lo) = f_lo, f(hi) = f_hi of opposite sign.

        Parameters
        ----------
        lo, hi : float
            The bracket (in f's own variable).
        f_lo, f_hi : float
            f at lo and hi, of opposite sign (or one zero).
        P, O : ndarray
            The kernels' parameter vectors, passed to f.
        xtol : float
            Relative tolerance on x [dimensionless].

        Returns
        -------
        float
            The estimate of the root.
        """
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
def _search(a, x, lo, hi, right):
    """First i in [lo, hi) with a[i] > x (right) or a[i] >= x (not right), else hi."""
    while lo < hi:
        mid = (lo + hi) // 2
        if a[mid] < x or (right and a[mid] == x):
            lo = mid + 1
        else:
            hi = mid
    return lo


@njit(cache=True, error_model="numpy", inline="always")
def search_left(a, x, lo, hi):
    """First i in [lo, hi) with a[i] >= x, else hi (a[lo:hi] non-decreasing).

    ``lo + numpy.searchsorted(a[lo:hi], x, side="left")``, without the slice
    (but x = NaN gives lo, where numpy, sorting NaN last, gives hi).

    Parameters
    ----------
    a : ndarray
        Array, non-decreasing on [lo, hi).
    x : float
        The value sought.
    lo, hi : int
        The slice searched.

    Returns
    -------
    int
        An index into ``a``, in [lo, hi].
    """
    return _search(a, x, lo, hi, False)


@njit(cache=True, error_model="numpy", inline="always")
def search_right(a, x, lo, hi):
    """First i in [lo, hi) with a[i] > x, else hi (a[lo:hi] non-decreasing).

    ``lo + numpy.searchsorted(a[lo:hi], x, side="right")``, without the slice
    (but x = NaN gives lo, where numpy, sorting NaN last, gives hi).

    Parameters
    ----------
    a : ndarray
        Array, non-decreasing on [lo, hi).
    x : float
        The value sought.
    lo, hi : int
        The slice searched.

    Returns
    -------
    int
        An index into ``a``, in [lo, hi].
    """
    return _search(a, x, lo, hi, True)


# make_brent's outcome codes
ROOT_FOUND = 0
ROOT_MAX_EVALS = 1  # max_evals calls of f without convergence
ROOT_JUMP = 2  # the bracket collapsed onto a sign change with |f| > jump_tol: a jump, no root
ROOT_F_FAILED = 3  # f returned a nonzero code (given as the second value)


def make_brent(f):
    """Return a compiled Brent root-finder for ``f(x, args) -> (code, fx, p, q)``
    that carries the payload ``(p, q)`` (two floats) of every trial.

    Brent's method (Brent 1973, Algorithms for Minimization without
    Derivatives, ch. 4; the layout of scipy's ``brentq``).  ``code != 0`` from
    ``f`` is a failed trial and ends the search.  The root-finder
    ``brent(xpre, fpre, ppre, qpre, xcur, fcur, pcur, qcur, args, ftol, xtol,
    jump_tol, evals, max_evals)`` starts from a bracket (fpre, fcur of
    opposite sign) and stops once ``|f| < ftol``, or when the bracket or the
    interpolated step falls below ``xtol``; a bracket that collapses with
    ``|f| > jump_tol`` is a jump of f, not a root.  Returns ``(outcome,
    f_code, x, p, q, evals)``: an outcome code above, the failed trial's code
    (ROOT_F_FAILED), the last abscissa, its payload (NaN unless ROOT_FOUND)
    and the count of calls so far (``evals`` given counts earlier ones).
    Carrying the payload means the answer needs no extra call of f.

    Parameters
    ----------
    f : numba dispatcher
        Compiled ``f(x, args) -> (code, fx, p, q)``.

    Returns
    -------
    numba dispatcher
        The compiled ``brent`` described above.
    """

    @njit(cache=True, error_model="numpy")
    def brent(xpre, fpre, ppre, qpre, xcur, fcur, pcur, qcur, args, ftol, xtol, jump_tol,
              evals, max_evals):
        """Brent's method from the bracket (xpre, xcur), carrying each trial's (p, q).

        Parameters
        ----------
        xpre, fpre, ppre, qpre : float
            One end of the bracket, f there and its payload.
        xcur, fcur, pcur, qcur : float
            The other end (f of opposite sign), f there and its payload.
        args : tuple
            Passed to f.
        ftol : float
            Stop when |f| < ftol (f's unit).
        xtol : float
            Absolute tolerance on x (x's unit).
        jump_tol : float
            A bracket collapsing with |f| above this is a jump, not a root.
        evals, max_evals : int
            Calls of f made so far, and the most allowed.

        Returns
        -------
        tuple
            (outcome, f_code, x, p, q, evals), as :func:`make_brent` says.
        """
        tol = 0.5 * xtol
        xblk = 0.0
        fblk = 0.0
        pblk = math.nan
        qblk = math.nan
        spre = 0.0
        scur = 0.0
        while True:
            if evals >= max_evals:
                return ROOT_MAX_EVALS, 0, xcur, math.nan, math.nan, evals
            if (fpre < 0.0) != (fcur < 0.0):
                xblk, fblk, pblk, qblk = xpre, fpre, ppre, qpre
                spre = xcur - xpre
                scur = spre
            if abs(fblk) < abs(fcur):
                xpre, fpre, ppre, qpre = xcur, fcur, pcur, qcur
                xcur, fcur, pcur, qcur = xblk, fblk, pblk, qblk
                xblk, fblk, pblk, qblk = xpre, fpre, ppre, qpre
            sbis = 0.5 * (xblk - xcur)
            if abs(fcur) < ftol:
                break
            if abs(sbis) < tol:
                if abs(fcur) > jump_tol:
                    return ROOT_JUMP, 0, xcur, math.nan, math.nan, evals
                break
            if abs(spre) > tol and abs(fcur) < abs(fpre):
                if xpre == xblk:
                    stry = -fcur * (xcur - xpre) / (fcur - fpre)
                else:
                    dpre = (fpre - fcur) / (xpre - xcur)
                    dblk = (fblk - fcur) / (xblk - xcur)
                    stry = -fcur * (fblk * dblk - fpre * dpre) / (dblk * dpre * (fblk - fpre))
                if 2.0 * abs(stry) < min(abs(spre), 3.0 * abs(sbis) - tol):
                    spre = scur
                    scur = stry
                    if abs(stry) < tol and abs(fcur) < jump_tol:
                        break  # the interpolated root is within xtol of xcur
                else:
                    spre = sbis
                    scur = sbis
            else:
                spre = sbis
                scur = sbis
            xpre, fpre, ppre, qpre = xcur, fcur, pcur, qcur
            if abs(scur) > tol:
                xcur += scur
            else:
                xcur += tol if sbis > 0.0 else -tol
            code, fcur, pcur, qcur = f(xcur, args)
            evals += 1
            if code != 0:
                return ROOT_F_FAILED, code, xcur, math.nan, math.nan, evals
        return ROOT_FOUND, 0, xcur, pcur, qcur, evals

    return brent
