"""Volume specifications and the comoving-volume integrals that turn a rate density into a count.

A merger-rate density ``R`` (Gpc^-3 yr^-1 at the rate's reference redshift) becomes a number of
mergers per year in a volume through :meth:`Volume.effective_gpc3`, the rate-weighted comoving
volume in Gpc^3: ``N_dot = R(z_ref) * effective_gpc3``. The forms:

- ``mw``: one Milky-Way-equivalent galaxy (MWEG), ``1 / n_gal`` of comoving volume with the MWEG
  number density ``n_gal`` = 0.0116 Mpc^-3 (Kopparapu et al. 2008, ApJ 675, 1459), at z = 0.
- ``gpc3`` / ``mpc3``: one comoving Gpc^3 / Mpc^3 at z = 0.
- ``stellar:MASS``: a galaxy of stellar mass MASS (Msun), ``MASS / rho_star`` of comoving volume,
  with the local stellar-mass density rho_star of :data:`STELLAR_DENSITY_MSUN_MPC3`.
- ``sphere:RADIUS``: the comoving ball of that radius (Mpc) around us,
  ``integral_0^{z(RADIUS)} R(z) dV_c/dz dz``, the rate's redshift evolution included; time is the
  sources' own (source frame), as for the local forms above.
- ``cosmic`` / ``cosmic:ZMAX``: the whole sky out to ZMAX (default 10),
  ``integral_0^ZMAX R(z) / (1+z) dV_c/dz dz``: the rate an observer counts (observer-frame time,
  hence the 1/(1+z) time dilation).

``dV_c/dz`` is astropy's ``differential_comoving_volume`` (times 4 pi sr) for the chosen
cosmology; the integrals use Simpson's rule on a fine uniform redshift grid.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Iterable
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

import numpy as np
from numpy.typing import NDArray

from gwdeficit.rates import RateEvolution
from gwdeficit.schema import OptionError

if TYPE_CHECKING:
    from astropy.cosmology import FLRW

#: Number density of Milky-Way-equivalent galaxies, Mpc^-3 (Kopparapu et al. 2008, ApJ 675,
#: 1459, from the blue luminosity density of nearby galaxies).
MWEG_DENSITY_MPC3 = 0.0116

#: Local stellar-mass density in Msun Mpc^-3: Omega_star = 0.0027 of the critical density for
#: h = 0.7 (Fukugita & Peebles 2004, ApJ 616, 643, their inventory of stars in spheroids, disks
#: and irregulars; from memory), i.e. 0.0027 * 2.775e11 h^2 Msun Mpc^-3 = 3.7e8 Msun Mpc^-3.
STELLAR_DENSITY_MSUN_MPC3 = 3.7e8

#: Upper redshift of a bare ``cosmic`` volume.
COSMIC_ZMAX_DEFAULT = 10.0

#: Largest ZMAX accepted (beyond recombination the merger-rate models mean nothing).
COSMIC_ZMAX_LIMIT = 1000.0

#: Points of the redshift grid of the volume integrals (odd, for Simpson's rule).
ZGRID_POINTS = 4097

VOLUME_FORMS = ("mw", "gpc3", "mpc3", "stellar:MASS", "sphere:RADIUS", "cosmic", "cosmic:ZMAX")
VOLUME_FORMS_HELP = (
    "valid forms: mw (one Milky-Way-equivalent galaxy), gpc3, mpc3 (per comoving Gpc^3 / Mpc^3), "
    "stellar:MASS (a galaxy of stellar mass MASS in Msun, e.g. stellar:6e10), sphere:RADIUS "
    "(comoving sphere, RADIUS in Mpc or with a unit, e.g. sphere:100 or sphere:1Gpc), cosmic or "
    "cosmic:ZMAX (whole sky to redshift ZMAX, default 10)"
)

_MPC3_PER_GPC3 = 1.0e9


def resolve_cosmology(spec: Any = None) -> FLRW:
    """An astropy cosmology from None (Planck18), a name, a cosmology or a metadata dict.

    Delegates to :func:`gwdeficit.cosmic.resolve_cosmology` so that every stage rebuilds the
    catalogue's cosmology (schema.META_COSMOLOGY) the same way.
    """
    from gwdeficit.cosmic import resolve_cosmology as _resolve

    return _resolve(spec)


def describe_cosmology(cosmology: FLRW) -> dict[str, Any]:
    """JSON-able description of a cosmology for schema.META_COSMOLOGY."""
    from gwdeficit.cosmic import describe_cosmology as _describe

    return _describe(cosmology)


def comoving_volume_integral(
    cosmology: FLRW,
    z_max: float,
    weight: Callable[[NDArray[np.float64]], NDArray[np.float64]] | None = None,
    observer_frame: bool = False,
    n: int = ZGRID_POINTS,
) -> float:
    """``integral_0^z_max w(z) [1/(1+z)] dV_c/dz dz`` over the whole sky, in Gpc^3.

    ``dV_c/dz = 4 pi * cosmology.differential_comoving_volume(z)`` (astropy; Hogg 1999,
    arXiv:astro-ph/9905116, eq. 28); ``w`` is a vectorised weight (a rate shape), default 1; the
    ``1/(1+z)`` factor is included when ``observer_frame``. Simpson's rule on ``n`` uniform points.
    With ``w = 1`` and no 1/(1+z) this is astropy's ``comoving_volume(z_max)``.
    """
    from scipy.integrate import simpson

    z_max = float(z_max)
    if not (np.isfinite(z_max) and z_max >= 0):
        raise OptionError(f"upper redshift {z_max!r} must be a finite number >= 0")
    if z_max == 0:
        return 0.0
    n = int(n) | 1
    z = np.linspace(0.0, z_max, n)
    dvdz = 4.0 * np.pi * cosmology.differential_comoving_volume(z).to_value("Gpc3 / sr")
    if weight is not None:
        dvdz = dvdz * np.asarray(weight(z), dtype=np.float64)
    if observer_frame:
        dvdz = dvdz / (1.0 + z)
    return float(simpson(dvdz, x=z))


def redshift_at_comoving_distance(cosmology: FLRW, distance_mpc: float) -> float:
    """Redshift whose line-of-sight comoving distance is ``distance_mpc`` (astropy z_at_value)."""
    import astropy.units as u
    from astropy.cosmology import z_at_value

    d = float(distance_mpc)
    horizon = float(cosmology.comoving_distance(1.0e4).to_value("Mpc"))
    if not (np.isfinite(d) and 0 < d < horizon):
        raise OptionError(
            f"sphere radius {d:g} Mpc must be positive and below the comoving distance to "
            f"z = 1e4 ({horizon:.0f} Mpc) in {cosmology.name or 'this cosmology'}"
        )
    z = z_at_value(cosmology.comoving_distance, d * u.Mpc, zmin=0.0, zmax=1.0e4, ztol=1e-12)
    return float(np.asarray(getattr(z, "value", z)))


@dataclass(frozen=True)
class Volume:
    """A parsed volume specification.

    spec: the text as given, normalised (lower case, no spaces), e.g. ``"sphere:100"``.
    form: ``mw``, ``gpc3``, ``mpc3``, ``stellar``, ``sphere`` or ``cosmic``.
    value: stellar mass (Msun), sphere radius (comoving Mpc) or ZMAX; NaN for the others.
    """

    spec: str
    form: str
    value: float = math.nan

    @property
    def observer_frame(self) -> bool:
        """True when the volume's count is per unit observer-frame time (``cosmic``)."""
        return self.form == "cosmic"

    @property
    def label(self) -> str:
        """Human-readable description."""
        if self.form == "mw":
            return "one Milky-Way-equivalent galaxy"
        if self.form == "gpc3":
            return "one comoving Gpc^3"
        if self.form == "mpc3":
            return "one comoving Mpc^3"
        if self.form == "stellar":
            return f"a galaxy of stellar mass {self.value:.3g} Msun"
        if self.form == "sphere":
            return f"comoving sphere of radius {self.value:g} Mpc (source-frame time)"
        return f"whole sky to z = {self.value:g} (observer-frame time)"

    def effective_gpc3(
        self,
        evolution: RateEvolution | None = None,
        cosmology: FLRW | None = None,
        galaxy_density_mpc3: float = MWEG_DENSITY_MPC3,
        stellar_density_msun_mpc3: float = STELLAR_DENSITY_MSUN_MPC3,
    ) -> float:
        """Rate-weighted comoving volume (Gpc^3): mergers per year = R(z_ref) * this.

        Local forms (mw, gpc3, mpc3, stellar) use the rate at z = 0, ``R(z_ref) s(0)/s(z_ref)``;
        ``sphere`` and ``cosmic`` integrate the evolution over the volume (module docstring).
        """
        evolution = evolution or RateEvolution()
        check_density(galaxy_density_mpc3, "galaxy density", "Mpc^-3")
        check_density(stellar_density_msun_mpc3, "stellar-mass density", "Msun Mpc^-3")
        local = float(evolution.factor(0.0))
        if self.form == "gpc3":
            return local
        if self.form == "mpc3":
            return local / _MPC3_PER_GPC3
        if self.form == "mw":
            return local / (galaxy_density_mpc3 * _MPC3_PER_GPC3)
        if self.form == "stellar":
            return local * self.value / (stellar_density_msun_mpc3 * _MPC3_PER_GPC3)
        cosmology = resolve_cosmology(cosmology)
        if self.form == "sphere":
            z_r = redshift_at_comoving_distance(cosmology, self.value)
            return comoving_volume_integral(cosmology, z_r, evolution.factor)
        return comoving_volume_integral(cosmology, self.value, evolution.factor, True)

    def describe(
        self,
        galaxy_density_mpc3: float = MWEG_DENSITY_MPC3,
        stellar_density_msun_mpc3: float = STELLAR_DENSITY_MSUN_MPC3,
    ) -> dict[str, Any]:
        """JSON-able description for metadata."""
        out: dict[str, Any] = {"spec": self.spec, "form": self.form, "label": self.label}
        if self.form == "mw":
            out["galaxy_density_mpc3"] = galaxy_density_mpc3
        if self.form == "stellar":
            out["stellar_mass_msun"] = self.value
            out["stellar_density_msun_mpc3"] = stellar_density_msun_mpc3
        if self.form == "sphere":
            out["radius_mpc"] = self.value
        if self.form == "cosmic":
            out["zmax"] = self.value
        out["time"] = "observer frame" if self.observer_frame else "source frame"
        return out


