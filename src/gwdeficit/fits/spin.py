"""Final (remnant) spin of a binary-black-hole merger.

Conventions shared by every function here: ``q = m2 / m1`` is the mass ratio (any q > 0; the
formulas are symmetric under exchanging the bodies together with their spins, so q <= 1 is not
required), ``chi1``/``chi2`` the dimensionless spin magnitudes in [0, 1], ``tilt1``/``tilt2``
the angles between each spin and the orbital angular momentum L (radians), ``phi12`` the
azimuthal angle between the two in-plane spin components (radians). All functions broadcast
like numpy ufuncs and return the dimensionless spin *magnitude* of the remnant, in [0, 1].

The formulas are evaluated by the compiled scalar kernels of :mod:`gwdeficit.fits._kernels`
(one implementation, shared with the remnant stage's fused loop); the docstrings here give
the equations, sources and calibrated ranges.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

from gwdeficit.fits.isco import ufunc_like

__all__ = [
    "BR09_COEFFICIENTS",
    "HLZ14_MASS_COEFFICIENTS",
    "HLZ14_SPIN_COEFFICIENTS",
    "R08_COEFFICIENTS",
    "barausse_rezzolla_2009",
    "buonanno_kidder_lehner_2008",
    "healy_lousto_zlochower_2014",
    "rezzolla_2008",
    "spin_components",
]


def compiled(slot: str, *args: ArrayLike) -> NDArray[np.float64]:
    """Evaluate the fit in kernel slot ``slot`` (a name in fits._kernels) on 1-d arrays."""
    from gwdeficit.fits import _kernels

    return _kernels.evaluate_slot(getattr(_kernels, slot), *args)


# Barausse & Rezzolla 2009, ApJL 704, L40, fitted coefficients (from memory,
# checked against Scheel et al. 2009: they give chi_f = 0.68646 for equal non-spinning masses).
BR09_COEFFICIENTS = {
    "s4": -0.1229,
    "s5": 0.4537,
    "t0": -2.8904,
    "t2": -3.5171,
    "t3": 2.5763,
}

# Rezzolla et al. 2008, PRD 78, 044002, aligned-spin fit, with the coefficients quoted
# in the abstract (from memory; +-0.012, 0.261, 0.065, 0.132, 0.548 respectively).
R08_COEFFICIENTS = {
    "s4": -0.129,
    "s5": -0.384,
    "t0": -2.686,
    "t2": -3.454,
    "t3": 2.353,
}


def spin_components(
    chi1: ArrayLike,
    chi2: ArrayLike,
    tilt1: ArrayLike,
    tilt2: ArrayLike,
    phi12: ArrayLike,
) -> tuple[NDArray[np.float64], ...]:
    """Spin components along L and in the orbital plane.

    Returns (chi1z, chi2z, chi1p, chi2p, cos_phi12): chi_i cos(tilt_i), chi_i sin(tilt_i) and
    cos(phi12). Broadcasts its arguments.
    """
    chi1, chi2, t1, t2, p12 = np.broadcast_arrays(
        *(np.asarray(x, dtype=np.float64) for x in (chi1, chi2, tilt1, tilt2, phi12))
    )
    return chi1 * np.cos(t1), chi2 * np.cos(t2), chi1 * np.sin(t1), chi2 * np.sin(t2), np.cos(p12)


# --------------------------------------------------------------------------------------------
# Barausse & Rezzolla 2009
# --------------------------------------------------------------------------------------------


@ufunc_like
def barausse_rezzolla_2009(
    q: ArrayLike,
    chi1: ArrayLike,
    chi2: ArrayLike,
    tilt1: ArrayLike = 0.0,
    tilt2: ArrayLike = 0.0,
    phi12: ArrayLike = 0.0,
) -> NDArray[np.float64]:
    """Final spin magnitude for generic (precessing) spins, Barausse & Rezzolla 2009.

    Barausse & Rezzolla 2009, ApJL 704, L40, their final formula (eqs. 6-10; equation
    numbers from memory):
        |a_f| = |a1 + a2 q^2 + l q Lhat| / (1 + q)^2, with
        l = s4 / (1 + q^2)^2 |a1 + a2 q^2|^2 + (s5 nu + t0 + 2) / (1 + q^2)
            (a1 cos beta + a2 q^2 cos gamma) + 2 sqrt(3) + t2 nu + t3 nu^2,
    nu = q / (1 + q)^2, beta/gamma the tilts, the angle alpha between the spins entering through
    |a1 + a2 q^2|^2 = a1^2 + a2^2 q^4 + 2 a1 a2 q^2 cos alpha. Coefficients
    s4 = -0.1229, s5 = 0.4537, t0 = -2.8904, t2 = -3.5171, t3 = 2.5763. For aligned spins it
    reduces to the form of Rezzolla et al. 2008 (:func:`rezzolla_2008`). The angles are those of
    the binary at large separation.

    Calibrated range (approximate, from memory): NR simulations with 1/4 <~ q <= 1 and spin
    magnitudes up to ~0.8, quoted accuracy ~0.01 in a_f. Built to reproduce the test-particle
    limit q -> 0 (a_f -> a1) exactly. For near-extremal aligned spins at small q (far outside
    the calibrated range) the formula exceeds the Kerr bound (da_f/dnu = +0.45 at a = 1, nu = 0,
    where the test-particle slope is 0); results are capped at 1.
    """
    return compiled("BR09", q, chi1, chi2, tilt1, tilt2, phi12)


# --------------------------------------------------------------------------------------------
# Rezzolla et al. 2008 (aligned spins), with the in-plane spin added in quadrature
# --------------------------------------------------------------------------------------------


@ufunc_like
def rezzolla_2008(
    q: ArrayLike,
    chi1: ArrayLike,
    chi2: ArrayLike,
    tilt1: ArrayLike = 0.0,
    tilt2: ArrayLike = 0.0,
    phi12: ArrayLike = 0.0,
) -> NDArray[np.float64]:
    """Final spin magnitude from the aligned-spin fit of Rezzolla et al. 2008.

    Rezzolla, Barausse, Dorband, Pollney, Reisswig, Seiler & Husa 2008, PRD 78, 044002, their
    fitting formula (eq. 5; equation number from memory):
        a_par = a + s4 a^2 nu + s5 a nu^2 + t0 a nu + 2 sqrt(3) nu + t2 nu^2 + t3 nu^3,
    with
    a = (a1 cos beta + a2 q^2 cos gamma) / (1 + q^2) built from the spin components along L and
    s4 = -0.129, s5 = -0.384, t0 = -2.686, t2 = -3.454, t3 = 2.353.

    In-plane correction (not part of R08): the binary's in-plane total spin
    |a1_perp + q^2 a2_perp| / (1 + q)^2 is added in quadrature,
    a_f = sqrt(a_par^2 + a_perp^2), the vector construction of Barausse & Rezzolla 2009,
    ApJL 704, L40. For aligned spins the result is exactly R08.

    Calibrated range (approximate, from memory): aligned-spin NR simulations with
    1/4 <~ q <= 1 and |a| up to ~0.8; built to give a_f -> a1 as q -> 0. Capped at the Kerr
    bound 1, which the formula exceeds for near-extremal aligned spins at small q.
    """
    return compiled("R08", q, chi1, chi2, tilt1, tilt2, phi12)


# --------------------------------------------------------------------------------------------
# Buonanno, Kidder & Lehner 2008 (parameter-free)
# --------------------------------------------------------------------------------------------


@ufunc_like
def buonanno_kidder_lehner_2008(
    q: ArrayLike,
    chi1: ArrayLike,
    chi2: ArrayLike,
    tilt1: ArrayLike = 0.0,
    tilt2: ArrayLike = 0.0,
    phi12: ArrayLike = 0.0,
) -> NDArray[np.float64]:
    """Parameter-free final spin estimate of Buonanno, Kidder & Lehner 2008.

    Buonanno, Kidder & Lehner 2008, PRD 77, 026004: the remnant's angular momentum is the
    binary's spins plus the orbital angular momentum of a test particle at the ISCO of the
    *final* black hole, with radiated energy and angular momentum after the ISCO neglected
    (M_f ~ M): chi_par = nu L_isco(chi_par) + (a1 cos beta + a2 q^2 cos gamma) / (1 + q)^2,
    L_isco from Bardeen, Press & Teukolsky 1972 (fits.isco), solved on whole arrays by Newton
    iterations. Gives 0.663 for equal non-spinning masses (NR: 0.686, Scheel et al. 2009).

    Here the orbit is taken as equatorial and the in-plane total spin |a1_perp + q^2 a2_perp|
    / (1 + q)^2 is added in quadrature (the vector sum of the same picture); BKL's treatment
    of inclined orbits is not reproduced; the magnitude is capped at the Kerr bound 1 (reached
    for near-extremal in-plane primary spins). No calibration: an estimate, never in the default.
    """
    return compiled("BKL08", q, chi1, chi2, tilt1, tilt2, phi12)


# --------------------------------------------------------------------------------------------
# Healy, Lousto & Zlochower 2014 (aligned spins): final spin and, in fits.mass, final mass
# --------------------------------------------------------------------------------------------

# Healy, Lousto & Zlochower 2014, PRD 90, 104004, fitted coefficients of the remnant spin
# (L*) and mass (K*) formulas (from memory). Checked in tests/reference/test_ref_nr.py: L0 and
# M0 against Scheel et al. 2009 (0.68646, 0.95162), the GW150914-like binary against Abbott
# et al. 2016, and the whole aligned-spin domain against Barausse & Rezzolla 2009 and
# Barausse, Morozova & Rezzolla 2012 within the fits' quoted accuracies; the sign convention
# of the spin difference (see fits._kernels.hlz14) is the one that agrees (the other disagrees by up
# to 0.07 in the final spin).
HLZ14_SPIN_COEFFICIENTS = {
    "0": 0.686710,
    "1": 0.613247,
    "2a": -0.145427,
    "2b": -0.115689,
    "2c": -0.005254,
    "2d": 0.801838,
    "3a": -0.073839,
    "3b": 0.004759,
    "3c": -0.078377,
    "3d": 1.585809,
    "4a": -0.003050,
    "4b": -0.002968,
    "4c": 0.004364,
    "4d": -0.047204,
    "4e": -0.053099,
    "4f": 0.953458,
    "4g": -0.067998,
    "4h": 0.001629,
    "4i": -0.066693,
}
HLZ14_MASS_COEFFICIENTS = {
    "0": 0.951507,
    "1": -0.051379,
    "2a": -0.004804,
    "2b": -0.054522,
    "2c": -0.000022,
    "2d": 1.995246,
    "3a": 0.007064,
    "3b": -0.017599,
    "3c": -0.119175,
    "3d": 0.025000,
    "4a": -0.068981,
    "4b": -0.011383,
    "4c": -0.002284,
    "4d": -0.165658,
    "4e": 0.019403,
    "4f": 2.980990,
    "4g": 0.020250,
    "4h": -0.004091,
    "4i": 0.078441,
}


@ufunc_like
def healy_lousto_zlochower_2014(
    q: ArrayLike,
    chi1: ArrayLike,
    chi2: ArrayLike,
    tilt1: ArrayLike = 0.0,
    tilt2: ArrayLike = 0.0,
    phi12: ArrayLike = 0.0,
) -> NDArray[np.float64]:
    """Final spin magnitude from the aligned-spin fit of Healy, Lousto & Zlochower 2014.

    Healy, Lousto & Zlochower 2014, PRD 90, 104004, their remnant-spin formula (eq. 14;
    equation number from memory), in their notation (body 1 the lighter, q = m1/m2 <= 1):
        alpha = (4 eta)^2 [L0 + L1 S + L2a Delta dm + L2b S^2 + L2c Delta^2 + L2d dm^2
                 + L3a Delta S dm + L3b S Delta^2 + L3c S^3 + L3d S dm^2
                 + L4a Delta S^2 dm + L4b Delta^3 dm + L4c Delta^4 + L4d S^4
                 + L4e Delta^2 S^2 + L4f dm^4 + L4g Delta dm^3 + L4h Delta^2 dm^2
                 + L4i S^2 dm^2] + S (1 + 8 eta) dm^4 + eta J_isco dm^6,
    eta = m1 m2 / M^2, dm = (m1 - m2)/M, S = (S1 + S2)/M^2 and Delta = (S2/m2 - S1/m1)/M along
    L, J_isco the specific angular momentum at the ISCO of a hole of spin alpha (Bardeen,
    Press & Teukolsky 1972; solved with the spin), coefficients in
    :data:`HLZ14_SPIN_COEFFICIENTS`. The last two terms make the test-particle limit exact.

    In-plane correction (not part of HLZ14): the in-plane total spin |a1_perp + q^2 a2_perp| /
    (1 + q)^2 is added in quadrature, as for :func:`rezzolla_2008`; for aligned spins the
    result is exactly the paper's |alpha|. Calibrated range (approximate, from memory):
    aligned-spin NR simulations with 1/6 <~ q <= 1 and spins up to ~0.8-0.85; the registry
    uses the common domain q >= 1/4, chi <= 0.8. Capped at the Kerr bound 1.
    """
    return compiled("HLZ14_SPIN", q, chi1, chi2, tilt1, tilt2, phi12)
