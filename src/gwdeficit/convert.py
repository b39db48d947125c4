"""Parametrisations of compact binaries, reference frames, spins, and redshift <-> distance.

Every function takes and returns plain float64 numpy arrays (or floats) in the package's fixed
units: solar masses, Mpc, radians. They broadcast like ufuncs. Values outside a function's domain
come back as NaN (never clipped or extrapolated silently); callers decide whether that is an error.

The luminosity-distance relation uses an astropy cosmology evaluated once on a grid and
interpolated with a cubic spline in both directions, so that millions of rows are converted
without a per-row root find. The grid covers 0 <= z <= :data:`Z_MAX`; the interpolation error is
below 1e-9 in z and 1e-8 relative in distance over 0 < z < 10 (checked against astropy's
``z_at_value`` and ``luminosity_distance`` in tests/reference/test_ref_convert.py).
"""

from __future__ import annotations

import functools
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from numpy.typing import ArrayLike, NDArray

from gwdeficit.schema import OptionError

FloatArray = NDArray[np.float64]

#: Highest redshift of the distance grid; larger redshifts (or distances) convert to NaN.
Z_MAX = 1000.0
#: Number of grid points, uniform in log(1 + z) from z = 0 to Z_MAX.
GRID_POINTS = 4096
DEFAULT_COSMOLOGY = "Planck18"


def _f(x: ArrayLike) -> FloatArray:
    return np.asarray(x, dtype=np.float64)


# --------------------------------------------------------------------------------------------
# Mass parametrisations
# --------------------------------------------------------------------------------------------


def chirp_mass(m1: ArrayLike, m2: ArrayLike) -> FloatArray:
    """Chirp mass Mc = (m1 m2)^(3/5) / (m1 + m2)^(1/5).

    The mass combination that sets the leading-order (Newtonian quadrupole) phase evolution of
    an inspiral; definition as in Cutler & Flanagan 1994, Phys. Rev. D 49, 2658 (section II;
    from memory). Valid for any m1, m2 > 0, in any mass unit.
    """
    m1, m2 = _f(m1), _f(m2)
    return (m1 * m2) ** 0.6 / (m1 + m2) ** 0.2


def symmetric_mass_ratio(m1: ArrayLike, m2: ArrayLike) -> FloatArray:
    """Symmetric mass ratio eta = m1 m2 / (m1 + m2)^2, in (0, 1/4] for positive masses.

    Standard definition (e.g. Cutler & Flanagan 1994, Phys. Rev. D 49, 2658; from memory).
    """
    m1, m2 = _f(m1), _f(m2)
    return m1 * m2 / (m1 + m2) ** 2


def mass_ratio(m1: ArrayLike, m2: ArrayLike) -> FloatArray:
    """Mass ratio q = min(m1, m2) / max(m1, m2), in (0, 1] (convention q <= 1)."""
    m1, m2 = _f(m1), _f(m2)
    return np.minimum(m1, m2) / np.maximum(m1, m2)


def masses_from_chirp_q(mc: ArrayLike, q: ArrayLike) -> tuple[FloatArray, FloatArray]:
    """Component masses (m1 >= m2) from chirp mass and mass ratio q = m2/m1 in (0, 1].

    Inverts :func:`chirp_mass`: m1 = Mc (1 + q)^(1/5) / q^(3/5), m2 = q m1. NaN where q is not
    in (0, 1] or Mc <= 0.
    """
    mc, q = _f(mc), _f(q)
    ok = (q > 0) & (q <= 1) & (mc > 0)
    qs = np.where(ok, q, np.nan)
    m1 = mc * (1.0 + qs) ** 0.2 / qs**0.6
    return m1, qs * m1


def masses_from_total_q(mt: ArrayLike, q: ArrayLike) -> tuple[FloatArray, FloatArray]:
    """Component masses (m1 >= m2) from total mass M and q = m2/m1 in (0, 1].

    m1 = M / (1 + q), m2 = q M / (1 + q). NaN where q is not in (0, 1] or M <= 0.
    """
    mt, q = _f(mt), _f(q)
    ok = (q > 0) & (q <= 1) & (mt > 0)
    qs = np.where(ok, q, np.nan)
    m1 = mt / (1.0 + qs)
    return m1, qs * m1


