"""Cosmic budget: the gravitational-wave background energy density and the mass-density history.

All mergers between today and ``zmax`` are folded with a merger-rate density ``R(z)`` (comoving,
per unit source-frame time) and the population mean per merger of a quantity (energy radiated in
gravitational waves, baryonic mass ejected, their sum):

- comoving mass density lost by mergers between redshifts ``z1 < z2``:
  ``rho_M = integral_{z1}^{z2} R(z) <dM> |dt/dz| dz``;
- present energy density of the background (Phinney 2001, arXiv:astro-ph/0108028, the theorem
  of his section 2): ``rho_gw c^2 = integral_0^zmax R(z) <E_rad> / (1+z) |dt/dz| dz``, the extra
  ``1/(1+z)`` being the redshift of each graviton's energy; ``Omega_gw = rho_gw / rho_crit``;
- the inspiral spectrum ``Omega_gw(f)`` (same theorem, frequency-resolved).

``|dt/dz| = 1 / ((1+z) H(z))`` comes from the astropy cosmology. Inside this module everything is
plain float64 numpy in Msun (energies in Msun c^2), Mpc, years and Hz; rates enter in
Gpc^-3 yr^-1 as quoted in the literature.

The physics functions (:func:`redshift_kernels`, :func:`inspiral_dedf`,
:func:`omega_gw_inspiral`, ...) take plain arrays; :func:`budget_table` builds the tidy output
table from draws; :func:`cosmic_budget` wires a remnants table, a rate model and a cosmology
together.
"""

from __future__ import annotations

import math
from collections.abc import Collection, Mapping, Sequence
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any, Protocol

import numpy as np
from numpy.typing import ArrayLike, NDArray

from gwdeficit.convert import chirp_mass
from gwdeficit.rates import RateEvolution
from gwdeficit.schema import OptionError, SchemaError

if TYPE_CHECKING:
    import pandas as pd
    from astropy.cosmology import FLRW

# --------------------------------------------------------------------------------------------
# Constants (plain floats in the package's internal units)
# --------------------------------------------------------------------------------------------

#: G Msun / c^3 in seconds, from the IAU 2015 nominal solar mass parameter (astropy constants
#: GM_sun = 1.3271244e20 m^3 s^-2, IAU 2015 Resolution B3) and the exact speed of light.
T_SUN_S = 1.3271244e20 / 299792458.0**3

#: Number of Mpc^3 in one Gpc^3.
MPC3_PER_GPC3 = 1.0e9

#: Points of the internal redshift grid (uniform in ln(1+z)); odd, for Simpson's rule.
ZGRID_POINTS = 4001

#: Every ``ZGRID_STRIDE``-th grid point is written to the output table (201 rows per quantity).
ZGRID_STRIDE = 20

#: Above this redshift the Madau & Dickinson 2014 fit is an extrapolation (fitted 0 < z < 8).
MADAU_DICKINSON_ZMAX = 8.0

#: Default upper redshift of the integrals: the end of the star-formation fit's range. Mergers
#: at 8 < z < 10 add well under 1% for that shape (and the lookback time changes by 0.2 Gyr).
DEFAULT_ZMAX = MADAU_DICKINSON_ZMAX

#: Default number of rows used for the population-averaged inspiral spectrum.
SPECTRUM_ROWS = 20000

#: Quantiles written to the tables: median, 68% and 90% central intervals.
QUANTILES = {"median": 0.5, "lo68": 0.16, "hi68": 0.84, "lo90": 0.05, "hi90": 0.95}

TABLE_COLUMNS: tuple[str, ...] = (
    "section",  # "total", "history" (against z and lookback time) or "spectrum" (against f)
    "kind",  # BBH, NSBH, BNS, or "all" when the table mixes kinds
    "quantity",
    "unit",  # astropy unit string of median..hi90 in this row
    "z",
    "lookback_gyr",
    "f_hz",
    *QUANTILES,
)

#: Quantities averaged per merger by the bootstrap (remnant-table columns, Msun or Msun c^2).
MEAN_COLUMNS: tuple[str, ...] = ("erad_msun", "ejected_msun", "deficit_msun")

#: Column added to a copy of the remnants table: inspiral energy up to the ISCO cut-off.
INSPIRAL_COLUMN = "einsp_msun"


# --------------------------------------------------------------------------------------------
# Binary and spectrum formulas
# --------------------------------------------------------------------------------------------


def isco_gw_frequency(mass_msun: ArrayLike) -> NDArray[np.float64]:
    """Gravitational-wave frequency (Hz) at the Schwarzschild innermost stable circular orbit.

    ``f = c^3 / (6^(3/2) pi G M)``: twice the orbital frequency ``sqrt(G M / r^3)`` at
    ``r = 6 G M / c^2``, the ISCO of a non-spinning black hole (e.g. Misner, Thorne & Wheeler
    1973, Gravitation, section 25.6). About 4.40 kHz (Msun / M). Used here with the *remnant*
    mass as the end of the inspiral; the remnant's spin is ignored (a Kerr ISCO of a prograde
    remnant would move the cut-off up by a factor of about two for chi_f ~ 0.7).
    """
    m = np.asarray(mass_msun, dtype=np.float64)
    return 1.0 / (6.0**1.5 * math.pi * T_SUN_S * m)


