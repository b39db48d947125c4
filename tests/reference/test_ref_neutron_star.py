"""Neutron-star merger physics checked against published results and exact limits.

Each check names its source beside it; "from memory" marks recalled values.
"""

from __future__ import annotations

import numpy as np
import pytest

from gwdeficit.fits import bns, isco, ns_eos, nsbh
from gwdeficit.fits.neutron_star import ns_remnant

# Some published cases lie outside a fit's calibrated range; the warning is expected there.
pytestmark = pytest.mark.filterwarnings("ignore::gwdeficit.fits.registry.FitRangeWarning")

# --------------------------------------------------------------------------------------------
# Post-Newtonian binding energy
# --------------------------------------------------------------------------------------------


@pytest.mark.parametrize("x", [0.004, 0.008, 0.015])
def test_pn_energy_test_mass_limit_matches_schwarzschild(x):
    # Exact circular-orbit energy of a test mass around a Schwarzschild hole, E/mu =
    # (1 - 2x)/sqrt(1 - 3x) - 1 with x = M/r (Bardeen, Press & Teukolsky 1972, ApJ 178, 347,
    # eq. 2.12 at a = 0), evaluated here through the project's Kerr-orbit module. The 3PN
    # truncation must agree up to the 4PN term, whose test-mass coefficient is
    # 3969/256 ~ 15.5 (Taylor expansion of the same exact expression): any wrong coefficient
    # through 3PN would leave a residual of order x^4 or lower.
    m2 = 1e-9
    mu = m2 / (1.0 + m2)
    e_pn = bns.binding_energy_pn(1.0, m2, 0.0, 0.0, x) / mu
    e_exact = isco.circular_orbit_energy(1.0 / x, 0.0) - 1.0
    assert abs(e_pn - e_exact) / x**5 == pytest.approx(3969.0 / 256.0, rel=0.15)


def test_pn_3pn_equal_mass_innermost_circular_orbit():
    # Minimum of the 3PN energy function E(x) for equal masses: M omega_ICO ~ 0.129 (and
    # 0.137 at 2PN) (Blanchet 2002, PRD 65, 124009, table of ICO frequencies; from memory).
    # This checks the nu-dependent coefficients, which the test-mass limit does not.
    x = bns.x_energy_minimum(1.0, 1.0, 0.0, 0.0)
    assert float(x) ** 1.5 == pytest.approx(0.129, abs=0.0015)


def test_pn_leading_tidal_term_equal_mass():
    # Leading tidal term of the binding energy, E = -(mu x/2)[1 - 9 (m_B/m_A) lambda_A/M^5 x^5]
    # per star (Flanagan & Hinderer 2008, PRD 77, 021502; from memory), lambda_A = Lambda_A
    # m_A^5; for two equal stars of deformability L the bracket is 1 - (9/16) L x^5.
    m, lam, x = 1.35, 400.0, 0.05
    e_tid = bns.binding_energy_pn(m, m, lam, lam, x) - bns.binding_energy_pn(m, m, 0, 0, x)
    mu = m / 2.0
    assert e_tid == pytest.approx(mu * x / 2.0 * 9.0 / 16.0 * lam * x**5, rel=1e-12)


# --------------------------------------------------------------------------------------------
# Neutron-star structure relations
# --------------------------------------------------------------------------------------------


def test_c_love_relations_agree_with_each_other():
    # Two independently published quasi-universal C-Love fits, Yagi & Yunes 2017 (Phys. Rep.
    # 681, 1) and Maselli et al. 2013 (PRD 88, 023007), each quoted accurate to ~7 % against
    # realistic EOSs (from memory), must agree within that accuracy over realistic Lambda.
    lam = np.geomspace(10.0, 5000.0, 60)
    yy = ns_eos.compactness_from_lambda(lam, "yagi-yunes-2017")
    ma = ns_eos.compactness_from_lambda(lam, "maselli-2013")
    assert np.all(np.abs(yy / ma - 1.0) < 0.07)
    assert np.all(np.diff(yy) < 0)  # more deformable stars are less compact


