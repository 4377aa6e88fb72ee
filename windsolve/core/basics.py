"""Composition, electron scattering and Eddington kernels (cgs floats).

Each function here is the kernel twin of a Quantity-aware function in
:mod:`windsolve.physics`; ``tests/test_physics.py`` checks that the pairs agree.
"""

import math

from numba import njit

from .constants import C_LIGHT, K_B, M_U, SIGMA_T, G

FOUR_PI = 4.0 * math.pi


@njit(cache=True, error_model="numpy")
def mean_molecular_weight(X, Z):
    """Mean mass per particle in units of m_u for a fully ionized gas.

    mu = 4 / (3 + 5 X - Z) (e.g. Kippenhahn, Weigert & Weiss 2012, Stellar
    Structure and Evolution, 2nd ed., eq. 4.30 with complete ionisation).
    """
    return 4.0 / (3.0 + 5.0 * X - Z)


@njit(cache=True, error_model="numpy")
def mean_mass_per_electron(X):
    """mu_e = 2 / (1 + X): nucleons per free electron, fully ionized gas."""
    return 2.0 / (1.0 + X)


@njit(cache=True, error_model="numpy")
def electron_scattering_opacity(X):
    """kappa_es = (sigma_T / m_u) (1 + X) / 2  [cm2 g-1]."""
    return SIGMA_T / M_U * 0.5 * (1.0 + X)


@njit(cache=True, error_model="numpy")
def eddington_luminosity(mass, kappa):
    """L_Edd = 4 pi G M c / kappa  [erg s-1] for mass [g], kappa [cm2 g-1]."""
    return FOUR_PI * G * mass * C_LIGHT / kappa


@njit(cache=True, error_model="numpy")
def eddington_factor(luminosity, mass, kappa):
    """Gamma = kappa L / (4 pi G M c) (dimensionless); independent of radius."""
    return kappa * luminosity / (FOUR_PI * G * mass * C_LIGHT)


@njit(cache=True, error_model="numpy")
def isothermal_sound_speed(T, mu):
    """a = sqrt(k T / (mu m_u))  [cm s-1]."""
    return math.sqrt(K_B * T / (mu * M_U))


@njit(cache=True, error_model="numpy")
def gas_temperature(a, mu):
    """Inverse of :func:`isothermal_sound_speed`: T = mu m_u a^2 / k  [K]."""
    return mu * M_U * a * a / K_B


@njit(cache=True, error_model="numpy")
def escape_speed(mass, r):
    """v_esc = sqrt(2 G M / r)  [cm s-1]."""
    return math.sqrt(2.0 * G * mass / r)
