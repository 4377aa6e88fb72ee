"""Flux-mean opacity laws kappa(rho, T) as compiled kernels (cgs).

All laws share one flat parameter vector ``O`` so that a wind kernel can take
any of them without recompiling (numba caches one specialisation):

=====  ==========================================================
slot   meaning
=====  ==========================================================
0      law code (``LAW_*`` below)
1      electron-scattering opacity kappa_es [cm2 g-1]
2..7   law parameters (see each law)
8      porosity length h0 at r = R0 [cm]; 0 switches porosity off
9      porosity reference radius R0 [cm]
10     porosity radial exponent q, h(r) = h0 (r / R0)**q
11..   tabulated law only: the table block (below); absent otherwise
=====  ==========================================================

The tabulated law (``LAW_TABLE``) keeps its edges in the parameter slots and
appends the table itself, so every law still travels in one float64 vector
and the wind kernels keep one numba signature:

==========================  =================================================
slot                        meaning
==========================  =================================================
2, 3                        log10 T of the first and last grid node
4, 5                        log10 R of the first and last grid node
6                           1.0: clamp to the table edge; 0.0: NaN outside
7                           1.0: the table has holes (ragged edges), 0.0: it
                            is rectangular (the strip block below is unused)
11                          nT, number of log10 T nodes (>= 4)
12                          nR, number of log10 R nodes (>= 4)
13, 14                      1 / spacing of the log10 T, log10 R nodes when
                            uniform (cell found by division), else 0.0
                            (found by bisection)
15 .. 15+nT-1               log10 T nodes, strictly increasing
15+nT .. 15+nT+nR-1         log10 R nodes, strictly increasing
15+nT+nR + 4 (i nR + j) +k  node (i, j): k = 0 log10 kappa, 1 its derivative
                            in log10 T, 2 in log10 R, 3 the cross derivative
S + 2 i, S + 2 i + 1        with S = 15+nT+nR+4 nT nR: the log10 R range
                            [lo_i, hi_i] of the valid cells of the cell row
                            i (log10 T between nodes i and i+1); a cell is
                            valid when none of its four nodes is a hole
==========================  =================================================

Tables with holes (published tables are not rectangular: values outside the
range of the computation are missing) keep NaN at the missing nodes.  The
valid cells of each row of cells form one run in log10 R (the user layer
checks or cuts to that), so "on the table" means: log10 T on the grid and
log10 R inside the strip of its cell row.  The interpolation therefore never
reads a cell that touches a missing node.

Here R = rho / T6**3 with T6 = T / 1e6 K (cgs), the variable of published
Rosseland-mean tables; kappa is in cm2 g-1.  Between the nodes the kernel
evaluates the bicubic Hermite interpolant of those node values and
derivatives (:func:`table_log_opacity`).  The node derivatives are
computed once, in Python, by :func:`windsolve.tables.node_derivatives`.

The user-facing registry that maps names and units onto these slots is
:data:`windsolve.opacity.OPACITY_LAWS`.
"""

import math

import numpy as np
from numba import njit

from .roots import search_right

LAW_ELECTRON_SCATTERING = 0
LAW_KRAMERS = 1
LAW_BUMP = 2
LAW_TABLE = 3

N_SLOTS = 11
SLOT_LAW = 0
SLOT_KES = 1
SLOT_P0 = 2
SLOT_H0 = 8
SLOT_R0 = 9
SLOT_Q = 10
# tabulated law (see the module docstring)
SLOT_LOGT_MIN = 2
SLOT_LOGT_MAX = 3
SLOT_LOGR_MIN = 4
SLOT_LOGR_MAX = 5
SLOT_CLAMP = 6
SLOT_HOLES = 7
SLOT_NT = 11
SLOT_NR = 12
SLOT_INV_HT = 13
SLOT_INV_HR = 14
SLOT_GRID = 15
UNIFORM_TOL = 1e-9  # relative spread of the steps below which a grid counts as uniform
NODE_STRIDE = 4  # log kappa, d/dlogT, d/dlogR, d2/dlogT dlogR per node
EDGE_TOL = 1e-12  # dex: points this close outside an edge count as on it

LN10 = math.log(10.0)


