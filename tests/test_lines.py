"""Line profiles: optically thin emission, Sobolev P Cygni, broadening, widths.

Tiers (a) exact solutions (constant-velocity shell, Gaussians, escape-probability
limits), (d) invariants (symmetry, occultation only on the red side, photon
conservation of a pure-scattering line), (e) bad input gives a one-line
ModelError, (f) the Quantity layer agrees with its compiled kernels.
"""

import math
import pathlib

import astropy.units as u
import numpy as np
import pytest

import windsolve
from windsolve import lines
from windsolve.core import lines as kernels
from windsolve.core.constants import C_LIGHT
from windsolve.errors import ModelError, OutputError

KM_S = u.km / u.s
R = 7e11  # cm, an arbitrary inner radius of the synthetic profiles
V_INF = 1000.0  # km/s
CONFIGS = pathlib.Path(__file__).parent.parent / "configs"


def shell_profile(v_inf=V_INF, n=400, outer=10.0):
    """Constant velocity v_inf over r in [R, outer R], rho ~ r^-2 (continuity)."""
    r = R * np.geomspace(1.0, outer, n)
    return {"radius": r * u.cm, "velocity": np.full(n, v_inf) * KM_S,
            "density": 1e-12 * (r / R) ** -2 * u.g / u.cm**3}


def beta_law_profile(n=400):
    """v = v_inf (1 - 0.99 R / r), r in [R, 100 R], rho from continuity."""
    r = R * np.geomspace(1.0, 100.0, n)
    v = V_INF * (1.0 - 0.99 * R / r)
    return {"radius": r * u.cm, "velocity": v * KM_S,
            "density": 1e-12 * (R / r) ** 2 * (V_INF / v) * u.g / u.cm**3}


def step(profile):
    return float((profile.velocity[1] - profile.velocity[0]).to_value(KM_S))


def gaussian(w, fwhm):
    return np.exp(-0.5 * (w * lines.FWHM_PER_SIGMA / fwhm) ** 2)


def fwhm_of(w, f):
    lo, hi = kernels.outermost_crossings(w, f / f.max(), 0.5)
    return hi - lo


def cgs(profile):
    return (profile["radius"].to_value(u.cm), profile["velocity"].to_value(u.cm / u.s),
            profile["density"].to_value(u.g / u.cm**3))


# -- (a) the constant-velocity shell ----------------------------------------------

@pytest.mark.parametrize("power", [1, 2])
def test_constant_velocity_shell_is_flat_topped_lamers_cassinelli_ch2(power):
    # A shell expanding at constant v spreads its light evenly over -v < w < v:
    # a flat-topped line of half-width v_inf (Lamers & Cassinelli 1999,
    # Introduction to Stellar Winds, ch. 2, from memory; docs/physics.md, eq. 27).
    p = lines.emission_profile(shell_profile(),
                               lines.LineSettings(emissivity_power=power, occultation=False))
    w = p.velocity.to_value(KM_S)
    dw = step(p)
    inside = np.abs(w) < V_INF - dw
    outside = np.abs(w) > V_INF
    assert np.max(np.abs(p.flux[inside] - 1.0)) < 1e-3
    assert np.all(p.flux[outside] == 0.0)
    assert abs(p.hwzi.to_value(KM_S) - V_INF) <= dw
    assert abs(p.fwhm.to_value(KM_S) - 2 * V_INF) <= 2 * dw
    assert np.isnan(p.edge_velocity.value)


