"""Radiated-energy formulas: published form, test-particle structure, symmetry, sign of spin."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from gwdeficit.fits import isco, mass, spin


def test_bmr12_is_its_published_form():
    # Barausse, Morozova & Rezzolla 2012, ApJ 758, 63 (from memory):
    # E/M = (1 - E_isco(a)) nu + 4 nu^2 (4 p0 + 16 p1 a (a + 1) + E_isco(a) - 1),
    # a = (a1 cos b + a2 q^2 cos g) / (1 + q)^2
    q = np.linspace(0.05, 1, 30)[:, None]
    a1, a2 = 0.7, np.linspace(-0.9, 0.9, 5)[None, :]
    nu = q / (1 + q) ** 2
    a = (a1 + a2 * q**2) / (1 + q) ** 2
    e = isco.isco_energy(a)
    p0, p1 = mass.BMR12_COEFFICIENTS["p0"], mass.BMR12_COEFFICIENTS["p1"]
    expect = (1 - e) * nu + 4 * nu**2 * (4 * p0 + 16 * p1 * a * (a + 1) + e - 1)
    got = mass.barausse_morozova_rezzolla_2012(q, a1, np.abs(a2), 0.0, np.where(a2 < 0, np.pi, 0))
    # the kernel evaluates the same BPT closed form (its own code): agreement to rounding
    np.testing.assert_allclose(got, expect, rtol=1e-12)


def test_bmr12_equal_mass_nonspinning_is_p0():
    # BMR12 (from memory): at nu = 1/4, a = 0 the formula reduces to p0
    assert float(mass.barausse_morozova_rezzolla_2012(1.0, 0.0, 0.0)) == pytest.approx(0.04827)


def test_isco_binding_uses_the_bkl_final_spin():
    # nu (1 - E_isco(chi_f)) with chi_f of Buonanno, Kidder & Lehner 2008 (aligned spins)
    q = np.array([0.2, 0.5, 1.0])
    chif = spin.buonanno_kidder_lehner_2008(q, 0.3, 0.3)
    nu = q / (1 + q) ** 2
    np.testing.assert_allclose(
        mass.isco_binding_energy(q, 0.3, 0.3), nu * (1 - isco.isco_energy(chif)), rtol=1e-6
    )


def test_in_plane_spins_do_not_enter_bmr12():
    a = mass.barausse_morozova_rezzolla_2012(0.5, 0.8, 0.8, np.pi / 2, np.pi / 2)
    assert a == pytest.approx(float(mass.barausse_morozova_rezzolla_2012(0.5, 0.0, 0.0)))


@settings(max_examples=100, deadline=None)
@given(
    st.floats(0.01, 1.0), st.floats(0, 1), st.floats(0, 1), st.floats(0, np.pi), st.floats(0, np.pi)
)
def test_mass_fits_symmetric_and_physical(q, c1, c2, t1, t2):
    # labelling symmetry (exact); 0 < E_rad/M < 1/4 (nu <= 1/4; common practice, no source)
    for f in (mass.barausse_morozova_rezzolla_2012, mass.isco_binding_energy):
        a = f(q, c1, c2, t1, t2)
        assert a == pytest.approx(f(1 / q, c2, c1, t2, t1), rel=1e-9, abs=1e-15)
        assert 0.0 < a < 0.25
