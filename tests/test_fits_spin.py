"""Final-spin formulas: internal consistency, the implicit solve, symmetry and bounds."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.optimize import brentq

from gwdeficit.fits import isco, spin

unit = st.floats(0.0, 1.0)
angle = st.floats(0.0, np.pi)
ratio = st.floats(0.01, 1.0)


def _r08_form(q, a, c):
    # Rezzolla et al. 2008, PRD 78, 044002 (from memory): aligned-spin form, a = (a1 + a2 q^2)
    # / (1 + q^2)
    nu = q / (1 + q) ** 2
    return (
        a + c["s4"] * a**2 * nu + c["s5"] * a * nu**2 + c["t0"] * a * nu
        + 2 * np.sqrt(3) * nu + c["t2"] * nu**2 + c["t3"] * nu**3
    )  # fmt: skip


def test_br09_aligned_limit_is_the_rezzolla_2008_form():
    # Barausse & Rezzolla 2009, ApJL 704, L40 (from memory): for aligned spins their formula
    # reduces to the R08 polynomial with the BR09 coefficients
    q = np.linspace(0.05, 1, 40)[:, None]
    a1, a2 = np.linspace(-0.9, 0.9, 7)[None, :], 0.4
    t1 = np.where(a1 < 0, np.pi, 0.0)
    got = spin.barausse_rezzolla_2009(q, np.abs(a1), a2, t1, 0.0, 0.0)
    expect = _r08_form(q, (a1 + a2 * q**2) / (1 + q**2), spin.BR09_COEFFICIENTS)
    np.testing.assert_allclose(got, np.abs(expect), rtol=1e-12, atol=1e-12)


def test_rezzolla_2008_aligned_is_its_published_form():
    q = np.linspace(0.05, 1, 40)
    got = spin.rezzolla_2008(q, 0.5, 0.2, 0.0, np.pi)
    expect = _r08_form(q, (0.5 - 0.2 * q**2) / (1 + q**2), spin.R08_COEFFICIENTS)
    np.testing.assert_allclose(got, expect, rtol=1e-12)


def test_inplane_spin_adds_in_quadrature_in_r08_and_br09_vector_form():
    # BR09 vector construction: |a1 + a2 q^2 + l q Lhat| / (1 + q)^2; for a single in-plane
    # primary spin the in-plane part is a1 / (1 + q)^2
    q = 0.5
    par = spin.rezzolla_2008(q, 0.0, 0.0)
    got = spin.rezzolla_2008(q, 0.6, 0.0, np.pi / 2)
    assert got == pytest.approx(np.hypot(par, 0.6 / (1 + q) ** 2), rel=1e-12)


def test_bkl_solution_matches_scipy_root_finding():
    # scipy.optimize.brentq as the reference solver of chi = nu L_isco(chi) + s_par (BKL 2008)
    rng = np.random.default_rng(3)
    q = np.concatenate([rng.uniform(0, 1, 300) ** 3, [1e-8, 1e-4, 1e-3, 1.0]])
    a1 = np.concatenate([rng.uniform(-1, 1, 300), [1.0, 1.0, 0.999, -1.0]])
    a2 = rng.uniform(-1, 1, q.size)
    got = spin.buonanno_kidder_lehner_2008(
        q, np.abs(a1), np.abs(a2), np.where(a1 < 0, np.pi, 0), np.where(a2 < 0, np.pi, 0)
    )
    nu = q / (1 + q) ** 2
    s = (a1 + a2 * q**2) / (1 + q) ** 2
    for i in range(q.size):
        root = brentq(_bkl_residual, -1.0, 1.0, args=(nu[i], s[i]), xtol=1e-14)
        assert got[i] == pytest.approx(min(abs(root), 1.0), abs=1e-9)


def _bkl_residual(x, nu, s):
    return x - nu * isco.isco_angular_momentum(x) - s


@settings(max_examples=100, deadline=None)
@given(ratio, unit, unit, angle, angle, st.floats(0.0, 2 * np.pi))
def test_spin_fits_are_symmetric_under_exchange(q, c1, c2, t1, t2, p12):
    # labelling symmetry (exact; common practice, no source)
    for f in (spin.barausse_rezzolla_2009, spin.rezzolla_2008, spin.buonanno_kidder_lehner_2008):
        a = f(q, c1, c2, t1, t2, p12)
        b = f(1 / q, c2, c1, t2, t1, -p12)
        assert a == pytest.approx(b, rel=1e-9, abs=1e-12)
        assert 0.0 <= a <= 1.0


def test_spin_functions_broadcast():
    out = spin.barausse_rezzolla_2009(np.ones((2, 1)), np.zeros((1, 3)), 0.0)
    assert out.shape == (2, 3)
    assert spin.buonanno_kidder_lehner_2008(np.full(5, 0.5), 0.3, 0.3).shape == (5,)
