"""The kernels' plain-float constants against their sources.

Tier (b)/(f): every value in ``windsolve.core.constants`` must equal the
installed astropy's (CODATA 2022, IAU 2015) to the last bit, and the Thomson
cross-section is cross-checked against scipy.constants (CODATA, an
independent package).
"""

import math

import astropy.constants as ac
import astropy.units as u
import pytest
import scipy.constants as sc

from windsolve.core import constants as C

PAIRS = [
    ("G", ac.G), ("C_LIGHT", ac.c), ("SIGMA_T", ac.sigma_T), ("M_U", ac.u),
    ("K_B", ac.k_B), ("SIGMA_SB", ac.sigma_sb), ("M_SUN", ac.M_sun), ("L_SUN", ac.L_sun),
    ("R_SUN", ac.R_sun),
]


@pytest.mark.parametrize("name, constant", PAIRS, ids=[p[0] for p in PAIRS])
def test_constant_matches_astropy(name, constant):
    assert getattr(C, name) == constant.cgs.value


def test_radiation_constant_from_astropy():
    # a = 4 sigma / c (common practice)
    a_rad = (4 * ac.sigma_sb / ac.c).to_value(u.erg / u.cm**3 / u.K**4)
    assert math.isclose(C.A_RAD, a_rad, rel_tol=1e-15)


def test_thomson_cross_section_against_scipy():
    # scipy.constants, CODATA "Thomson cross section" in m^2 -> cm^2.
    sigma_t = sc.physical_constants["Thomson cross section"][0] * 1e4
    assert math.isclose(C.SIGMA_T, sigma_t, rel_tol=1e-9)
    # and from the classical electron radius, sigma_T = (8 pi / 3) r_e^2
    r_e = sc.physical_constants["classical electron radius"][0] * 1e2
    assert math.isclose(C.SIGMA_T, 8 * math.pi / 3 * r_e**2, rel_tol=1e-9)


def test_year_is_julian():
    assert C.YEAR == (1 * u.yr).to_value(u.s)
