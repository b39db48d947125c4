"""Binary-neutron-star (BNS) mergers: energy radiated in the inspiral, matter left outside the
remnant, the prompt-collapse threshold and the kind of remnant.

All functions take plain float arrays (masses in Msun, radii in km, dimensionless otherwise)
and broadcast like ufuncs; geometric units G = c = 1 inside, masses in Msun.

What is and is not here
-----------------------
- Radiated energy: the energy radiated during the inspiral up to the contact of the two stars,
  from the 3PN point-mass binding energy plus the leading-order tidal term. This is a LOWER
  BOUND on the energy radiated in gravitational waves: it leaves out the merger and any
  post-merger emission of a massive neutron-star remnant. An NR-calibrated fit of the energy
  radiated to merger in terms of kappa_2^T (Zappa et al. 2018, PRL 120, 111101) exists but its
  coefficients are not reproduced here because they could not be verified.
- Matter outside the remnant: dynamical ejecta (Dietrich & Ujevic 2017) plus disk mass
  (Radice et al. 2018), both baryonic (rest) masses.
- Prompt collapse: Bauswein, Baumgarte & Janka 2013; supramassive limit: Breu & Rezzolla 2016.
  Both need the caller's equation-of-state parameters (M_TOV, R_1.6).
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

from gwdeficit.fits.ns_eos import GM_SUN_KM, kappa2t, lambda_tilde

FloatArray = NDArray[np.float64]

# --------------------------------------------------------------------------------------------
# Inspiral energy from the post-Newtonian binding energy
# --------------------------------------------------------------------------------------------


def _pn_coefficients(nu: FloatArray) -> tuple[FloatArray, FloatArray, FloatArray]:
    """Point-mass 1PN, 2PN and 3PN coefficients of the circular-orbit binding energy.

    Blanchet 2014, Living Rev. Relativ. 17, 2, eq. 233 (from memory):
    e1 = -3/4 - nu/12; e2 = -27/8 + 19/8 nu - nu^2/24;
    e3 = -675/64 + (34445/576 - 205 pi^2/96) nu - 155/96 nu^2 - 35/5184 nu^3.
    """
    e1 = -0.75 - nu / 12.0
    e2 = -27.0 / 8.0 + 19.0 / 8.0 * nu - nu * nu / 24.0
    e3 = (
        -675.0 / 64.0
        + (34445.0 / 576.0 - 205.0 * np.pi**2 / 96.0) * nu
        - 155.0 / 96.0 * nu**2
        - 35.0 / 5184.0 * nu**3
    )
    return e1, e2, e3


def binding_energy_pn(
    m1: ArrayLike, m2: ArrayLike, lam1: ArrayLike, lam2: ArrayLike, x: ArrayLike
) -> FloatArray:
    """Binding energy E(x) in Msun c^2 of a circular binary at PN parameter x = (M omega)^(2/3).

    E = -(M nu x / 2) [1 + e1 x + e2 x^2 + e3 x^3 - 3 kappa_2^T x^5], where e1..e3 are the
    point-mass 3PN coefficients (Blanchet 2014, Living Rev. Relativ. 17, 2, eq. 233) and the
    last term is the leading-order (Newtonian, adiabatic) tidal correction,
    -9 sum_A (m_B/m_A) Lambda_A m_A^5 / M^5 x^5 = -3 kappa_2^T x^5 (Flanagan & Hinderer 2008,
    PRD 77, 021502; from memory). omega is the orbital angular frequency and M the total mass;
    Lambda = 0 gives the point-mass (black-hole) result. Valid in the adiabatic inspiral,
    x << 1; near contact (x ~ 0.15-0.2) it is an approximation of unknown few-ten-per-cent
    accuracy (common practice, no source).
    """
    m1, m2, x = (np.asarray(a, dtype=np.float64) for a in (m1, m2, x))
    mt = m1 + m2
    nu = m1 * m2 / mt**2
    e1, e2, e3 = _pn_coefficients(nu)
    k = kappa2t(m1, m2, lam1, lam2)
    return -0.5 * mt * nu * x * (1.0 + e1 * x + e2 * x**2 + e3 * x**3 - 3.0 * k * x**5)


def x_energy_minimum(
    m1: ArrayLike, m2: ArrayLike, lam1: ArrayLike, lam2: ArrayLike, iterations: int = 30
) -> FloatArray:
    """PN parameter x at which :func:`binding_energy_pn` has its minimum (the PN "ISCO").

    Solves f(x) = dE/dx / (-M nu / 2) = 1 + 2 e1 x + 3 e2 x^2 + 4 e3 x^3 - 18 kappa_2^T x^5 = 0
    by Newton iteration from x = 0.5, vectorised; each row stops at its own convergence
    (step <= 1e-14), so its result does not depend on the other rows. For 0 <= nu <= 1/4 the
    coefficients e1, e2, e3 are all negative and kappa_2^T >= 0, so f falls from f(0) = 1, is
    concave on x >= 0, and is negative at x = 0.5: the root is unique, and Newton steps from
    the right of it approach it monotonically (the tangent of a concave function lies above
    it).
    """
    m1, m2 = (np.asarray(a, dtype=np.float64) for a in (m1, m2))
    mt = m1 + m2
    nu = m1 * m2 / mt**2
    e1, e2, e3 = _pn_coefficients(nu)
    k = kappa2t(m1, m2, lam1, lam2)
    x = np.full(np.broadcast(e1, k).shape, 0.5)
    active = np.ones(x.shape, dtype=bool)
    with np.errstate(invalid="ignore", divide="ignore"):
        for _ in range(iterations):
            f = 1.0 + x * (2 * e1 + x * (3 * e2 + x * (4 * e3 - 18 * k * x * x)))
            df = 2 * e1 + x * (6 * e2 + x * (12 * e3 - 90 * k * x * x))
            step = np.where(active, f / df, 0.0)
            x = x - step
            # a row stops once its own step is below 1e-14, so its value never depends on
            # which other rows share the array (batch or block)
            active &= np.abs(step) > 1e-14
            if not active.any():
                break
    return np.where(np.isfinite(k) & np.isfinite(nu), x, np.nan)


def x_contact(m1: ArrayLike, m2: ArrayLike, c1: ArrayLike, c2: ArrayLike) -> FloatArray:
    """PN parameter x at which the two stellar surfaces touch, from Kepler's law.

    x = M / (R1 + R2) with R_A = m_A / C_A in geometric units (Newtonian orbit of separation
    R1 + R2; common practice, no source). For equal compactness x = C.
    """
    m1, m2, c1, c2 = (np.asarray(a, dtype=np.float64) for a in (m1, m2, c1, c2))
    return (m1 + m2) / (m1 / c1 + m2 / c2)


def inspiral_erad_to_contact(
    m1: ArrayLike,
    m2: ArrayLike,
    lam1: ArrayLike,
    lam2: ArrayLike,
    c1: ArrayLike,
    c2: ArrayLike,
) -> FloatArray:
    """Energy (Msun c^2) radiated in gravitational waves during the inspiral up to contact.

    E_rad = -E(x_end), the binding energy of :func:`binding_energy_pn` at
    x_end = min(:func:`x_contact`, :func:`x_energy_minimum`): the energy radiated from infinite
    separation until the stars touch, or until the PN energy stops decreasing, if earlier.

    This is a lower bound on the total radiated energy of a BNS merger: merger and post-merger
    emission are not included, and they are comparable to or larger than the inspiral part for
    binaries that do not collapse promptly (from memory). Range: adiabatic inspiral of two
    neutron stars; not calibrated to numerical relativity.
    """
    x_end = np.minimum(x_contact(m1, m2, c1, c2), x_energy_minimum(m1, m2, lam1, lam2))
    return -binding_energy_pn(m1, m2, lam1, lam2, x_end)


def gw_frequency_hz(m_total_msun: ArrayLike, x: ArrayLike) -> FloatArray:
    """Dominant (l = m = 2) GW frequency in Hz at PN parameter x: f = x^(3/2) / (pi G M / c^3)."""
    gm_sun_s = GM_SUN_KM / 299792.458  # G Msun / c^3 in seconds (c in km/s, exact)
    m = np.asarray(m_total_msun, dtype=np.float64)
    return np.asarray(x, dtype=np.float64) ** 1.5 / (np.pi * m * gm_sun_s)


# --------------------------------------------------------------------------------------------
# Matter outside the remnant: dynamical ejecta and disk
# --------------------------------------------------------------------------------------------

#: Dietrich & Ujevic 2017, CQG 34, 105014, eq. 1 and its coefficient table (from memory).
DU2017 = {"a": -1.35695, "b": 6.11252, "c": -49.43355, "d": 16.1144, "n": -2.5484}
#: Approximate span of the Dietrich & Ujevic 2017 calibration set (from memory):
#: mass ratio m1/m2 up to ~2, compactness ~0.12 to ~0.22.
DU2017_RANGE = {"q_max": 2.0, "c_min": 0.12, "c_max": 0.22}


def dynamical_ejecta_du2017(
    m1: ArrayLike,
    m2: ArrayLike,
    c1: ArrayLike,
    c2: ArrayLike,
    mb1: ArrayLike,
    mb2: ArrayLike,
) -> FloatArray:
    """Baryonic mass (Msun) of dynamical ejecta of a BNS merger.

    M_ej / 1e-3 Msun = [a (m2/m1)^(1/3) (1 - 2 C1)/C1 + b (m2/m1)^n + c (1 - m1/mb1)] mb1
                       + (1 <-> 2) + d,
    a = -1.35695, b = 6.11252, c = -49.43355, d = 16.1144, n = -2.5484
    (Dietrich & Ujevic 2017, Class. Quantum Grav. 34, 105014, eq. 1; from memory). m are
    gravitational and mb baryonic masses, C compactnesses. Negative fit values are returned
    as 0 (no ejecta). Calibrated on 172 NR simulations with m1/m2 up to ~2 and C ~0.12-0.22
    (from memory); the fit's scatter is large, about a factor 2 (from memory).
    """
    m1, m2, c1, c2, mb1, mb2 = (np.asarray(a, dtype=np.float64) for a in (m1, m2, c1, c2, mb1, mb2))
    a, b, c, d, n = (DU2017[k] for k in "abcdn")

    def one(ma, mb_other, ca, mba):  # contribution of star A, partner B
        ratio = mb_other / ma
        return (
            a * ratio ** (1.0 / 3.0) * (1.0 - 2.0 * ca) / ca + b * ratio**n + c * (1.0 - ma / mba)
        ) * mba

    fit = one(m1, m2, c1, mb1) + one(m2, m1, c2, mb2) + d
    return np.maximum(fit, 0.0) * 1e-3


def du2017_in_range(
    m1: ArrayLike, m2: ArrayLike, c1: ArrayLike, c2: ArrayLike
) -> NDArray[np.bool_]:
    """True where a binary lies inside the approximate Dietrich & Ujevic 2017 calibration set."""
    m1, m2, c1, c2 = (np.asarray(a, dtype=np.float64) for a in (m1, m2, c1, c2))
    r = DU2017_RANGE
    q = np.maximum(m1, m2) / np.minimum(m1, m2)
    return (
        (q <= r["q_max"])
        & (c1 >= r["c_min"])
        & (c1 <= r["c_max"])
        & (c2 >= r["c_min"])
        & (c2 <= r["c_max"])
    )


#: Radice et al. 2018, ApJ 869, 130 (disk-mass fit; also ApJL 852, L29) (from memory).
RADICE2018_DISK = {"alpha": 0.084, "beta": 0.127, "gamma": 567.1, "delta": 405.14, "floor": 1e-3}
#: Approximate span of its calibration (from memory): GW170817-like chirp masses, m1/m2 up to
#: ~1.2 (wider mass ratios were not simulated), Lambda-tilde ~ 100 to ~ 1500.
RADICE2018_RANGE = {"q_max": 1.2, "lt_min": 100.0, "lt_max": 1500.0}


def disk_mass_radice2018(
    m1: ArrayLike, m2: ArrayLike, lam1: ArrayLike, lam2: ArrayLike
) -> FloatArray:
    """Baryonic mass (Msun) of the accretion disk around a BNS merger remnant.

    M_disk = max(1e-3, alpha + beta tanh((Lambda~ - gamma) / delta)) Msun,
    alpha = 0.084, beta = 0.127, gamma = 567.1, delta = 405.14, with Lambda~ the binary tidal
    deformability (:func:`gwdeficit.fits.ns_eos.lambda_tilde`) (Radice, Perego, Hotokezaka et
    al. 2018, ApJ 869, 130, eq. 24, and Radice, Perego, Zappa & Bernuzzi 2018, ApJL 852, L29,
    eq. 1; from memory). Calibrated on near-equal-mass binaries (m1/m2 up to ~1.2) of
    GW170817-like chirp mass, Lambda~ ~ 100-1500 (from memory); scatter ~ a few 1e-2 Msun.
    """
    lt = lambda_tilde(m1, m2, lam1, lam2)
    p = RADICE2018_DISK
    return np.maximum(p["floor"], p["alpha"] + p["beta"] * np.tanh((lt - p["gamma"]) / p["delta"]))


def radice2018_in_range(
    m1: ArrayLike, m2: ArrayLike, lam1: ArrayLike, lam2: ArrayLike
) -> NDArray[np.bool_]:
    """True where a binary lies inside the approximate calibration of the Radice 2018 disk fit."""
    m1, m2 = (np.asarray(a, dtype=np.float64) for a in (m1, m2))
    lt = lambda_tilde(m1, m2, lam1, lam2)
    q = np.maximum(m1, m2) / np.minimum(m1, m2)
    r = RADICE2018_RANGE
    return (q <= r["q_max"]) & (lt >= r["lt_min"]) & (lt <= r["lt_max"])


# --------------------------------------------------------------------------------------------
# Collapse thresholds and the kind of remnant
# --------------------------------------------------------------------------------------------

#: Bauswein, Baumgarte & Janka 2013, PRL 111, 131101 (from memory): k = a C*_max + b.
BAUSWEIN2013 = {"a": -3.606, "b": 2.38}
#: Breu & Rezzolla 2016, MNRAS 459, 646 (from memory): M_max,uniform rotation / M_TOV.
BREU_REZZOLLA_2016_RATIO = 1.203


def prompt_collapse_threshold_bauswein2013(mtov_msun: ArrayLike, r16_km: ArrayLike) -> FloatArray:
    """Total binary mass (Msun) above which a BNS merger collapses promptly to a black hole.

    M_thres = (a G M_TOV / (c^2 R_1.6) + b) M_TOV with a = -3.606, b = 2.38, M_TOV the maximum
    mass of non-rotating stars and R_1.6 the radius of a 1.6 Msun star (Bauswein, Baumgarte &
    Janka 2013, PRL 111, 131101, eq. 2; from memory). Calibrated on equal-mass binaries of 12
    EOSs (C*_max ~ 0.2 - 0.3), accuracy ~ 0.05 Msun (from memory).
    """
    mtov = np.asarray(mtov_msun, dtype=np.float64)
    cstar = GM_SUN_KM * mtov / np.asarray(r16_km, dtype=np.float64)
    return (BAUSWEIN2013["a"] * cstar + BAUSWEIN2013["b"]) * mtov


def supramassive_limit_breu_rezzolla2016(mtov_msun: ArrayLike) -> FloatArray:
    """Maximum gravitational mass (Msun) of uniformly rotating neutron stars.

    M_max = 1.203 M_TOV (Breu & Rezzolla 2016, MNRAS 459, 646; quoted spread +-0.022 M_TOV over
    the EOSs studied; from memory).
    """
    return BREU_REZZOLLA_2016_RATIO * np.asarray(mtov_msun, dtype=np.float64)


BNS_REMNANT_KINDS = ("BH", "HMNS", "SMNS", "NS")


def bns_remnant_kind(
    m_total_msun: ArrayLike,
    m_remnant_msun: ArrayLike,
    mtov_msun: ArrayLike,
    r16_km: ArrayLike,
) -> NDArray[np.str_]:
    """Kind of BNS merger remnant: "BH", "HMNS", "SMNS" or "NS" ("" where undecidable).

    - "BH": prompt collapse, initial total mass above
      :func:`prompt_collapse_threshold_bauswein2013`;
    - otherwise by the remnant's gravitational mass (after radiated energy and ejecta):
      "HMNS" (hypermassive) above the uniform-rotation limit
      :func:`supramassive_limit_breu_rezzolla2016`, "SMNS" (supramassive) between M_TOV and
      that limit, "NS" (stable) at or below M_TOV. Comparing gravitational masses to these
      limits is common practice (no source); it ignores thermal support and differential
      rotation of the young remnant.
    NaN in any input gives "".
    """
    mtot, mrem, mtov, r16 = np.broadcast_arrays(
        *(
            np.asarray(a, dtype=np.float64)
            for a in (m_total_msun, m_remnant_msun, mtov_msun, r16_km)
        )
    )
    thr = prompt_collapse_threshold_bauswein2013(mtov, r16)
    smax = supramassive_limit_breu_rezzolla2016(mtov)
    ok = np.isfinite(mtot) & np.isfinite(thr) & np.isfinite(mtov)
    kind = np.where(
        mtot > thr,
        "BH",
        np.where(mrem > smax, "HMNS", np.where(mrem > mtov, "SMNS", "NS")),
    )
    kind = np.where(ok & (np.isfinite(mrem) | (mtot > thr)), kind, "")
    return kind.astype("<U4")
