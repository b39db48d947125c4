"""Mass parametrisations, frames and spin conversions (gwdeficit.convert)."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from gwdeficit import convert
from gwdeficit.schema import OptionError

masses = st.floats(min_value=0.1, max_value=500.0)


def test_gw150914_chirp_mass_and_symmetric_mass_ratio():
    # 36 + 29 Msun: chirp mass about 28 Msun (Abbott et al. 2016, PRL 116, 061102; from memory).
    assert convert.chirp_mass(36.0, 29.0) == pytest.approx(28.0, abs=0.5)
    # eta = m1 m2 / M^2 = 1044 / 4225 (definition, Cutler & Flanagan 1994, PRD 49, 2658).
    assert convert.symmetric_mass_ratio(36.0, 29.0) == pytest.approx(1044 / 4225, rel=1e-15)


def test_equal_masses_limits():
    # For m1 = m2 = m: eta = 1/4 and Mc = m 2^(-1/5) (follows from the definitions).
    assert convert.symmetric_mass_ratio(10.0, 10.0) == 0.25
    assert convert.chirp_mass(10.0, 10.0) == pytest.approx(10.0 * 2**-0.2, rel=1e-15)
    m1, m2 = convert.masses_from_total_eta(20.0, 0.25)
    assert (m1, m2) == (10.0, 10.0)


@settings(max_examples=100, deadline=None)
@given(masses, masses)
def test_round_trips_between_parametrisations(a, b):
    # Every inversion reproduces the component masses it was made from (m1 >= m2).
    m1, m2 = max(a, b), min(a, b)
    mc, mt = convert.chirp_mass(m1, m2), m1 + m2
    q, eta = m2 / m1, convert.symmetric_mass_ratio(m1, m2)
    for got in (
        convert.masses_from_chirp_q(mc, q),
        convert.masses_from_total_q(mt, q),
        convert.masses_from_chirp_eta(mc, eta),
        convert.masses_from_total_eta(mt, eta),
        convert.masses_from_chirp_total(mc, mt),
    ):
        # The eta-based inversions lose precision near q = 1 (sqrt(1 - 4 eta)); 1e-6 in mass.
        np.testing.assert_allclose(got, (m1, m2), rtol=1e-6)
    assert convert.q_from_eta(eta) == pytest.approx(q, rel=1e-5, abs=1e-7)


def test_extreme_mass_ratio_without_cancellation():
    # eta = q / (1 + q)^2 (definition), so eta -> q for small q; m2 must not round to 0.
    q = 1e-14
    eta = q / (1 + q) ** 2
    assert convert.q_from_eta(eta) == pytest.approx(q, rel=1e-10)
    _, m2 = convert.masses_from_chirp_total(convert.chirp_mass(1e8, 1.0), 1e8 + 1.0)
    assert m2 == pytest.approx(1.0, rel=1e-6)


def test_invalid_parametrisations_give_nan_not_clipped_values():
    assert np.isnan(convert.masses_from_chirp_q(10.0, 1.5)).all()
    assert np.isnan(convert.masses_from_chirp_q(10.0, 0.0)).all()
    assert np.isnan(convert.masses_from_total_eta(10.0, 0.26)).all()
    # Mc / M above 4^(-3/5) has no real masses.
    assert np.isnan(convert.masses_from_chirp_total(9.0, 10.0)).all()


def test_functions_broadcast_like_ufuncs():
    m1 = np.array([[30.0], [10.0]])
    m2 = np.array([5.0, 6.0, 7.0])
    assert convert.chirp_mass(m1, m2).shape == (2, 3)
    assert convert.source_frame_mass(m1, np.array([0.1, 0.2, 0.3])).shape == (2, 3)


def test_detector_frame_at_gw150914_redshift():
    # The same event at z = 0.09 has detector-frame masses 1.09 times the source-frame ones
    # (m_det = (1 + z) m; Krolak & Schutz 1987, GRG 19, 1163; z from Abbott et al. 2016,
    # PRL 116, 061102; from memory).
    src = np.array([36.0, 29.0])
    det = convert.detector_frame_mass(src, 0.09)
    np.testing.assert_allclose(det / src, 1.09, rtol=1e-15)
    np.testing.assert_allclose(convert.source_frame_mass(det, 0.09), src, rtol=1e-15)
    # The chirp mass scales the same way (it is homogeneous of degree 1 in the masses).
    assert convert.chirp_mass(*det) == pytest.approx(1.09 * convert.chirp_mass(*src), rel=1e-14)


def test_spin_vector_geometry():
    # A (3, 0, 4)/5 vector: magnitude 1, cos(tilt) = 0.8 (Pythagoras; geometric identity).
    chi1, chi2, t1, t2, phi12 = convert.spin_angles(0.6, 0.0, 0.8, 0.0, 0.5, 0.0)
    assert chi1 == pytest.approx(1.0)
    assert t1 == pytest.approx(np.arccos(0.8))
    assert chi2 == pytest.approx(0.5)
    assert t2 == pytest.approx(np.pi / 2)
    assert phi12 == pytest.approx(np.pi / 2)  # s2 lies 90 degrees ahead of s1 about L
    # Anti-aligned spin: tilt pi; a zero spin: tilt 0 and phi12 degenerate (0).
    chi1, chi2, t1, t2, phi12 = convert.spin_angles(0.0, 0.0, -0.3, 0.0, 0.0, 0.0)
    assert (chi1, t1, chi2, t2, phi12) == (pytest.approx(0.3), pytest.approx(np.pi), 0, 0, 0)


def test_spin_angles_round_trip():
    rng = np.random.default_rng(7)
    n = 1000
    chi1, chi2 = rng.uniform(0.01, 1, n), rng.uniform(0.01, 1, n)
    t1, t2 = rng.uniform(0.01, np.pi - 0.01, n), rng.uniform(0.01, np.pi - 0.01, n)
    phi = rng.uniform(0, 2 * np.pi, n)
    back = convert.spin_angles(*convert.spin_vectors(chi1, chi2, t1, t2, phi))
    for got, want in zip(back[:4], (chi1, chi2, t1, t2), strict=True):
        np.testing.assert_allclose(got, want, rtol=0, atol=1e-12)
    d = np.abs(np.mod(back[4] - phi + np.pi, 2 * np.pi) - np.pi)
    assert d.max() < 1e-10


def test_relabelling_bodies_reverses_phi12():
    # Swapping the two bodies turns phi12 = phi2 - phi1 into -phi12 (mod 2 pi).
    phi = np.array([0.3, 2.0, 5.5])
    s = convert.spin_vectors(0.5, 0.7, 1.0, 2.0, phi)
    swapped = convert.spin_angles(*s[3:], *s[:3])
    np.testing.assert_allclose(swapped[4], convert.wrap_angle(-phi), atol=1e-12)


def test_aligned_and_effective_spin():
    chi, tilt = convert.aligned_spin(np.array([0.4, -0.2, 0.0]))
    np.testing.assert_array_equal(chi, [0.4, 0.2, 0.0])
    np.testing.assert_array_equal(tilt, [0.0, np.pi, 0.0])
    # Equal aligned spins chi give chi_eff = chi for any masses (Ajith et al. 2011, PRL 106,
    # 241101, definition; from memory).
    assert convert.effective_spin(30.0, 5.0, 0.3, 0.3, 0.0, 0.0) == pytest.approx(0.3)
    assert convert.effective_spin(30.0, 5.0, 0.3, 0.3, np.pi, np.pi) == pytest.approx(-0.3)
    # In-plane spins do not contribute.
    assert convert.effective_spin(30.0, 5.0, 0.9, 0.9, np.pi / 2, np.pi / 2) == pytest.approx(
        0.0, abs=1e-15
    )


def test_wrap_angle():
    np.testing.assert_allclose(
        convert.wrap_angle([-np.pi / 2, 2 * np.pi, 7.0]), [1.5 * np.pi, 0.0, 7.0 - 2 * np.pi]
    )


def test_cosmology_names():
    assert "Planck18" in convert.available_cosmologies()
    assert convert.get_cosmology("planck15").name == "Planck15"
    with pytest.raises(OptionError, match="Planck18"):
        convert.get_cosmology("NotACosmology")
    rec = convert.cosmology_record("Planck18")
    # Planck 2018 (Planck Collaboration 2020, A&A 641, A6; astropy's realization): H0 = 67.66.
    assert rec["H0_km_s_Mpc"] == pytest.approx(67.66, abs=0.01)
