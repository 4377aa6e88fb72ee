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
=====  ==========================================================

The user-facing registry that maps names and units onto these slots is
:data:`windsolve.opacity.OPACITY_LAWS`.
"""

import math

import numpy as np
from numba import njit

LAW_ELECTRON_SCATTERING = 0
LAW_KRAMERS = 1
LAW_BUMP = 2

N_SLOTS = 11
SLOT_LAW = 0
SLOT_KES = 1
SLOT_P0 = 2
SLOT_H0 = 8
SLOT_R0 = 9
SLOT_Q = 10

LN10 = math.log(10.0)


@njit(cache=True, error_model="numpy", inline="always")
def kramers(rho, T, kes, coeff):
    """Electron scattering plus a Kramers-form free-free/bound-free term.

    kappa = kappa_es + coeff * rho * T**-3.5 with
    coeff = (C_ff (1 - Z) + C_bf (g/t) Z) (1 + X).  Kramers (1923, Phil. Mag.
    46, 836); the textbook coefficients C_ff = 3.68e22 and C_bf = 4.34e25 (cgs)
    are those quoted in Hansen, Kawaler & Trimble (2004), Stellar Interiors,
    section 4.4 (section number from memory).
    """
    return kes + coeff * rho * T ** -3.5


@njit(cache=True, error_model="numpy", inline="always")
def bump(rho, T, kes, amplitude, rho_ref, s, log_tb, width):
    """Parametric opacity bump, a transparent stand-in for the iron bump.

    kappa = kappa_es [1 + A (rho/rho_ref)**s exp(-(log10 T - log10 T_b)**2 / (2 w**2))]
    """
    d = (math.log10(T) - log_tb) / width
    return kes * (1.0 + amplitude * (rho / rho_ref) ** s * math.exp(-0.5 * d * d))


@njit(cache=True, error_model="numpy", inline="always")
def opacity(O, rho, T):
    """Opacity of the law encoded in ``O`` at density rho [g cm-3], T [K]."""
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
    return np.nan


@njit(cache=True, error_model="numpy", inline="always")
def porosity_factor(tau_b):
    """Porosity reduction (1 - exp(-tau_b)) / tau_b for clumps of optical depth tau_b.

    Shaviv (1998, ApJ 494, L193); Owocki, Gayley & Shaviv (2004, ApJ 616, 525),
    eq. 4 (a single clump size).  Uses a series for tau_b < 1e-5 to avoid the
    0/0 cancellation.
    """
    if tau_b < 1e-5:
        return 1.0 - 0.5 * tau_b + tau_b * tau_b / 6.0
    return -math.expm1(-tau_b) / tau_b


@njit(cache=True, error_model="numpy", inline="always")
def porosity_length(O, r):
    """h(r) = h0 (r / R0)**q [cm]."""
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
    """Opacity with the porosity modifier applied when h0 > 0."""
    k = opacity(O, rho, T)
    if O[SLOT_H0] > 0.0:
        k *= porosity_factor(k * rho * porosity_length(O, r))
    return k


def pack(law_code, kes, params=(), porosity=(0.0, 1.0, 0.0)):
    """Build the flat parameter vector ``O`` (plain Python helper)."""
    O = np.zeros(N_SLOTS)
    O[SLOT_LAW] = law_code
    O[SLOT_KES] = kes
    for i, value in enumerate(params):
        O[SLOT_P0 + i] = value
    O[SLOT_H0], O[SLOT_R0], O[SLOT_Q] = porosity
    return O