def masses_from_total_eta(mt: ArrayLike, eta: ArrayLike) -> tuple[FloatArray, FloatArray]:
    """Component masses (m1 >= m2) from total mass M and symmetric mass ratio eta in (0, 1/4].

    m1,2 = M (1 +- sqrt(1 - 4 eta)) / 2, inverting :func:`symmetric_mass_ratio`; m2 is evaluated
    as 2 eta M / (1 + sqrt(1 - 4 eta)), the same value without cancellation at small eta. NaN
    where eta is outside (0, 1/4] (a relative excess up to 1e-12, from rounding, counts as 1/4).
    """
    mt, eta = _f(mt), _f(eta)
    disc = 1.0 - 4.0 * eta
    disc = np.where((disc < 0) & (disc > -4e-12), 0.0, disc)
    ok = (eta > 0) & (disc >= 0) & (mt > 0)
    root = np.sqrt(np.where(ok, disc, np.nan))
    return 0.5 * mt * (1.0 + root), 2.0 * eta * mt / (1.0 + root)


def masses_from_chirp_eta(mc: ArrayLike, eta: ArrayLike) -> tuple[FloatArray, FloatArray]:
    """Component masses (m1 >= m2) from chirp mass and symmetric mass ratio.

    Uses M = Mc eta^(-3/5) (which follows from the two definitions) and
    :func:`masses_from_total_eta`.
    """
    mc, eta = _f(mc), _f(eta)
    with np.errstate(divide="ignore", invalid="ignore"):
        mt = mc * np.where(eta > 0, eta, np.nan) ** -0.6
    return masses_from_total_eta(mt, eta)


def masses_from_chirp_total(mc: ArrayLike, mt: ArrayLike) -> tuple[FloatArray, FloatArray]:
    """Component masses (m1 >= m2) from chirp mass and total mass: eta = (Mc / M)^(5/3).

    NaN where Mc / M exceeds 4^(-3/5) (no real pair of masses) or a mass is <= 0.
    """
    mc, mt = _f(mc), _f(mt)
    with np.errstate(divide="ignore", invalid="ignore"):
        eta = np.where((mc > 0) & (mt > 0), mc / mt, np.nan) ** (5.0 / 3.0)
    return masses_from_total_eta(mt, eta)


def q_from_eta(eta: ArrayLike) -> FloatArray:
    """Mass ratio q = m2/m1 <= 1 from the symmetric mass ratio eta in (0, 1/4]."""
    m1, m2 = masses_from_total_eta(1.0, eta)
    return m2 / m1


# --------------------------------------------------------------------------------------------
# Frames
# --------------------------------------------------------------------------------------------


def source_frame_mass(m_det: ArrayLike, z: ArrayLike) -> FloatArray:
    """Source-frame mass m = m_det / (1 + z) from a detector-frame (redshifted) mass.

    Cosmological redshift rescales every mass scale of the signal by (1 + z) (e.g. Krolak &
    Schutz 1987, Gen. Relativ. Gravit. 19, 1163; from memory). Valid for z >= 0.
    """
    return _f(m_det) / (1.0 + _f(z))


def detector_frame_mass(m: ArrayLike, z: ArrayLike) -> FloatArray:
    """Detector-frame mass m_det = (1 + z) m; inverse of :func:`source_frame_mass`."""
    return _f(m) * (1.0 + _f(z))


# --------------------------------------------------------------------------------------------
# Spins
# --------------------------------------------------------------------------------------------


def wrap_angle(phi: ArrayLike) -> FloatArray:
    """An azimuth wrapped into [0, 2 pi)."""
    out = np.mod(_f(phi), 2.0 * np.pi)
    return np.where(out >= 2.0 * np.pi, 0.0, out)


def spin_angles(
    s1x: ArrayLike,
    s1y: ArrayLike,
    s1z: ArrayLike,
    s2x: ArrayLike,
    s2y: ArrayLike,
    s2z: ArrayLike,
) -> tuple[FloatArray, FloatArray, FloatArray, FloatArray, FloatArray]:
    """Spin magnitudes, tilts and phi12 from dimensionless spin vectors.

    The vectors are given in a frame whose z axis is the orbital angular momentum L (the usual
    convention of precessing-binary analyses, e.g. Farr et al. 2014, Phys. Rev. D 90, 024018;
    from memory). Returns ``(chi1, chi2, tilt1, tilt2, phi12)``: chi = |s|, tilt = arccos(s_z /
    chi) in [0, pi] (0 for a zero spin), phi12 = azimuth of s2 minus azimuth of s1, wrapped into
    [0, 2 pi). phi12 is degenerate when either in-plane spin vanishes; it is then 0 (any value
    gives the same vectors).
    """
    s1x, s1y, s1z, s2x, s2y, s2z = (_f(a) for a in (s1x, s1y, s1z, s2x, s2y, s2z))
    chi1 = np.sqrt(s1x**2 + s1y**2 + s1z**2)
    chi2 = np.sqrt(s2x**2 + s2y**2 + s2z**2)
    with np.errstate(divide="ignore", invalid="ignore"):
        tilt1 = np.arccos(np.clip(np.where(chi1 > 0, s1z / chi1, 1.0), -1.0, 1.0))
        tilt2 = np.arccos(np.clip(np.where(chi2 > 0, s2z / chi2, 1.0), -1.0, 1.0))
    inplane = (np.hypot(s1x, s1y) > 0) & (np.hypot(s2x, s2y) > 0)
    phi12 = np.where(inplane, wrap_angle(np.arctan2(s2y, s2x) - np.arctan2(s1y, s1x)), 0.0)
    return chi1, chi2, tilt1, tilt2, phi12