def test_c_love_radius_consistent_with_gw170817_constraint():
    # GW170817: Lambda(1.4 Msun) = 190 (+390 -120) and R = 11.9 +- 1.4 km, 90 % intervals
    # (Abbott et al. 2018, PRL 121, 161101; from memory). The C-Love relation applied to the
    # median Lambda must give a radius inside the quoted radius interval, and the ends of the
    # Lambda interval a radius range overlapping it.
    r_med = ns_eos.radius_from_compactness(1.4, ns_eos.compactness_from_lambda(190.0))
    assert 10.5 <= r_med <= 13.3
    r_lo, r_hi = ns_eos.radius_from_compactness(
        1.4, ns_eos.compactness_from_lambda(np.array([70.0, 580.0]))
    )
    assert r_lo < 10.5 < r_hi <= 13.5


def test_baryonic_mass_of_double_pulsar_b():
    # PSR J0737-3039B, gravitational mass 1.249 Msun, has a baryonic mass 1.366 - 1.375 Msun
    # for a range of EOSs (Podsiadlowski et al. 2005, MNRAS 361, 1243; from memory). Both
    # approximations must land there, the radius-dependent one for R = 11 - 13 km.
    m = 1.249
    assert ns_eos.baryonic_mass(m, None, "timmes-woosley-weaver-1996") == pytest.approx(
        1.37, abs=0.01
    )
    for r_km in (11.0, 12.0, 13.0):
        c = ns_eos.compactness_from_radius(m, r_km)
        assert 1.355 <= ns_eos.baryonic_mass(m, c, "lattimer-prakash-2001") <= 1.39


def test_geometric_solar_mass_against_astropy():
    # G Msun / c^2 = 1.4766 km (IAU 2015 nominal solar parameter; handbook value).
    assert ns_eos.GM_SUN_KM == pytest.approx(1.4766, abs=1e-4)


def test_lambda_tilde_and_kappa_equal_mass():
    # Equal masses and deformabilities: Lambda~ = Lambda (Favata 2014, PRL 112, 101101) and
    # kappa_2^T = 3 Lambda / 16 (Bernuzzi, Nagar, Dietrich & Damour 2015, PRL 114, 161103).
    assert ns_eos.lambda_tilde(1.3, 1.3, 500.0, 500.0) == pytest.approx(500.0, rel=1e-12)
    assert ns_eos.kappa2t(1.3, 1.3, 500.0, 500.0) == pytest.approx(3 * 500.0 / 16, rel=1e-12)


# --------------------------------------------------------------------------------------------
# NSBH: tidal disruption (Foucart, Hinderer & Nissanke 2018)
# --------------------------------------------------------------------------------------------


def _fhn(q, chi, c):
    return nsbh.remnant_mass_fraction_fhn2018(q, isco.isco_radius(chi), c)


def test_no_disruption_at_high_mass_ratio_low_spin():
    # Q = 7 with a non-spinning BH leaves no matter outside the hole for realistic NSs
    # (Foucart, Hinderer & Nissanke 2018, PRD 98, 081501; Foucart 2012, PRD 86, 124007;
    # from memory).
    for c in (0.13, 0.15, 0.18):
        assert _fhn(7.0, 0.0, c) == 0.0


def test_disruption_at_low_mass_ratio_high_aligned_spin():
    # Q ~ 2-3 with aligned spin ~0.9 leaves tenths of the NS mass outside the hole
    # (Foucart, Hinderer & Nissanke 2018, PRD 98, 081501; from memory).
    for q in (2.0, 3.0):
        frac = _fhn(q, 0.9, 0.15)
        assert 0.1 < frac < 0.5