@njit(cache=True, error_model="numpy", inline="always")
def kramers(rho, T, kes, coeff):
    """Electron scattering plus a Kramers-form free-free/bound-free term.

    kappa = kappa_es + coeff * rho * T**-3.5 with
    coeff = (C_ff (1 - Z) + C_bf (g/t) Z) (1 + X).  Kramers (1923, Phil. Mag.
    46, 836); the textbook coefficients C_ff = 3.68e22 and C_bf = 4.34e25 (cgs)
    are those quoted in Hansen, Kawaler & Trimble (2004), Stellar Interiors,
    section 4.4 (section number from memory).

    Parameters
    ----------
    rho : float
        Density [g cm^-3].
    T : float
        Temperature [K].
    kes : float
        Electron-scattering opacity [cm^2 g^-1].
    coeff : float
        (C_ff (1 - Z) + C_bf (g/t) Z) (1 + X) [cgs: cm^5 g^-2 K^3.5].

    Returns
    -------
    float
        kappa [cm^2 g^-1].

    References
    ----------
    docs/physics.md, eq. 6.
    """
    return kes + coeff * rho * T ** -3.5


@njit(cache=True, error_model="numpy", inline="always")
def bump(rho, T, kes, amplitude, rho_ref, s, log_tb, width):
    """Parametric opacity bump, a transparent stand-in for the iron bump.

    kappa = kappa_es [1 + A (rho/rho_ref)**s exp(-(log10 T - log10 T_b)**2 / (2 w**2))]

    Parameters
    ----------
    rho : float
        Density [g cm^-3].
    T : float
        Temperature [K].
    kes : float
        Electron-scattering opacity [cm^2 g^-1].
    amplitude : float
        A [dimensionless].
    rho_ref : float
        Reference density [g cm^-3].
    s : float
        Density exponent [dimensionless].
    log_tb : float
        log10 of the peak temperature [log10 K].
    width : float
        Width w [dex].

    Returns
    -------
    float
        kappa [cm^2 g^-1].

    References
    ----------
    docs/physics.md, eq. 7.
    """
    d = (math.log10(T) - log_tb) / width
    return kes * (1.0 + amplitude * (rho / rho_ref) ** s * math.exp(-0.5 * d * d))


# --- tabulated opacity -------------------------------------------------------

@njit(cache=True, error_model="numpy", inline="always")
def table_coordinates(rho, T):
    """(log10 T, log10 R) of a point, R = rho / (T / 1e6 K)**3 (cgs).

    Parameters
    ----------
    rho : float
        Density [g cm^-3].
    T : float
        Temperature [K].

    Returns
    -------
    log_T, log_R : float
        log10 T [log10 K] and log10 R [log10 g cm^-3].

    References
    ----------
    docs/physics.md, eq. 8.
    """
    log_T = math.log10(T)
    return log_T, math.log10(rho) - 3.0 * log_T + 18.0


@njit(cache=True, error_model="numpy", inline="always")
def _find_cell(O, start, n, x, inv_h):
    """Index i of the cell [g_i, g_i+1] of the n nodes O[start:start+n] holding x.

    On a uniform grid (inv_h = 1 / spacing > 0) the index is computed and
    corrected for rounding; otherwise bisection, so non-uniform grids work.
    x on the last node falls in the last cell.  x must lie on the grid, to
    within EDGE_TOL (callers check or clamp first).
    """
    if inv_h > 0.0:
        i = int((x - O[start]) * inv_h)
        if i < 0:
            i = 0
        elif i > n - 2:
            i = n - 2
        if x < O[start + i] and i > 0:
            i -= 1
        elif x >= O[start + i + 1] and i < n - 2:
            i += 1
        return i
    # the nodes g_1 .. g_{n-2} at or below x (g_0 <= x is taken for granted)
    return search_right(O, x, start + 1, start + n - 1) - start - 1


