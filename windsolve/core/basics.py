"""Composition, electron scattering and Eddington kernels (cgs floats).

Each function here is the kernel twin of a Quantity-aware function in
:mod:`windsolve.physics`; ``tests/test_physics.py`` checks that the pairs agree.
"""

import math

from numba import njit

from .constants import A_H, A_HE, C_LIGHT, K_B, M_U, SIGMA_T, G

FOUR_PI = 4.0 * math.pi


# Particles and electrons per gram of a fully ionised gas are counted from
# the atomic weights of hydrogen and helium (A_H, A_HE); a metal atom of mass
# A m_u is taken to give A/2 electrons (A ~ 2 Z_nuc, common practice), so
# metals add Z/2 electrons and, with their nuclei neglected, Z/2 particles
# per m_u.  With A_H = 1 and A_HE = 4 these become the textbook forms
# mu = 4/(3 + 5X - Z) and mu_e = 2/(1 + X) (Kippenhahn, Weigert & Weiss 2012,
# Stellar Structure and Evolution, 2nd ed., ch. 4), which overcount electrons
# in hydrogen by 0.8 %.


@njit(cache=True, error_model="numpy")
def electrons_per_unit(X, Z):
    """Free electrons per m_u of gas, 1/mu_e = X/A_H + 2Y/A_He + Z/2 (fully ionised).

    Parameters
    ----------
    X, Z : float
        Hydrogen and metal mass fractions [dimensionless]; Y = 1 - X - Z.

    Returns
    -------
    float
        1/mu_e [dimensionless].

    References
    ----------
    docs/physics.md, eq. 1.
    """
    Y = 1.0 - X - Z
    return X / A_H + 2.0 * Y / A_HE + 0.5 * Z


@njit(cache=True, error_model="numpy")
def mean_molecular_weight(X, Z):
    """Mean mass per particle (nuclei and electrons) in units of m_u.

    1/mu = 2X/A_H + 3Y/A_He + Z/2 for a fully ionised gas (see the note
    above on metals).

    Parameters
    ----------
    X, Z : float
        Hydrogen and metal mass fractions [dimensionless].

    Returns
    -------
    float
        mu [dimensionless, units of m_u].

    References
    ----------
    docs/physics.md, eq. 2.
    """
    Y = 1.0 - X - Z
    return 1.0 / (2.0 * X / A_H + 3.0 * Y / A_HE + 0.5 * Z)


@njit(cache=True, error_model="numpy")
def mean_mass_per_electron(X, Z):
    """mu_e: mass per free electron in units of m_u, fully ionised gas.

    Parameters
    ----------
    X, Z : float
        Hydrogen and metal mass fractions [dimensionless].

    Returns
    -------
    float
        mu_e [dimensionless].

    References
    ----------
    docs/physics.md, eq. 1.
    """
    return 1.0 / electrons_per_unit(X, Z)


@njit(cache=True, error_model="numpy")
def electron_scattering_opacity(X, Z):
    """kappa_es = sigma_T n_e / rho = (sigma_T / m_u) / mu_e  [cm2 g-1].

    Parameters
    ----------
    X, Z : float
        Hydrogen and metal mass fractions [dimensionless].

    Returns
    -------
    float
        Electron-scattering opacity [cm^2 g^-1].

    References
    ----------
    docs/physics.md, eq. 5.
    """
    return SIGMA_T / M_U * electrons_per_unit(X, Z)


@njit(cache=True, error_model="numpy")
def eddington_luminosity(mass, kappa):
    """L_Edd = 4 pi G M c / kappa  [erg s-1].

    Parameters
    ----------
    mass : float
        Stellar mass [g].
    kappa : float
        Flux-mean opacity [cm^2 g^-1].

    Returns
    -------
    float
        Eddington luminosity [erg s^-1].

    References
    ----------
    docs/physics.md, eq. 11.
    """
    return FOUR_PI * G * mass * C_LIGHT / kappa


@njit(cache=True, error_model="numpy")
def eddington_factor(luminosity, mass, kappa):
    """Gamma = kappa L / (4 pi G M c) (dimensionless); independent of radius.

    Parameters
    ----------
    luminosity : float
        Radiative luminosity [erg s^-1].
    mass : float
        Stellar mass [g].
    kappa : float
        Flux-mean opacity [cm^2 g^-1].

    Returns
    -------
    float
        Eddington factor [dimensionless].

    References
    ----------
    docs/physics.md, eq. 12.
    """
    return kappa * luminosity / (FOUR_PI * G * mass * C_LIGHT)


@njit(cache=True, error_model="numpy")
def isothermal_sound_speed(T, mu):
    """a = sqrt(k T / (mu m_u))  [cm s-1].

    Parameters
    ----------
    T : float
        Gas temperature [K].
    mu : float
        Mean molecular weight [dimensionless].

    Returns
    -------
    float
        Isothermal sound speed [cm s^-1].

    References
    ----------
    docs/physics.md, eq. 3.
    """
    return math.sqrt(K_B * T / (mu * M_U))


@njit(cache=True, error_model="numpy")
def gas_temperature(a, mu):
    """Inverse of :func:`isothermal_sound_speed`: T = mu m_u a^2 / k  [K].

    Parameters
    ----------
    a : float
        Isothermal sound speed [cm s^-1].
    mu : float
        Mean molecular weight [dimensionless].

    Returns
    -------
    float
        Gas temperature [K].

    References
    ----------
    docs/physics.md, eq. 3.
    """
    return mu * M_U * a * a / K_B


@njit(cache=True, error_model="numpy")
def escape_speed(mass, r):
    """v_esc = sqrt(2 G M / r)  [cm s-1].

    Parameters
    ----------
    mass : float
        Stellar mass [g].
    r : float
        Radius [cm].

    Returns
    -------
    float
        Escape speed [cm s^-1].

    References
    ----------
    docs/physics.md, eq. 4.
    """
    return math.sqrt(2.0 * G * mass / r)
