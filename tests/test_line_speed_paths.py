"""The fast paths of the line widths agree with the slow, general computations.

(f) internal consistency: the suffix-sum emission kernel against the general
loop, the lazily evaluated P Cygni blue edge against a dense sampling of the
full Sobolev profile, and the cgs entry point of sweep workers against
``line_widths``.
"""

import math
import pathlib

import astropy.units as u
import numpy as np
import pytest

import windsolve
from windsolve import lines
from windsolve.core import lines as kernels

KM_S = u.km / u.s
R = 7e11  # cm
V_INF = 1e8  # cm/s
CONFIGS = pathlib.Path(__file__).parent.parent / "configs"


def demo_arrays(result):
    """(r, v, rho, R_c) in cgs as ``line_widths`` describes them: the written profile,
    for Model B followed by the ballistic thin flow above the photosphere,
    v^2 = v_inf^2 + K / r with K = (v_ph^2 - v_inf^2) R_ph and rho from continuity, out
    to ``lines.THIN_EXTENT`` R_ph; R_c by ``lines.default_core_radius_cgs``."""
    p, s = result.profile, result.summary
    r, v, rho, kappa = (p[key].to_value(unit) for key, unit in (
        ("radius", u.cm), ("velocity", u.cm / u.s), ("density", u.g / u.cm**3),
        ("opacity", u.cm**2 / u.g)))

    def cgs(key, unit):
        return s[key].to_value(unit) if key in s else math.nan
    R_ph = cgs("photosphere_radius", u.cm)
    if math.isfinite(R_ph):
        v_inf, mdot = cgs("terminal_velocity", u.cm / u.s), cgs("mass_loss_rate", u.g / u.s)
        K = (v[-1] ** 2 - v_inf**2) * R_ph
        r_out = R_ph * np.geomspace(1.0, lines.THIN_EXTENT, lines.THIN_POINTS)[1:]
        v_out = np.sqrt(v_inf**2 + K / r_out)
        rho_out = mdot / (4.0 * np.pi * r_out**2 * v_out)
        r_all, v, rho = (np.concatenate(pair) for pair in ((r, r_out), (v, v_out),
                                                             (rho, rho_out)))
    else:
        r_all = r
    radius = getattr(result.model, "radius", None)
    Rc = lines.default_core_radius_cgs(r_all, (r, rho[:r.size], kappa), R_ph,
                                       math.nan if radius is None else radius.to_value(u.cm),
                                       cgs("base_radius", u.cm))
    return r_all, v, rho, Rc


def beta_law(beta=1.0, n=300, outer=100.0):
    """v = v_inf (1 - 0.99 R / r)^beta, rho from continuity."""
    r = R * np.geomspace(1.0, outer, n)
    v = V_INF * (1.0 - 0.99 * R / r) ** beta
    return r, v, 1e-12 * (R / r) ** 2 * (V_INF / v)


def exponential_base(n=250):
    """A nearly hydrostatic base (v grows exponentially) joining a beta law: the demo's
    shape, where the dense slow gas dominates an optically thin line."""
    r = R * np.geomspace(1.0, 30.0, n)
    v = 1e5 * np.exp((r / R - 1.0) / 0.05)
    v = np.minimum(v, V_INF * (1.0 - 0.99 * R / r) ** 0.8)
    v = np.maximum.accumulate(v)
    return r, v, 1e-9 * (R / r) ** 2 * (v[0] / v)


SYNTHETIC = {"beta1": beta_law(), "beta3": beta_law(3.0), "base": exponential_base()}


# -- emission: suffix sums == the general loop -----------------------------------------

def _compare_emission(r, v, rho, Rc):
    w = np.linspace(-1.2, 1.2, 401) * v.max()
    for occult in (True, False):
        for n in (1.0, 2.0):
            slow = kernels.emission_flux_general(r, v, rho, n, Rc, occult, w)
            fast = kernels.emission_flux_monotonic(r, v, rho, n, Rc, occult, w)
            np.testing.assert_allclose(fast, slow, rtol=1e-10, atol=1e-10 * slow.max())
            assert slow.max() > 0
            # the dispatcher takes the fast path here and gives the same numbers
            np.testing.assert_array_equal(kernels.emission_flux(r, v, rho, n, Rc, occult, w),
                                          fast)


