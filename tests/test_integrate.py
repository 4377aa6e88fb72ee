"""The compiled DOP853 integrator against exact solutions and scipy's tableau.

Tier (a): exact solutions, errors measured against ``atol + rtol |y|``
(the convention of scipy's own ``_ivp`` tests).
"""

import math

import numpy as np
import pytest
from numba import njit
from scipy.integrate._ivp import dop853_coefficients as scipy_dop853

from windsolve.core import integrate as T  # the coefficients the compiled driver reads
from windsolve.core.integrate import (
    REACHED_END,
    STEP_TOO_SMALL,
    make_integrator,
    make_scalar_integrator,
)


def test_tableau_matches_scipy():
    n = scipy_dop853.N_STAGES
    assert T.N_STAGES == n
    np.testing.assert_array_equal(T.A, scipy_dop853.A[:n, :n])
    np.testing.assert_array_equal(T.B, scipy_dop853.A[n, :n])
    np.testing.assert_array_equal(T.C, scipy_dop853.C[:n])
    np.testing.assert_array_equal(T.E3, scipy_dop853.E3)
    np.testing.assert_array_equal(T.E5, scipy_dop853.E5)
    # dense output: the three extra stages and the interpolation coefficients
    np.testing.assert_array_equal(T.A_EXTRA, scipy_dop853.A[n + 1:])
    np.testing.assert_array_equal(T.C_EXTRA, scipy_dop853.C[n + 1:])
    np.testing.assert_array_equal(T.D, scipy_dop853.D)
    assert T.INTERPOLATOR_POWER == scipy_dop853.INTERPOLATOR_POWER


@njit
def _oscillator(x, y, P, O, dydx):
    dydx[0] = y[1]
    dydx[1] = -P[0] * y[0]


@njit
def _never(x, y, P, O):
    return 0


@njit
def _stop_when_negative(x, y, P, O):
    return 7 if y[0] < 0.0 else 0


@njit
def _blow_up(x, y, P, O, dydx):
    dydx[0] = y[0] * y[0]  # y = 1/(1 - x): singular at x = 1


oscillate = make_integrator(_oscillator, _never)
oscillate_until_negative = make_integrator(_oscillator, _stop_when_negative)
blow_up = make_integrator(_blow_up, _never)


@pytest.mark.parametrize("rtol", [1e-6, 1e-9, 1e-12])
def test_harmonic_oscillator_exact(rtol):
    # y'' = -w^2 y, y(0) = 1, y'(0) = 0  ->  y = cos(w x)
    w = 3.0
    P = np.array([w * w])
    xs = np.empty(5000)
    ys = np.empty((5000, 2))
    status, x, y, n, nfev = oscillate(0.0, np.array([1.0, 0.0]), 10.0, P, P, rtol, rtol,
                                      1e-3, np.inf, xs, ys)
    assert status == REACHED_END and x == 10.0
    err = np.abs(ys[:n, 0] - np.cos(w * xs[:n])) / (rtol + rtol * np.abs(np.cos(w * xs[:n])))
    # global error of a few hundred local tolerances over ~5 periods
    assert err.max() < 300


def test_backward_integration_and_storage_order():
    P = np.array([1.0])
    xs = np.empty(1000)
    ys = np.empty((1000, 2))
    status, x, y, n, _ = oscillate(0.0, np.array([1.0, 0.0]), -2.0, P, P, 1e-10, 1e-10,
                                   1e-3, 0.1, xs, ys)
    assert status == REACHED_END and n > 20
    assert np.all(np.diff(xs[:n]) < 0) and np.all(np.diff(xs[:n]) >= -0.1 - 1e-15)
    assert abs(y[0] - math.cos(2.0)) < 1e-8


def test_monitor_stops_the_integration():
    P = np.array([1.0])
    status, x, y, n, _ = oscillate_until_negative(0.0, np.array([1.0, 0.0]), 10.0, P, P,
                                                  1e-10, 1e-10, 1e-3, 0.01, np.empty(0),
                                                  np.empty((0, 2)))
    assert status == 7
    # first accepted step past the zero of cos at pi/2 (max step 0.01)
    assert math.pi / 2 < x <= math.pi / 2 + 0.0101


