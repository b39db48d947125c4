"""The registry of remnant fits: what each estimates, its source, its calibrated range.

Every entry is a :class:`Fit`. ``quantity`` is one of :data:`QUANTITIES`; ``slot`` is the
fit's place in the compiled kernels of :mod:`gwdeficit.fits._kernels` (raw output: final-spin
magnitude, radiated-energy fraction E_rad / M, or recoil speed in km/s); ``function`` is the
public ufunc-like formula in fits.spin / fits.mass / fits.kick, evaluated by the same kernel.
NR-calibrated fits have ``in_default=True`` and enter the default estimate (their mean) and its
spread; parameter-free estimates and superseded calibrations stay per-fit columns only.

The registry holds only fits whose coefficients were checked against the published results in
tests/reference/test_ref_nr.py. See DEVELOPERS.md, "How to add a fit".
"""

from __future__ import annotations

from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from gwdeficit.fits import _kernels, kick, mass, spin
from gwdeficit.schema import PER_FIT_SEPARATOR, OptionError

__all__ = [
    "QUANTITIES",
    "QUANTITY_COLUMNS",
    "REGISTRY",
    "Fit",
    "FitRangeWarning",
    "default_fits",
    "get_fit",
    "per_fit_column",
    "select_fits",
]

QUANTITIES: tuple[str, ...] = ("final_spin", "final_mass", "recoil")

# Per-fit output columns by quantity: f"{column}{PER_FIT_SEPARATOR}{fit name}".
QUANTITY_COLUMNS: Mapping[str, tuple[str, ...]] = {
    "final_spin": ("chif",),
    "final_mass": ("mf_msun", "erad_msun"),
    "recoil": ("vkick_kms",),
}


class FitRangeWarning(UserWarning):
    """Some binaries lie outside the calibrated range of a fit used for them (extrapolation)."""


def per_fit_column(column: str, fit_name: str) -> str:
    """Name of a per-fit column, e.g. ``per_fit_column("chif", "rezzolla_2008")``."""
    return f"{column}{PER_FIT_SEPARATOR}{fit_name}"


@dataclass(frozen=True)
class Fit:
    """One published fitting formula (or parameter-free estimate) and what the tool knows of it."""

    name: str
    quantity: str
    citation: str
    summary: str
    calibrated: tuple[tuple[str, float], ...]
    in_default: bool
    slot: int
    function: Callable[..., NDArray[np.float64]]

    @property
    def calibrated_range(self) -> dict[str, float]:
        """Calibrated range as a dict: ``q_min`` (m2/m1) and ``chi_max``; empty if none."""
        return dict(self.calibrated)

    @property
    def columns(self) -> tuple[str, ...]:
        """The per-fit output columns of this fit."""
        return tuple(per_fit_column(c, self.name) for c in QUANTITY_COLUMNS[self.quantity])

    def in_range(
        self, q: NDArray[np.float64], chi1: NDArray[np.float64], chi2: NDArray[np.float64]
    ) -> NDArray[np.bool_]:
        """Rows inside the calibrated range (q = m2/m1 <= 1). All True if there is none."""
        ok = np.ones(np.shape(q), dtype=bool)
        rng = self.calibrated_range
        if "q_min" in rng:
            ok &= q >= rng["q_min"]
        if "chi_max" in rng:
            ok &= (chi1 <= rng["chi_max"]) & (chi2 <= rng["chi_max"])
        return ok

    def describe_range(self) -> str:
        """Human-readable calibrated range."""
        rng = self.calibrated_range
        if not rng:
            return "none (parameter-free)"
        parts = []
        if "q_min" in rng:
            parts.append(f"q >= {rng['q_min']:g}")
        if "chi_max" in rng:
            parts.append(f"chi <= {rng['chi_max']:g}")
        return ", ".join(parts)

    def metadata(self) -> dict:
        """JSON-able description stored in ``gwdeficit.fits``."""
        return {
            "name": self.name,
            "quantity": self.quantity,
            "citation": self.citation,
            "calibrated": self.calibrated_range,
            "in_default": self.in_default,
            "columns": list(self.columns),
            "summary": self.summary,
        }


# Common calibrated domain of the 2007-2012 NR fits below (approximate, from memory: the bulk
# of their calibration sets had 1/4 <~ q <= 1 and spin magnitudes up to ~0.8).
_NR_DOMAIN: tuple[tuple[str, float], ...] = (("q_min", 0.25), ("chi_max", 0.8))

