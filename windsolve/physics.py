"""Physical basis with units: composition, electron scattering, Eddington limit.

The formulas are those of docs/physics.md, sections 1 and 3 (eqs. 1-5, 11, 12).
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
QuantityLike = u.Quantity | str  # what the functions below take for a dimensioned value


def _twin(lite):
    def attach(function):
        function.lite = lite
        return function
    return attach


def check_composition(X: float, Z: float) -> None:
    """Check a composition: raise ModelError unless 0 <= X, 0 <= Z and X + Z <= 1.

    Parameters
    ----------
    X, Z : float
        Hydrogen and metal mass fractions (dimensionless).

    Raises
    ------
    ModelError
        A fraction that is not a number, lies outside [0, 1], or X + Z > 1.
    """
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
def mean_molecular_weight(X: float, Z: float) -> float:
    """Mean molecular weight mu of a fully ionized gas, in units of m_u.

    Parameters
    ----------
    X, Z : float
        Hydrogen and metal mass fractions (dimensionless); helium is
        Y = 1 - X - Z.

    Returns
    -------
    float
        mu, the mean mass per particle (nuclei and electrons) in units of
        the atomic mass unit m_u (dimensionless).

    Raises
    ------
    ModelError
        An invalid composition (see :func:`check_composition`).

    Notes
    -----
    .. math:: \\frac{1}{\\mu} = \\frac{2X}{A_H} + \\frac{3Y}{A_{He}} + \\frac{Z}{2}

    with the standard atomic weights A_H = 1.008 and A_He = 4.002602; metals
    give A/2 electrons per atom of mass A m_u (common practice) and their
    nuclei are neglected.  With A_H = 1, A_He = 4 this is the textbook
    mu = 4 / (3 + 5X - Z) (Kippenhahn, Weigert & Weiss 2012, Stellar
    Structure and Evolution, ch. 4); pure ionised hydrogen has mu = A_H / 2.

    References
    ----------
    docs/physics.md, eq. 2.
    """
    check_composition(X, Z)
    return basics.mean_molecular_weight(X, Z)


@_twin(basics.mean_mass_per_electron)
def mean_mass_per_electron(X: float, Z: float) -> float:
    """mu_e, the mass per free electron in units of m_u (dimensionless).

    Parameters
    ----------
    X, Z : float
        Hydrogen and metal mass fractions (dimensionless).

    Returns
    -------
    float
        mu_e in units of the atomic mass unit m_u (dimensionless).

    Raises
    ------
    ModelError
        An invalid composition (see :func:`check_composition`).

    Notes
    -----
    .. math:: \\frac{1}{\\mu_e} = \\frac{X}{A_H} + \\frac{2Y}{A_{He}} + \\frac{Z}{2}

    (fully ionised; the textbook 2 / (1 + X) when A_H = 1 and A_He = 4).

    References
    ----------
    docs/physics.md, eq. 1.
    """
    check_composition(X, Z)
    return basics.mean_mass_per_electron(X, Z)


@_twin(basics.electron_scattering_opacity)
def electron_scattering_opacity(X: float, Z: float) -> u.Quantity:
    """Thomson electron-scattering opacity of a fully ionized gas [cm2 / g].

    Parameters
    ----------
    X, Z : float
        Hydrogen and metal mass fractions (dimensionless).

    Returns
    -------
    Quantity [cm2 / g]
        kappa_es.

    Raises
    ------
    ModelError
        An invalid composition (see :func:`check_composition`).

    Notes
    -----
    .. math:: \\kappa_{es} = \\frac{\\sigma_T}{m_u \\mu_e}
              \\approx 0.2 (1 + X)\\ {\\rm cm^2\\,g^{-1}}

    Electrons per gram are counted from the atomic weights of H and He (see
    :func:`mean_mass_per_electron`): pure hydrogen gives sigma_T / m_H =
    0.3975 cm2/g, 0.8 % below the textbook 0.2 (1 + X) = 0.4.

    References
    ----------
    docs/physics.md, eqs. 1 and 5.
    """
    check_composition(X, Z)
    return basics.electron_scattering_opacity(X, Z) << OPACITY_UNIT


@_twin(basics.eddington_luminosity)
def eddington_luminosity(mass: QuantityLike, opacity: QuantityLike) -> u.Quantity:
    """Eddington luminosity L_Edd = 4 pi G M c / kappa.

    Parameters
    ----------
    mass : Quantity or str [mass]
        Stellar mass M, e.g. ``"10 Msun"``.
    opacity : Quantity or str [area / mass]
        Flux-mean opacity kappa, e.g. ``0.34 * u.cm**2 / u.g``.

    Returns
    -------
    Quantity [erg / s]
        The luminosity at which radiation on kappa balances gravity.

    Raises
    ------
    ModelError
        A value without a unit, or with the wrong dimension.

    References
    ----------
    docs/physics.md, eq. 11.
    """
    M = to_cgs(mass, u.g, "mass")
    k = to_cgs(opacity, OPACITY_UNIT, "opacity")
    return basics.eddington_luminosity(M, k) << u.erg / u.s


@_twin(basics.eddington_factor)
def eddington_factor(luminosity: QuantityLike, mass: QuantityLike,
                     opacity: QuantityLike) -> float:
    """Eddington factor Gamma = kappa L / (4 pi G M c) (dimensionless).

    Parameters
    ----------
    luminosity : Quantity or str [power]
        Radiative luminosity L, e.g. ``"1e6 Lsun"``.
    mass : Quantity or str [mass]
        Stellar mass M.
    opacity : Quantity or str [area / mass]
        Flux-mean opacity kappa.

    Returns
    -------
    float
        Gamma, the ratio of radiative acceleration to gravity (dimensionless).

    Raises
    ------
    ModelError
        A value without a unit, or with the wrong dimension.

    Notes
    -----
    Radiation force and gravity both fall as r^-2, so at fixed opacity and
    luminosity Gamma does not depend on radius.

    References
    ----------
    docs/physics.md, eq. 12.
    """
    L = to_cgs(luminosity, u.erg / u.s, "luminosity")
    M = to_cgs(mass, u.g, "mass")
    k = to_cgs(opacity, OPACITY_UNIT, "opacity")
    return basics.eddington_factor(L, M, k)


@_twin(basics.isothermal_sound_speed)
def isothermal_sound_speed(temperature: QuantityLike, mu: float) -> u.Quantity:
    """Isothermal sound speed a = sqrt(k T / (mu m_u)) [cm / s].

    Parameters
    ----------
    temperature : Quantity or str [temperature]
        Gas temperature T, e.g. ``"3e4 K"``.
    mu : float
        Mean molecular weight in units of m_u (dimensionless), e.g. from
        :func:`mean_molecular_weight`.

    Returns
    -------
    Quantity [cm / s]
        a.

    Raises
    ------
    ModelError
        A temperature without a unit, or with the wrong dimension.

    References
    ----------
    docs/physics.md, eq. 3.
    """
    T = to_cgs(temperature, u.K, "temperature")
    return basics.isothermal_sound_speed(T, float(mu)) << u.cm / u.s


@_twin(basics.escape_speed)
def escape_speed(mass: QuantityLike, radius: QuantityLike) -> u.Quantity:
    """Escape speed sqrt(2 G M / r) [cm / s].

    Parameters
    ----------
    mass : Quantity or str [mass]
        Stellar mass M.
    radius : Quantity or str [length]
        Radius r.

    Returns
    -------
    Quantity [cm / s]
        v_esc.

    Raises
    ------
    ModelError
        A value without a unit, or with the wrong dimension.

    References
    ----------
    docs/physics.md, eq. 4.
    """
    M = to_cgs(mass, u.g, "mass")
    r = to_cgs(radius, u.cm, "radius")
    return basics.escape_speed(M, r) << u.cm / u.s
