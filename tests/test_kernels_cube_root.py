"""The compiled cube root of the remnant kernels (fits._kernels.cube_root) against numpy.

Reference: numpy's cbrt in extended precision (x87 long double, 64-bit mantissa, on x86-64),
numpy used as the reference library; where long double is no wider than float64 the reference
is numpy's float64 cbrt and the tolerance is widened by its own error (common practice, no
source: glibc's cbrt is documented within a few units in the last place).
"""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st
from hypothesis.extra.numpy import arrays

from gwdeficit.fits import _kernels as kn

WIDE = np.finfo(np.longdouble).nmant > np.finfo(np.float64).nmant
ULP_TOLERANCE = 1.0 if WIDE else 4.0


def _ulps_from_reference(x: np.ndarray, got: np.ndarray) -> np.ndarray:
    """|got - cbrt(x)| in units of the last place of the float64 cube root."""
    ref = np.cbrt(x.astype(np.longdouble))
    ref64 = ref.astype(np.float64)
    scale = np.spacing(np.abs(ref64)).astype(np.longdouble)
    return (np.abs(got.astype(np.longdouble) - ref) / scale).astype(np.float64)


def test_cube_root_is_within_one_unit_in_the_last_place_over_the_kernels_range():
    rng = np.random.default_rng(3)
    # the kernels take cube roots of 1 +- s_par and max(1 - A, 0): values in [0, ~2], down to
    # 2^-53 near extremal spins
    x = np.concatenate([rng.uniform(0.0, 2.0, 200_000), 2.0 ** -np.arange(1, 60.0)])
    got = kn.cube_root(x)
    assert _ulps_from_reference(x, got).max() <= ULP_TOLERANCE


def test_cube_root_over_many_decades_signs_and_specials():
    rng = np.random.default_rng(4)
    mags = 10.0 ** rng.uniform(-300, 300, 100_000)  # includes |x| < 1e-37 and > 1e37 (np.cbrt)
    x = np.concatenate([mags * rng.choice([-1.0, 1.0], mags.size), [5e-324, -5e-324, 1.7e308]])
    got = kn.cube_root(x)
    assert _ulps_from_reference(x, got).max() <= ULP_TOLERANCE
    assert np.array_equal(np.sign(got), np.sign(x))
    special = np.array([0.0, -0.0, np.inf, -np.inf, np.nan])
    out = kn.cube_root(special)
    np.testing.assert_array_equal(out[:4], [0.0, -0.0, np.inf, -np.inf])
    assert np.signbit(out[1]) and not np.signbit(out[0])
    assert np.isnan(out[4])


def test_cube_root_of_exact_cubes_is_exact():
    k = np.arange(-2000.0, 2001.0)
    np.testing.assert_array_equal(kn.cube_root(k**3), k)
    np.testing.assert_array_equal(
        kn.cube_root(2.0 ** (3 * np.arange(-300, 300))), 2.0 ** np.arange(-300, 300.0)
    )


def test_cube_root_in_place_and_into_another_array_agree():
    x = np.random.default_rng(5).uniform(0, 2, 1000)
    expected = kn.cube_root(x)
    out = np.empty_like(x)
    assert kn.cube_root(x, out=out) is out
    np.testing.assert_array_equal(out, expected)
    y = x.copy()
    kn.cube_root(y, out=y)
    np.testing.assert_array_equal(y, expected)
    np.testing.assert_array_equal(x, np.random.default_rng(5).uniform(0, 2, 1000))  # input kept


def test_cube_root_first_guess_is_within_the_stated_error():
    # the constant's claim (fits._kernels): the bit-level guess is within 3.3% of the root
    x = np.concatenate([np.linspace(1.0, 8.0, 100_001), 10.0 ** np.linspace(-30, 30, 10_001)])
    guess = np.empty(x.size, dtype=np.float32)
    assert kn._cube_root_guess(x, guess) == 0
    bits = guess.view(np.int32)
    bits //= 3
    bits += kn._CBRT_GUESS_BIAS
    assert np.max(np.abs(guess / np.cbrt(x) - 1.0)) < 0.033


@given(arrays(np.float64, st.integers(0, 64), elements=st.floats(allow_nan=False)))
def test_cube_root_property_any_finite_or_infinite_input(x):
    got = kn.cube_root(x)
    assert got.shape == x.shape
    finite = np.isfinite(x)
    assert np.all(_ulps_from_reference(x[finite], got[finite]) <= ULP_TOLERANCE)
    np.testing.assert_array_equal(got[~finite], x[~finite])


@pytest.mark.parametrize("n", [1, 3, 7, 17, 1000])
def test_cube_root_short_arrays_and_loop_remainders(n):
    # vector body and scalar remainder of the compiled loop give the same value
    x = np.random.default_rng(n).uniform(0, 2, n)
    whole = kn.cube_root(x)
    one_by_one = np.array([kn.cube_root(x[i : i + 1])[0] for i in range(n)])
    np.testing.assert_array_equal(whole, one_by_one)