@njit(cache=True, error_model="numpy")
def table_log_opacity(O, log_T, log_R):
    """Bicubic Hermite interpolant of log10 kappa and its gradient.

    Returns ``(f, f_T, f_R)``: log10 kappa and its derivatives with respect
    to log10 T and log10 R at a point on the table (no range check here).

    Notes
    -----
    On the cell [x0, x1] x [y0, y1] with widths hx, hy and t = (x - x0)/hx,
    s = (y - y0)/hy,

    .. math::

        f = \\sum_{a,b\\in\\{0,1\\}} f_{ab} H_a(t) H_b(s)
            + h_x f_{x,ab} K_a(t) H_b(s) + h_y f_{y,ab} H_a(t) K_b(s)
            + h_x h_y f_{xy,ab} K_a(t) K_b(s)

    with the cubic Hermite basis H_0 = 2t^3 - 3t^2 + 1, H_1 = 3t^2 - 2t^3,
    K_0 = t^3 - 2t^2 + t, K_1 = t^3 - t^2 (e.g. Press et al. 2007, Numerical
    Recipes, 3rd ed., section 3.6.3, "bicubic interpolation").  Value and
    first derivatives are continuous across cell edges for any node
    derivatives (C1); with the spline derivatives of
    :func:`windsolve.tables.node_derivatives` the result is the tensor-product
    cubic spline (C2, error O(h^4)).

    Parameters
    ----------
    O : ndarray
        Opacity vector of the tabulated law (module docstring).
    log_T : float
        log10 T [log10 K], on the table.
    log_R : float
        log10 R [log10 g cm^-3], on the table.

    Returns
    -------
    f, f_T, f_R : float
        log10 kappa [log10 cm^2 g^-1] and its derivatives [dimensionless].
    """
    nT = int(O[SLOT_NT])
    nR = int(O[SLOT_NR])
    start_R = SLOT_GRID + nT
    start_F = start_R + nR
    i = _find_cell(O, SLOT_GRID, nT, log_T, O[SLOT_INV_HT])
    j = _find_cell(O, start_R, nR, log_R, O[SLOT_INV_HR])
    x0 = O[SLOT_GRID + i]
    hx = O[SLOT_GRID + i + 1] - x0
    y0 = O[start_R + j]
    hy = O[start_R + j + 1] - y0
    t = (log_T - x0) / hx
    s = (log_R - y0) / hy
    t2 = t * t
    s2 = s * s
    # Hermite basis and its derivative in t (per unit t) ...
    H0t = 2.0 * t2 * t - 3.0 * t2 + 1.0
    H1t = 3.0 * t2 - 2.0 * t2 * t
    K0t = t2 * t - 2.0 * t2 + t
    K1t = t2 * t - t2
    dH0t = 6.0 * t2 - 6.0 * t
    dH1t = -dH0t
    dK0t = 3.0 * t2 - 4.0 * t + 1.0
    dK1t = 3.0 * t2 - 2.0 * t
    # ... and in s
    H0s = 2.0 * s2 * s - 3.0 * s2 + 1.0
    H1s = 3.0 * s2 - 2.0 * s2 * s
    K0s = s2 * s - 2.0 * s2 + s
    K1s = s2 * s - s2
    dH0s = 6.0 * s2 - 6.0 * s
    dH1s = -dH0s
    dK0s = 3.0 * s2 - 4.0 * s + 1.0
    dK1s = 3.0 * s2 - 2.0 * s
    f = 0.0
    fx = 0.0
    fy = 0.0
    for a in range(2):
        if a == 0:
            Ht, Kt, dHt, dKt = H0t, K0t, dH0t, dK0t
        else:
            Ht, Kt, dHt, dKt = H1t, K1t, dH1t, dK1t
        for b in range(2):
            if b == 0:
                Hs, Ks, dHs, dKs = H0s, K0s, dH0s, dK0s
            else:
                Hs, Ks, dHs, dKs = H1s, K1s, dH1s, dK1s
            k = start_F + NODE_STRIDE * ((i + a) * nR + (j + b))
            v = O[k]
            vx = O[k + 1] * hx
            vy = O[k + 2] * hy
            vxy = O[k + 3] * hx * hy
            f += v * Ht * Hs + vx * Kt * Hs + vy * Ht * Ks + vxy * Kt * Ks
            fx += v * dHt * Hs + vx * dKt * Hs + vy * dHt * Ks + vxy * dKt * Ks
            fy += v * Ht * dHs + vx * Kt * dHs + vy * Ht * dKs + vxy * Kt * dKs
    return f, fx / hx, fy / hy


@njit(cache=True, error_model="numpy")
def table_log_opacity_value(O, log_T, log_R):
    """log10 kappa alone: :func:`table_log_opacity` without the gradient.

    The wind kernels' hot path (about half the cost of value and gradient).

    Parameters
    ----------
    O : ndarray
        Opacity vector of the tabulated law.
    log_T, log_R : float
        The point on the table [log10 K, log10 g cm^-3].

    Returns
    -------
    float
        log10 kappa [log10 cm^2 g^-1].
    """
    i = _find_cell(O, SLOT_GRID, int(O[SLOT_NT]), log_T, O[SLOT_INV_HT])
    return _cell_value(O, i, log_T, log_R)


