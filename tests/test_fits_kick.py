"""Recoil formulas: published structure, phase dependence, symmetry."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from gwdeficit.fits import kick


def test_nonspinning_term_is_gonzalez_2007():
    # Gonzalez et al. 2007, PRL 98, 091101 (from memory): v = A nu^2 sqrt(1 - 4 nu)(1 + B nu)
    q = np.linspace(0.05, 1, 50)
    nu = q / (1 + q) ** 2
    expect = 1.2e4 * nu**2 * np.sqrt(1 - 4 * nu) * (1 - 0.93 * nu)
    for f in (kick.lousto_2012, kick.campanelli_2007):
        np.testing.assert_allclose(f(q, 0.0, 0.0, 0.0, 0.0, 0.0, 1.0), expect, rtol=1e-12)


def test_superkick_follows_cos_phase():
    phase = np.linspace(0, 2 * np.pi, 9)
    v = kick.campanelli_2007(1.0, 0.8, 0.8, np.pi / 2, np.pi / 2, np.pi, phase)
    # equal masses, in-plane spins only: v = K nu^2/(1+q) |a1p - a2p| |cos phase|
    expect = 6.0e4 / 16 / 2 * 1.6 * np.abs(np.cos(phase))
    np.testing.assert_allclose(v, expect, rtol=1e-12, atol=1e-9)


def test_aligned_spin_term_uses_xi():
    # equal masses, spins aligned and antialigned: only v_perp = H nu^2 (a1z - a2z)/2
    v = kick.lousto_2012(1.0, 0.5, 0.5, 0.0, np.pi, 0.0, 0.0)
    assert float(v) == pytest.approx(6.9e3 / 16 / 2 * 1.0, rel=1e-12)


def test_spin_difference_perp():
    assert float(
        kick.spin_difference_perp(1.0, 1.0, 1.0, np.pi / 2, np.pi / 2, np.pi)
    ) == pytest.approx(2.0)
    assert float(
        kick.spin_difference_perp(1.0, 1.0, 1.0, np.pi / 2, np.pi / 2, 0.0)
    ) == pytest.approx(0.0, abs=1e-7)


@settings(max_examples=100, deadline=None)
@given(
    st.floats(0.01, 1.0), st.floats(0, 1), st.floats(0, 1), st.floats(0, np.pi),
    st.floats(0, np.pi), st.floats(0, 2 * np.pi), st.floats(0, 2 * np.pi),
)  # fmt: skip
def test_kick_fits_symmetric_and_bounded(q, c1, c2, t1, t2, p12, ph):
    # labelling symmetry (exact); recoils stay below ~5000 km/s (Lousto & Zlochower 2011,
    # PRL 107, 231102, from memory: the largest hang-up kicks are ~5000 km/s)
    for f in (kick.lousto_2012, kick.campanelli_2007):
        a = f(q, c1, c2, t1, t2, p12, ph)
        assert a == pytest.approx(f(1 / q, c2, c1, t2, t1, -p12, ph), rel=1e-9, abs=1e-9)
        assert 0.0 <= a < 5500.0
