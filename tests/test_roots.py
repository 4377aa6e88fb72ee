"""The compiled root-finders and binary searches of windsolve.core.roots.

References: numpy.searchsorted for the searches; the cube root of 2 (math)
for the root-finders.  Their use in the solvers is pinned by
tests/test_frozen_numbers.py.
"""

import math

import numpy as np
import pytest
from numba import njit

from windsolve.core import roots


@pytest.mark.parametrize("side", ["left", "right"])
def test_searches_agree_with_numpy_searchsorted(side):
    search = roots.search_left if side == "left" else roots.search_right
    rng = np.random.default_rng(3)
    a = np.sort(rng.integers(0, 20, 50)).astype(float)  # with ties
    for lo, hi in ((0, 50), (0, 0), (7, 7), (3, 40), (49, 50)):
        for x in np.arange(-1.0, 21.0, 0.5):
            expected = lo + int(np.searchsorted(a[lo:hi], x, side=side))
            assert search(a, x, lo, hi) == expected, (x, lo, hi)
        # unlike numpy (which sorts NaN last), NaN compares false: lo, as the old kernels did
        assert search(a, math.nan, lo, hi) == lo


@njit(cache=True)
def _cubic(x, P, O):
    return x * x * x - P[0]


@njit(cache=True)
def _cubic_with_payload(x, args):
    c, fail_above = args
    if x > fail_above:
        return 7, math.nan, math.nan, math.nan
    return 0, x * x * x - c, 2.0 * x, 3.0 * x


def test_illinois_finds_the_cube_root_of_two():
    refine = roots.make_illinois(_cubic)
    P = np.array([2.0])
    x = refine(0.0, 3.0, -2.0, 25.0, P, P, 1e-14)
    assert abs(x - 2.0 ** (1.0 / 3.0)) < 1e-13


def test_brent_carries_the_payload_of_its_answer():
    brent = roots.make_brent(_cubic_with_payload)
    outcome, code, x, p, q, evals = brent(0.0, -2.0, 0.0, 0.0, 3.0, 25.0, 6.0, 9.0,
                                          (2.0, 10.0), 1e-15, 1e-15, 1e-3, 0, 100)
    root = 2.0 ** (1.0 / 3.0)
    assert outcome == roots.ROOT_FOUND and code == 0
    assert abs(x - root) < 1e-13 and p == 2.0 * x and q == 3.0 * x
    assert 0 < evals < 30
    # a failed trial ends the search with its code; the evaluation limit is kept
    outcome, code = brent(0.0, -2.0, 0.0, 0.0, 3.0, 25.0, 6.0, 9.0, (2.0, -1.0),
                          1e-15, 1e-15, 1e-3, 0, 100)[:2]
    assert (outcome, code) == (roots.ROOT_F_FAILED, 7)
    assert brent(0.0, -2.0, 0.0, 0.0, 3.0, 25.0, 6.0, 9.0, (2.0, 10.0),
                 1e-15, 1e-15, 1e-3, 0, 2)[0] == roots.ROOT_MAX_EVALS
