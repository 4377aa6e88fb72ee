"""Critical-point machinery shared by the wind models (compiled).

At a critical point of a steady wind both the numerator N and the
denominator D of dv/dr = N / D vanish.  L'Hopital's rule gives the slope
p = dv/dr there as a root of

.. math:: 2 p^2 - b p - c = 0,

with, for the isothermal wind, b = dN/dv and c = dN/dr (partials at fixed
mass-loss rate), and, for the diffusion wind, b = N_v + k1 and
c = N_r + N_T T' (see ``windsolve.core`` model modules).  The topology follows
from the linearisation of the autonomous system dr/ds = D, dv/ds = N: with
dD/dr = 2p - k1 along the solution, the point is a saddle (X-type) when
(2 p+ - k1)(2 p- - k1) < 0, a node when the roots are real and the product is
positive, and a focus (spiral) when the roots are complex.  Textbook
background: Lamers & Cassinelli (1999), Introduction to Stellar Winds,
section 4.2 (from memory); Jordan & Smith (2007), Nonlinear Ordinary
Differential Equations, 4th ed., ch. 2 (classification of linear critical
points).
"""

import math

from numba import njit

SADDLE = 1
NODE = 2
FOCUS = 3
DEGENERATE = 4

KIND_NAMES = {SADDLE: "saddle (X-type)", NODE: "node", FOCUS: "focus (spiral)",
              DEGENERATE: "degenerate"}


@njit(cache=True, error_model="numpy")
def classify(b, c, k1):
    """Topology and slopes of a critical point from 2 p^2 - b p - c = 0.

    Parameters
    ----------
    b : float
        Linear coefficient [s^-1]: dN/dv (Model A) or N_v + k1 (Model B).
    c : float
        Constant coefficient [s^-2]: dN/dr (Model A) or N_r + N_T T' (Model B).
    k1 : float
        (k / (mu m_u)) T' / v [s^-1]; 0 for Model A.

    Returns
    -------
    kind : int
        SADDLE, NODE, FOCUS or DEGENERATE.
    p_plus, p_minus : float
        The larger and smaller slope dv/dr [s^-1]; NaN for a focus.  For a
        saddle ``p_plus`` is the root with 2p - k1 > 0, the accelerating
        (wind) branch.

    References
    ----------
    docs/physics.md, eqs. 25 and 26.
    """
    disc = b * b + 8.0 * c
    if disc < 0.0:
        return FOCUS, math.nan, math.nan
    sq = math.sqrt(disc)
    # Stable form of the two roots (avoid cancellation in b -/+ sq).
    if b >= 0.0:
        p1 = (b + sq) / 4.0
    else:
        p1 = (b - sq) / 4.0
    # Product of the roots is -c/2; p1 = 0 only when b = c = 0.
    p2 = -c / (2.0 * p1) if p1 != 0.0 else 0.0
    p_plus = max(p1, p2)
    p_minus = min(p1, p2)
    prod = (2.0 * p_plus - k1) * (2.0 * p_minus - k1)
    if prod < 0.0:
        return SADDLE, p_plus, p_minus
    if prod > 0.0:
        return NODE, p_plus, p_minus
    return DEGENERATE, p_plus, p_minus
