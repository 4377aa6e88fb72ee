"""Physical basis: composition, electron scattering, Eddington luminosity.

Tiers (b) published/handbook values with their sources, (d) invariants and
(f) each Quantity function agrees with its compiled ``lite`` twin.
"""

import math
from pathlib import Path

import astropy.constants as ac
import astropy.units as u
import numpy as np
import pytest

from windsolve import physics
from windsolve.errors import ModelError

# Atomic masses from astropy's CODATA constants (an independent source): a
# hydrogen atom weighs m_p + m_e (its 13.6 eV binding energy, 1.5e-8 of it,
# neglected).  The standard atomic weight A_H = 1.008 includes natural
# deuterium, 1.7e-4 above that: tolerances below allow for it.
M_H = (ac.m_p + ac.m_e).cgs.value
# Helium: standard atomic weight 4.002602 (IUPAC; from memory), checked here
# only to the 2e-4 to which a 4He atom, 2 m_p + 2 m_n + 2 m_e less its 28.3 MeV
# binding energy (common practice), reproduces it.
M_HE = (2 * ac.m_p + 2 * ac.m_n + 2 * ac.m_e).cgs.value - 28.3e6 * 1.602176634e-12 / \
    ac.c.cgs.value**2


@pytest.mark.parametrize("X, Z, particles_per_gram", [
    # Fully ionised pure hydrogen: a proton and an electron per m_H; pure
    # helium: three particles per m_He (common practice).
    (1.0, 0.0, 2 / M_H),
    (0.0, 0.0, 3 / M_HE),
    # A mixture, metals counted as A/2 electrons per atom of mass A m_u and
    # nuclei neglected (common practice): 2X/m_H + 3Y/m_He + Z/(2 m_u).
    (0.6, 0.03, 2 * 0.6 / M_H + 3 * 0.37 / M_HE + 0.03 / (2 * ac.u.cgs.value)),
])
def test_mean_molecular_weight_from_particle_counting(X, Z, particles_per_gram):
    mu = physics.mean_molecular_weight(X, Z)
    assert math.isclose(mu * ac.u.cgs.value, 1 / particles_per_gram, rel_tol=2e-4)


def test_mean_molecular_weight_close_to_the_textbook_form():
    # mu = 4 / (3 + 5X - Z) with A_H = 1, A_He = 4 (Kippenhahn, Weigert &
    # Weiss 2012, ch. 4): the atomic weights move it by under 1 % (the
    # textbook "mu ~ 0.62" for solar-like ionised gas, common practice).
    for X, Z in [(0.7, 0.02), (1.0, 0.0), (0.0, 0.0), (0.3, 0.05)]:
        assert math.isclose(physics.mean_molecular_weight(X, Z), 4 / (3 + 5 * X - Z),
                            rel_tol=1e-2)


@pytest.mark.parametrize("X, Z, electrons_per_gram", [
    (1.0, 0.0, 1 / M_H),
    (0.0, 0.0, 2 / M_HE),
    (0.7, 0.02, 0.7 / M_H + 2 * 0.28 / M_HE + 0.02 / (2 * ac.u.cgs.value)),
])
def test_electron_scattering_opacity_from_electron_counting(X, Z, electrons_per_gram):
    # kappa_es = sigma_T n_e / rho, sigma_T from astropy (CODATA 2022).
    expected = ac.sigma_T.cgs.value * electrons_per_gram
    assert math.isclose(physics.electron_scattering_opacity(X, Z).to_value(u.cm**2 / u.g),
                        expected, rel_tol=2e-4)
    assert math.isclose(physics.mean_mass_per_electron(X, Z) * ac.u.cgs.value,
                        1 / electrons_per_gram, rel_tol=2e-4)


@pytest.mark.parametrize("X, kappa", [
    # kappa_es = 0.2 (1 + X) cm2/g is the textbook approximation (e.g.
    # Lamers & Cassinelli 1999, ch. 7, from memory); it counts one electron
    # per m_u in hydrogen, 0.8 % too many, hence the 1 % tolerance.
    (0.7, 0.34),
    (1.0, 0.40),
    (0.0, 0.20),
])
def test_electron_scattering_opacity_handbook(X, kappa):
    value = physics.electron_scattering_opacity(X, 0.0).to_value(u.cm**2 / u.g)
    assert math.isclose(value, kappa, rel_tol=1e-2)


def test_eddington_luminosity_handbook_value():
    # L_Edd = 4 pi G M m_p c / sigma_T = 1.26e38 (M/Msun) erg/s for pure
    # hydrogen (Shapiro & Teukolsky 1983, Black Holes, White Dwarfs and
    # Neutron Stars, ch. 13; value and source from memory), and "1.3e38" in
    # Frank, King & Raine (2002), Accretion Power in Astrophysics, eq. 1.2.
    # The opacity is windsolve's own kappa_es for X = 1, so this checks the
    # electron count per gram too.  Tolerance: half a unit in the last
    # quoted digit.
    kappa = physics.electron_scattering_opacity(1.0, 0.0)
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
    (physics.mean_mass_per_electron, (0.7, 0.02), (0.7, 0.02)),
    (physics.electron_scattering_opacity, (0.7, 0.02), (0.7, 0.02)),
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


def test_parker_reference_config_is_what_it_says():
    # configs/parker_reference.toml states Gamma = L / L_Edd = 0.5 for its
    # electron-scattering star; L_Edd = 4 pi G M c / kappa_es computed here
    # from astropy's constants and the electron count per gram of X = 0.7,
    # Z = 0 (hydrogen atom m_p + m_e, helium atomic weight 4.002602 from
    # memory), independent of windsolve's own kernels.
    from windsolve import load_model
    model = load_model(Path(__file__).parent.parent / "configs" / "parker_reference.toml")
    assert (model.X, model.Z) == (0.7, 0.0)
    kappa = ac.sigma_T * (0.7 / (ac.m_p + ac.m_e) + 2 * 0.3 / (4.002602 * ac.u))
    gamma = (kappa * model.luminosity / (4 * math.pi * ac.G * model.mass * ac.c)).decompose()
    assert math.isclose(gamma.value, 0.5, rel_tol=3e-4)
