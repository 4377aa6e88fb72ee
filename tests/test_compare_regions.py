"""Delta chi^2 regions and the per-measurement exclusion rules of windsolve.observe.

Outside sources: scipy.stats.chi2 (the chi^2 distribution's quantiles) and the
Delta chi^2 table of Press et al., Numerical Recipes (3rd ed., section 15.6.5);
a coverage test on synthetic data drawn, with seeded Gaussian noise, from
Model A solutions of known parameters.
"""

import math

import numpy as np
import pytest
from scipy.stats import chi2 as chi2_dist
from scipy.stats import norm

from windsolve.observe import (
    Observation,
    chi2_map,
    compare_table,
    confidence_intervals,
    delta_chi2_level,
)


@pytest.mark.parametrize("n_params", [1, 2])
@pytest.mark.parametrize("sigma", [1, 2, 3])
def test_levels_are_chi2_quantiles(n_params, sigma):
    p = norm.cdf(sigma) - norm.cdf(-sigma)  # 68.27 %, 95.45 %, 99.73 %
    assert math.isclose(delta_chi2_level(n_params, sigma), chi2_dist.ppf(p, n_params),
                        rel_tol=1e-10)


def test_levels_match_the_numerical_recipes_table():
    # Press et al. (2007), table in section 15.6.5: 68.3 %, 95.4 %, 99.73 %
    table = {1: (1.00, 4.00, 9.00), 2: (2.30, 6.18, 11.8)}
    for n, row in table.items():
        for s, expected in zip((1, 2, 3), row, strict=True):
            assert abs(delta_chi2_level(n, s) - expected) < 0.01 * expected


def obs(quantity, value, sigma, row):
    return Observation("S", quantity, "-", value * 1e5, sigma * 1e5, row)


def test_an_undefined_prediction_excludes_the_measurement_not_the_model():
    # 40 converged rows whose edge velocity cannot be measured (NaN, as a
    # decelerating flow gives): the edge is excluded, every row compared.
    n = 40
    vinf = np.linspace(300e5, 700e5, n)
    table = {"converged": np.ones(n, bool), "terminal_velocity": vinf,
             "edge_velocity": np.full(n, np.nan), "fwhm": 0.9 * vinf}
    observations = [obs("terminal_velocity", 500, 40, 2), obs("edge_velocity", -650, 50, 3),
                    obs("fwhm", 450, 40, 4)]
    c = compare_table(table, observations)
    assert c.compared.all() and c.n_used == 2
    assert list(c.used) == [True, False, True]
    assert "edge_velocity" in c.reason_lines()[0] and "no converged row" in c.reason_lines()[0]
    expected = ((vinf - 500e5) / 40e5) ** 2 + ((0.9 * vinf - 450e5) / 40e5) ** 2
    assert np.allclose(c.chi2, expected, rtol=1e-13)
    assert "40 compared on 2 of 3 measurements" in c.counts()


def test_rows_missing_a_used_measurement_are_counted_not_ranked():
    table = {"converged": np.array([True, True, True, True, False]),
             "terminal_velocity": np.array([4e7, 5e7, 6e7, 7e7, np.nan]),
             "fwhm": np.array([4e7, np.nan, 6e7, 7e7, np.nan])}
    c = compare_table(table, [obs("terminal_velocity", 500, 40, 2), obs("fwhm", 500, 40, 3)])
    assert list(c.compared) == [True, False, True, True, False]
    assert int(c.incomplete.sum()) == 1
    assert np.isnan(c.chi2[1]) and np.isnan(c.chi2[4])
    assert "undefined in 1 converged rows" in c.reason_lines()[0]
    assert c.best() in (0, 2)  # row 1 (the exact v_inf) lacks the fwhm: not ranked


def test_a_quantity_the_table_cannot_predict_is_refused():
    from windsolve.errors import ModelError
    table = {"converged": np.ones(2, bool), "terminal_velocity": np.array([4e7, 5e7])}
    with pytest.raises(ModelError, match="no fwhm column"):
        compare_table(table, [obs("fwhm", 500, 40, 2)])