def test_constant_velocity_shell_flux_matches_integral():
    # F = 2 pi int rho^2 r^2 / v dr with rho = rho0 (R/r)^2:
    # 2 pi rho0^2 R^4 / v (1/R - 1/(10 R)) for |w| < v (exact; tolerance from
    # interpolating ln rho linearly in r between 400 geometric points).
    # With occultation a shell is seen for w < v sqrt(1 - (R/r)^2), so for
    # w > 0 only r > r_min = R / sqrt(1 - (w/v)^2) contributes.
    r, v, rho = cgs(shell_profile())
    vinf = v[0]
    w = np.linspace(-0.99, 0.99, 199) * vinf
    rho0 = rho[0]

    def expected(r_min):
        return 2 * math.pi * rho0**2 * R**4 / vinf * (1 / r_min - 1 / (10 * R))

    free = kernels.emission_flux(r, v, rho, 2.0, R, False, w)
    np.testing.assert_allclose(free, expected(R), rtol=2e-5)
    hidden = kernels.emission_flux(r, v, rho, 2.0, R, True, w)
    r_min = np.where(w > 0, R / np.sqrt(1 - (w / vinf) ** 2), R)
    np.testing.assert_allclose(hidden, expected(np.minimum(r_min, 10 * R)), rtol=2e-5,
                               atol=1e-12 * expected(R))


# -- (d) invariants of the emission line ----------------------------------------

def test_emission_without_occultation_is_symmetric(demo_result):
    # Nothing distinguishes approaching from receding gas without a core.
    for power in (1, 2):
        f = lines.emission_profile(demo_result, lines.LineSettings(emissivity_power=power,
                                                            occultation=False)).flux
        np.testing.assert_allclose(f, f[::-1], rtol=1e-9, atol=1e-14)


@pytest.mark.parametrize("source", ["demo", "beta"])
def test_occultation_removes_only_red_flux(demo_result, source):
    # The disk hides gas behind it (z < 0), which recedes: only w > 0 loses
    # light.  The core is the first tabulated radius here, so no shell lies
    # inside it and the blue side must be unchanged.
    profile = demo_result.profile if source == "demo" else beta_law_profile()
    r, v, rho = cgs(profile)
    w = np.linspace(-1.2, 1.2, 401) * v.max()
    seen = kernels.emission_flux(r, v, rho, 2.0, r[0], True, w)
    whole = kernels.emission_flux(r, v, rho, 2.0, r[0], False, w)
    blue = w < 0
    np.testing.assert_allclose(seen[blue], whole[blue], rtol=1e-12)
    red = (w > 0) & (whole > 0)
    assert np.all(seen[red] <= whole[red] * (1 + 1e-12))
    assert np.any(seen[red] < 0.99 * whole[red])
    # The same through the Quantity layer, where each profile has peak 1:
    # on the blue side the two differ by one constant factor.
    src = demo_result if source == "demo" else profile
    core = profile["radius"][0]
    a = lines.emission_profile(src, lines.LineSettings(occultation=True), core_radius=core).flux
    b = lines.emission_profile(src, lines.LineSettings(occultation=False), core_radius=core).flux
    ratio = a[blue & (b > 1e-12)] / b[blue & (b > 1e-12)]
    np.testing.assert_allclose(ratio, ratio[0], rtol=1e-9)
    assert np.all(a[red] <= ratio[0] * b[red] * (1 + 1e-9))


def test_shells_inside_the_core_are_not_seen():
    # With occultation a core beyond the last point leaves nothing to emit.
    with pytest.raises(ModelError, match="no tabulated gas outside the core"):
        lines.emission_profile(shell_profile(), core_radius=20 * R * u.cm)
    # ... and a core halfway out removes the inner shells from both sides.
    r, v, rho = cgs(shell_profile())
    w = np.linspace(-0.5, -0.1, 5) * v[0]
    F = kernels.emission_flux(r, v, rho, 2.0, 5 * R, True, w)
    expected = 2 * math.pi * rho[0] ** 2 * R**4 / v[0] * (1 / (5 * R) - 1 / (10 * R))
    np.testing.assert_allclose(F, expected, rtol=2e-5)


# -- (a) Gaussian broadening -------------------------------------------------------