def test_o3_nsbh_events_have_no_remnant_matter():
    # GW200105 (m1 ~ 8.9, m2 ~ 1.9 Msun, small BH spin) and GW200115 (m1 ~ 5.7, m2 ~ 1.5 Msun,
    # aligned BH spin component ~ -0.19): both consistent with no tidal disruption and no
    # matter left outside the BH (Abbott et al. 2021, ApJL 915, L5; from memory). Checked for
    # NS radii 11 - 13 km.
    for r_km in (11.0, 12.0, 13.0):
        out = ns_remnant(
            [8.9, 5.7],
            [1.9, 1.5],
            [0.09, 0.19],
            [0.0, 0.0],
            [0.0, np.pi],
            [0.0, 0.0],
            np.nan,
            np.nan,
            "NSBH",
            ns_radius_km=r_km,
        )
        assert not out["disrupted"].any()
        assert np.all(out["ejected_msun"] == 0.0)


def test_bbh_limit_of_nsbh_matches_nr_equal_mass_bbh():
    # An equal-mass "NSBH" whose companion is very compact (C = 0.3) leaves no matter outside
    # the hole, so the binary-black-hole fits apply: non-spinning equal-mass BBH gives
    # M_f = 0.95162 M and chi_f = 0.68646 (Scheel et al. 2009, PRD 79, 024003; from memory).
    from gwdeficit.remnant import remnant_arrays

    m = 1.4
    out = ns_remnant(
        m,
        m,
        0.0,
        0.0,
        0.0,
        0.0,
        np.nan,
        np.nan,
        "NSBH",
        phi12_rad=0.0,
        ns_radius_km=ns_eos.radius_from_compactness(m, 0.3),
        bbh_remnant=lambda *a: remnant_arrays(*a, seed=0),
    )
    assert not out["disrupted"] and out["ejected_msun"] == 0.0
    assert out["mf_msun"] / (2 * m) == pytest.approx(0.95162, abs=1e-3)
    assert out["chif"] == pytest.approx(0.68646, abs=5e-3)
    assert out["mf_msun"] + out["erad_msun"] == pytest.approx(2 * m, rel=1e-12)


@pytest.mark.parametrize("q, chi", [(10.0, 0.0), (20.0, 0.5), (5.0, -0.3)])
def test_bbh_limit_of_nsbh_for_heavy_black_holes_is_the_bbh_result(q, chi):
    # Heavy black holes with low or anti-aligned spin do not disrupt the NS (Foucart, Hinderer
    # & Nissanke 2018; from memory); the NSBH result is then the BBH-fit result of the
    # project's remnant stage, row for row.
    from gwdeficit.remnant import remnant_arrays

    m2 = 1.35
    tilt = 0.0 if chi >= 0 else np.pi
    out = ns_remnant(
        q * m2,
        m2,
        abs(chi),
        0.0,
        tilt,
        0.0,
        np.nan,
        np.nan,
        "NSBH",
        phi12_rad=0.0,
        ns_radius_km=12.0,
        bbh_remnant=lambda *a: remnant_arrays(*a, seed=0),
    )
    ref = remnant_arrays(q * m2, m2, abs(chi), 0.0, tilt, 0.0, 0.0, seed=0)
    assert not out["disrupted"]
    for key in ("mf_msun", "chif", "erad_msun", "vkick_kms"):
        assert out[key] == ref[key]


def test_disruption_needs_high_spin_at_realistic_mass_ratio():
    # At Q = 7 significant remnant matter (> ~0.1 Msun) requires a BH spin of about 0.7 or more
    # for typical NS compactness (Foucart et al. 2013, PRD 87, 084006; from memory).
    mb = ns_eos.baryonic_mass(1.4, 0.144)
    assert _fhn(7.0, 0.5, 0.144) * mb < 0.05
    assert _fhn(7.0, 0.9, 0.144) * mb > 0.1


# --------------------------------------------------------------------------------------------
# BNS: GW170817 and collapse thresholds
# --------------------------------------------------------------------------------------------