@njit(cache=True, error_model="numpy", inline="always")
def _cell_value(O, i, log_T, log_R):
    """log10 kappa at a point of the cell row i (the log10 R cell found here)."""
    nT = int(O[SLOT_NT])
    nR = int(O[SLOT_NR])
    start_R = SLOT_GRID + nT
    j = _find_cell(O, start_R, nR, log_R, O[SLOT_INV_HR])
    if O[SLOT_HOLES] != 0.0 and j > 0:
        # On the upper end of a ragged row's strip the cell found starts
        # there (beyond the strip): take the one below it.
        if O[start_R + j] >= O[_strip_start(O) + 2 * i + 1] - EDGE_TOL:
            j -= 1
    return _hermite(O, i, j, log_T, log_R)


@njit(cache=True, error_model="numpy", inline="always")
def _hermite(O, i, j, log_T, log_R):
    """The bicubic Hermite value on cell (i, j) (Notes of table_log_opacity)."""
    nT = int(O[SLOT_NT])
    nR = int(O[SLOT_NR])
    start_R = SLOT_GRID + nT
    start_F = start_R + nR
    x0 = O[SLOT_GRID + i]
    hx = O[SLOT_GRID + i + 1] - x0
    y0 = O[start_R + j]
    hy = O[start_R + j + 1] - y0
    t = (log_T - x0) / hx
    s = (log_R - y0) / hy
    t2 = t * t
    s2 = s * s
    H1t = 3.0 * t2 - 2.0 * t2 * t
    H0t = 1.0 - H1t
    K0t = (t2 * t - 2.0 * t2 + t) * hx
    K1t = (t2 * t - t2) * hx
    H1s = 3.0 * s2 - 2.0 * s2 * s
    H0s = 1.0 - H1s
    K0s = (s2 * s - 2.0 * s2 + s) * hy
    K1s = (s2 * s - s2) * hy
    k00 = start_F + NODE_STRIDE * (i * nR + j)
    k01 = k00 + NODE_STRIDE
    k10 = k00 + NODE_STRIDE * nR
    k11 = k10 + NODE_STRIDE
    # Sum over the corners (a, b) of the Hermite products (Notes of
    # table_log_opacity); the cell widths are folded into K.
    return (H0s * (H0t * O[k00] + K0t * O[k00 + 1] + H1t * O[k10] + K1t * O[k10 + 1])
            + K0s * (H0t * O[k00 + 2] + K0t * O[k00 + 3] + H1t * O[k10 + 2] + K1t * O[k10 + 3])
            + H1s * (H0t * O[k01] + K0t * O[k01 + 1] + H1t * O[k11] + K1t * O[k11 + 1])
            + K1s * (H0t * O[k01 + 2] + K0t * O[k01 + 3] + H1t * O[k11 + 2]
                     + K1t * O[k11 + 3]))


@njit(cache=True, error_model="numpy", inline="always")
def _strip_start(O):
    """Index of the first strip bound (lo_0) in O (module docstring)."""
    nT = int(O[SLOT_NT])
    nR = int(O[SLOT_NR])
    return SLOT_GRID + nT + nR + NODE_STRIDE * nT * nR


@njit(cache=True, error_model="numpy", inline="always")
def _outside(O, log_T, log_R):
    # EDGE_TOL: a node on the edge, reached through rho = R T6^3 and back,
    # may miss the edge by rounding; it still counts as on the table.
    return (log_T < O[SLOT_LOGT_MIN] - EDGE_TOL or log_T > O[SLOT_LOGT_MAX] + EDGE_TOL
            or log_R < O[SLOT_LOGR_MIN] - EDGE_TOL or log_R > O[SLOT_LOGR_MAX] + EDGE_TOL)


