"""Physical basis: composition, electron scattering, Eddington luminosity.

Tiers (b) published/handbook values with their sources, (d) invariants and
(f) each Quantity function agrees with its compiled ``lite`` twin.
"""

import math

import astropy.constants as ac
import astropy.units as u
import numpy as np
import pytest

from windsolve import physics
from windsolve.errors import ModelError


@pytest.mark.parametrize("X, Z, mu", [
    # Fully ionized pure hydrogen: mu = 1/2; pure helium: mu = 4/3 (e.g.
    # Kippenhahn, Weigert & Weiss 2012, ch. 4; common practice).
    (1.0, 0.0, 0.5),
    (0.0, 0.0, 4.0 / 3.0),
    # X = 0.7, Z = 0.02: 4 / (3 + 3.5 - 0.02) = 0.61728... (the textbook
    # "mu ~ 0.62" for solar-like ionized gas, common practice).
    (0.7, 0.02, 4.0 / 6.48),
])
def test_mean_molecular_weight_standard_compositions(X, Z, mu):
    assert math.isclose(physics.mean_molecular_weight(X, Z), mu, rel_tol=1e-14)


def test_mean_molecular_weight_from_particle_counting():
    # Independent count for X, Y, Z fully ionized, metals with A ~ 2 Z_nuc
    # (nuclei + electrons per unit mass: 2X + 3Y/4 + Z/2; common practice).
    X, Z = 0.6, 0.03
    Y = 1 - X - Z
    n_per_mass = 2 * X + 0.75 * Y + 0.5 * Z
    assert math.isclose(physics.mean_molecular_weight(X, Z), 1 / n_per_mass, rel_tol=1e-12)


@pytest.mark.parametrize("X, kappa, rel", [
    # kappa_es = 0.2 (1 + X) cm2/g is the textbook approximation (e.g.
    # Lamers & Cassinelli 1999, ch. 7, from memory); the exact sigma_T/m_u
    # factor is 0.20063, hence 0.4 % tolerance.
    (0.7, 0.34, 4e-3),
    (1.0, 0.40, 4e-3),
    (0.0, 0.20, 4e-3),
])
def test_electron_scattering_opacity_handbook(X, kappa, rel):
    value = physics.electron_scattering_opacity(X).to_value(u.cm**2 / u.g)
    assert math.isclose(value, kappa, rel_tol=rel)


def test_electron_scattering_opacity_from_astropy():
    X = 0.7
    expected = (ac.sigma_T / ac.u * (1 + X) / 2).to_value(u.cm**2 / u.g)
    assert math.isclose(physics.electron_scattering_opacity(X).value, expected, rel_tol=1e-14)


def test_eddington_luminosity_handbook_value():
    # L_Edd = 4 pi G M m_p c / sigma_T = 1.26e38 (M/Msun) erg/s for pure
    # hydrogen (Shapiro & Teukolsky 1983, Black Holes, White Dwarfs and
    # Neutron Stars, ch. 13; value and source from memory), and "1.3e38" in
    # Frank, King & Raine (2002), Accretion Power in Astrophysics, eq. 1.2.
    # Tolerance: half a unit in the last quoted digit.
    kappa = (ac.sigma_T / ac.m_p).to(u.cm**2 / u.g)
    L = physics.eddington_luminosity(1 * u.Msun, kappa)
    assert L.unit == u.erg / u.s
    assert abs(L.value - 1.26e38) <= 0.005e38
    assert abs(L.value - 1.3e38) <= 0.05e38


def test_eddington_luminosity_against_astropy_quantities():
    M = 20 * u.Msun
    kappa = 0.34 * u.cm**2 / u.g
    expected = (4 * math.pi * ac.G * M * ac.c / kappa).to_value(u.erg / u.s)
    assert math.isclose(physics.eddington_luminosity(M, kappa).value, expected, rel_tol=1e-13)


def test_eddington_factor_is_L_over_L_edd():
    M, k, L = 30 * u.Msun, 0.34 * u.cm**2 / u.g, 2e5 * u.Lsun
    gamma = physics.eddington_factor(L, M, k)
    assert math.isclose(gamma, (L / physics.eddington_luminosity(M, k)).to_value(u.one),
                        rel_tol=1e-13)


def test_eddington_factor_independent_of_radius():
    # Radiative acceleration kappa L / (4 pi r^2 c) over gravity G M / r^2 at
    # several radii: the ratio does not depend on r (common practice).
    M, k, L = 30 * u.Msun, 0.34 * u.cm**2 / u.g, 2e5 * u.Lsun
    r = np.geomspace(1, 1e4, 7) * u.Rsun
    ratio = ((k * L / (4 * np.pi * r**2 * ac.c)) / (ac.G * M / r**2)).to_value(u.one)
    assert np.allclose(ratio, physics.eddington_factor(L, M, k), rtol=1e-13, atol=0)


def test_sound_speed_and_escape_speed():
    # a = sqrt(k T / (mu m_u)); v_esc(Sun) = 617.7 km/s (Allen's Astrophysical
    # Quantities, 4th ed., 2000, section 14.1, from memory).
    a = physics.isothermal_sound_speed(1e4 * u.K, 0.6)
    expected = np.sqrt(ac.k_B * 1e4 * u.K / (0.6 * ac.u)).to_value(u.cm / u.s)
    assert math.isclose(a.value, expected, rel_tol=1e-13)
    v = physics.escape_speed(1 * u.Msun, 1 * u.Rsun).to_value(u.km / u.s)
    assert math.isclose(v, 617.7, rel_tol=1e-3)


@pytest.mark.parametrize("function, args, lite_args", [
    (physics.mean_molecular_weight, (0.7, 0.02), (0.7, 0.02)),
    (physics.mean_mass_per_electron, (0.7,), (0.7,)),
    (physics.electron_scattering_opacity, (0.7,), (0.7,)),
    (physics.eddington_luminosity, (2 * u.Msun, 0.34 * u.cm**2 / u.g),
     ((2 * u.Msun).to_value(u.g), 0.34)),
    (physics.eddington_factor, (1e5 * u.Lsun, 2 * u.Msun, 0.34 * u.cm**2 / u.g),
     ((1e5 * u.Lsun).to_value(u.erg / u.s), (2 * u.Msun).to_value(u.g), 0.34)),
    (physics.isothermal_sound_speed, (3e4 * u.K, 0.6), (3e4, 0.6)),
    (physics.escape_speed, (1 * u.Msun, 1 * u.Rsun),
     ((1 * u.Msun).to_value(u.g), (1 * u.Rsun).to_value(u.cm))),
])
def test_quantity_function_agrees_with_lite_twin(function, args, lite_args):
    value = function(*args)
    value = value.cgs.value if isinstance(value, u.Quantity) else value
    assert math.isclose(value, function.lite(*lite_args), rel_tol=1e-15)


@pytest.mark.parametrize("call, fragment", [
    (lambda: physics.eddington_luminosity(2.0, 0.34 * u.cm**2 / u.g), "no unit"),
    (lambda: physics.eddington_luminosity(2 * u.km, 0.34 * u.cm**2 / u.g), "mass is needed"),
    (lambda: physics.mean_molecular_weight(0.9, 0.2), "exceeds 1"),
    (lambda: physics.mean_molecular_weight(-0.1, 0.0), "between 0 and 1"),
])
def test_bad_arguments_raise_model_error(call, fragment):
    with pytest.raises(ModelError, match=fragment):
        call()