def test_gaussian_widths_add_in_quadrature():
    # A Gaussian of FWHM a convolved with one of FWHM b is a Gaussian of FWHM
    # sqrt(a^2 + b^2) (common practice).  The sampled line is piecewise
    # linear, which adds a variance of h^2/6: far below a tenth of a step.
    w = np.linspace(-600.0, 600.0, 1201)  # km/s, step 1 km/s
    a, b = 50.0, 120.0
    out = lines.broaden(w * KM_S, gaussian(w, a), b * KM_S)
    assert abs(fwhm_of(w, out) - math.hypot(a, b)) < 0.1
    # total flux is kept
    assert math.isclose(np.trapezoid(out, w), np.trapezoid(gaussian(w, a), w), rel_tol=1e-9)


def test_resolving_power_gives_fwhm_c_over_R():
    # R = lambda / FWHM, so the instrumental FWHM is c / R (definition).
    settings = lines.LineSettings(resolution=5000)
    c_over_R = C_LIGHT / 1e5 / 5000
    assert math.isclose(settings.instrument_fwhm.to_value(KM_S), c_over_R, rel_tol=1e-14)
    w = np.linspace(-600.0, 600.0, 1201)
    out = lines.broaden(w * KM_S, gaussian(w, 40.0), settings.broadening_fwhm)
    assert abs(fwhm_of(w, out) - math.hypot(40.0, c_over_R)) < 0.1
    # turbulence and instrument combine in quadrature into one Gaussian
    both = lines.LineSettings(turbulence="30 km/s", resolution="40 km/s")
    assert math.isclose(both.broadening_fwhm.to_value(KM_S), 50.0, rel_tol=1e-14)


def test_resolution_sets_width_of_a_narrow_line():
    # A 1 km/s shell seen at R = 3000 (c/R = 99.93 km/s): the box adds a
    # variance of (2 km/s)^2 / 12, i.e. 0.01 km/s to the FWHM.
    p = lines.emission_profile(shell_profile(v_inf=1.0),
                               lines.LineSettings(occultation=False, resolution=3000))
    assert abs(p.fwhm.to_value(KM_S) - C_LIGHT / 1e5 / 3000) < 0.1 * step(p)


@pytest.mark.parametrize("sigma", [1e-6, 0.05, 0.3])
def test_broadening_narrower_than_the_grid_is_exact(sigma):
    # The sampled profile is piecewise linear, and the convolution is exact
    # however small sigma is compared with the step: for f = 10 - |w| it is
    # 10 - E|w - X| (X ~ N(0, sigma)) = f(w) - 2 E[(X - |w|)+], with
    # E[(X - d)+] = sigma phi(d/sigma) - d (1 - Phi(d/sigma)) (exact).
    w = np.linspace(-10.0, 10.0, 21)
    f = 10.0 - np.abs(w)
    out = kernels.gaussian_broaden(f, 1.0, sigma, 0.0)
    d = np.abs(w) / sigma
    excess = sigma * (np.exp(-0.5 * d**2) / math.sqrt(2 * math.pi)
                      - d * 0.5 * np.array([math.erfc(x / math.sqrt(2)) for x in d]))
    inner = slice(4, 17)  # away from the grid's ends (continuum 0 beyond them)
    np.testing.assert_allclose(out[inner], (f - 2 * excess)[inner], rtol=1e-12)
    assert math.isclose(out[10], 10.0 - sigma * math.sqrt(2 / math.pi), rel_tol=1e-12)


# -- Sobolev P Cygni ------------------------------------------------------------

@pytest.mark.parametrize("make", [shell_profile, beta_law_profile])
def test_pcygni_blue_edge_at_minus_v_max_for_a_strong_line(make):
    # For a strong (saturated) resonance line the absorption trough reaches
    # -v_infinity (Lamers & Cassinelli 1999, ch. 8, from memory): here -v_max,
    # the fastest tabulated gas, to the grid step.
    profile = make()
    v_max = profile["velocity"].max().to_value(KM_S)
    p = lines.pcygni_profile(profile, lines.LineSettings(line_strength=1e3))
    assert p.kind == "pcygni"
    assert abs(p.edge_velocity.to_value(KM_S) + v_max) <= step(p)
    assert np.isnan(p.fwhm.value) and np.isnan(p.hwzi.value)
    # continuum 1 beyond the fastest gas, emission above it on the red side
    w = p.velocity.to_value(KM_S)
    np.testing.assert_allclose(p.flux[np.abs(w) > v_max], 1.0, atol=1e-12)
    assert p.flux[w > 0].max() > 1.0 and p.flux.min() < 0.5