def spin_vectors(
    chi1: ArrayLike,
    chi2: ArrayLike,
    tilt1: ArrayLike,
    tilt2: ArrayLike,
    phi12: ArrayLike,
) -> tuple[FloatArray, FloatArray, FloatArray, FloatArray, FloatArray, FloatArray]:
    """Spin vectors (s1x, s1y, s1z, s2x, s2y, s2z) with z along L and s1's in-plane part on x.

    Inverse of :func:`spin_angles` up to a rotation about L (which none of the canonical
    quantities depends on).
    """
    chi1, chi2, tilt1, tilt2, phi12 = (_f(a) for a in (chi1, chi2, tilt1, tilt2, phi12))
    s1x = chi1 * np.sin(tilt1)
    s1y = np.zeros_like(s1x)
    s1z = chi1 * np.cos(tilt1)
    s2x = chi2 * np.sin(tilt2) * np.cos(phi12)
    s2y = chi2 * np.sin(tilt2) * np.sin(phi12)
    s2z = chi2 * np.cos(tilt2)
    return s1x, s1y, s1z, s2x, s2y, s2z


def aligned_spin(chiz: ArrayLike) -> tuple[FloatArray, FloatArray]:
    """Magnitude and tilt of a spin known only by its signed component along L.

    Returns ``(|chiz|, tilt)`` with tilt = 0 for chiz >= 0 and pi for chiz < 0.
    """
    chiz = _f(chiz)
    return np.abs(chiz), np.where(chiz < 0, np.pi, 0.0)


def effective_spin(
    m1: ArrayLike,
    m2: ArrayLike,
    chi1: ArrayLike,
    chi2: ArrayLike,
    tilt1: ArrayLike,
    tilt2: ArrayLike,
) -> FloatArray:
    """Mass-weighted effective aligned spin chi_eff = (m1 chi1 cos t1 + m2 chi2 cos t2) / M.

    Definition of Ajith et al. 2011, Phys. Rev. Lett. 106, 241101 (and Racine 2008, Phys. Rev. D
    78, 044021; from memory). In [-1, 1] for spin magnitudes in [0, 1].
    """
    m1, m2 = _f(m1), _f(m2)
    return (m1 * _f(chi1) * np.cos(tilt1) + m2 * _f(chi2) * np.cos(tilt2)) / (m1 + m2)


# --------------------------------------------------------------------------------------------
# Redshift <-> luminosity distance
# --------------------------------------------------------------------------------------------


def available_cosmologies() -> tuple[str, ...]:
    """Names of astropy's built-in cosmology realizations (Planck18, Planck15, WMAP9, ...)."""
    from astropy.cosmology import realizations

    return tuple(realizations.available)


def get_cosmology(name: str = DEFAULT_COSMOLOGY) -> Any:
    """The astropy cosmology realization called ``name`` (case-insensitive)."""
    from astropy.cosmology import realizations

    names = {n.lower(): n for n in available_cosmologies()}
    key = str(name).strip().lower()
    if key not in names:
        raise OptionError(
            f"cosmology {name!r} is not known; valid: {', '.join(available_cosmologies())}"
        )
    return getattr(realizations, names[key])


def cosmology_record(name: str = DEFAULT_COSMOLOGY) -> dict[str, Any]:
    """JSON-able description of a cosmology realization for output metadata."""
    import astropy

    cosmo = get_cosmology(name)
    m_nu = cosmo.m_nu
    return {
        "name": cosmo.name,
        "class": type(cosmo).__name__,
        "H0_km_s_Mpc": float(cosmo.H0.value),
        "Om0": float(cosmo.Om0),
        "Ode0": float(cosmo.Ode0),
        "Ok0": float(cosmo.Ok0),
        "Ob0": None if cosmo.Ob0 is None else float(cosmo.Ob0),
        "Tcmb0_K": float(cosmo.Tcmb0.value),
        "Neff": float(cosmo.Neff),
        "m_nu_eV": None if m_nu is None else [float(v) for v in np.atleast_1d(m_nu.value)],
        "reference": str(cosmo.meta.get("reference", "")),
        "astropy_version": astropy.__version__,
        "distance_method": (
            f"astropy luminosity_distance on {GRID_POINTS} points uniform in log(1+z), "
            f"0 <= z <= {Z_MAX:g}, cubic-spline interpolation both ways"
        ),
    }


