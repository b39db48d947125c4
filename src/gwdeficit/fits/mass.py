"""Energy radiated in gravitational waves (and so the remnant mass) of a binary-black-hole merger.

Every function returns the radiated fraction E_rad / M of the total mass M = m1 + m2 (both in
the source frame); the remnant mass is M (1 - E_rad / M). Arguments follow fits.spin: ``q =
m2 / m1`` (any q > 0; the formulas are symmetric under exchanging the bodies with their spins),
spin magnitudes ``chi1``/``chi2`` in [0, 1], tilts in radians. Functions broadcast like ufuncs.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

from gwdeficit.fits.isco import ufunc_like
from gwdeficit.fits.spin import compiled

__all__ = [
    "BMR12_COEFFICIENTS",
    "barausse_morozova_rezzolla_2012",
    "healy_lousto_zlochower_2014",
    "isco_binding_energy",
]

# Barausse, Morozova & Rezzolla 2012, ApJ 758, 63 (from memory; p0 alone gives E_rad/M for
# equal non-spinning masses, 0.04827, against 0.04838 from Scheel et al. 2009).
BMR12_COEFFICIENTS = {"p0": 0.04827, "p1": 0.01707}


@ufunc_like
def barausse_morozova_rezzolla_2012(
    q: ArrayLike,
    chi1: ArrayLike,
    chi2: ArrayLike,
    tilt1: ArrayLike = 0.0,
    tilt2: ArrayLike = 0.0,
) -> NDArray[np.float64]:
    """Radiated-energy fraction E_rad / M, Barausse, Morozova & Rezzolla 2012.

    Barausse, Morozova & Rezzolla 2012, ApJ 758, 63, their fitting formula (eq. 18; equation
    number from memory):
        E_rad / M = [1 - E_isco(a)] nu + 4 nu^2 [4 p0 + 16 p1 a (a + 1) + E_isco(a) - 1],
    with nu = q / (1 + q)^2, a = (a1 cos beta + a2 q^2 cos gamma) / (1 + q)^2 the total spin
    projected on the orbital angular momentum in units of M^2, E_isco the specific energy at the
    Kerr ISCO for that signed spin (fits.isco, Bardeen, Press & Teukolsky 1972), p0 = 0.04827,
    p1 = 0.01707. The first term is the test-particle limit (binding energy at the ISCO) and
    p0 is the equal-mass non-spinning value.

    Calibrated range (approximate, from memory): NR simulations with 1/4 <~ q <= 1 and spins
    up to ~0.8 (aligned and a few precessing); exact test-particle limit by construction.
    In-plane spin components do not enter.
    """
    return compiled("BMR12", q, chi1, chi2, tilt1, tilt2, 0.0)


@ufunc_like
def isco_binding_energy(
    q: ArrayLike,
    chi1: ArrayLike,
    chi2: ArrayLike,
    tilt1: ArrayLike = 0.0,
    tilt2: ArrayLike = 0.0,
) -> NDArray[np.float64]:
    """Parameter-free estimate E_rad / M = nu [1 - E_isco(chi_f)]: ISCO binding energy.

    The energy a test body of reduced mass mu = nu M radiates on its way from infinity to the
    ISCO of the final black hole, E_isco from Bardeen, Press & Teukolsky 1972, ApJ 178, 347
    (fits.isco), evaluated at the signed final spin along L of the Buonanno, Kidder & Lehner
    2008 (PRD 77, 026004) estimate (fits.spin). The plunge and ringdown are ignored, so it
    underestimates comparable-mass values (0.025 against 0.048 for equal non-spinning masses,
    Scheel et al. 2009) and is exact only as nu -> 0. No calibration: never in the default.
    """
    return compiled("BPT72", q, chi1, chi2, tilt1, tilt2, 0.0)


@ufunc_like
def healy_lousto_zlochower_2014(
    q: ArrayLike,
    chi1: ArrayLike,
    chi2: ArrayLike,
    tilt1: ArrayLike = 0.0,
    tilt2: ArrayLike = 0.0,
) -> NDArray[np.float64]:
    """Radiated-energy fraction E_rad / M from the aligned-spin fit of Healy, Lousto & Zlochower.

    Healy, Lousto & Zlochower 2014, PRD 90, 104004, their remnant-mass formula (eq. 13;
    equation number from memory), in their notation (see fits.spin.healy_lousto_zlochower_2014
    for eta, dm, S and Delta):
        M_rem / M = (4 eta)^2 [M0 + K1 S + K2a Delta dm + K2b S^2 + K2c Delta^2 + K2d dm^2
                    + K3a Delta S dm + K3b S Delta^2 + K3c S^3 + K3d S dm^2
                    + K4a Delta S^2 dm + K4b Delta^3 dm + K4c Delta^4 + K4d S^4
                    + K4e Delta^2 S^2 + K4f dm^4 + K4g Delta dm^3 + K4h Delta^2 dm^2
                    + K4i S^2 dm^2] + [1 + eta (E_isco + 11)] dm^6,
    E_isco the specific energy at the ISCO of the final hole (Bardeen, Press & Teukolsky
    1972, at the HLZ14 final spin), coefficients in fits.spin.HLZ14_MASS_COEFFICIENTS;
    E_rad / M = 1 - M_rem / M. The dm^6 term gives the test-particle limit
    M_rem = M - mu (1 - E_isco) exactly. M0 = 0.951507 is the equal-mass non-spinning value.

    Calibrated range (approximate, from memory): aligned-spin NR simulations with
    1/6 <~ q <= 1 and spins up to ~0.8-0.85 (the registry uses q >= 1/4, chi <= 0.8).
    In-plane spin components do not enter.
    """
    return compiled("HLZ14_MASS", q, chi1, chi2, tilt1, tilt2, 0.0)
