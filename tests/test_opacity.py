"""Opacity laws and the porosity modifier (tiers b, d, e, f)."""

import math

import astropy.units as u
import numpy as np
import pytest

from windsolve import OPACITY_LAWS, Opacity
from windsolve.core import basics
from windsolve.core import opacity as K
from windsolve.errors import ModelError
from windsolve.opacity import opacity_value

X, Z = 0.7, 0.02
KES = basics.electron_scattering_opacity(X, Z)


def test_registry_codes_are_unique_and_named():
    codes = [law.code for law in OPACITY_LAWS.values()]
    assert len(set(codes)) == len(codes)
    assert set(OPACITY_LAWS) >= {"electron_scattering", "kramers", "bump"}


def test_electron_scattering_law_is_constant():
    op = Opacity("electron_scattering")
    for rho, T in [(1e-12, 1e4), (1.0, 1e7)]:
        assert opacity_value(op, rho * u.g / u.cm**3, T * u.K, X, Z).value == KES


def test_kramers_textbook_coefficients():
    # kappa_ff = 3.68e22 (1 - Z)(1 + X) rho T^-3.5 and
    # kappa_bf = 4.34e25 (g/t) Z (1 + X) rho T^-3.5 [cgs] (Kramers form with
    # the textbook coefficients, e.g. Hansen, Kawaler & Trimble 2004, section
    # 4.4, from memory).  At rho = 1 g/cm3, T = 1e7 K (hand-evaluated here):
    rho, T = 1.0, 1e7
    ff = 3.68e22 * (1 - Z) * (1 + X) * rho * T**-3.5
    bf = 4.34e25 * 0.1 * Z * (1 + X) * rho * T**-3.5
    op = Opacity("kramers", gaunt_guillotine_ratio=0.1)
    value = opacity_value(op, rho * u.g / u.cm**3, T * u.K, X, Z).value
    assert math.isclose(value, KES + ff + bf, rel_tol=1e-13)


def test_bump_peaks_at_peak_temperature_with_amplitude():
    op = Opacity("bump", amplitude=4.0, peak_temperature="2e5 K", width_dex=0.1,
                 density_exponent=0.5, reference_density="1e-9 g/cm3")
    peak = opacity_value(op, 1e-9 * u.g / u.cm**3, 2e5 * u.K, X, Z).value
    assert math.isclose(peak, 5 * KES, rel_tol=1e-13)
    # one width away the excess falls by exp(-1/2)
    side = opacity_value(op, 1e-9 * u.g / u.cm**3, 2e5 * 10**0.1 * u.K, X, Z).value
    assert math.isclose(side - KES, 4 * KES * math.exp(-0.5), rel_tol=1e-12)
    # density exponent: a 4x denser gas doubles the excess for s = 1/2
    dense = opacity_value(op, 4e-9 * u.g / u.cm**3, 2e5 * u.K, X, Z).value
    assert math.isclose(dense - KES, 8 * KES, rel_tol=1e-12)


@pytest.mark.parametrize("tau", [1e-8, 1e-6, 9.999e-6, 1.0001e-5, 1e-3, 0.5, 1.0, 30.0, 800.0])
def test_porosity_factor_matches_closed_form(tau):
    # (1 - exp(-tau)) / tau (Owocki, Gayley & Shaviv 2004, eq. 4), evaluated
    # with numpy's expm1 for accuracy; the kernel switches to a series below
    # 1e-5 and must agree on both sides of the switch.
    expected = -np.expm1(-tau) / tau
    assert math.isclose(K.porosity_factor(tau), expected, rel_tol=1e-14)


def test_porosity_limits():
    # optically thin clumps: no change; thick clumps: kappa_eff -> 1/(rho h)
    O = K.pack(K.LAW_ELECTRON_SCATTERING, KES, (), (1e6, 1e12, 0.0))
    assert math.isclose(K.effective_opacity(O, 1e-20, 1e4, 1e12), KES, rel_tol=1e-9)
    rho, h = 1e-3, 1e6
    assert math.isclose(K.effective_opacity(O, rho, 1e4, 1e12), 1 / (rho * h), rel_tol=1e-9)


def test_porosity_length_power_law():
    O = K.pack(K.LAW_ELECTRON_SCATTERING, KES, (), (2.0, 10.0, 1.5))
    assert math.isclose(K.porosity_length(O, 40.0), 2.0 * 4.0**1.5, rel_tol=1e-14)


def test_lite_twin_agrees():
    op = Opacity("kramers")
    O = op.kernel_vector(X, Z)
    assert opacity_value.lite(O, 1e-8, 3e4) == opacity_value(op, "1e-8 g/cm3", "3e4 K", X, Z).value


@pytest.mark.parametrize("kwargs, fragment", [
    (dict(law="kramer"), 'did you mean "kramers"'),
    (dict(law="bump", amplitude=3, peak_temperature="2e5 K"), "width_dex is required"),
    (dict(law="bump", amplitude=3, peak_temperature="2e5", width_dex=0.1), "no unit"),
    (dict(law="bump", amplitude=3, peak_temperature="2e5 K", width_dex=0.1, widht=1),
     "unknown key"),
    (dict(law="electron_scattering", amplitude=3), "takes no parameters"),
    (dict(law="kramers", free_free_coefficient="3 km"), "is needed"),
])
def test_bad_opacity_settings(kwargs, fragment):
    law = kwargs.pop("law")
    with pytest.raises(ModelError, match=fragment):
        Opacity(law, kwargs)