def test_fast_emission_equals_general_loop_on_the_demo(demo_result):
    r, v, rho, Rc = demo_arrays(demo_result)
    assert r[0] < Rc < r[-1]  # an occulting core inside the grid
    _compare_emission(r, v, rho, Rc)


@pytest.mark.parametrize("name", sorted(SYNTHETIC))
@pytest.mark.parametrize("core", [1.0, 1.37, 8.2])
def test_fast_emission_equals_general_loop_on_synthetic_winds(name, core):
    r, v, rho = SYNTHETIC[name]
    _compare_emission(r, v, rho, core * R)


def test_emission_falls_back_to_the_general_loop_when_v_falls_outward():
    # A decelerating outer wind: the seen region at w is no longer one outer
    # part of the grid, so the suffix sums are wrong there and the dispatcher
    # must use the general loop.
    r, v, rho = beta_law()
    v = v * np.where(r > 5 * R, (5 * R / r) ** 0.8, 1.0)
    w = np.linspace(-1.2, 1.2, 401) * v.max()
    slow = kernels.emission_flux_general(r, v, rho, 2.0, R, True, w)
    np.testing.assert_array_equal(kernels.emission_flux(r, v, rho, 2.0, R, True, w), slow)
    wrong = kernels.emission_flux_monotonic(r, v, rho, 2.0, R, True, w)
    assert np.max(np.abs(wrong - slow)) > 1e-3 * slow.max()


def test_occultation_root_finds_the_bisection_crossing():
    # The suffix-sum path finds where the occultation edge v sqrt(1 - (Rc/r)^2)
    # = w as the Newton root of v^2 (x^2 - 1) = w^2 x^2; the general loop finds
    # it by bisection; including a shell that starts on the core (infinite
    # slope).  One tabulated interval with j r^2 / v = 1 (rho = v / r^2, n = 1):
    # F(w) / 2 pi is then the length of the seen part, so the two crossings
    # t (in units of a sub-interval) differ by |dF| / (2 pi dr_sub): < 1e-12.
    rng = np.random.default_rng(3)
    Rc = 1e12
    for ra_over in (1.0, 1.0 + 1e-9, 1.01, 1.5, 20.0):
        for _ in range(20):
            ra = ra_over * Rc
            rb = ra * (1.0 + rng.uniform(1e-4, 0.3))
            va, vb = np.sort(rng.uniform(1e6, 1e8, 2))
            edge = lambda r, v: v * math.sqrt(max(1.0 - (Rc / r) ** 2, 0.0))  # noqa: E731
            wk = np.array([rng.uniform(edge(ra, va), edge(rb, vb))])
            r, v = np.array([ra, rb]), np.array([va, vb])
            rho = v / r**2
            t_bis = kernels.emission_flux_general(r, v, rho, 1.0, Rc, True, wk)[0]
            t_new = kernels.emission_flux_monotonic(r, v, rho, 1.0, Rc, True, wk)[0]
            dr_sub = (rb - ra) / kernels.NSUB
            assert 0.0 < t_new < 2 * math.pi * (rb - ra)
            assert abs(t_new - t_bis) < 1e-12 * 2 * math.pi * dr_sub


# -- emission widths: exact crossings == the limit of ever finer grids ------------------