# Not inlined (unlike the analytic laws): a table lookup is a few hundred
# lines of IR, and numba's inline="always" puts a copy of it into every
# caller -- every right-hand-side evaluation of every DOP853 stage (13 a
# step), for every integrator, whatever the model's law.  That made most of
# the first run's compile time (benchmarks/bench_startup.py); as a call it
# compiles once and costs a few ns against the lookup's tens.
@njit(cache=True, error_model="numpy")
def table_opacity(O, rho, T):
    """Tabulated opacity kappa(rho, T) [cm2 g-1].

    NaN outside the table unless slot 6 asks for clamping, in which case
    log10 T and log10 R are each moved onto the nearest table edge.  A NaN
    input gives NaN either way.

    Parameters
    ----------
    O : ndarray
        Opacity vector of the tabulated law.
    rho : float
        Density [g cm^-3].
    T : float
        Temperature [K].

    Returns
    -------
    float
        kappa [cm^2 g^-1], or NaN.

    References
    ----------
    docs/physics.md, section 2 ("Tables").
    """
    log_T, log_R = table_coordinates(rho, T)
    if _outside(O, log_T, log_R):
        if O[SLOT_CLAMP] == 0.0:
            return np.nan
        # Written out (not min/max) so that a NaN in the other coordinate
        # stays NaN.
        if log_T < O[SLOT_LOGT_MIN]:
            log_T = O[SLOT_LOGT_MIN]
        elif log_T > O[SLOT_LOGT_MAX]:
            log_T = O[SLOT_LOGT_MAX]
        if log_R < O[SLOT_LOGR_MIN]:
            log_R = O[SLOT_LOGR_MIN]
        elif log_R > O[SLOT_LOGR_MAX]:
            log_R = O[SLOT_LOGR_MAX]
    i = _find_cell(O, SLOT_GRID, int(O[SLOT_NT]), log_T, O[SLOT_INV_HT])
    if O[SLOT_HOLES] != 0.0:
        # A ragged table: log10 R must lie in the strip of valid cells of
        # this cell row; clamping moves it onto the strip's nearer end.
        k = _strip_start(O) + 2 * i
        if log_R < O[k] - EDGE_TOL or log_R > O[k + 1] + EDGE_TOL:
            if O[SLOT_CLAMP] == 0.0:
                return np.nan
            log_R = O[k] if log_R < O[k] else O[k + 1]
    return math.exp(LN10 * _cell_value(O, i, log_T, log_R))


@njit(cache=True, error_model="numpy", inline="always")
def off_table(O, rho, T):
    """True where a tabulated law without clamping has no value at (rho, T).

    False for every analytic law, for a clamped table, and for NaN input
    (a NaN there comes from elsewhere).  Wind kernels use it to stop with a
    status that names (rho, T) instead of a bare NaN; note that an adaptive
    step never *accepts* an off-table point (see :func:`table_margin`).

    Parameters
    ----------
    O : ndarray
        Opacity vector.
    rho : float
        Density [g cm^-3].
    T : float
        Temperature [K].

    Returns
    -------
    bool
    """
    if O[SLOT_LAW] != LAW_TABLE or O[SLOT_CLAMP] != 0.0:
        return False
    log_T, log_R = table_coordinates(rho, T)
    if _outside(O, log_T, log_R):
        return True
    if O[SLOT_HOLES] == 0.0:
        return False
    k = _strip_start(O) + 2 * _find_cell(O, SLOT_GRID, int(O[SLOT_NT]), log_T,
                                         O[SLOT_INV_HT])
    return log_R < O[k] - EDGE_TOL or log_R > O[k + 1] + EDGE_TOL


@njit(cache=True, error_model="numpy", inline="always")
def opacity(O, rho, T):
    """Opacity of the law encoded in ``O`` at density rho [g cm-3], T [K].

    Parameters
    ----------
    O : ndarray
        Opacity vector (module docstring).
    rho : float
        Density [g cm^-3].
    T : float
        Temperature [K].

    Returns
    -------
    float
        kappa [cm^2 g^-1], without porosity; NaN for an unknown law code.

    References
    ----------
    docs/physics.md, eqs. 5-8.
    """
    # Compare the float slot directly: converting it to an integer first
    # costs measurably in the innermost loop.
    law = O[SLOT_LAW]
    kes = O[SLOT_KES]
    if law == LAW_ELECTRON_SCATTERING:
        return kes
    elif law == LAW_KRAMERS:
        return kramers(rho, T, kes, O[SLOT_P0])
    elif law == LAW_BUMP:
        return bump(rho, T, kes, O[2], O[3], O[4], O[5], O[6])
    elif law == LAW_TABLE:
        return table_opacity(O, rho, T)
    return np.nan


