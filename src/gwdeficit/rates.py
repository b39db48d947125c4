"""Merger-rate density models: the local value with its uncertainty, and redshift evolution.

A rate density is quoted at a reference redshift ``z_ref`` (often 0.2 for catalogue results) in
Gpc^-3 yr^-1 (source-frame time). Its evolution with redshift is a dimensionless shape
``s(z)``; the rate at any redshift is ``R(z) = R(z_ref) * s(z) / s(z_ref)``.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

from gwdeficit.schema import OptionError

EVOLUTIONS = ("none", "powerlaw", "madau-dickinson")


def madau_dickinson_sfr(z: ArrayLike) -> NDArray[np.float64]:
    """Cosmic star-formation-rate density psi(z) in Msun yr^-1 Mpc^-3.

    psi(z) = 0.015 (1+z)^2.7 / (1 + ((1+z)/2.9)^5.6), Madau & Dickinson 2014, ARA&A 52, 415,
    eq. 15 (fit to UV and IR data, Salpeter IMF). Fitted over 0 < z < 8; its maximum lies near
    z = 1.86.
    """
    zp1 = 1.0 + np.asarray(z, dtype=np.float64)
    return 0.015 * zp1**2.7 / (1.0 + (zp1 / 2.9) ** 5.6)


@dataclass(frozen=True)
class RateEvolution:
    """Redshift shape of a merger-rate density.

    kind: ``"none"`` (constant comoving rate), ``"powerlaw"`` ((1+z)^kappa) or
    ``"madau-dickinson"`` (shaped like :func:`madau_dickinson_sfr`, no delay time).
    z_ref: redshift at which the quoted rate applies.
    """

    kind: str = "none"
    kappa: float = 0.0
    z_ref: float = 0.0

    def __post_init__(self) -> None:
        if self.kind not in EVOLUTIONS:
            raise OptionError(
                f"rate evolution {self.kind!r} is not known; valid: {', '.join(EVOLUTIONS)}"
            )
        if not np.isfinite(self.kappa):
            raise OptionError(f"power-law index {self.kappa!r} is not a finite number")
        if not (np.isfinite(self.z_ref) and self.z_ref >= 0):
            raise OptionError(f"reference redshift {self.z_ref!r} must be a number >= 0")

    def shape(self, z: ArrayLike) -> NDArray[np.float64]:
        """Unnormalised shape s(z)."""
        z = np.asarray(z, dtype=np.float64)
        if self.kind == "none":
            return np.ones_like(z)
        if self.kind == "powerlaw":
            return (1.0 + z) ** self.kappa
        return madau_dickinson_sfr(z)

    def factor(self, z: ArrayLike) -> NDArray[np.float64]:
        """R(z) / R(z_ref) = s(z) / s(z_ref)."""
        return self.shape(z) / self.shape(self.z_ref)

    def describe(self) -> dict:
        """JSON-able description for metadata."""
        return {"evolution": self.kind, "kappa": self.kappa, "z_ref": self.z_ref}