def test_chi2_map_is_the_profile_over_the_other_axes():
    x = np.repeat([1.0, 2.0], 6)
    y = np.tile(np.repeat([10.0, 20.0], 3), 2)
    z = np.tile([0.0, 1.0, 2.0], 4)  # a third axis, profiled out
    v = 1e7 * (1 + x + 0.1 * y + z)
    table = {"converged": np.ones(12, bool), "terminal_velocity": v}
    c = compare_table(table, [obs("terminal_velocity", 300, 10, 2)])
    m = chi2_map(c, x, y)
    # at each (x, y) the minimum over z: z = 0
    expected = ((1e7 * (1 + m["x"][None, :] + 0.1 * m["y"][:, None]) - 3e7) / 1e6) ** 2
    assert np.allclose(m["chi2"], expected)
    assert math.isclose(m["levels"][1] - m["chi2_min"], chi2_dist.ppf(0.682689492, 2),
                        rel_tol=1e-6)


@pytest.fixture(scope="module")
def model_a_grid():
    """Model A solutions on a luminosity x sound-speed grid: v_inf and the emission FWHM."""
    import windsolve
    from windsolve.lines import LineSettings, line_widths
    base = windsolve.load_model(windsolve.demo_model_path())
    L = np.linspace(3.6e6, 4.4e6, 17)
    a = np.linspace(18.0, 22.0, 9)
    rows = []
    settings = LineSettings(turbulence="20 km/s")
    for Li in L:
        for ai in a:
            r = windsolve.solve(base.replace(luminosity=f"{float(Li)!r} Lsun",
                                             sound_speed=f"{float(ai)!r} km/s"))
            assert r.converged, r.message
            w = line_widths(r, settings)
            rows.append((Li, ai, r.summary["terminal_velocity"].to_value("cm/s"),
                         w["fwhm"].to_value("cm/s")))
    return np.array(rows)


def coverage(grid, truth, sigmas, n_params, draws, seed):
    """Fraction of seeded noise draws whose 1-sigma region holds the true parameters."""
    rng = np.random.default_rng(seed)
    L, a, vinf, fwhm = grid.T
    table = {"converged": np.ones(len(L), bool), "terminal_velocity": vinf, "fwhm": fwhm}
    hits = 0
    level = delta_chi2_level(n_params, 1)
    for _ in range(draws):
        noisy = [vinf[truth] + sigmas[0] * rng.standard_normal(),
                 fwhm[truth] + sigmas[1] * rng.standard_normal()]
        c = compare_table(table, [Observation("S", q, "-", v, s, k) for k, (q, v, s) in
                                  enumerate(zip(("terminal_velocity", "fwhm"), noisy, sigmas,
                                                strict=True))])
        if n_params == 2:
            hits += c.chi2[truth] - np.nanmin(c.chi2) <= level
        else:
            iv = [i for i in confidence_intervals(c, {"L": L}, n_params=1, sigmas=(1,))][0]
            hits += iv.low <= L[truth] <= iv.high
    return hits / draws


def test_coverage_of_the_one_sigma_regions(model_a_grid):
    # The truth in the middle of the grid; noise of a few grid steps so the
    # regions are resolved and well inside the grid.
    grid = model_a_grid
    truth = 8 * 9 + 4  # L = 4.0e6 Lsun, a = 20 km/s
    vinf, fwhm = grid[:, 2], grid[:, 3]
    dv = np.ptp(vinf) / 16
    dw = np.ptp(fwhm) / 16
    sigmas = (2 * dv, 2 * dw)
    draws = 400
    binomial = 3 * math.sqrt(0.683 * 0.317 / draws)  # 3 sigma of the count
    two = coverage(grid, truth, sigmas, 2, draws, seed=12)
    assert abs(two - 0.683) < binomial + 0.03, two
    # one parameter of interest (L), the other profiled out
    one = coverage(grid, truth, sigmas, 1, draws, seed=13)
    assert abs(one - 0.683) < binomial + 0.03, one
    # the wrong level (2 parameters' for one) over-covers: the test can fail
    assert delta_chi2_level(2, 1) > delta_chi2_level(1, 1)