@njit(cache=True, error_model="numpy")
def table_margin(O, rho, T):
    """Distance [dex] of (log10 T, log10 R) from the nearest table edge.

    Positive inside, negative outside; +inf for analytic laws and clamped
    tables.  An adaptive integration that runs off an unclamped table does not
    step onto an off-table point: its Runge-Kutta stages there return NaN, so
    the step shrinks until the integrator gives up just short of the edge.  A
    small margin at that last accepted point is how a driver tells "left the
    table" from other step-size failures.

    Parameters
    ----------
    O : ndarray
        Opacity vector.
    rho : float
        Density [g cm^-3].
    T : float
        Temperature [K].

    Returns
    -------
    float
        The margin [dex].
    """
    if O[SLOT_LAW] != LAW_TABLE or O[SLOT_CLAMP] != 0.0:
        return np.inf
    log_T, log_R = table_coordinates(rho, T)
    m = min(log_T - O[SLOT_LOGT_MIN], O[SLOT_LOGT_MAX] - log_T,
            log_R - O[SLOT_LOGR_MIN], O[SLOT_LOGR_MAX] - log_R)
    if O[SLOT_HOLES] == 0.0 or not m >= -EDGE_TOL:
        return m
    return min(m, _strip_margin(O, log_T, log_R))


@njit(cache=True, error_model="numpy")
def _strip_margin(O, log_T, log_R):
    """Distance [dex] to the edge of the valid cells of a ragged table.

    In log10 R to the ends of the point's own strip, in log10 T to the
    neighbouring cell row when that row's strip does not hold log10 R (the
    edge of a hole lies there).  Negative in a hole.
    """
    nT = int(O[SLOT_NT])
    i = _find_cell(O, SLOT_GRID, nT, log_T, O[SLOT_INV_HT])
    S = _strip_start(O)
    k = S + 2 * i
    m = min(log_R - O[k], O[k + 1] - log_R)
    if i + 1 < nT - 1:
        if log_R < O[k + 2] or log_R > O[k + 3]:
            m = min(m, O[SLOT_GRID + i + 1] - log_T)
    if i > 0:
        if log_R < O[k - 2] or log_R > O[k - 1]:
            m = min(m, log_T - O[SLOT_GRID + i])
    return m


@njit(cache=True, error_model="numpy")
def tabulate_log_opacity(O, log_T, log_R):
    """log10 kappa of the law in ``O`` at rho = R (T/1e6 K)**3 on a grid (nT, nR).

    The converter behind :func:`windsolve.tables.tabulate`; NaN where the
    law gives no positive opacity.

    Parameters
    ----------
    O : ndarray
        Opacity vector.
    log_T : ndarray (nT,)
        log10 T [log10 K].
    log_R : ndarray (nR,)
        log10 R [log10 g cm^-3] (docs/physics.md, eq. 8).

    Returns
    -------
    ndarray (nT, nR)
        log10 kappa [log10 cm^2 g^-1].
    """
    out = np.empty((log_T.shape[0], log_R.shape[0]))
    for i in range(log_T.shape[0]):
        T = 10.0 ** log_T[i]
        for j in range(log_R.shape[0]):
            rho = 10.0 ** (log_R[j] + 3.0 * log_T[i] - 18.0)
            k = opacity(O, rho, T)
            out[i, j] = math.log10(k) if k > 0.0 else np.nan
    return out


@njit(cache=True, error_model="numpy", inline="always")
def porosity_factor(tau_b):
    """Porosity reduction (1 - exp(-tau_b)) / tau_b for clumps of optical depth tau_b.

    Shaviv (1998, ApJ 494, L193); Owocki, Gayley & Shaviv (2004, ApJ 616, 525),
    eq. 4 (a single clump size).  Uses a series for tau_b < 1e-5 to avoid the
    0/0 cancellation.

    Parameters
    ----------
    tau_b : float
        Optical depth of one clump, kappa rho h [dimensionless].

    Returns
    -------
    float
        kappa_eff / kappa [dimensionless].

    References
    ----------
    docs/physics.md, eq. 9.
    """
    if tau_b < 1e-5:
        return 1.0 - 0.5 * tau_b + tau_b * tau_b / 6.0
    return -math.expm1(-tau_b) / tau_b


