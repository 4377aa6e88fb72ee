"""Physical basis with units: composition, electron scattering, Eddington limit.

Each function takes and returns astropy Quantities (composition fractions are
plain numbers) and has a ``.lite`` attribute: its compiled kernel twin in
:mod:`windsolve.core.basics`, which takes and returns cgs floats.  Use the
Quantity version interactively and the ``lite`` one in loops.
"""

import astropy.units as u

from ._units import to_cgs
from .core import basics
from .errors import ModelError

__all__ = [
    "mean_molecular_weight",
    "mean_mass_per_electron",
    "electron_scattering_opacity",
    "eddington_luminosity",
    "eddington_factor",
    "isothermal_sound_speed",
    "escape_speed",
]

OPACITY_UNIT = u.cm**2 / u.g


def _twin(lite):
    def attach(function):
        function.lite = lite
        return function
    return attach


def check_composition(X, Z):
    """Raise ModelError unless 0 <= X, 0 <= Z and X + Z <= 1."""
    for name, value in (("X", X), ("Z", Z)):
        if isinstance(value, bool) or not isinstance(value, (int, float)):
            raise ModelError(f"[composition] {name} = {value!r}: give a mass fraction "
                             f"between 0 and 1, e.g. {name} = 0.7")
        if not 0.0 <= value <= 1.0:
            raise ModelError(f"[composition] {name} = {value}: a mass fraction must lie "
                             f"between 0 and 1")
    if X + Z > 1.0:
        raise ModelError(f"[composition] X + Z = {X + Z:g} exceeds 1 (helium Y = 1 - X - Z "
                         f"would be negative); lower X or Z")


@_twin(basics.mean_molecular_weight)
def mean_molecular_weight(X, Z):
    """Mean molecular weight mu of a fully ionized gas, in units of m_u.

    Parameters
    ----------
    X, Z : float
        Hydrogen and metal mass fractions; helium is Y = 1 - X - Z.

    Notes
    -----
    .. math:: \\frac{1}{\\mu} = \\frac{2X}{A_H} + \\frac{3Y}{A_{He}} + \\frac{Z}{2}

    with the standard atomic weights A_H = 1.008 and A_He = 4.002602; metals
    give A/2 electrons per atom of mass A m_u (common practice) and their
    nuclei are neglected.  With A_H = 1, A_He = 4 this is the textbook
    mu = 4 / (3 + 5X - Z) (Kippenhahn, Weigert & Weiss 2012, Stellar
    Structure and Evolution, ch. 4); pure ionised hydrogen has mu = A_H / 2.
    """
    check_composition(X, Z)
    return basics.mean_molecular_weight(X, Z)


@_twin(basics.mean_mass_per_electron)
def mean_mass_per_electron(X, Z):
    """mu_e, the mass per free electron in units of m_u (dimensionless).

    .. math:: \\frac{1}{\\mu_e} = \\frac{X}{A_H} + \\frac{2Y}{A_{He}} + \\frac{Z}{2}

    (fully ionised; the textbook 2 / (1 + X) when A_H = 1 and A_He = 4).
    """
    check_composition(X, Z)
    return basics.mean_mass_per_electron(X, Z)


@_twin(basics.electron_scattering_opacity)
def electron_scattering_opacity(X, Z):
    """Thomson electron-scattering opacity of a fully ionized gas [cm2 / g].

    .. math:: \\kappa_{es} = \\frac{\\sigma_T}{m_u \\mu_e}
              \\approx 0.2 (1 + X)\\ {\\rm cm^2\\,g^{-1}}

    Electrons per gram are counted from the atomic weights of H and He (see
    :func:`mean_mass_per_electron`): pure hydrogen gives sigma_T / m_H =
    0.3975 cm2/g, 0.8 % below the textbook 0.2 (1 + X) = 0.4.
    """
    check_composition(X, Z)
    return basics.electron_scattering_opacity(X, Z) << OPACITY_UNIT


@_twin(basics.eddington_luminosity)
def eddington_luminosity(mass, opacity):
    """Eddington luminosity L_Edd = 4 pi G M c / kappa.

    Parameters
    ----------
    mass : Quantity [mass]
    opacity : Quantity [area / mass]

    Returns
    -------
    Quantity [erg / s]
    """
    M = to_cgs(mass, u.g, "mass")
    k = to_cgs(opacity, OPACITY_UNIT, "opacity")
    return basics.eddington_luminosity(M, k) << u.erg / u.s


@_twin(basics.eddington_factor)
def eddington_factor(luminosity, mass, opacity):
    """Eddington factor Gamma = kappa L / (4 pi G M c) (dimensionless).

    Radiation force and gravity both fall as r^-2, so at fixed opacity and
    luminosity Gamma does not depend on radius.
    """
    L = to_cgs(luminosity, u.erg / u.s, "luminosity")
    M = to_cgs(mass, u.g, "mass")
    k = to_cgs(opacity, OPACITY_UNIT, "opacity")
    return basics.eddington_factor(L, M, k)


@_twin(basics.isothermal_sound_speed)
def isothermal_sound_speed(temperature, mu):
    """Isothermal sound speed a = sqrt(k T / (mu m_u)) [cm / s]."""
    T = to_cgs(temperature, u.K, "temperature")
    return basics.isothermal_sound_speed(T, float(mu)) << u.cm / u.s


@_twin(basics.escape_speed)
def escape_speed(mass, radius):
    """Escape speed sqrt(2 G M / r) [cm / s]."""
    M = to_cgs(mass, u.g, "mass")
    r = to_cgs(radius, u.cm, "radius")
    return basics.escape_speed(M, r) << u.cm / u.s