def test_singularity_gives_step_too_small():
    status, x, y, n, _ = blow_up(0.0, np.array([1.0]), 2.0, np.zeros(1), np.zeros(1),
                                 1e-8, 1e-8, 1e-3, np.inf, np.empty(0), np.empty((0, 1)))
    assert status == STEP_TOO_SMALL
    assert abs(x - 1.0) < 1e-6  # stops at the singular point x = 1


@pytest.mark.parametrize("direction", [1.0, -1.0])
def test_dense_output_between_steps(direction):
    # Interpolated points of the 7th-order dense output (Hairer, Norsett &
    # Wanner 1993, II.6/II.10) against y = cos(w x): as accurate as the steps.
    w = 3.0
    P = np.array([w * w])
    rtol = 1e-10
    xs = np.empty(5000)
    ys = np.empty((5000, 2))
    status, x, y, n, _ = oscillate(0.0, np.array([1.0, 0.0]), direction * 10.0, P, P, rtol,
                                   rtol, 1e-3, np.inf, xs, ys, 0.01)
    assert status == REACHED_END and x == direction * 10.0
    xs, ys = xs[:n], ys[:n]
    assert np.all(direction * np.diff(xs) > 0)  # ordered, steps and grid merged
    on_grid = np.isclose(xs / 0.01, np.round(xs / 0.01), rtol=0, atol=1e-9)
    assert on_grid.sum() >= 1000  # every 0.01 of the 10 covered
    steps = np.empty(5000)
    _, _, _, n_steps, _ = oscillate(0.0, np.array([1.0, 0.0]), direction * 10.0, P, P,
                                    rtol, rtol, 1e-3, np.inf, steps, np.empty((5000, 2)))
    assert n_steps < 200 and n > 1000  # the grid did not shorten the steps
    err = np.abs(ys[:, 0] - np.cos(w * xs)) / (rtol + rtol * np.abs(np.cos(w * xs)))
    assert err.max() < 300


@njit
def _decay(x, y, P, O, dydx):
    dydx[0] = -P[0] * y[0] * (1.0 + math.sin(x))


@njit
def _decay_scalar(x, y, P, O):
    return -P[0] * y * (1.0 + math.sin(x))


@njit
def _never_scalar(x, y, P, O):
    return 0


decay = make_integrator(_decay, _never)
decay_scalar = make_scalar_integrator(_decay_scalar, _never_scalar)


@pytest.mark.parametrize("dx_out", [0.0, 0.05])
def test_scalar_integrator_matches_general_one(dx_out):
    # The one-equation specialisation is the same method: the same steps and
    # values to rounding, stored points included; and both match the exact
    # y = exp(-k (x + 1 - cos x)).
    P = np.array([0.7])
    n = 2000
    xs, ys = np.empty(n), np.empty((n, 1))
    xs1, ys1 = np.empty(n), np.empty(n)
    a = decay(0.0, np.array([1.0]), 6.0, P, P, 1e-9, 1e-12, 1e-4, np.inf, xs, ys, dx_out)
    b = decay_scalar(0.0, 1.0, 6.0, P, P, 1e-9, 1e-12, 1e-4, np.inf, xs1, ys1, dx_out)
    assert a[0] == b[0] == REACHED_END and a[3] == b[3] and a[4] == b[4]
    np.testing.assert_array_equal(xs[:a[3]], xs1[:b[3]])
    np.testing.assert_allclose(ys[:a[3], 0], ys1[:b[3]], rtol=1e-14, atol=0)
    exact = np.exp(-0.7 * (xs1[:b[3]] + 1.0 - np.cos(xs1[:b[3]])))
    assert np.max(np.abs(ys1[:b[3]] / exact - 1.0)) < 1e-7