def inspiral_dedf(f_hz: ArrayLike, mchirp_msun: ArrayLike) -> NDArray[np.float64]:
    """Source-frame inspiral energy spectrum dE/df in Msun c^2 per Hz.

    ``dE/df = (pi^(2/3) / 3) G^(2/3) Mc^(5/3) f^(-1/3)`` (in units of c^2: ``(pi^(2/3)/3)
    T_sun^(2/3) (Mc/Msun)^(5/3) f^(-1/3)`` Msun c^2 / Hz), the leading-order quadrupole
    spectrum of a circular binary (Peters & Mathews 1963, Phys. Rev. 131, 435; in this form in
    Phinney 2001, arXiv:astro-ph/0108028). Newtonian order: valid well below the last stable
    orbit; callers cut it at :func:`isco_gw_frequency`. No cut-off is applied here.
    """
    f = np.asarray(f_hz, dtype=np.float64)
    mc = np.asarray(mchirp_msun, dtype=np.float64)
    return (
        (math.pi ** (2.0 / 3.0) / 3.0)
        * T_SUN_S ** (2.0 / 3.0)
        * mc ** (5.0 / 3.0)
        * f ** (-1.0 / 3.0)
    )


def inspiral_energy(mchirp_msun: ArrayLike, fcut_hz: ArrayLike) -> NDArray[np.float64]:
    """Energy (Msun c^2) radiated by the quadrupole inspiral from f = 0 up to ``fcut_hz``.

    The integral of :func:`inspiral_dedf`: ``E = (1/2) (pi T_sun f_cut)^(2/3) (Mc/Msun)^(5/3)``.
    With ``f_cut`` the Schwarzschild ISCO frequency of the total mass this equals the Newtonian
    binding energy ``eta M c^2 / 12`` at ``r = 6 G M / c^2``. Same range as
    :func:`inspiral_dedf`.
    """
    mc = np.asarray(mchirp_msun, dtype=np.float64)
    fc = np.asarray(fcut_hz, dtype=np.float64)
    return 0.5 * (math.pi * T_SUN_S * fc) ** (2.0 / 3.0) * mc ** (5.0 / 3.0)


# --------------------------------------------------------------------------------------------
# Redshift integrals
# --------------------------------------------------------------------------------------------


def redshift_grid(zmax: float, n: int = ZGRID_POINTS) -> NDArray[np.float64]:
    """``n`` redshifts from 0 to ``zmax``, uniform in ``ln(1+z)`` (dense at low z)."""
    if not (np.isfinite(zmax) and zmax > 0):
        raise OptionError(f"zmax {zmax!r} must be a finite number > 0")
    if n < 3:
        raise OptionError(f"a redshift grid needs at least 3 points, not {n}")
    return np.expm1(np.linspace(0.0, math.log1p(zmax), n))


def abs_dt_dz(z: ArrayLike, cosmology: FLRW) -> NDArray[np.float64]:
    """``|dt/dz| = 1 / ((1+z) H(z))`` in years (source-frame cosmic time per unit redshift).

    Standard FLRW relation (Hogg 1999, arXiv:astro-ph/9905116, the lookback-time integrand,
    eq. 30 from memory), with ``H(z) = H0 E(z)`` from the astropy cosmology (any redshift it
    supports).
    """
    z = np.asarray(z, dtype=np.float64)
    hubble_time_yr = float(cosmology.hubble_time.to_value("yr"))
    return hubble_time_yr * np.asarray(cosmology.inv_efunc(z), dtype=np.float64) / (1.0 + z)


def cumulative_in_redshift(z: ArrayLike, y: ArrayLike) -> NDArray[np.float64]:
    """``integral_0^z y(z') dz'`` at every point of a grid made by :func:`redshift_grid`.

    Composite Simpson's rule (scipy ``cumulative_simpson``) in ``u = ln(1+z)``, where the
    integrand becomes ``y (1+z)``; ``y`` may carry leading axes (the last axis is redshift).
    """
    from scipy.integrate import cumulative_simpson

    z = np.asarray(z, dtype=np.float64)
    y = np.asarray(y, dtype=np.float64)
    return cumulative_simpson(y * (1.0 + z), x=np.log1p(z), axis=-1, initial=0.0)


@dataclass(frozen=True)
class RedshiftKernels:
    """Redshift integrals of a rate shape, per unit rate density at ``z_ref`` (all in years).

    Multiplying a kernel by a rate density (Gpc^-3 yr^-1) and a mean per merger (Msun) gives a
    comoving density in Msun Gpc^-3. Every array is on the grid ``z`` (from 0 to ``zmax``).

    - ``rate_factor``: R(z) / R(z_ref)
    - ``lookback_gyr``: lookback time, integral of |dt/dz| (Gyr)
    - ``number``: integral_0^z R/R_ref |dt/dz| dz (yr): mergers per comoving volume since z
    - ``energy``: the same with an extra 1/(1+z): contribution to today's background
    - ``spectral``: the same with (1+z)^(-1/3): the z-integral of the inspiral spectrum
    """

    z: NDArray[np.float64]
    rate_factor: NDArray[np.float64]
    lookback_gyr: NDArray[np.float64]
    number: NDArray[np.float64]
    energy: NDArray[np.float64]
    spectral: NDArray[np.float64]

    @property
    def zmax(self) -> float:
        return float(self.z[-1])


def redshift_kernels(
    evolution: RateEvolution, cosmology: FLRW, zmax: float, n: int = ZGRID_POINTS
) -> RedshiftKernels:
    """Cumulative redshift integrals of ``R(z)/R(z_ref) |dt/dz|`` with weights 1, 1/(1+z) and
    (1+z)^(-1/3), from 0 to every grid redshift up to ``zmax`` (see :class:`RedshiftKernels`).

    The 1/(1+z) weight is Phinney 2001 (arXiv:astro-ph/0108028, section 2): energy emitted at z
    is redshifted by the expansion before it reaches today. Range: as the rate evolution and the
    cosmology (the Madau & Dickinson 2014 shape is fitted for 0 < z < 8).
    """
    z = redshift_grid(zmax, n)
    dtdz = abs_dt_dz(z, cosmology)
    factor = np.asarray(evolution.factor(z), dtype=np.float64)
    weights = np.stack(
        [dtdz, factor * dtdz, factor * dtdz / (1.0 + z), factor * dtdz * (1.0 + z) ** (-1.0 / 3.0)]
    )
    cum = cumulative_in_redshift(z, weights)
    return RedshiftKernels(
        z=z,
        rate_factor=factor,
        lookback_gyr=cum[0] / 1e9,
        number=cum[1],
        energy=cum[2],
        spectral=cum[3],
    )