@pytest.mark.parametrize("make", [shell_profile, beta_law_profile])
@pytest.mark.parametrize("k0", [0.01, 1.0, 100.0])
def test_pure_scattering_line_without_occultation_keeps_its_photons(make, k0):
    # Pure scattering removes no photons: without occultation the emission
    # equals the absorption and the equivalent width vanishes (Lamers &
    # Cassinelli 1999, ch. 2, from memory).  This holds only if
    # S = beta_c I_c / beta (Castor 1970).  Tolerance: the w-grid (401 points)
    # across the discontinuities at -v_max and w = 0; it falls with n_velocity.
    p = lines.pcygni_profile(make(), lines.LineSettings(line_strength=k0, occultation=False))
    w = p.velocity.to_value(KM_S)
    net = np.trapezoid(p.flux - 1.0, w)
    assert abs(net) < 2e-3 * np.trapezoid(np.abs(p.flux - 1.0), w)
    hidden = lines.pcygni_profile(make(), lines.LineSettings(line_strength=k0))
    assert np.trapezoid(hidden.flux - 1.0, w) < -0.05 * np.trapezoid(np.abs(p.flux - 1.0), w)
    # occultation changes only the red side
    np.testing.assert_array_equal(hidden.flux[w < 0], p.flux[w < 0])


def test_escape_probability_limits_castor_1970():
    # Optically thin: beta -> 1, beta_c -> W = (1 - sqrt(1 - (Rc/r)^2)) / 2,
    # the dilution factor.  Optically thick: (1 - e^-tau)/tau -> 1/tau with
    # tau = K rho / Q(mu), Q = mu^2 v' + (1 - mu^2) v/r quadratic in mu, so
    # beta = (v'/3 + 2 v/(3 r)) / (K rho) and
    # beta_c = (1/2) int_{mu*}^1 Q dmu / (K rho) (Castor 1970, MNRAS 149, 111,
    # from memory; Gauss-Legendre is exact for the quadratic).
    r, v, dvdr, Rc, rho = 3e12, 5e7, 2e-5, 1e12, 1.0
    mu_s = math.sqrt(1 - (Rc / r) ** 2)
    beta, beta_c = kernels.escape_probabilities(1e-20, rho, r, v, dvdr, Rc)
    assert math.isclose(beta, 1.0, rel_tol=1e-9)
    assert math.isclose(beta_c, 0.5 * (1 - mu_s), rel_tol=1e-9)
    K = 1e12
    beta, beta_c = kernels.escape_probabilities(K, rho, r, v, dvdr, Rc)

    def Q_integral(a):  # int_a^1 Q dmu
        return (dvdr - v / r) * (1 - a**3) / 3 + v / r * (1 - a)

    assert math.isclose(beta, Q_integral(0.0) / (K * rho), rel_tol=1e-9)
    assert math.isclose(beta_c, 0.5 * Q_integral(mu_s) / (K * rho), rel_tol=1e-9)


def test_sobolev_tau_of_a_steady_wind_is_k0_over_x2_w_dwdx():
    # tau_rad = k0 / (x^2 w dw/dx) for a steady wind (module docstring; the
    # form of Castor & Lamers 1979, from memory): check the scaling the layer
    # builds, at the fastest point of the beta law, through a thin line whose
    # absorption depth at the core's centre is tau itself.
    profile = beta_law_profile()
    r, v, rho = cgs(profile)
    v_max = v.max()
    rho_ref = np.median(r * r * rho * v) / (R * R * v_max)
    K = 1e-3 * v_max / (R * rho_ref)
    dvdr = kernels.velocity_gradient(r, v)
    x, wv = r / R, v / v_max
    tau = np.array([kernels.sobolev_tau(K, rho[i], r[i], v[i], dvdr[i], 1.0)
                    for i in range(r.size)])
    dwdx = dvdr * R / v_max
    np.testing.assert_allclose(tau, 1e-3 / (x**2 * wv * dwdx), rtol=1e-12)