@pytest.mark.parametrize("name", sorted(SYNTHETIC) + ["demo"])
@pytest.mark.parametrize("core", [1.0, 1.37, 8.2])
def test_exact_emission_widths_are_where_the_profile_crosses_the_level(demo_result, name, core):
    # Unbroadened widths come from the flux sums alone (no grid).  The
    # grid evaluator (suffix sums) must give exactly level * F(0) at both
    # crossings, and a 20,001-point grid must find them to within one of
    # its steps (linear interpolation misplaces a crossing by less).
    # Through the kernel entry point emission_line (sigma = 0): the blue
    # crossing w_- at a level is -HWZI (the red side, behind the core, is
    # never the wider); the red one at level 0.5 is w_+ = FWHM + w_-.
    r, v, rho = demo_arrays(demo_result)[:3] if name == "demo" else SYNTHETIC[name]
    Rc = core * r[0]
    for occult in (True, False):
        for n in (1.0, 2.0):
            peak = kernels.emission_flux(r, v, rho, n, Rc, occult, np.zeros(1))[0]
            fine = kernels.velocity_grid(v.max(), 0.0, 20001)
            step = fine[1] - fine[0]
            # the suffix sums, normalised to F(0): the exact-profile path was taken
            F_fine = kernels.emission_flux_monotonic(r, v, rho, n, Rc, occult, fine)
            for level in (0.5, 0.05, 0.2):
                f, fwhm, hwzi, ok = kernels.emission_line(r, v, rho, n, Rc, occult, fine, 0.0,
                                                          level)
                assert ok
                np.testing.assert_array_equal(f, F_fine / peak)
                w_lo = -hwzi
                crossings = [w_lo] + ([fwhm + w_lo] if level == 0.5 else [])
                assert -v.max() <= w_lo < 0.0
                assert level != 0.5 or 0.0 <= crossings[1] <= v.max()
                F = kernels.emission_flux_monotonic(r, v, rho, n, Rc, occult,
                                                    np.array(crossings))
                np.testing.assert_allclose(F / peak, level, rtol=1e-9)
                g_lo, g_hi = kernels.outermost_crossings(fine, f, level)
                assert abs(g_lo - w_lo) <= step
                if level == 0.5:
                    assert abs(g_hi - crossings[1]) <= step
                if not occult and level == 0.5:  # both sides see the whole shell: symmetric
                    assert fwhm == 2 * hwzi


def test_unbroadened_widths_do_not_depend_on_the_grid():
    # A core deep in the nearly hydrostatic base: the line is a spike far
    # narrower than a 401-point grid's step, and its FWHM must still be the
    # same on 401 and 40,001 points (read off the 401-point grid it came out
    # about 4x wider).
    r, v, rho = SYNTHETIC["base"]
    settings = [lines.LineSettings(n_velocity=n) for n in (401, 40001)]
    a, b = (lines.widths_cgs(r, v, rho, s, r[0]) for s in settings)
    step = 2.4 * v.max() / 400
    assert a[0] < step  # narrower than one step of the coarse grid
    assert a[0] == b[0] and a[1] == b[1]


# -- P Cygni: the lazy edge == a dense sampling of the full profile ----------------------

def _grid_edge(r, v, rho, K, Rc, n_w, sigma=0.0, depth=0.1, half=None):
    half = 1.2 * v.max() if half is None else half
    w = np.linspace(-half, half, n_w)
    F = kernels.gaussian_broaden(kernels.pcygni_flux(r, v, rho, K, Rc, True, w), w[1] - w[0],
                                 sigma, 1.0)
    return kernels.outermost_crossings(w, 1.0 - F, depth)[0], w


@pytest.mark.parametrize("source", ["demo", "beta1", "beta3"])
@pytest.mark.parametrize("k0", [100.0, 1.0])
def test_exact_edge_agrees_with_a_dense_grid(demo_result, source, k0):
    # The edge found on the exact profile must agree with the linearly
    # interpolated crossing on a 40,001-point grid to within 1.5 of its steps
    # (linear interpolation misplaces a crossing by less than one step).
    if source == "demo":
        r, v, rho, Rc = demo_arrays(demo_result)
    else:
        (r, v, rho), Rc = SYNTHETIC[source], R
    K = kernels.sobolev_strength(r, v, rho, Rc, k0)
    dense, wd = _grid_edge(r, v, rho, K, Rc, 40001)
    w = np.linspace(-1.2, 1.2, 401) * v.max()
    fast = kernels.pcygni_edge(r, v, rho, K, Rc, True, w, 0.0, 0.1)
    assert np.isfinite(dense)
    assert abs(fast - dense) <= 1.5 * (wd[1] - wd[0])
    # beyond the fastest gas nothing absorbs: F = F_c for w < -v_max
    # (Lamers & Cassinelli 1999, ch. 8, from memory), so the exact edge lies inside it
    assert -v.max() < fast < 0


