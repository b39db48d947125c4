"""Neutron-star - black-hole (NSBH) mergers: tidal disruption and the baryonic mass that stays
outside the black hole (Foucart, Hinderer & Nissanke 2018).

Plain float arrays in, arrays out, broadcasting like ufuncs; masses in Msun, geometric units
G = c = 1 inside. Body 1 is the black hole, body 2 the neutron star.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

FloatArray = NDArray[np.float64]

#: Foucart, Hinderer & Nissanke 2018, PRD 98, 081501(R), eq. 4 (from memory).
FHN2018 = {"alpha": 0.406, "beta": 0.139, "gamma": 0.255, "delta": 1.761}
#: Calibration of FHN 2018 (from memory): 75 NR simulations with BH/NS mass ratio 1 - 7,
#: aligned BH spin -0.5 to 0.97, NS compactness 0.13 - 0.182.
FHN2018_RANGE = {
    "q_min": 1.0,
    "q_max": 7.0,
    "chi_min": -0.5,
    "chi_max": 0.97,
    "c_min": 0.13,
    "c_max": 0.182,
}


def remnant_mass_fraction_fhn2018(q: ArrayLike, r_isco: ArrayLike, c_ns: ArrayLike) -> FloatArray:
    """Baryonic mass left outside the black hole, as a fraction of the NS baryonic mass.

    M_rem / M_NS^b = [max(alpha (1 - 2 C) / eta^(1/3) - beta R_ISCO C / eta + gamma, 0)]^delta
    with eta = Q / (1 + Q)^2, Q = M_BH / M_NS (gravitational masses), C the NS compactness and
    R_ISCO the Kerr ISCO radius in units of M_BH for the BH spin component along the orbital
    angular momentum; alpha = 0.406, beta = 0.139, gamma = 0.255, delta = 1.761 (Foucart,
    Hinderer & Nissanke 2018, Phys. Rev. D 98, 081501(R), eq. 4; from memory). "Outside" means
    bound disk, tidal tail and unbound ejecta together, about 10 ms after merger.
    Calibrated range: Q = 1 - 7, aligned spin -0.5 to 0.97, C = 0.13 - 0.182 (from memory);
    typical error ~ 0.015 M_NS^b or ~15 % of M_rem (from memory).
    """
    q, r_isco, c = (np.asarray(a, dtype=np.float64) for a in (q, r_isco, c_ns))
    eta = q / (1.0 + q) ** 2
    p = FHN2018
    base = p["alpha"] * (1.0 - 2.0 * c) / np.cbrt(eta) - p["beta"] * r_isco * c / eta + p["gamma"]
    return np.maximum(base, 0.0) ** p["delta"]


def fhn2018_in_range(q: ArrayLike, chi_aligned: ArrayLike, c_ns: ArrayLike) -> NDArray[np.bool_]:
    """True where an NSBH lies inside the FHN 2018 calibration set (see :data:`FHN2018_RANGE`)."""
    q, chi, c = (np.asarray(a, dtype=np.float64) for a in (q, chi_aligned, c_ns))
    r = FHN2018_RANGE
    return (
        (q >= r["q_min"])
        & (q <= r["q_max"])
        & (chi >= r["chi_min"])
        & (chi <= r["chi_max"])
        & (c >= r["c_min"])
        & (c <= r["c_max"])
    )