REGISTRY: tuple[Fit, ...] = (
    Fit(
        name="barausse_rezzolla_2009",
        quantity="final_spin",
        citation="Barausse & Rezzolla 2009, ApJL 704, L40",
        summary="precessing-spin final spin; aligned limit of Rezzolla et al. 2008 form",
        calibrated=_NR_DOMAIN,
        in_default=True,
        slot=_kernels.BR09,
        function=spin.barausse_rezzolla_2009,
    ),
    Fit(
        name="rezzolla_2008",
        quantity="final_spin",
        citation="Rezzolla, Barausse, Dorband, Pollney, Reisswig, Seiler & Husa 2008, "
        "PRD 78, 044002",
        summary="aligned-spin final spin; in-plane total spin added in quadrature",
        calibrated=_NR_DOMAIN,
        in_default=True,
        slot=_kernels.R08,
        function=spin.rezzolla_2008,
    ),
    Fit(
        name="healy_lousto_zlochower_spin_2014",
        quantity="final_spin",
        citation="Healy, Lousto & Zlochower 2014, PRD 90, 104004",
        summary="aligned-spin final spin with spin-difference terms; in-plane spin in quadrature",
        calibrated=_NR_DOMAIN,
        in_default=True,
        slot=_kernels.HLZ14_SPIN,
        function=spin.healy_lousto_zlochower_2014,
    ),
    Fit(
        name="buonanno_kidder_lehner_2008",
        quantity="final_spin",
        citation="Buonanno, Kidder & Lehner 2008, PRD 77, 026004",
        summary="parameter-free: spins + test-particle ISCO angular momentum of the final hole",
        calibrated=(),
        in_default=False,
        slot=_kernels.BKL08,
        function=spin.buonanno_kidder_lehner_2008,
    ),
    Fit(
        name="barausse_morozova_rezzolla_2012",
        quantity="final_mass",
        citation="Barausse, Morozova & Rezzolla 2012, ApJ 758, 63",
        summary="radiated energy from the ISCO binding energy plus an NR-fitted correction",
        calibrated=_NR_DOMAIN,
        in_default=True,
        slot=_kernels.BMR12,
        function=mass.barausse_morozova_rezzolla_2012,
    ),
    Fit(
        name="healy_lousto_zlochower_mass_2014",
        quantity="final_mass",
        citation="Healy, Lousto & Zlochower 2014, PRD 90, 104004",
        summary="aligned-spin remnant mass with spin-difference terms and ISCO test-body limit",
        calibrated=_NR_DOMAIN,
        in_default=True,
        slot=_kernels.HLZ14_MASS,
        function=mass.healy_lousto_zlochower_2014,
    ),
    Fit(
        name="bardeen_press_teukolsky_1972",
        quantity="final_mass",
        citation="Bardeen, Press & Teukolsky 1972, ApJ 178, 347 (ISCO binding energy), at the "
        "final spin of Buonanno, Kidder & Lehner 2008, PRD 77, 026004",
        summary="parameter-free: nu (1 - E_isco) at the final hole's ISCO; no plunge/ringdown",
        calibrated=(),
        in_default=False,
        slot=_kernels.BPT72,
        function=mass.isco_binding_energy,
    ),
    Fit(
        name="lousto_2012",
        quantity="recoil",
        citation="Lousto, Zlochower, Dotti & Volonteri 2012, PRD 85, 084015 (with Gonzalez et "
        "al. 2007, PRL 98, 091101 and Campanelli et al. 2007, ApJL 659, L5)",
        summary="mass-ratio, aligned-spin and superkick terms with hang-up dependence",
        calibrated=_NR_DOMAIN,
        in_default=True,
        slot=_kernels.LOUSTO12,
        function=kick.lousto_2012,
    ),
    Fit(
        name="campanelli_2007",
        quantity="recoil",
        citation="Campanelli, Lousto, Zlochower & Merritt 2007, ApJL 659, L5 and PRL 98, "
        "231102 (with Gonzalez et al. 2007, PRL 98, 091101)",
        summary="mass-ratio, aligned-spin and superkick terms (no hang-up dependence)",
        calibrated=_NR_DOMAIN,
        in_default=True,
        slot=_kernels.CAMPANELLI07,
        function=kick.campanelli_2007,
    ),
)

_BY_NAME: dict[str, Fit] = {f.name: f for f in REGISTRY}


def get_fit(name: str) -> Fit:
    """The registered fit called ``name``; :class:`OptionError` if there is none."""
    try:
        return _BY_NAME[name]
    except KeyError:
        raise OptionError(
            f"fit {name!r} is not known; registered fits: {', '.join(_BY_NAME)}"
        ) from None


def default_fits() -> tuple[Fit, ...]:
    """Every registered fit (the default selection of the remnant stage)."""
    return REGISTRY


def select_fits(names: Sequence[str] | None = None) -> tuple[Fit, ...]:
    """Validate a selection of fit names (None: all). Every quantity needs an NR fit.

    Raises :class:`OptionError` for unknown or repeated names, and when a quantity would have
    no NR-calibrated (``in_default``) fit left, since the default estimate needs one.
    """
    if names is None:
        chosen = REGISTRY
    else:
        seen: set[str] = set()
        out = []
        for n in names:
            if n in seen:
                raise OptionError(f"fit {n!r} selected twice")
            seen.add(n)
            out.append(get_fit(n))
        chosen = tuple(sorted(out, key=REGISTRY.index))
    for quantity in QUANTITIES:
        if not any(f.in_default for f in chosen if f.quantity == quantity):
            raise OptionError(
                f"no NR-calibrated {quantity} fit selected; choose at least one of "
                + ", ".join(f.name for f in REGISTRY if f.quantity == quantity and f.in_default)
            )
    return chosen