def test_exact_edge_is_a_crossing_of_the_profile(demo_result):
    # 1 - F/F_c reaches edge_depth at the edge, and not just outside it.
    r, v, rho, Rc = demo_arrays(demo_result)
    K = kernels.sobolev_strength(r, v, rho, Rc, 100.0)
    w = np.linspace(-1.2, 1.2, 401) * v.max()
    for depth in (0.1, 0.5):
        edge = kernels.pcygni_edge(r, v, rho, K, Rc, True, w, 0.0, depth)
        tol = 1e-8 * v.max()
        F = kernels.pcygni_flux(r, v, rho, K, Rc, True, np.array([edge - tol, edge + tol]))
        assert 1.0 - F[0] < depth <= 1.0 - F[1]


@pytest.mark.parametrize("fwhm_kms", [0.05, 20.0, 60.0])
def test_broadened_edge_equals_the_grid_measurement(demo_result, fwhm_kms):
    # With broadening the edge is measured on the broadened grid profile:
    # the lazy evaluation must give exactly the number of the full profile.
    r, v, rho, Rc = demo_arrays(demo_result)
    K = kernels.sobolev_strength(r, v, rho, Rc, 30.0)
    fwhm = fwhm_kms * 1e5
    sigma = fwhm / lines.FWHM_PER_SIGMA
    w = kernels.velocity_grid(v.max(), fwhm, 401)
    grid, _ = _grid_edge(r, v, rho, K, Rc, 401, sigma, half=w[-1])
    fast = kernels.pcygni_edge(r, v, rho, K, Rc, True, w, sigma, 0.1)
    assert np.isfinite(grid) and fast == grid


def test_weak_line_has_no_edge():
    # A trough shallower than edge_depth everywhere: nan, as on the grid.
    r, v, rho = beta_law()
    K = kernels.sobolev_strength(r, v, rho, R, 1e-3)
    w = np.linspace(-1.2, 1.2, 401) * v.max()
    grid, _ = _grid_edge(r, v, rho, K, R, 401)
    assert np.isnan(grid)
    assert np.isnan(kernels.pcygni_edge(r, v, rho, K, R, True, w, 0.0, 0.1))
    F = kernels.pcygni_flux(r, v, rho, K, R, True, w)
    assert 0.0 < np.max(1.0 - F) < 0.1  # there is a trough, just a shallow one


# -- one implementation: widths_cgs == line_widths == the profiles -------------------------

@pytest.mark.parametrize("kwargs", [{}, {"turbulence": "20 km/s", "resolution": 5000},
                                    {"emissivity_power": 1, "occultation": False},
                                    {"line_strength": 2.0, "edge_depth": 0.3}])
def test_widths_cgs_equals_line_widths_and_the_profiles(demo_result, kwargs):
    settings = lines.LineSettings(**kwargs)
    r, v, rho, Rc = demo_arrays(demo_result)
    got = lines.widths_cgs(r, v, rho, settings, Rc)
    assert got == lines.widths_cgs(r, v, rho, settings.cgs, Rc)
    widths = lines.line_widths(demo_result, settings)
    em = lines.emission_profile(demo_result, settings)
    pc = lines.pcygni_profile(demo_result, settings)
    for value, key, profile in zip(got, ("fwhm", "hwzi", "edge_velocity"), (em, em, pc),
                                     strict=True):
        assert np.isfinite(value)
        assert widths[key].to_value(u.cm / u.s) == pytest.approx(value, rel=1e-15)
        assert getattr(profile, key).to_value(u.cm / u.s) == pytest.approx(value, rel=1e-15)


def test_widths_cgs_of_model_b_with_its_thin_flow(bump_result):
    # The caller appends the thin flow (here: as line_widths does); that flow
    # decelerates, and its edge comes from every resonance point of each ray.
    result = bump_result
    r, v, rho, Rc = demo_arrays(result)
    fwhm, hwzi, edge = lines.widths_cgs(r, v, rho, lines.LineSettings(), Rc)
    widths = lines.line_widths(result)
    # (line_widths returns km/s: the round trip may cost the last bit)
    assert np.isfinite(fwhm) and widths["fwhm"].to_value(u.cm / u.s) == pytest.approx(fwhm,
                                                                                     rel=1e-15)
    assert widths["hwzi"].to_value(u.cm / u.s) == pytest.approx(hwzi, rel=1e-15)
    assert np.isfinite(edge)
    assert widths["edge_velocity"].to_value(u.cm / u.s) == pytest.approx(edge, rel=1e-15)
    assert lines.pcygni_profile(result).edge_velocity.to_value(u.cm / u.s) == edge
    # no gas outside the core: all nan
    assert all(np.isnan(x) for x in lines.widths_cgs(r, v, rho, lines.LineSettings(),
                                                     2 * r[-1]))