def check_density(value: float, what: str, unit: str) -> float:
    """A positive finite density, else :class:`OptionError`."""
    v = float(value)
    if not (np.isfinite(v) and v > 0):
        raise OptionError(f"{what} {value!r} {unit} must be a positive finite number")
    return v


def _quantity_value(text: str, unit: str, what: str, spec: str) -> float:
    """A number, optionally with an astropy unit convertible to ``unit``."""
    try:
        return float(text)
    except ValueError:
        pass
    import astropy.units as u

    try:
        q = u.Quantity(text)
        return float(q.to_value(unit))
    except (TypeError, ValueError, u.UnitsError) as exc:
        raise OptionError(
            f"volume {spec!r}: {what} {text!r} is not a number (in {unit}) or a quantity "
            f"convertible to {unit}; {VOLUME_FORMS_HELP}"
        ) from exc


def parse_volume(text: str | Volume) -> Volume:
    """Parse one volume specification (see the module docstring); :class:`OptionError` if bad."""
    if isinstance(text, Volume):
        return text
    raw = str(text).strip()
    spec = raw.lower().replace(" ", "")
    name, sep, arg = spec.partition(":")
    if name in ("mw", "gpc3", "mpc3") and not sep:
        return Volume(spec, name)
    if name == "cosmic" and not sep:
        return Volume(spec, "cosmic", COSMIC_ZMAX_DEFAULT)
    if name in ("stellar", "sphere", "cosmic") and sep and arg:
        arg_raw = raw.partition(":")[2].strip()
        if name == "stellar":
            value = _quantity_value(arg_raw, "solMass", "stellar mass", raw)
        elif name == "sphere":
            value = _quantity_value(arg_raw, "Mpc", "radius", raw)
        else:
            value = _quantity_value(arg_raw, "", "ZMAX", raw)
        if not (np.isfinite(value) and value > 0):
            raise OptionError(f"volume {raw!r}: the value must be positive; {VOLUME_FORMS_HELP}")
        if name == "cosmic" and value > COSMIC_ZMAX_LIMIT:
            raise OptionError(
                f"volume {raw!r}: ZMAX must not exceed {COSMIC_ZMAX_LIMIT:g}; {VOLUME_FORMS_HELP}"
            )
        return Volume(f"{name}:{arg_raw.replace(' ', '')}", name, value)
    raise OptionError(f"volume {raw!r} is not known; {VOLUME_FORMS_HELP}")


def parse_volumes(items: Iterable[str | Volume]) -> list[Volume]:
    """Parse repeatable / comma-separated volume options, keeping order, dropping exact repeats."""
    out: list[Volume] = []
    for item in items:
        parts = [item] if isinstance(item, Volume) else str(item).split(",")
        for part in parts:
            if isinstance(part, str) and not part.strip():
                continue
            vol = parse_volume(part)
            if vol.spec not in {v.spec for v in out}:
                out.append(vol)
    if not out:
        raise OptionError(f"no volume given; {VOLUME_FORMS_HELP}")
    return out