# -- (f) the Quantity layer and its kernels agree ------------------------------------

def test_emission_profile_matches_kernel(demo_result):
    # (f) internal: the Quantity layer is the kernel plus units, the default
    # core radius, peak normalisation and the +-1.2 v_max grid.  The default
    # core of a Model A result is where tau = integral of kappa rho dr from
    # outside reaches 2/3 (recomputed here: kappa rho exponential between
    # points, the crossing solved for on that curve).
    p = lines.emission_profile(demo_result)
    r, v, rho = cgs(demo_result.profile)
    kappa = demo_result.profile["opacity"].to_value(u.cm**2 / u.g)
    f = kappa * rho
    seg = np.diff(r) * (f[1:] - f[:-1]) / np.log(f[1:] / f[:-1])
    tau = np.concatenate([np.cumsum(seg[::-1])[::-1], [0.0]])
    i = np.flatnonzero(tau >= 2 / 3)[-1]
    k = np.log(f[i + 1] / f[i]) / (r[i + 1] - r[i])
    Rc = r[i] + np.log((f[i + 1] - (2 / 3 - tau[i + 1]) * k) / f[i]) / k
    assert tau[0] > 2 / 3 and r[0] < Rc < r[-1]
    w = p.velocity.to_value(u.cm / u.s)
    F = kernels.emission_flux(r, v, rho, 2.0, Rc, True, w)
    np.testing.assert_allclose(p.flux, F / F.max(), rtol=1e-12, atol=1e-15)
    assert math.isclose(w[-1], 1.2 * v.max(), rel_tol=1e-12)
    assert p.velocity.size == 401 and p.velocity.unit == KM_S


def test_pcygni_profile_matches_kernel():
    # (f) internal: k_0 -> K as the module docstring defines it; a 20 km/s
    # FWHM turbulence widens the grid by 2 FWHM on each side.
    profile = beta_law_profile()
    settings = lines.LineSettings(line_strength=3.0, turbulence="20 km/s")
    p = lines.pcygni_profile(profile, settings)
    r, v, rho = cgs(profile)
    w = p.velocity.to_value(u.cm / u.s)
    v_max = v.max()
    rho_ref = np.median(r * r * rho * v) / (R * R * v_max)
    F = kernels.pcygni_flux(r, v, rho, 3.0 * v_max / (R * rho_ref), R, True, w)
    sigma = 20e5 / lines.FWHM_PER_SIGMA
    F = kernels.gaussian_broaden(F, w[1] - w[0], sigma, 1.0)
    np.testing.assert_allclose(p.flux, F, rtol=1e-12)
    assert math.isclose(w[-1], 1.2 * v_max + 2 * 20e5, rel_tol=1e-12)


def test_broaden_matches_kernel():
    # (f) internal: sigma = FWHM / (2 sqrt(2 ln 2)) (definition of the FWHM).
    w = np.linspace(-100.0, 100.0, 201)
    f = gaussian(w, 10.0)
    out = lines.broaden(w * KM_S, f, "15 km/s")
    np.testing.assert_allclose(out, kernels.gaussian_broaden(f, 1.0, 15.0 / 2.3548200450309493,
                                                             0.0), rtol=1e-12)


# -- results, files, widths ---------------------------------------------------------