@njit(cache=True, error_model="numpy", inline="always")
def porosity_length(O, r):
    """h(r) = h0 (r / R0)**q [cm].

    Parameters
    ----------
    O : ndarray
        Opacity vector (slots 8-10 hold h0, R0, q).
    r : float
        Radius [cm].

    Returns
    -------
    float
        Porosity length [cm].

    References
    ----------
    docs/physics.md, eq. 10.
    """
    q = O[SLOT_Q]
    # A general pow costs ~20 ns, several times the rest of this call;
    # the common exponents 0 and 1 skip it.
    if q == 0.0:
        return O[SLOT_H0]
    if q == 1.0:
        return O[SLOT_H0] * (r / O[SLOT_R0])
    return O[SLOT_H0] * math.exp(q * math.log(r / O[SLOT_R0]))


@njit(cache=True, error_model="numpy", inline="always")
def effective_opacity(O, rho, T, r):
    """Opacity with the porosity modifier applied when h0 > 0.

    Parameters
    ----------
    O : ndarray
        Opacity vector.
    rho : float
        Density [g cm^-3].
    T : float
        Temperature [K].
    r : float
        Radius [cm].

    Returns
    -------
    float
        kappa_eff [cm^2 g^-1].

    References
    ----------
    docs/physics.md, eqs. 9 and 10.
    """
    k = opacity(O, rho, T)
    if O[SLOT_H0] > 0.0:
        k *= porosity_factor(k * rho * porosity_length(O, r))
    return k


def pack(law_code, kes, params=(), porosity=(0.0, 1.0, 0.0), extra=None):
    """Build the flat parameter vector ``O`` (plain Python helper).

    ``extra`` (1-D floats) is appended after slot 10: the table block of the
    tabulated law (see :func:`pack_table`).

    Parameters
    ----------
    law_code : int
        One of the ``LAW_*`` codes.
    kes : float
        Electron-scattering opacity [cm^2 g^-1].
    params : sequence of float
        The law's parameters for slots 2-7 [cgs].
    porosity : tuple of float
        (h0 [cm], R0 [cm], q [dimensionless]).
    extra : array_like or None
        The table block, or None.

    Returns
    -------
    ndarray
        The vector ``O``.
    """
    n_extra = 0 if extra is None else len(extra)
    O = np.zeros(N_SLOTS + n_extra)
    O[SLOT_LAW] = law_code
    O[SLOT_KES] = kes
    for i, value in enumerate(params):
        O[SLOT_P0 + i] = value
    O[SLOT_H0], O[SLOT_R0], O[SLOT_Q] = porosity
    if n_extra:
        O[N_SLOTS:] = extra
    return O


def pack_table(log_T, log_R, nodes, clamp=False):
    """(params, extra) for :func:`pack` from a table and its node data.

    ``nodes`` has shape (nT, nR, 4): log10 kappa, d/dlog T, d/dlog R and the
    cross derivative at each node.  Checks only the shapes; the user layer
    (:mod:`windsolve.tables`) validates the content.

    Parameters
    ----------
    log_T : array_like (nT,)
        log10 T nodes [log10 K].
    log_R : array_like (nR,)
        log10 R nodes [log10 g cm^-3].
    nodes : array_like (nT, nR, 4)
        Node values and derivatives.
    clamp : bool
        Clamp to the table edge instead of NaN outside.

    Returns
    -------
    params : tuple of float
        Slots 2-7 (grid edges, clamp flag, holes flag).
    extra : ndarray
        The table block (slot 11 on), with the cell strips at its end.

    Raises
    ------
    ValueError
        The shapes do not agree.
    """
    log_T = np.asarray(log_T, dtype=float)
    log_R = np.asarray(log_R, dtype=float)
    nodes = np.asarray(nodes, dtype=float)
    nT, nR = log_T.size, log_R.size
    if nodes.shape != (nT, nR, NODE_STRIDE):
        raise ValueError(f"node data of shape {nodes.shape}, expected {(nT, nR, NODE_STRIDE)}")
    strips = cell_strips(log_R, nodes[:, :, 0])
    holes = bool(np.isnan(nodes[:, :, 0]).any())
    params = (log_T[0], log_T[-1], log_R[0], log_R[-1], 1.0 if clamp else 0.0,
              1.0 if holes else 0.0)
    extra = np.concatenate(([nT, nR, _inverse_step(log_T), _inverse_step(log_R)],
                            log_T, log_R, nodes.ravel(), strips.ravel()))
    return params, extra