def critical_density(cosmology: FLRW) -> float:
    """Present critical density ``3 H0^2 / (8 pi G)`` in Msun Mpc^-3 (astropy cosmology)."""
    return float(cosmology.critical_density0.to_value("solMass / Mpc3"))


# --------------------------------------------------------------------------------------------
# Spectrum
# --------------------------------------------------------------------------------------------


def omega_gw_inspiral(
    f_hz: ArrayLike,
    mchirp_msun: ArrayLike,
    fcut_hz: ArrayLike,
    weights: ArrayLike,
    kernels: RedshiftKernels,
    rho_crit_msun_mpc3: float,
    rate_gpc3_yr: float = 1.0,
    chunk: int = 2_000_000,
) -> NDArray[np.float64]:
    """Inspiral background spectrum ``Omega_gw(f)`` at observed frequencies ``f_hz``.

    Phinney 2001 (arXiv:astro-ph/0108028, section 2):
    ``Omega_gw(f) = f / (rho_c c^2) integral_0^zmax R(z) |dt/dz| <dE/df_s>(f (1+z)) dz``, with
    the weighted population mean of the source-frame spectrum :func:`inspiral_dedf` of each row
    (chirp mass ``mchirp_msun``), cut off above its ``fcut_hz`` (source frame). For one row the
    cut-off truncates the redshift integral at ``1 + z = fcut / f``, so the integral is read
    exactly from the cumulative kernel ``kernels.spectral`` (linear interpolation in ln(1+z));
    below ``min(fcut) / (1 + zmax)`` the spectrum is exactly proportional to ``f^(2/3)``.
    ``rate_gpc3_yr`` is the rate density at the evolution's ``z_ref``. Inspiral only (no
    merger-ringdown part); Newtonian order.
    """
    f = np.atleast_1d(np.asarray(f_hz, dtype=np.float64))
    mc = np.atleast_1d(np.asarray(mchirp_msun, dtype=np.float64))
    fc = np.atleast_1d(np.asarray(fcut_hz, dtype=np.float64))
    w = np.atleast_1d(np.asarray(weights, dtype=np.float64))
    if not (mc.shape == fc.shape == w.shape) or mc.ndim != 1:
        raise OptionError("chirp masses, cut-off frequencies and weights must be 1-D, same length")
    total_w = float(w.sum())
    if not (total_w > 0 and np.all(w >= 0)):
        raise OptionError("spectrum weights must be >= 0 with a positive sum")
    wn = w / total_w
    u_grid = np.log1p(kernels.z)
    amp = inspiral_dedf(1.0, mc) * wn  # per row: (pi^(2/3)/3) T^(2/3) Mc^(5/3) * weight
    out = np.zeros(f.shape, dtype=np.float64)
    step = max(1, chunk // max(1, f.size))
    for start in range(0, mc.size, step):  # chunks of rows bound the (f x rows) memory
        sl = slice(start, start + step)
        zcut = np.clip(fc[None, sl] / f[:, None] - 1.0, 0.0, kernels.zmax)
        k = np.interp(np.log1p(zcut), u_grid, kernels.spectral)
        out += k @ amp[sl]
    return rate_gpc3_yr / MPC3_PER_GPC3 * f ** (2.0 / 3.0) * out / rho_crit_msun_mpc3


def spectrum_integral(f_hz: ArrayLike, omega: ArrayLike) -> Any:
    """``integral Omega_gw(f) d ln f`` from 0 to ``f_hz[-1]`` (Simpson's rule in ln f).

    Below the first grid point the spectrum is taken as the pure inspiral power law
    ``f^(2/3)``, whose integral is ``(3/2) Omega_gw(f_0)`` (exact when ``f_0`` lies below every
    redshifted cut-off). Equals Omega_gw of the inspiral energy when the grid reaches the
    highest cut-off (Phinney 2001: the spectrum integrates to the energy density). ``omega``
    may carry leading axes (e.g. draws); the last axis is frequency. Returns a float for 1-D
    input, else an array.
    """
    from scipy.integrate import simpson

    f = np.asarray(f_hz, dtype=np.float64)
    om = np.asarray(omega, dtype=np.float64)
    out = simpson(om, x=np.log(f), axis=-1) + 1.5 * om[..., 0]
    return float(out) if np.ndim(out) == 0 else out


def frequency_grid(f_min: float, f_max: float, per_decade: int = 25) -> NDArray[np.float64]:
    """Log-spaced observed frequencies from ``f_min`` to ``f_max`` (Hz), both included."""
    if not (np.isfinite(f_min) and np.isfinite(f_max) and 0 < f_min < f_max):
        raise OptionError(f"frequency range {f_min!r}..{f_max!r} Hz must satisfy 0 < min < max")
    n = max(3, math.ceil(per_decade * math.log10(f_max / f_min)) + 1)
    return np.geomspace(f_min, f_max, n)


# --------------------------------------------------------------------------------------------
# Cosmology
# --------------------------------------------------------------------------------------------


def resolve_cosmology(spec: Any = None) -> FLRW:
    """An astropy cosmology from ``None`` (Planck18), a realization name (case-insensitive), a
    cosmology object, or a metadata dict (schema.META_COSMOLOGY, as written by the ingest stage).

    A dict whose name is not one of astropy's realizations is rebuilt as a flat LambdaCDM from
    its ``H0_km_s_Mpc`` (or ``H0``), ``Om0`` and ``Tcmb0_K`` (or ``Tcmb0``, default 0);
    anything else raises :class:`OptionError`.
    """
    from astropy import cosmology as ac

    from gwdeficit.convert import DEFAULT_COSMOLOGY, available_cosmologies, get_cosmology

    if spec is None:
        return get_cosmology(DEFAULT_COSMOLOGY)
    if isinstance(spec, ac.FLRW):
        return spec
    name = spec.get("name") if isinstance(spec, Mapping) else spec
    known = {n.lower() for n in available_cosmologies()}
    if isinstance(name, str) and name.strip().lower() in known:
        return get_cosmology(name)
    if isinstance(spec, Mapping):
        h0 = spec.get("H0_km_s_Mpc", spec.get("H0"))
        om0 = spec.get("Om0")
        if h0 is not None and om0 is not None:
            try:
                tcmb = float(spec.get("Tcmb0_K", spec.get("Tcmb0", 0.0)) or 0.0)
                return ac.FlatLambdaCDM(
                    H0=float(h0), Om0=float(om0), Tcmb0=tcmb, name=str(name or "custom")
                )
            except (TypeError, ValueError) as exc:
                raise OptionError(f"cosmology {dict(spec)!r} cannot be rebuilt: {exc}") from exc
    raise OptionError(
        f"cosmology {name!r} is not known; valid: {', '.join(available_cosmologies())}, or a "
        "dict with H0_km_s_Mpc and Om0"
    )


def describe_cosmology(cosmology: FLRW) -> dict[str, Any]:
    """JSON-able description of a cosmology for schema.META_COSMOLOGY.

    A built-in realization is described by ``convert.cosmology_record``; any other cosmology
    with the same keys where they apply.
    """
    from gwdeficit.convert import available_cosmologies, cosmology_record, get_cosmology

    name = cosmology.name
    if name in available_cosmologies() and get_cosmology(name) == cosmology:
        return cosmology_record(name)
    return {
        "name": name,
        "class": type(cosmology).__name__,
        "H0_km_s_Mpc": float(cosmology.H0.to_value("km / (Mpc s)")),
        "Om0": float(cosmology.Om0),
        "Ode0": float(cosmology.Ode0),
        "Tcmb0_K": float(cosmology.Tcmb0.to_value("K")),
    }


# --------------------------------------------------------------------------------------------
# Tidy output table from draws
# --------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class SpectrumShape:
    """Population-mean inspiral spectrum per unit rate, with the inspiral energy behind it.

    ``omega_per_rate``: Omega_gw(f) for a rate density of 1 Gpc^-3 yr^-1 at z_ref;
    ``einsp_mean_msun``: the weighted mean inspiral energy per merger of the rows used (the
    spectrum's amplitude is proportional to it); ``rows``: how many rows it was computed from.
    """

    f_hz: NDArray[np.float64]
    omega_per_rate: NDArray[np.float64]
    einsp_mean_msun: float
    rows: int


@dataclass(frozen=True)
class DrawBlock:
    """Draws of one output quantity: ``values`` has shape (n_draws, m) for the m points of its
    axis (redshift, frequency, or a single total)."""

    section: str
    quantity: str
    unit: str
    values: NDArray[np.float64]
    z: NDArray[np.float64] | None = None
    lookback_gyr: NDArray[np.float64] | None = None
    f_hz: NDArray[np.float64] | None = None

    @property
    def key(self) -> tuple[str, str]:
        return (self.section, self.quantity)


def energy_density_erg_cm3(msun_c2_per_mpc3: ArrayLike = 1.0) -> NDArray[np.float64]:
    """Convert an energy density from Msun c^2 Mpc^-3 to erg cm^-3 (astropy units, constants)."""
    import astropy.constants as const
    import astropy.units as u

    factor = (u.Msun * const.c**2 / u.Mpc**3).to_value("erg / cm3")
    return np.asarray(msun_c2_per_mpc3, dtype=np.float64) * factor


def budget_draws(
    kernels: RedshiftKernels,
    rate_draws: ArrayLike,
    mean_draws: Mapping[str, ArrayLike],
    rho_crit_msun_mpc3: float,
    spectrum: SpectrumShape | None = None,
    stride: int = ZGRID_STRIDE,
) -> list[DrawBlock]:
    """Every output quantity, per draw, from paired draws of the rate and the per-merger means.

    ``rate_draws``: rate density at the evolution's z_ref (Gpc^-3 yr^-1), one per draw;
    ``mean_draws``: per quantity in :data:`MEAN_COLUMNS` (and optionally
    :data:`INSPIRAL_COLUMN`), the population mean per merger (Msun, or Msun c^2) in the same
    draws. Draw ``d`` pairs ``rate_draws[d]`` with every ``mean_draws[q][d]``.

    Quantities (``section``):

    - ``total``: ``merger_density`` (Mpc^-3, mergers since zmax), ``<q>_density`` (Msun Mpc^-3,
      comoving mass density lost since zmax, q = erad, ejected, deficit), ``gw_energy_density``
      (erg cm^-3) and ``gw_energy_density_msun`` (Msun c^2 Mpc^-3, written "solMass / Mpc3"),
      ``omega_gw`` and, with a spectrum, ``omega_gw_inspiral`` (from the inspiral energy);
    - ``history`` against z and lookback time: ``merger_rate`` (Gpc^-3 yr^-1), ``<q>_rate``
      (Msun Mpc^-3 yr^-1), ``<q>_density_before`` (lost by mergers between zmax and z, i.e. up
      to that epoch), ``<q>_density_since`` (lost by mergers between z and today) and
      ``omega_gw_since`` (today's Omega_gw from mergers below z);
    - ``spectrum`` against observed frequency: ``omega_gw_inspiral``. Its spread comes from the
      rate draws and the bootstrap of the mean inspiral energy (the amplitude); its shape is
      the population mean of the rows used (:class:`SpectrumShape`).
    """
    rate = np.asarray(rate_draws, dtype=np.float64).reshape(-1)
    n = rate.size
    means = {k: np.asarray(v, dtype=np.float64).reshape(-1) for k, v in mean_draws.items()}
    for k, v in means.items():
        if v.size != n:
            raise OptionError(f"{v.size} draws of {k!r} but {n} rate draws; they must pair up")
    idx = np.unique(np.r_[np.arange(0, kernels.z.size, stride), kernels.z.size - 1])
    zk = {"z": kernels.z[idx], "lookback_gyr": kernels.lookback_gyr[idx]}
    rate_mpc = rate / MPC3_PER_GPC3  # Mpc^-3 yr^-1 at z_ref
    rho_c = float(rho_crit_msun_mpc3)
    present = [q for q in MEAN_COLUMNS if q in means]
    out: list[DrawBlock] = []

    def total(quantity: str, unit: str, values: NDArray[np.float64]) -> None:
        out.append(DrawBlock("total", quantity, unit, values.reshape(n, 1)))

    def history(quantity: str, unit: str, scale: NDArray[np.float64], kernel: NDArray) -> None:
        out.append(DrawBlock("history", quantity, unit, np.outer(scale, kernel), **zk))

    total("merger_density", "1 / Mpc3", rate_mpc * kernels.number[-1])
    for col in present:
        name = col.removesuffix("_msun")
        total(f"{name}_density", "solMass / Mpc3", rate_mpc * means[col] * kernels.number[-1])
    if "erad_msun" in means:
        rho_gw = rate_mpc * means["erad_msun"] * kernels.energy[-1]  # Msun c^2 / Mpc^3
        total("gw_energy_density", "erg / cm3", energy_density_erg_cm3(rho_gw))
        total("gw_energy_density_msun", "solMass / Mpc3", rho_gw)
        total("omega_gw", "", rho_gw / rho_c)
    if spectrum is not None and INSPIRAL_COLUMN in means:
        total(
            "omega_gw_inspiral", "", rate_mpc * means[INSPIRAL_COLUMN] * kernels.energy[-1] / rho_c
        )

    history("merger_rate", "1 / (Gpc3 yr)", rate, kernels.rate_factor[idx])
    number = kernels.number[idx]
    for col in present:
        name = col.removesuffix("_msun")
        scale = rate_mpc * means[col]
        history(f"{name}_rate", "solMass / (Mpc3 yr)", scale, kernels.rate_factor[idx])
        history(f"{name}_density_before", "solMass / Mpc3", scale, kernels.number[-1] - number)
        history(f"{name}_density_since", "solMass / Mpc3", scale, number)
    if "erad_msun" in means:
        history("omega_gw_since", "", rate_mpc * means["erad_msun"] / rho_c, kernels.energy[idx])

    if spectrum is not None:
        if INSPIRAL_COLUMN in means and spectrum.einsp_mean_msun > 0:
            amp = rate * means[INSPIRAL_COLUMN] / spectrum.einsp_mean_msun
        else:
            amp = rate
        out.append(
            DrawBlock(
                "spectrum",
                "omega_gw_inspiral",
                "",
                np.outer(amp, spectrum.omega_per_rate),
                f_hz=spectrum.f_hz,
            )
        )
    return out


def sum_draws(groups: Sequence[Sequence[DrawBlock]]) -> list[DrawBlock]:
    """Per-draw sum over independent populations (kinds) of the quantities all of them have.

    Every quantity of :func:`budget_draws` is additive over populations (rates, densities,
    Omega_gw); the groups must share their redshift and frequency axes.
    """
    if not groups:
        return []
    keyed = [{b.key: b for b in g} for g in groups]
    common = [k for k in keyed[0] if all(k in g for g in keyed[1:])]
    out = []
    for k in common:
        first = keyed[0][k]
        values = np.sum([g[k].values for g in keyed], axis=0)
        out.append(
            DrawBlock(
                first.section,
                first.quantity,
                first.unit,
                values,
                first.z,
                first.lookback_gyr,
                first.f_hz,
            )
        )
    return out


def budget_table(blocks_by_kind: Mapping[str, Sequence[DrawBlock]]) -> pd.DataFrame:
    """The tidy cosmic-budget table: one row per kind x quantity x axis point.

    Columns :data:`TABLE_COLUMNS`: section, kind, quantity, unit, z, lookback_gyr (Gyr), f_hz
    (Hz) (NaN where not the row's axis), then the median and the 68% and 90% central intervals
    over draws (quantiles 0.16/0.84 and 0.05/0.95).
    """
    import pandas as pd

    frames = []
    for kind, blocks in blocks_by_kind.items():
        for b in blocks:
            qs = np.quantile(b.values, list(QUANTILES.values()), axis=0)
            m = qs.shape[1]
            nan = np.full(m, np.nan)
            frames.append(
                pd.DataFrame(
                    {
                        "section": b.section,
                        "kind": kind,
                        "quantity": b.quantity,
                        "unit": b.unit,
                        "z": nan if b.z is None else b.z,
                        "lookback_gyr": nan if b.lookback_gyr is None else b.lookback_gyr,
                        "f_hz": nan if b.f_hz is None else b.f_hz,
                        **{name: qs[i] for i, name in enumerate(QUANTILES)},
                    }
                )
            )
    if not frames:
        return pd.DataFrame({c: pd.Series(dtype="float64") for c in TABLE_COLUMNS})
    return pd.concat(frames, ignore_index=True)[list(TABLE_COLUMNS)]


# --------------------------------------------------------------------------------------------
# The API on a remnants table
# --------------------------------------------------------------------------------------------


class RateModelLike(Protocol):
    """What the cosmic budget needs of a rate model (``gwdeficit.rates.RateModel``)."""

    evolution: RateEvolution

    @property
    def median(self) -> float: ...

    def draw(self, n: int, rng: np.random.Generator) -> NDArray[np.float64]: ...

    def describe(self) -> dict: ...


#: Columns of the remnants table the cosmic budget reads.
REQUIRED_COLUMNS: tuple[str, ...] = (
    "remnant_status",
    "event",
    "sample",
    "weight",
    "kind",
    "m1_msun",
    "m2_msun",
    "mf_msun",
    *MEAN_COLUMNS,
)


@dataclass(frozen=True)
class CosmicBudget:
    """Result of :func:`cosmic_budget`.

    ``table``: the tidy table (:func:`budget_table`); ``summary``: JSON-able headline numbers,
    counts and notes; ``meta``: Parquet metadata for ``cosmic.parquet`` (units, rate model,
    cosmology, provenance with this stage's record, summary); ``warnings``: what the user must
    be told (extrapolations, rows left out); ``notes``: the model's standing caveats.
    """

    table: pd.DataFrame
    summary: dict[str, Any]
    meta: dict[str, Any]
    warnings: tuple[str, ...] = field(default_factory=tuple)
    notes: tuple[str, ...] = field(default_factory=tuple)


#: Helper columns added to a copy of the remnants table for the spectrum.
_MCHIRP = "mchirp_msun"
_FCUT = "fcut_hz"


def population_weights(pop: Any) -> NDArray[np.float64]:
    """Row weights of the population mean per merger for a ``resample.Population``.

    The mean of ``x`` is ``sum_e W_e E_e[s x] / sum_e W_e E_e[s]`` (resample module docstring):
    row ``r`` of event ``e`` weighs ``W_e w_r s_r / sum_{r in e} w_r``, in the population's
    (sorted) row order. Normalised to sum to one.
    """
    ev = np.repeat(np.arange(pop.n_events), pop.counts)
    wsum = np.add.reduceat(pop.row_weight, pop.starts)
    w = pop.event_weight[ev] * pop.row_weight * pop.row_factor / wsum[ev]
    return w / w.sum()


def _spectrum_shape(
    pop: Any,
    f_hz: NDArray[np.float64],
    kernels: RedshiftKernels,
    rho_c: float,
    max_rows: int,
    rng: np.random.Generator,
) -> SpectrumShape:
    mc = pop.values[_MCHIRP][:, 0]
    fcut = pop.values[_FCUT][:, 0]
    w = population_weights(pop)
    ok = np.isfinite(mc) & np.isfinite(fcut) & (mc > 0) & (fcut > 0) & (w > 0)
    mc, fcut, w = mc[ok], fcut[ok], w[ok]
    if mc.size > max_rows:  # uniform subsample keeping each row's weight (ratio estimator)
        keep = np.sort(rng.choice(mc.size, size=max_rows, replace=False))
        mc, fcut, w = mc[keep], fcut[keep], w[keep]
    omega = omega_gw_inspiral(f_hz, mc, fcut, w, kernels, rho_c)
    einsp = float(np.sum(w * inspiral_energy(mc, fcut)) / np.sum(w))
    return SpectrumShape(f_hz=f_hz, omega_per_rate=omega, einsp_mean_msun=einsp, rows=mc.size)


def _interval(values: NDArray[np.float64]) -> dict[str, float]:
    qs = np.quantile(values, list(QUANTILES.values()))
    return {name: float(qs[i]) for i, name in enumerate(QUANTILES)}


def _with_spectrum_columns(remnants: pd.DataFrame) -> pd.DataFrame:
    m1 = remnants["m1_msun"].to_numpy(np.float64)
    m2 = remnants["m2_msun"].to_numpy(np.float64)
    mf = remnants["mf_msun"].to_numpy(np.float64)
    frame = remnants.copy()
    with np.errstate(invalid="ignore", divide="ignore"):
        frame[_MCHIRP] = chirp_mass(m1, m2)
        frame[_FCUT] = isco_gw_frequency(mf)
        frame[INSPIRAL_COLUMN] = inspiral_energy(frame[_MCHIRP], frame[_FCUT])
    return frame


def cosmic_budget(
    remnants: pd.DataFrame,
    rate_model: RateModelLike | Mapping[str, RateModelLike],
    cosmology: Any = None,
    *,
    zmax: float = DEFAULT_ZMAX,
    n_draws: int = 2000,
    seed: int | None = 0,
    rng: np.random.Generator | None = None,
    spectrum: bool = True,
    f_min_hz: float = 1e-5,
    per_decade: int = 40,
    spectrum_rows: int = SPECTRUM_ROWS,
    sources: Collection[str] = ("catalogue", "posterior", "rate", "fits"),
    selection: str = "none",
    inputs: Mapping[str, str] | None = None,
    source_name: str = "remnants table",
) -> CosmicBudget:
    """Gravitational-wave energy density and mass-density history of a merging population.

    ``remnants``: the remnants table (schema.REMNANT_COLUMNS with the catalogue columns);
    ``rate_model``: one rate model for the whole table, or a mapping kind -> rate model (each
    kind with its own rate and evolution; events count in their majority kind, see
    ``resample.event_kinds``; kinds without a rate or without estimated rows are left out and
    said so; the kinds are also summed as "all"); ``cosmology``: an astropy cosmology, a
    realization name or a META_COSMOLOGY dict (default: the table's metadata, else Planck18).

    Per draw (``n_draws``, seeded by ``seed`` or the given ``rng``) a rate is drawn from the
    model and the population means per merger of erad, ejected and deficit (and of the inspiral
    energy up to the remnant's Schwarzschild ISCO) come from ``resample.bootstrap_means`` with
    the error ``sources`` switched on (``"rate"`` off holds the rate at the model's median);
    ``selection`` as there. Formulas: :func:`redshift_kernels`, :func:`omega_gw_inspiral`,
    :func:`budget_draws`. ``inputs`` ({path: sha256}) goes into this stage's provenance record;
    ``source_name`` names the table in error messages.
    """
    from gwdeficit.resample import bootstrap_means, event_kinds, prepare_population
    from gwdeficit.schema import (
        META_COSMOLOGY,
        META_PROVENANCE,
        META_RATE_MODEL,
        META_SUMMARY,
        META_UNITS,
    )
    from gwdeficit.workdir import merge_provenance, provenance_record

    missing = [c for c in REQUIRED_COLUMNS if c not in remnants.columns]
    if missing:
        raise SchemaError(
            f"{source_name}: missing column(s) {', '.join(missing)}; the cosmic budget needs a "
            "remnants table (run 'gwdeficit remnant' first)"
        )
    if isinstance(n_draws, bool) or not (isinstance(n_draws, int | np.integer) and n_draws >= 1):
        raise OptionError(f"--draws {n_draws!r}: must be an integer >= 1")
    if not (np.isfinite(zmax) and 0 < zmax <= 1000):
        raise OptionError(f"--zmax {zmax!r}: must be a number in (0, 1000]")
    if spectrum_rows < 1:
        raise OptionError(f"spectrum_rows {spectrum_rows!r}: must be >= 1")
    if spectrum and not (np.isfinite(f_min_hz) and f_min_hz > 0):
        raise OptionError(f"lowest frequency {f_min_hz!r} Hz must be a positive number")
    n_draws = int(n_draws)
    rng = np.random.default_rng(seed) if rng is None else rng
    cosmo = resolve_cosmology(
        cosmology if cosmology is not None else remnants.attrs.get(META_COSMOLOGY)
    )
    rho_c = critical_density(cosmo)
    stat_sources = [s for s in sources if s != "rate"]
    warnings: list[str] = []
    notes: list[str] = []
    if cosmology is None and remnants.attrs.get(META_COSMOLOGY) is None:
        notes.append("the input names no cosmology; Planck18 (astropy) is used")
    frame = _with_spectrum_columns(remnants)
    columns = [*MEAN_COLUMNS, INSPIRAL_COLUMN] if spectrum else list(MEAN_COLUMNS)
    prepared = [*columns, _MCHIRP, _FCUT] if spectrum else columns

    # Populations: (label, kind filter for resample, rate model)
    groups: list[tuple[str, str | None, RateModelLike]] = []
    if isinstance(rate_model, Mapping):
        ev_kind = event_kinds(remnants)  # each event counts in its majority kind
        kinds_present = sorted(set(ev_kind.astype(str)))
        for k in sorted(set(rate_model) - set(kinds_present)):
            warnings.append(f"a rate was given for {k} but the table has no {k} events; left out")
        for k in kinds_present:
            if k not in rate_model:
                n_k = int((ev_kind.astype(str) == k).sum())
                warnings.append(f"no rate given for {k}: its {n_k} event(s) are left out")
                continue
            groups.append((k, k, rate_model[k]))
    else:
        kinds_present = sorted(set(remnants["kind"].astype(str)))
        label = kinds_present[0] if len(kinds_present) == 1 else "all"
        groups.append((label, None, rate_model))

    counts: dict[str, dict[str, Any]] = {}
    used: list[tuple[str, str | None, RateModelLike, Any]] = []
    for label, kind, model in groups:
        try:
            pop = prepare_population(
                frame, prepared, selection=selection, kind=kind, source=source_name
            )
        except SchemaError as exc:
            if kind is None:
                raise
            warnings.append(f"{label}: left out ({exc})")
            continue
        info = pop.info
        counts[label] = {
            k: info.get(k)
            for k in (
                "rows_in",
                "rows_used",
                "rows_not_estimated",
                "rows_zero_weight_events",
                "events_in",
                "events_used",
                "events_zero_weight",
                "not_estimated_reasons",
            )
        }
        if info.get("rows_not_estimated"):
            warnings.append(
                f"{label}: {info['rows_not_estimated']} of {info['rows_in']} row(s) have no "
                "remnant estimate (remnant_status not_estimated); left out of the mean per merger"
            )
        if info.get("events_zero_weight"):
            warnings.append(
                f"{label}: {info['events_zero_weight']} event(s) with zero total weight left out"
            )
        used.append((label, kind, model, pop))
    if not used:
        raise OptionError(f"{source_name}: no population with both estimated rows and a rate")

    for label, _, model, _ in used:
        if model.evolution.kind == "madau-dickinson" and zmax > MADAU_DICKINSON_ZMAX:
            warnings.append(
                f"{label}: the Madau & Dickinson 2014 shape is fitted for 0 < z < 8; "
                f"integrating to zmax = {zmax:g} extrapolates it"
            )

    f_grid = None
    if spectrum:
        fc_all = np.concatenate([pop.values[_FCUT][:, 0] for *_, pop in used])
        fc_all = fc_all[np.isfinite(fc_all) & (fc_all > 0)]
        if fc_all.size == 0:
            warnings.append("spectrum: no row with a remnant mass; no spectrum computed")
        elif float(fc_all.max()) <= f_min_hz:
            raise OptionError(
                f"lowest frequency {f_min_hz:g} Hz is above every inspiral cut-off "
                f"(highest {float(fc_all.max()):.4g} Hz)"
            )
        else:
            f_grid = frequency_grid(f_min_hz, float(fc_all.max()), per_decade)
            notes.append(
                "spectrum: inspiral only (quadrupole dE/df up to the Schwarzschild ISCO of the "
                "remnant mass); no merger-ringdown part"
            )
            ev_kind = event_kinds(remnants).astype(str)
            used_kinds = {k for _, k, _, _ in used}
            ns = {"BNS", "NSBH"} & (set(ev_kind) if None in used_kinds else used_kinds)
            if ns:
                notes.append(
                    "spectrum: for neutron-star binaries the ISCO cut-off ignores tidal "
                    "disruption and contact, which end the inspiral earlier"
                )

    kernel_cache: dict[RateEvolution, RedshiftKernels] = {}
    blocks: dict[str, list[DrawBlock]] = {}
    details: dict[str, dict[str, Any]] = {}
    for label, kind, model, pop in used:
        ev = model.evolution
        if ev not in kernel_cache:
            kernel_cache[ev] = redshift_kernels(ev, cosmo, zmax)
        kernels = kernel_cache[ev]
        if "rate" in sources:
            rates = np.asarray(model.draw(n_draws, rng), dtype=np.float64).reshape(-1)
        else:
            rates = np.full(n_draws, float(model.median))
        group_columns = list(columns)
        shape = None
        if f_grid is not None:
            einsp = pop.values[INSPIRAL_COLUMN][:, 0]
            n_bad = int((~np.isfinite(einsp)).sum())
            if n_bad:
                group_columns.remove(INSPIRAL_COLUMN)
                warnings.append(
                    f"{label}: {n_bad} row(s) without a finite remnant mass are left out of the "
                    "spectrum's shape; its band then reflects the rate only"
                )
            shape = _spectrum_shape(pop, f_grid, kernels, rho_c, spectrum_rows, rng)
            if shape.rows < pop.n_rows - n_bad:
                warnings.append(
                    f"{label}: spectrum shape from a random {shape.rows} of "
                    f"{pop.n_rows - n_bad} rows"
                )
        elif INSPIRAL_COLUMN in group_columns:
            group_columns.remove(INSPIRAL_COLUMN)
        means = bootstrap_means(
            frame,
            group_columns,
            n_draws,
            rng,
            sources=stat_sources,
            selection=selection,
            kind=kind,
        )
        blocks[label] = budget_draws(kernels, rates, means, rho_c, shape)
        details[label] = {
            "rate_model": model.describe(),
            "mean_per_merger_msun": {
                c: _interval(np.asarray(means[c], dtype=np.float64)) for c in group_columns
            },
            "spectrum_rows": None if shape is None else shape.rows,
        }
    if len(used) > 1:
        blocks["all"] = sum_draws(list(blocks.values()))

    table = budget_table(blocks)
    some_kernels = next(iter(kernel_cache.values()))
    totals: dict[str, dict[str, Any]] = {}
    for label, bl in blocks.items():
        totals[label] = {
            b.quantity: {"unit": b.unit, **_interval(b.values[:, 0])}
            for b in bl
            if b.section == "total"
        }
        spec = [b for b in bl if b.section == "spectrum"]
        tot = [b for b in bl if b.key == ("total", "omega_gw_inspiral")]
        if spec and tot:  # per draw: integral of the spectrum / Omega_gw of the inspiral energy
            ratio = spectrum_integral(spec[0].f_hz, spec[0].values) / tot[0].values[:, 0]
            totals[label]["spectrum_integral_rel_diff"] = float(np.max(np.abs(ratio - 1.0)))
    summary: dict[str, Any] = {
        "source": source_name,
        "zmax": float(zmax),
        "lookback_gyr_at_zmax": float(some_kernels.lookback_gyr[-1]),
        "cosmology": describe_cosmology(cosmo),
        "critical_density_msun_mpc3": rho_c,
        "draws": n_draws,
        "seed": seed,
        "sources": sorted(sources),
        "selection": selection,
        "kinds": details,
        "counts": counts,
        "totals": totals,
        "spectrum": None
        if f_grid is None
        else {
            "f_min_hz": float(f_grid[0]),
            "f_max_hz": float(f_grid[-1]),
            "points": int(f_grid.size),
            "model": "inspiral only, quadrupole dE/df up to the remnant's Schwarzschild ISCO",
        },
        "warnings": list(warnings),
        "notes": list(notes),
    }
    units = {"z": "", "lookback_gyr": "Gyr", "f_hz": "Hz"}
    units.update(dict(zip(table["quantity"], table["unit"], strict=True)))
    record = provenance_record(
        "cosmic",
        inputs=inputs,
        zmax=float(zmax),
        draws=n_draws,
        seed=seed,
        spectrum=bool(spectrum),
        f_min_hz=float(f_min_hz),
        sources=sorted(sources),
        selection=selection,
    )
    rate_meta: Any
    if isinstance(rate_model, Mapping):
        rate_meta = {k: m.describe() for k, m in rate_model.items()}
    else:
        rate_meta = rate_model.describe()
    meta = {
        META_UNITS: units,
        META_RATE_MODEL: rate_meta,
        META_COSMOLOGY: describe_cosmology(cosmo),
        META_PROVENANCE: merge_provenance(remnants.attrs, record),
        META_SUMMARY: summary,
    }
    return CosmicBudget(
        table=table, summary=summary, meta=meta, warnings=tuple(warnings), notes=tuple(notes)
    )