@dataclass(frozen=True)
class DistanceGrid:
    """Luminosity distance on a redshift grid, interpolated both ways with cubic splines.

    ``log1pz`` is uniform in log(1 + z); ``dl_mpc`` is astropy's ``luminosity_distance`` (Hogg
    1999, arXiv:astro-ph/9905116, eqs. 15, 16 and 21: D_L = (1 + z) D_M) at those points. Build
    it with :func:`distance_grid`.
    """

    name: str
    z_max: float
    log1pz: FloatArray = field(repr=False)
    dl_mpc: FloatArray = field(repr=False)
    _forward: Any = field(repr=False, compare=False)
    _inverse: Any = field(repr=False, compare=False)

    @property
    def dl_max(self) -> float:
        """Luminosity distance (Mpc) at the grid's upper redshift."""
        return float(self.dl_mpc[-1])

    def dl_of_z(self, z: ArrayLike) -> FloatArray:
        """Luminosity distance in Mpc; NaN for z < 0, z > z_max or NaN input."""
        z = _f(z)
        ok = (z >= 0) & (z <= self.z_max)
        out = _eval_spline(self._forward, np.log1p(np.where(ok, z, 0.0)), uniform=True)
        return np.where(ok, out, np.nan)

    def z_of_dl(self, dl_mpc: ArrayLike) -> FloatArray:
        """Redshift; NaN for distances < 0, beyond the grid, or NaN input."""
        d = _f(dl_mpc)
        ok = (d >= 0) & (d <= self.dl_max)
        out = np.expm1(_eval_spline(self._inverse, np.where(ok, d, 0.0), uniform=False))
        return np.where(ok, np.maximum(out, 0.0), np.nan)


def _eval_spline(spline: Any, x: FloatArray, uniform: bool) -> FloatArray:
    """Evaluate a scipy CubicSpline from its own coefficients, vectorised.

    Same polynomial pieces as ``spline(x)`` (for x inside the knots), but the interval is found
    by index arithmetic on a uniform grid or by ``numpy.searchsorted`` otherwise, which is
    several times faster than the generic piecewise-polynomial evaluation for 1e6+ values.
    """
    knots, coef = spline.x, spline.c
    n = knots.size - 1
    x = np.asarray(x, dtype=np.float64)
    if uniform:
        step = (knots[-1] - knots[0]) / n
        i = np.floor((x - knots[0]) / step).astype(np.int64)
    else:
        i = np.searchsorted(knots, x, side="right") - 1
    i = np.clip(i, 0, n - 1)
    t = x - knots[i]
    return ((coef[0, i] * t + coef[1, i]) * t + coef[2, i]) * t + coef[3, i]


@functools.lru_cache(maxsize=8)
def _grid(canonical_name: str) -> DistanceGrid:
    from scipy.interpolate import CubicSpline

    cosmo = get_cosmology(canonical_name)
    u = np.linspace(0.0, np.log1p(Z_MAX), GRID_POINTS)
    dl = np.asarray(cosmo.luminosity_distance(np.expm1(u)).to_value("Mpc"), dtype=np.float64)
    dl[0] = 0.0
    if not np.all(np.diff(dl) > 0):  # pragma: no cover - all built-in realizations are monotonic
        raise OptionError(f"cosmology {canonical_name}: luminosity distance is not monotonic")
    return DistanceGrid(
        name=canonical_name,
        z_max=Z_MAX,
        log1pz=u,
        dl_mpc=dl,
        _forward=CubicSpline(u, dl),
        _inverse=CubicSpline(dl, u),
    )


def distance_grid(cosmology: str = DEFAULT_COSMOLOGY) -> DistanceGrid:
    """The (cached) distance grid of a named astropy cosmology realization."""
    return _grid(get_cosmology(cosmology).name)


def luminosity_distance(z: ArrayLike, cosmology: str = DEFAULT_COSMOLOGY) -> FloatArray:
    """Luminosity distance in Mpc at redshift z (0 <= z <= Z_MAX; NaN outside).

    Interpolates astropy's ``luminosity_distance`` (Hogg 1999, eq. 21) for the named
    realization; relative error below 1e-8 for 0 < z < 10.
    """
    return distance_grid(cosmology).dl_of_z(z)


def redshift_from_distance(dl_mpc: ArrayLike, cosmology: str = DEFAULT_COSMOLOGY) -> FloatArray:
    """Redshift at luminosity distance ``dl_mpc`` (Mpc), by vectorised grid inversion.

    Absolute error below 1e-9 in z for 0 < z < 10 (checked against astropy's ``z_at_value``).
    NaN for negative distances and for distances beyond z = Z_MAX.
    """
    return distance_grid(cosmology).z_of_dl(dl_mpc)
