"""Kerr ISCO functions: consistency with the general circular-orbit formulas, limits, inverse."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

from gwdeficit.fits import isco

SPINS = np.linspace(-0.999, 0.999, 401)


def test_isco_energy_and_momentum_match_circular_orbit_formulas():
    # Bardeen, Press & Teukolsky 1972, ApJ 178, 347: eqs. (2.12)-(2.13) evaluated at the ISCO
    # radius (2.21) equal the closed forms sqrt(1 - 2/(3r)) and 2(1 + 2 sqrt(3r - 2))/(3 sqrt 3)
    r = isco.isco_radius(SPINS)
    np.testing.assert_allclose(
        isco.circular_orbit_energy(r, SPINS), isco.isco_energy(SPINS), rtol=1e-10
    )
    np.testing.assert_allclose(
        isco.circular_orbit_angular_momentum(r, SPINS),
        isco.isco_angular_momentum(SPINS),
        rtol=1e-10,
    )


def test_isco_radius_satisfies_the_marginal_stability_condition():
    # BPT 1972 (from memory): at the ISCO r^2 - 6 r + 8 a sqrt(r) - 3 a^2 = 0 (M = 1)
    r = isco.isco_radius(SPINS)
    np.testing.assert_allclose(
        r * r - 6 * r + 8 * SPINS * np.sqrt(r) - 3 * SPINS**2, 0.0, atol=1e-9
    )


def test_isco_is_monotone_in_signed_spin():
    # BPT 1972: the ISCO shrinks from 9M (retrograde, a = -1) to 1M (prograde, a = 1)
    r = isco.isco_radius(np.linspace(-1, 1, 2001))
    assert np.all(np.diff(r) < 0)
    e = isco.isco_energy(np.linspace(-1, 1, 2001))
    assert np.all(np.diff(e) < 0)


def test_spins_outside_the_kerr_range_give_nan():
    assert np.isnan(isco.isco_radius([1.0001, -1.5])).all()


def test_isco_broadcasts_like_a_ufunc():
    a = np.zeros((3, 4))
    assert isco.isco_radius(a).shape == (3, 4)
    assert isco.isco_energy(0.0).shape == ()


@given(st.floats(-1.0, 1.0))
def test_w_inverse_round_trip(a):
    assert float(isco.isco_spin_from_w(isco.isco_w(a))) == pytest.approx(a, abs=1e-13)


def test_newton_solve_matches_the_closed_form():
    # BPT 1972 closed form (eq. 2.21) against the cube-root-free Newton solve of the same
    # ISCO condition: energies to 3e-11, and the solved w maps back to the spin exactly
    a = np.concatenate([np.linspace(-1, 1, 20001), [1 - 1e-12, -1 + 1e-12, 1e-9]])
    w = isco.isco_w_solve(a)
    np.testing.assert_allclose(w / np.sqrt(w * w + 2), isco.isco_energy(a), atol=3e-11)
    np.testing.assert_allclose(isco.isco_spin_from_w(w), a, atol=1e-10)
    assert isco.isco_w_solve(0.0).shape == ()
    np.testing.assert_allclose(isco.isco_w_solve([1.0, 0.0, -1.0]), [1.0, 4.0, 5.0], atol=1e-12)