def cell_strips(log_R, log_kappa):
    """The log10 R range [lo_i, hi_i] of the valid cells of each cell row, (nT - 1, 2).

    A cell is valid when its four nodes are finite.  Where a row's valid
    cells form several runs, the longest is kept (the others count as
    outside); a row without one gets (inf, -inf): nothing is inside.

    Parameters
    ----------
    log_R : array_like (nR,)
        log10 R nodes [log10 g cm^-3].
    log_kappa : array_like (nT, nR)
        Node values, NaN at holes.

    Returns
    -------
    ndarray (nT - 1, 2)
        lo_i, hi_i [log10 g cm^-3].
    """
    log_R = np.asarray(log_R, dtype=float)
    f = np.isfinite(np.asarray(log_kappa, dtype=float))
    valid = f[:-1, :-1] & f[:-1, 1:] & f[1:, :-1] & f[1:, 1:]
    out = np.empty((valid.shape[0], 2))
    for i, row in enumerate(valid):
        best, run, start, best_start = 0, 0, 0, 0
        for j, ok in enumerate(row):
            if ok:
                if run == 0:
                    start = j
                run += 1
                if run > best:
                    best, best_start = run, start
            else:
                run = 0
        if best:
            out[i] = log_R[best_start], log_R[best_start + best]
        else:
            out[i] = np.inf, -np.inf
    return out


def _inverse_step(grid):
    """1 / spacing of a uniform grid, 0.0 for a non-uniform one."""
    steps = np.diff(grid)
    if np.ptp(steps) <= UNIFORM_TOL * steps.mean():
        return (grid.size - 1) / (grid[-1] - grid[0])
    return 0.0


def describe_off_table(O, rho, T):
    """Where (rho, T) lies off a table, in words (plain Python, for messages).

    Parameters
    ----------
    O : ndarray
        Opacity vector of the tabulated law.
    rho : float
        Density [g cm^-3].
    T : float
        Temperature [K].

    Returns
    -------
    str
        E.g. ``"rho = 1e-12 g/cm3, T = 1e+05 K (log T = 5, log R = -8.2): below the
        table's log R edge -8 at this log T"``.
    """
    log_T, log_R = table_coordinates(rho, T)
    where = (f"rho = {rho:.3g} g/cm3, T = {T:.3g} K (log T = {log_T:.3f}, "
             f"log R = {log_R:.3f})")
    if O[SLOT_LAW] != LAW_TABLE:
        return where
    if log_T < O[SLOT_LOGT_MIN] - EDGE_TOL:
        return f"{where}: below the table's lowest log T = {O[SLOT_LOGT_MIN]:g}"
    if log_T > O[SLOT_LOGT_MAX] + EDGE_TOL:
        return f"{where}: above the table's highest log T = {O[SLOT_LOGT_MAX]:g}"
    lo, hi = O[SLOT_LOGR_MIN], O[SLOT_LOGR_MAX]
    if O[SLOT_HOLES] != 0.0:
        nT = int(O[SLOT_NT])
        grid = O[SLOT_GRID:SLOT_GRID + nT]
        i = min(max(int(np.searchsorted(grid, log_T, side="right")) - 1, 0), nT - 2)
        k = _strip_start(O) + 2 * i
        lo, hi = O[k], O[k + 1]
        span = f"at log T = {grid[i]:g} .. {grid[i + 1]:g} the table holds log R = {lo:g} .. {hi:g}"
    else:
        span = f"the table holds log R = {lo:g} .. {hi:g}"
    if log_R < lo - EDGE_TOL:
        return f"{where}: below the table's low-log R edge ({span})"
    if log_R > hi + EDGE_TOL:
        return f"{where}: beyond the table's high-log R edge ({span})"
    # Inside, just short of an edge (where a failing step stops): the nearest one.
    edges = ((log_R - lo, "low-log R edge"), (hi - log_R, "high-log R edge"),
             (log_T - O[SLOT_LOGT_MIN], "low-log T edge"),
             (O[SLOT_LOGT_MAX] - log_T, "high-log T edge"))
    if O[SLOT_HOLES] != 0.0:
        edges += ((_strip_margin(O, log_T, log_R), "edge of a hole"),)
    name = min(edges, key=lambda e: e[0])[1]  # the first of equals
    return f"{where}: at the table's {name} ({span})"
