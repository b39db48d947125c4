"""Recoil ("kick") speed of the remnant of a binary-black-hole merger, in km/s.

Both formulas here share the empirical structure built up by the Rochester/RIT and Jena groups:

    v = |(v_m + v_perp cos xi) e1 + v_perp sin xi e2 + v_par ez|,

with e1, e2 in the orbital plane and ez along L, and
- v_m: the unequal-mass term of Gonzalez et al. 2007, PRL 98, 091101:
  v_m = A nu^2 (1 - q)/(1 + q) (1 + B nu), A = 1.2e4 km/s, B = -0.93 (non-spinning maximum
  175.2 +- 11 km/s at q = 0.36 +- 0.03);
- v_perp: the in-plane kick from the aligned spin components,
  v_perp = H nu^2 (a1z - q a2z) / (1 + q);
- v_par: the kick along L from the in-plane spins (the "superkick", Campanelli et al. 2007),
  proportional to |a1_perp - q a2_perp| cos(Theta), Theta the angle between the in-plane spin
  difference and the infall direction near merger.

Arguments: ``q = m2 / m1`` (any q > 0; symmetric under exchanging the bodies with their spins),
spin magnitudes, tilts (rad), in-plane azimuth ``phi12`` between the spins (rad) and
``phase`` = Theta (rad). Theta is set by the binary's orbital phase at merger and is not known
from catalogue parameters; callers draw it uniformly in [0, 2 pi) (remnant.py does, with the
run's seed). Functions broadcast like ufuncs.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

from gwdeficit.fits.isco import ufunc_like
from gwdeficit.fits.spin import compiled, spin_components

__all__ = [
    "CAMPANELLI07_COEFFICIENTS",
    "GONZALEZ07_COEFFICIENTS",
    "LOUSTO12_COEFFICIENTS",
    "campanelli_2007",
    "lousto_2012",
    "spin_difference_perp",
]

# Gonzalez, Hannam, Sperhake, Bruegmann & Husa 2007, PRL 98, 091101 (from memory).
GONZALEZ07_COEFFICIENTS = {"A_kms": 1.2e4, "B": -0.93}

# Campanelli, Lousto, Zlochower & Merritt 2007, ApJL 659, L5 (H, xi) and PRL 98, 231102 (K),
# from memory.
CAMPANELLI07_COEFFICIENTS = {
    **GONZALEZ07_COEFFICIENTS,
    "H_kms": 7.3e3,
    "xi_deg": 88.0,
    "K_kms": 6.0e4,
}

# Lousto, Zlochower, Dotti & Volonteri 2012, PRD 85, 084015 (from memory).
LOUSTO12_COEFFICIENTS = {
    **GONZALEZ07_COEFFICIENTS,
    "H_kms": 6.9e3,
    "xi_deg": 145.0,
    "V11_kms": 3677.76,
    "VA_kms": 2481.21,
    "VB_kms": 1792.45,
    "VC_kms": 1506.52,
}


@ufunc_like
def spin_difference_perp(
    q: ArrayLike,
    chi1: ArrayLike,
    chi2: ArrayLike,
    tilt1: ArrayLike,
    tilt2: ArrayLike,
    phi12: ArrayLike,
) -> NDArray[np.float64]:
    """|a1_perp - q a2_perp|: in-plane spin difference entering the superkick.

    sqrt(a1p^2 + q^2 a2p^2 - 2 q a1p a2p cos phi12) with a_ip = chi_i sin(tilt_i).
    """
    q = np.asarray(q, dtype=np.float64)
    _, _, chi1p, chi2p, cphi = spin_components(chi1, chi2, tilt1, tilt2, phi12)
    qa2 = q * chi2p
    return np.sqrt(np.maximum(chi1p * chi1p + qa2 * (qa2 - 2.0 * chi1p * cphi), 0.0))


@ufunc_like
def lousto_2012(
    q: ArrayLike,
    chi1: ArrayLike,
    chi2: ArrayLike,
    tilt1: ArrayLike,
    tilt2: ArrayLike,
    phi12: ArrayLike,
    phase: ArrayLike,
) -> NDArray[np.float64]:
    """Recoil speed (km/s) with the hang-up terms of Lousto et al. 2012.

    Lousto, Zlochower, Dotti & Volonteri 2012, PRD 85, 084015, eqs. (1)-(3) (equation numbers
    from memory), written with body 1 the heavier (q = m2/m1):
        v_m    = A nu^2 (1 - q)/(1 + q) (1 + B nu)            (Gonzalez et al. 2007),
        v_perp = H nu^2 (a1z - q a2z) / (1 + q),
        v_par  = 16 nu^2 / (1 + q) [V11 + VA S + VB S^2 + VC S^3] |a1_perp - q a2_perp| cos Theta,
        S = 2 (a1z + q^2 a2z) / (1 + q)^2,
    A = 1.2e4 km/s, B = -0.93, H = 6.9e3 km/s, xi = 145 deg, V11 = 3677.76 km/s,
    VA = 2481.21 km/s, VB = 1792.45 km/s, VC = 1506.52 km/s. The S terms are the "hang-up"
    dependence of the superkick on the aligned spin.

    Calibrated range (approximate, from memory): NR simulations with 1/4 <~ q <= 1 and spins
    up to ~0.8-0.9; the maximum (partially aligned spins, equal masses) is ~5000 km/s.
    """
    return compiled("LOUSTO12", q, chi1, chi2, tilt1, tilt2, phi12, phase)


@ufunc_like
def campanelli_2007(
    q: ArrayLike,
    chi1: ArrayLike,
    chi2: ArrayLike,
    tilt1: ArrayLike,
    tilt2: ArrayLike,
    phi12: ArrayLike,
    phase: ArrayLike,
) -> NDArray[np.float64]:
    """Recoil speed (km/s) from the empirical formula of Campanelli et al. 2007.

    Campanelli, Lousto, Zlochower & Merritt 2007, ApJL 659, L5, eqs. (1)-(4) (equation numbers
    from memory), body 1 the heavier (q = m2/m1):
        v_m    = A nu^2 (1 - q)/(1 + q) (1 + B nu)            (Gonzalez et al. 2007),
        v_perp = H nu^2 (a1z - q a2z) / (1 + q),
        v_par  = K nu^2 / (1 + q) |a1_perp - q a2_perp| cos Theta,
    A = 1.2e4 km/s, B = -0.93, H = 7.3e3 km/s, xi = 88 deg; K = 6.0e4 km/s from Campanelli,
    Lousto, Zlochower & Merritt 2007, PRL 98, 231102. Maximal in-plane spins antiparallel,
    equal masses: up to K/16 = 3750 km/s.

    Calibrated range (approximate, from memory): the mass-ratio term covers 1/4 <~ q <= 1; the
    spin terms were fitted to a handful of simulations with moderate spins (~0.5), so their
    coverage is sparse. The registry uses the common domain q >= 1/4, spins <= 0.8.
    """
    return compiled("CAMPANELLI07", q, chi1, chi2, tilt1, tilt2, phi12, phase)