# GW170817 low-spin-prior 90 % intervals: m1 1.36 - 1.60, m2 1.17 - 1.36 Msun,
# total mass 2.74 (+0.04 -0.01) Msun (Abbott et al. 2017, PRL 119, 161101; from memory).
GW170817_PAIRS = [(1.37, 1.37), (1.46, 1.28), (1.55, 1.19)]


@pytest.mark.parametrize("m1,m2", GW170817_PAIRS)
@pytest.mark.parametrize("r_km", [11.0, 12.0, 13.0])
def test_gw170817_radiated_energy_above_observed_bound(m1, m2, r_km):
    # GW170817 radiated more than 0.025 Msun c^2 (Abbott et al. 2017, PRL 119, 161101; from
    # memory). Our inspiral-to-contact energy is itself a lower bound on the total, and must
    # stay above the observed bound and well below the total mass.
    out = ns_remnant(m1, m2, 0.0, 0.0, 0.0, 0.0, np.nan, np.nan, "BNS", ns_radius_km=r_km)
    assert m1 + m2 == pytest.approx(2.74, abs=0.02)
    assert 0.025 < out["erad_msun"] < 0.1
    assert out["erad_lower_bound"]


@pytest.mark.parametrize("r_km", [11.0, 12.0, 13.0])
def test_gw170817_dynamical_ejecta_order_of_magnitude(r_km):
    # The Dietrich & Ujevic 2017 fit, applied to GW170817, gives dynamical ejecta between
    # ~1e-3 and ~1e-2 Msun for plausible EOSs (Abbott et al. 2017, ApJL 850, L39; from memory).
    out = ns_remnant(1.46, 1.28, 0.0, 0.0, 0.0, 0.0, np.nan, np.nan, "BNS", ns_radius_km=r_km)
    assert 1e-3 <= out["ejecta_dyn_msun"] <= 1.5e-2


def test_bauswein_threshold_ratio_range():
    # k = M_thres / M_TOV lies between ~1.3 and ~1.7 for the EOSs of Bauswein, Baumgarte &
    # Janka 2013 (PRL 111, 131101; from memory).
    mtov = np.array([2.0, 2.2, 2.4])
    r16 = np.array([11.0, 12.5, 14.0])
    k = bns.prompt_collapse_threshold_bauswein2013(mtov, r16) / mtov
    assert np.all((k > 1.3) & (k < 1.7))


def test_gw170817_remnant_not_prompt_collapse_and_hypermassive():
    # GW170817 did not collapse promptly, and its remnant is inferred to have been
    # hypermassive, giving M_TOV <~ 2.17 Msun (Margalit & Metzger 2017, ApJL 850, L19; from
    # memory). With M_TOV = 2.17 Msun and R = R_1.6 = 12 km the classification must agree.
    out = ns_remnant(
        1.46,
        1.28,
        0.0,
        0.0,
        0.0,
        0.0,
        np.nan,
        np.nan,
        "BNS",
        ns_radius_km=12.0,
        mtov_msun=2.17,
    )
    assert out["mthresh_msun"] > 2.74
    assert out["remnant_kind"] == "HMNS"


def test_gw190425_collapses_promptly_for_soft_eos():
    # GW190425, total mass ~3.4 Msun, most likely collapsed promptly to a black hole
    # (Abbott et al. 2020, ApJL 892, L3; from memory): above the Bauswein threshold for
    # M_TOV = 2.2 Msun, R_1.6 = 12 km.
    out = ns_remnant(
        1.85,
        1.55,
        0.0,
        0.0,
        0.0,
        0.0,
        np.nan,
        np.nan,
        "BNS",
        ns_radius_km=12.0,
        mtov_msun=2.2,
    )
    assert out["remnant_kind"] == "BH"
    # a prompt-collapse remnant forms only a small disk, <~ 1e-2 Msun (Radice et al. 2018,
    # ApJ 869, 130; from memory)
    assert out["disk_msun"] < 1e-2