def test_line_widths_of_the_demo(demo_result):
    # The demo is an invented star: only the structure and the strong-line
    # edge at -v_max (Lamers & Cassinelli 1999, ch. 8, from memory) are checked.
    widths = lines.line_widths(demo_result)
    assert set(widths) == {"fwhm", "hwzi", "edge_velocity", "terminal_velocity"}
    for q in widths.values():
        assert q.unit == KM_S
    v_inf = demo_result.summary["terminal_velocity"].to_value(KM_S)
    assert widths["terminal_velocity"].to_value(KM_S) == pytest.approx(v_inf, rel=1e-14)
    p = lines.pcygni_profile(demo_result)
    assert abs(widths["edge_velocity"].to_value(KM_S) + v_inf) <= step(p)
    assert widths["fwhm"].value > 0 and widths["hwzi"].value > 0


def test_model_b_lines_come_from_the_thin_flow_above_the_photosphere(bump_result):
    # Model B's profile stops at the photosphere (its core radius); the line
    # comes from the ballistic thin flow above it, v^2 = v_inf^2 + K / r
    # (docs/physics.md, eq. 23), so its widths sit between v_inf and v_ph.
    result = bump_result
    widths = lines.line_widths(result)
    v_inf = result.summary["terminal_velocity"].to_value(KM_S)
    v_ph = result.summary["photosphere_velocity"].to_value(KM_S)
    hwzi = widths["hwzi"].to_value(KM_S)
    assert v_inf * 0.9 < hwzi <= v_ph * 1.01
    assert np.isfinite(widths["fwhm"].value)
    # The thin flow decelerates (Gamma_thin < 1), so the fastest gas is at the
    # photosphere: the P Cygni edge traces v_ph (the fastest gas in front of the
    # disk), not v_inf (common practice; docs/physics.md, section 7).
    p = lines.pcygni_profile(result)
    assert p.slows_outward
    assert p.fastest.to_value(KM_S) == pytest.approx(v_ph, rel=1e-3)
    edge = widths["edge_velocity"].to_value(KM_S)
    assert edge == p.edge_velocity.to_value(KM_S)
    assert -1.001 * v_ph <= edge < -v_inf


def test_result_read_back_from_hdf5_gives_same_widths(demo_result, tmp_path):
    # (d) a result read back from its file (cgs datasets) gives the same widths.
    path = demo_result.to_hdf5(tmp_path / "demo.h5")
    again = windsolve.read_result(path)
    a = lines.line_widths(demo_result)
    b = lines.line_widths(again)
    for key in a:
        assert a[key].to_value(KM_S) == pytest.approx(b[key].to_value(KM_S), rel=1e-12)


def test_to_csv_round_trip(tmp_path):
    # The documented CSV layout: one header line, then velocity_km_s,flux rows;
    # no temporary file is left behind.
    p = lines.emission_profile(shell_profile(), lines.LineSettings(occultation=False))
    path = p.to_csv(tmp_path / "line.csv")
    assert path.read_text().splitlines()[0] == "velocity_km_s,flux"
    data = np.loadtxt(path, delimiter=",", skiprows=1)
    np.testing.assert_allclose(data[:, 0], p.velocity.to_value(KM_S), rtol=1e-9)
    np.testing.assert_allclose(data[:, 1], p.flux, rtol=1e-9, atol=1e-12)
    assert [f.name for f in tmp_path.iterdir()] == ["line.csv"]
    with pytest.raises(OutputError):
        p.to_csv(tmp_path)
    with pytest.raises(OutputError):
        p.to_csv(tmp_path / "missing" / "line.csv")


# -- (e) bad input --------------------------------------------------------------------

