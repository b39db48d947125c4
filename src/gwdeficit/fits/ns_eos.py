"""Neutron-star structure from quasi-universal relations: compactness, tidal deformability,
baryonic mass, and the binary tidal parameters.

Every function takes plain float arrays in fixed units (solar masses, kilometres,
dimensionless) and broadcasts like a ufunc. Geometric units G = c = 1 are used inside: the
compactness of a star of gravitational mass ``m`` and areal radius ``R`` is
``C = G m / (R c^2)``.

These relations replace a full equation of state (EOS) when a catalogue row carries no tidal
deformability: the caller chooses either a neutron-star radius (a fixed-radius EOS
approximation) or passes the deformabilities, and the compactness follows from a published
compactness-Love relation. The choice made is recorded per row by :func:`resolve_neutron_stars`.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from astropy import constants as _const
from astropy import units as _u
from numpy.typing import ArrayLike, NDArray

from gwdeficit.schema import OptionError

#: G * M_sun / c^2 in km (astropy constants: IAU 2015 nominal solar mass, CODATA G).
GM_SUN_KM: float = float((_const.G * _const.M_sun / _const.c**2).to_value(_u.km))

FloatArray = NDArray[np.float64]

# --------------------------------------------------------------------------------------------
# Compactness - Love (C-Love) relations: C = a0 + a1 ln(Lambda) + a2 ln(Lambda)^2
# --------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class CLoveRelation:
    """A quasi-universal compactness - tidal-deformability fit ``C = sum_k a_k (ln Lambda)^k``.

    ``lambda_range`` is the span of Lambda over which the relation was calibrated (outside it
    the result is flagged, not extrapolated silently).
    """

    name: str
    a0: float
    a1: float
    a2: float
    lambda_range: tuple[float, float]
    source: str


C_LOVE_RELATIONS: dict[str, CLoveRelation] = {
    # Yagi & Yunes 2017, Phys. Rep. 681, 1, eq. (78): C = 0.360 - 0.0355 ln L + 0.000705 ln^2 L
    # (from memory), fitted to non-rotating stars of many realistic cold EOSs; quoted accuracy
    # a few per cent (below ~7 %). Calibrated over realistic NS masses, roughly
    # 1 <~ Lambda <~ 1e4 (from memory).
    "yagi-yunes-2017": CLoveRelation(
        "yagi-yunes-2017",
        0.360,
        -0.0355,
        0.000705,
        (1.0, 1.0e4),
        "Yagi & Yunes 2017, Phys. Rep. 681, 1, eq. 78",
    ),
    # Maselli, Cardoso, Ferrari, Gualtieri & Pani 2013, PRD 88, 023007, eq. (8):
    # C = 0.371 - 3.91e-2 ln L + 1.056e-3 ln^2 L (from memory), realistic EOSs, accuracy
    # better than ~7 %; calibrated over roughly 1 <~ Lambda <~ 1e4 (from memory).
    "maselli-2013": CLoveRelation(
        "maselli-2013",
        0.371,
        -0.0391,
        0.001056,
        (1.0, 1.0e4),
        "Maselli et al. 2013, PRD 88, 023007, eq. 8",
    ),
}

DEFAULT_C_LOVE = "yagi-yunes-2017"


def c_love_relation(name: str) -> CLoveRelation:
    """Look up a compactness-Love relation by name; :class:`OptionError` if unknown."""
    try:
        return C_LOVE_RELATIONS[name]
    except KeyError:
        raise OptionError(
            f"compactness-Love relation {name!r} is not known; valid: "
            + ", ".join(sorted(C_LOVE_RELATIONS))
        ) from None


def compactness_from_lambda(lam: ArrayLike, relation: str = DEFAULT_C_LOVE) -> FloatArray:
    """Compactness C = G m / (R c^2) of a neutron star from its tidal deformability Lambda.

    C = a0 + a1 ln(Lambda) + a2 ln(Lambda)^2 with the coefficients of ``relation``
    (default Yagi & Yunes 2017, Phys. Rep. 681, 1, eq. 78). Lambda <= 0 or NaN gives NaN.
    Calibrated range: see :data:`C_LOVE_RELATIONS` (about 1 to 1e4 in Lambda).
    """
    rel = c_love_relation(relation)
    lam = np.asarray(lam, dtype=np.float64)
    with np.errstate(divide="ignore", invalid="ignore"):
        y = np.log(np.where(lam > 0, lam, np.nan))
    return rel.a0 + rel.a1 * y + rel.a2 * y * y


def lambda_from_compactness(c: ArrayLike, relation: str = DEFAULT_C_LOVE) -> FloatArray:
    """Tidal deformability Lambda of a neutron star of compactness C: inverse of the C-Love fit.

    Solves a2 y^2 + a1 y + (a0 - C) = 0 for y = ln(Lambda), taking the root on the branch where
    C decreases with Lambda (y below the vertex -a1 / (2 a2), i.e. Lambda < ~1e10), which is the
    physical one over the whole calibrated range. C <= 0 or NaN gives NaN.
    """
    rel = c_love_relation(relation)
    c = np.asarray(c, dtype=np.float64)
    disc = rel.a1 * rel.a1 - 4.0 * rel.a2 * (rel.a0 - c)
    with np.errstate(invalid="ignore", over="ignore"):
        y = (-rel.a1 - np.sqrt(disc)) / (2.0 * rel.a2)
        return np.where(c > 0, np.exp(y), np.nan)


def compactness_from_radius(m_msun: ArrayLike, radius_km: ArrayLike) -> FloatArray:
    """Compactness C = G m / (R c^2) from gravitational mass (Msun) and areal radius (km)."""
    m = np.asarray(m_msun, dtype=np.float64)
    r = np.asarray(radius_km, dtype=np.float64)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(r > 0, GM_SUN_KM * m / r, np.nan)


def radius_from_compactness(m_msun: ArrayLike, c: ArrayLike) -> FloatArray:
    """Areal radius in km of a star of gravitational mass ``m_msun`` and compactness ``c``."""
    m = np.asarray(m_msun, dtype=np.float64)
    c = np.asarray(c, dtype=np.float64)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(c > 0, GM_SUN_KM * m / c, np.nan)


# --------------------------------------------------------------------------------------------
# Baryonic (rest) mass from gravitational mass
# --------------------------------------------------------------------------------------------

BARYONIC_RELATIONS: tuple[str, ...] = ("lattimer-prakash-2001", "timmes-woosley-weaver-1996")
DEFAULT_BARYONIC = "lattimer-prakash-2001"


def baryonic_mass(
    m_msun: ArrayLike,
    compactness: ArrayLike | None = None,
    relation: str = DEFAULT_BARYONIC,
) -> FloatArray:
    """Baryonic (rest) mass M_b in Msun of a cold neutron star of gravitational mass ``m_msun``.

    The binding energy BE = M_b - M_g is taken from a published approximation:

    - ``"lattimer-prakash-2001"``: BE / M_g = 0.6 C / (1 - 0.5 C), with C the compactness
      (Lattimer & Prakash 2001, ApJ 550, 426, eq. 21; from memory). Fitted to realistic EOSs
      without strong phase transitions; quoted accuracy about +-20 % in BE (from memory),
      i.e. about 2 % in M_b for C ~ 0.17.
    - ``"timmes-woosley-weaver-1996"``: BE = 0.075 M_g^2 (Msun), independent of radius
      (Timmes, Woosley & Weaver 1996, ApJ 457, 834, eq. 8; from memory); calibrated on
      neutron stars of 1.2 - 1.6 Msun (from memory).

    ``compactness`` is required for the first relation and ignored by the second.
    """
    m = np.asarray(m_msun, dtype=np.float64)
    if relation == "lattimer-prakash-2001":
        if compactness is None:
            raise OptionError("baryonic mass by Lattimer & Prakash 2001 needs the compactness")
        c = np.asarray(compactness, dtype=np.float64)
        return m * (1.0 + 0.6 * c / (1.0 - 0.5 * c))
    if relation == "timmes-woosley-weaver-1996":
        return m + 0.075 * m * m
    raise OptionError(
        f"baryonic-mass relation {relation!r} is not known; valid: {', '.join(BARYONIC_RELATIONS)}"
    )


# --------------------------------------------------------------------------------------------
# Binary tidal parameters
# --------------------------------------------------------------------------------------------


def lambda_tilde(m1: ArrayLike, m2: ArrayLike, lam1: ArrayLike, lam2: ArrayLike) -> FloatArray:
    """Binary tidal deformability Lambda-tilde, the combination entering the 5PN phase.

    Lambda~ = 16/13 [(m1 + 12 m2) m1^4 L1 + (m2 + 12 m1) m2^4 L2] / (m1 + m2)^5
    (Flanagan & Hinderer 2008, PRD 77, 021502; Favata 2014, PRL 112, 101101, eq. 5). Equals
    Lambda for equal masses and deformabilities. A black hole has Lambda = 0.
    """
    m1, m2, lam1, lam2 = (np.asarray(a, dtype=np.float64) for a in (m1, m2, lam1, lam2))
    mt = m1 + m2
    return 16.0 / 13.0 * ((m1 + 12.0 * m2) * m1**4 * lam1 + (m2 + 12.0 * m1) * m2**4 * lam2) / mt**5


def kappa2t(m1: ArrayLike, m2: ArrayLike, lam1: ArrayLike, lam2: ArrayLike) -> FloatArray:
    """Tidal coupling constant kappa_2^T of a binary.

    kappa_2^T = 2 sum_A (m_B / m_A) (m_A / M)^5 k_2^A / C_A^5 (Damour & Nagar 2010, PRD 81,
    084016; Bernuzzi, Nagar, Dietrich & Damour 2015, PRL 114, 161103, eq. 2), written with
    Lambda_A = (2/3) k_2^A / C_A^5 as kappa_2^T = 3 sum_A Lambda_A m_A^4 m_B / M^5. For equal
    masses kappa_2^T = (3/16) Lambda~.
    """
    m1, m2, lam1, lam2 = (np.asarray(a, dtype=np.float64) for a in (m1, m2, lam1, lam2))
    mt = m1 + m2
    return 3.0 * (lam1 * m1**4 * m2 + lam2 * m2**4 * m1) / mt**5


# --------------------------------------------------------------------------------------------
# Per-row resolution of the neutron-star properties
# --------------------------------------------------------------------------------------------

#: Per-row codes of where a neutron star's deformability and compactness came from.
SOURCE_LAMBDA = "lambda"  # Lambda given in the row; C from the C-Love relation
SOURCE_RADIUS = "radius"  # no Lambda; C = G m / (R c^2) from the caller's radius; Lambda inverted
SOURCE_NONE = "none"  # neither: not estimated


@dataclass(frozen=True)
class NeutronStars:
    """Resolved properties of an array of neutron stars (one entry per row).

    lam: tidal deformability; compactness: G m / (R c^2); radius_km; mb_msun: baryonic mass;
    source: one of ``"lambda"``, ``"radius"``, ``"none"`` per row; in_range: inside the
    calibrated range of the C-Love relation used (always True for ``"radius"`` rows whose
    inverted Lambda is in range, False for ``"none"``).
    """

    lam: FloatArray
    compactness: FloatArray
    radius_km: FloatArray
    mb_msun: FloatArray
    source: NDArray[np.str_]
    in_range: NDArray[np.bool_]


def resolve_neutron_stars(
    m_msun: ArrayLike,
    lam: ArrayLike,
    *,
    ns_radius_km: ArrayLike | None = None,
    eos_relation: str = DEFAULT_C_LOVE,
    baryonic_relation: str = DEFAULT_BARYONIC,
) -> NeutronStars:
    """Deformability, compactness, radius and baryonic mass of neutron stars, row by row.

    Where ``lam`` is finite and positive it is used, and the compactness follows from the
    C-Love relation ``eos_relation``. Where it is missing (NaN) and ``ns_radius_km`` is given,
    the compactness is G m / (R c^2) and Lambda the inverse of the same relation. Where both
    are missing the row's properties are NaN and its source is ``"none"``: no default is
    substituted. The baryonic mass follows from ``baryonic_relation`` (see
    :func:`baryonic_mass`).
    """
    rel = c_love_relation(eos_relation)
    m = np.asarray(m_msun, dtype=np.float64)
    lam_in = np.broadcast_to(np.asarray(lam, dtype=np.float64), m.shape)
    if np.any(lam_in < 0):
        raise OptionError("tidal deformabilities must be >= 0 (NaN where unknown)")
    have_lam = np.isfinite(lam_in) & (lam_in > 0)
    if ns_radius_km is None:
        radius = np.full(m.shape, np.nan)
    else:
        radius = np.broadcast_to(np.asarray(ns_radius_km, dtype=np.float64), m.shape)
        if np.any(~(np.isfinite(radius) & (radius > 0))):
            raise OptionError(f"neutron-star radius must be a positive number of km: {radius!r}")
        c_r = compactness_from_radius(m, radius)
        if np.any(c_r >= 0.5):
            raise OptionError(
                "neutron-star radius is below the Schwarzschild radius 2 G m / c^2 for some "
                "rows; give a radius in km"
            )
    have_r = ~have_lam & np.isfinite(radius)

    c_from_lam = compactness_from_lambda(np.where(have_lam, lam_in, np.nan), eos_relation)
    c_from_r = compactness_from_radius(m, np.where(have_r, radius, np.nan))
    comp = np.where(have_lam, c_from_lam, np.where(have_r, c_from_r, np.nan))
    lam_out = np.where(
        have_lam, lam_in, np.where(have_r, lambda_from_compactness(c_from_r, eos_relation), np.nan)
    )
    lo, hi = rel.lambda_range
    in_range = (have_lam | have_r) & (lam_out >= lo) & (lam_out <= hi)
    source = np.where(have_lam, SOURCE_LAMBDA, np.where(have_r, SOURCE_RADIUS, SOURCE_NONE))
    return NeutronStars(
        lam=lam_out,
        compactness=comp,
        radius_km=radius_from_compactness(m, comp),
        mb_msun=baryonic_mass(m, comp, baryonic_relation),
        source=source,
        in_range=in_range,
    )