def test_settings_cgs_are_computed_once_in_cgs():
    # FWHM in quadrature (common practice), sigma = FWHM / 2 sqrt(2 ln 2) (definition).
    s = lines.LineSettings(turbulence="30 km/s", resolution="40 km/s", emissivity_power=1)
    c = s.cgs
    assert c is s.cgs
    assert math.isclose(c.broadening_fwhm, 50e5, rel_tol=1e-12)
    assert math.isclose(c.broadening_sigma, 50e5 / (2 * math.sqrt(2 * math.log(2))),
                        rel_tol=1e-12)
    assert (c.emissivity_power, c.occultation, c.n_velocity) == (1.0, True, 401)
    with pytest.raises(windsolve.errors.ModelError, match="LineSettings"):
        lines.widths_cgs(np.ones(3), np.ones(3), np.ones(3), {"turbulence": 0}, 1.0)


def _exponential_tau(r, f):
    """tau from the outer end, f = kappa rho exponential in r between points."""
    q = np.log(f[1:] / f[:-1])
    seg = np.diff(r) * (f[1:] - f[:-1]) / q
    return np.concatenate([np.cumsum(seg[::-1])[::-1], [0.0]])


def test_optical_core_radius_cgs(demo_result):
    # tau = int kappa rho dr from outside reaches 2/3 (the usual photosphere
    # definition, common practice), kappa rho exponential between points:
    # recomputed here with numpy; and the crossing found on that curve
    # (tau(Rc) = 2/3 to rounding, unlike the linear interpolation).
    p = demo_result.profile
    r = p["radius"].to_value(u.cm)
    rho = p["density"].to_value(u.g / u.cm**3)
    kappa = p["opacity"].to_value(u.cm**2 / u.g)
    f = kappa * rho
    tau = _exponential_tau(r, f)
    got = lines.optical_core_radius_cgs(r, rho, kappa)
    i = np.searchsorted(r, got) - 1
    k = np.log(f[i + 1] / f[i]) / (r[i + 1] - r[i])
    tau_at = tau[i + 1] + (f[i + 1] - f[i] * np.exp(k * (got - r[i]))) / k
    assert math.isclose(tau_at, 2 / 3, rel_tol=1e-12)
    # ... and it is the default core of the demo's lines (Model A, an opaque inner wind)
    default, given = (lines.line_widths(demo_result, core_radius=c) for c in (None, got * u.cm))
    assert all(default[key] == given[key] for key in ("fwhm", "hwzi", "edge_velocity"))
    assert lines.optical_core_radius_cgs(r, rho * 1e-30, kappa) is None


def test_optical_core_of_an_exponential_atmosphere_is_exact():
    # rho = rho0 exp(-(r - R) / H), constant kappa: tau(r) = kappa rho0 H
    # (exp(-(r - R)/H) - exp(-(r_out - R)/H)) (analytic integral), so
    # tau = 2/3 at r = R - H ln(2 / (3 kappa rho0 H) + exp(-(r_out - R)/H)),
    # on a coarse grid too (a trapezoid sum on this grid is off by 0.27 H).
    R, H, kappa, rho0 = 7e12, 3e10, 0.34, 1e-9
    r = np.linspace(R, R + 60 * H, 40)
    rho = rho0 * np.exp(-(r - R) / H)
    expected = R - H * math.log(2 / (3 * kappa * rho0 * H) + math.exp(-(r[-1] - R) / H))
    got = lines.optical_core_radius_cgs(r, rho, np.full_like(r, kappa))
    assert abs(got - expected) < 1e-9 * H