@pytest.mark.parametrize("kwargs, field", [
    ({"emissivity_power": 3}, "emissivity_power"),
    ({"emissivity_power": 1.5}, "emissivity_power"),
    ({"emissivity_power": True}, "emissivity_power"),
    ({"occultation": "yes"}, "occultation"),
    ({"turbulence": "-5 km/s"}, "turbulence"),
    ({"turbulence": "10 K"}, "turbulence"),
    ({"turbulence": 10}, "turbulence"),
    ({"resolution": 0}, "resolution"),
    ({"resolution": -2000.0}, "resolution"),
    ({"resolution": "0 km/s"}, "resolution"),
    ({"resolution": "fast"}, "resolution"),
    ({"resolution": "3 K"}, "resolution"),
    ({"resolution": True}, "resolution"),
    ({"hwzi_fraction": 0.0}, "hwzi_fraction"),
    ({"hwzi_fraction": 1.0}, "hwzi_fraction"),
    ({"edge_depth": 1.5}, "edge_depth"),
    ({"edge_depth": -0.1}, "edge_depth"),
    ({"line_strength": 0.0}, "line_strength"),
    ({"line_strength": float("nan")}, "line_strength"),
    ({"n_velocity": 5}, "n_velocity"),
    ({"n_velocity": 100.5}, "n_velocity"),
])
def test_bad_settings_give_one_line_model_errors(kwargs, field):
    with pytest.raises(ModelError) as error:
        lines.LineSettings(**kwargs)
    message = str(error.value)
    assert "\n" not in message and field in message


def test_settings_accept_strings_with_units():
    # As model files do: strings with units; a bare number as resolution is R.
    s = lines.LineSettings(turbulence="10 km/s", resolution="30 km/s")
    assert s.turbulence.unit == KM_S and s.turbulence.value == 10.0
    assert s.resolution.to_value(KM_S) == 30.0
    assert lines.LineSettings(resolution="20000").resolution == 20000.0
    assert lines.LineSettings(turbulence=5 * u.m / u.s).turbulence.to_value(KM_S) == 0.005


@pytest.mark.parametrize("change, text", [
    (lambda d: d.pop("density"), "no 'density'"),
    (lambda d: d.update(radius=d["radius"].value), "Quantity"),
    (lambda d: d.update(velocity=d["velocity"].value * u.K), "Quantity"),
    (lambda d: d.update(radius=d["radius"][::-1]), "increase"),
    (lambda d: d.update(velocity=-d["velocity"]), "> 0"),
    (lambda d: d.update(density=d["density"][:-1]), "lengths"),
])
def test_bad_profiles_give_one_line_model_errors(change, text):
    profile = shell_profile()
    change(profile)
    with pytest.raises(ModelError, match=text) as error:
        lines.emission_profile(profile)
    assert "\n" not in str(error.value)


def test_bad_arguments_give_model_errors(demo_result):
    with pytest.raises(ModelError, match="core_radius"):
        lines.emission_profile(demo_result, core_radius="3 K")
    with pytest.raises(ModelError, match="WindResult"):
        lines.emission_profile([1, 2, 3])
    with pytest.raises(ModelError, match="LineSettings"):
        lines.emission_profile(demo_result, settings={"occultation": False})
    failed = windsolve.WindResult(demo_result.model, False, "stalled", "stalled at 2 R0")
    with pytest.raises(ModelError, match="no converged profile"):
        lines.line_widths(failed)


def test_velocity_falling_outward_gives_both_lines_and_an_edge_at_the_fastest_gas():
    # (e) a wind that slows outward (the beta law reversed: fastest at the
    # core) has several resonance points per ray; both entry points give the
    # same finite edge, near -v_max (the fastest gas, in front of the disk),
    # not -v_inf (common practice; tests/test_lines_any_flow.py checks the
    # profile itself against a ray-by-ray formal solution).
    profile = beta_law_profile()
    profile["velocity"] = profile["velocity"][::-1].copy()
    p = lines.pcygni_profile(profile)
    widths = lines.line_widths(profile)
    v_max = profile["velocity"].to_value(KM_S).max()
    assert p.slows_outward and p.fastest.to_value(KM_S) == pytest.approx(v_max, rel=1e-12)
    assert widths["edge_velocity"].to_value(KM_S) == p.edge_velocity.to_value(KM_S)
    assert -v_max <= p.edge_velocity.to_value(KM_S) < -0.9 * v_max
    assert np.isfinite(widths["fwhm"].value)
