"""The registry of remnant fits: what each estimates, its source, its calibrated range.

Every entry is a :class:`Fit`. ``quantity`` is one of :data:`QUANTITIES`; ``kernel`` maps the
shared per-chunk inputs (:class:`Components`) to the fit's raw output (final-spin magnitude,
radiated-energy fraction E_rad / M, or recoil speed in km/s); ``function`` is the public
ufunc-like formula in fits.spin / fits.mass / fits.kick. NR-calibrated fits have
``in_default=True`` and enter the default estimate (their mean) and its spread; parameter-free
estimates and superseded calibrations stay per-fit columns only.

The registry holds only fits whose coefficients were checked against the published results in
tests/reference/test_ref_nr.py. See DEVELOPERS.md, "How to add a fit".
"""

from __future__ import annotations

from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass
from functools import cached_property

import numpy as np
from numpy.typing import NDArray

from gwdeficit.fits import kick, mass, spin
from gwdeficit.schema import PER_FIT_SEPARATOR, OptionError

__all__ = [
    "QUANTITIES",
    "QUANTITY_COLUMNS",
    "REGISTRY",
    "Components",
    "Fit",
    "FitRangeWarning",
    "components",
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
class Components:
    """Inputs shared by every fit for one chunk of binaries (1-d float64 arrays, q <= 1).

    q = m2/m1, q2 = q^2, opq2 = (1+q)^2, nu = q/(1+q)^2; chi1/chi2 spin magnitudes;
    chi1z/chi2z components along L; sz = chi1z + q^2 chi2z; s_par = sz/(1+q)^2 (total spin
    along L over M^2); spin_sq = |chi1 + q^2 chi2|^2 (vectors); perp_sq = |chi1_perp +
    q^2 chi2_perp|^2 / (1+q)^4; dperp = |chi1_perp - q chi2_perp|; cos_phase = cos of the
    in-plane spin phase at merger.
    """

    q: NDArray[np.float64]
    q2: NDArray[np.float64]
    opq2: NDArray[np.float64]
    nu: NDArray[np.float64]
    chi1: NDArray[np.float64]
    chi2: NDArray[np.float64]
    chi1z: NDArray[np.float64]
    chi2z: NDArray[np.float64]
    sz: NDArray[np.float64]
    s_par: NDArray[np.float64]
    spin_sq: NDArray[np.float64]
    perp_sq: NDArray[np.float64]
    dperp: NDArray[np.float64]
    cos_phase: NDArray[np.float64]

    @cached_property
    def bkl_w(self) -> NDArray[np.float64]:
        """ISCO variable of the Buonanno-Kidder-Lehner final spin (shared by two estimates)."""
        return spin._bkl_w(self.nu, self.s_par)

    @cached_property
    def hlz14(self) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
        """Signed final spin and E_rad / M of Healy, Lousto & Zlochower 2014 (both fits)."""
        return spin._hlz14_core(self.q, self.nu, self.chi1z, self.chi2z, self.s_par)

    @cached_property
    def kick_units(self) -> tuple[NDArray[np.float64], ...]:
        """Factors shared by the recoil fits (fits.kick._kick_units)."""
        return kick._kick_units(self.q, self.nu, self.chi1z, self.chi2z, self.dperp, self.cos_phase)


def components(
    q: NDArray[np.float64],
    chi1: NDArray[np.float64],
    chi2: NDArray[np.float64],
    cos_t1: NDArray[np.float64],
    sin_t1: NDArray[np.float64],
    cos_t2: NDArray[np.float64],
    sin_t2: NDArray[np.float64],
    cos_phi12: NDArray[np.float64],
    cos_phase: NDArray[np.float64],
) -> Components:
    """Build :class:`Components` from q <= 1, spin magnitudes and cos/sin of the angles.

    Temporaries are updated in place: on cache-sized chunks numpy's cost is dominated by
    allocating (and page-faulting) new arrays, not by the arithmetic.
    """
    chi1z, chi2z = chi1 * cos_t1, chi2 * cos_t2
    chi1p, chi2p = chi1 * sin_t1, chi2 * sin_t2
    q2 = q * q
    opq2 = q + 1.0
    opq2 *= opq2
    sz = q2 * chi2z
    sz += chi1z
    # dperp^2 = chi1p^2 + q chi2p (q chi2p - 2 chi1p cos phi12)
    qc2 = q * chi2p
    c1c = chi1p * cos_phi12
    dperp = qc2 - 2.0 * c1c
    dperp *= qc2
    p1sq = chi1p * chi1p
    dperp += p1sq
    np.sqrt(np.maximum(dperp, 0.0, out=dperp), out=dperp)
    # |chi1p + q^2 chi2p|^2 = chi1p^2 + q^2 chi2p (q^2 chi2p + 2 chi1p cos phi12)
    inplane_sq = q2 * chi2p
    c1c *= 2.0
    c1c += inplane_sq
    inplane_sq *= c1c
    inplane_sq += p1sq
    np.maximum(inplane_sq, 0.0, out=inplane_sq)
    nu = q / opq2
    s_par = sz / opq2
    spin_sq = sz * sz
    spin_sq += inplane_sq
    opq2_sq = opq2 * opq2
    np.divide(inplane_sq, opq2_sq, out=opq2_sq)
    return Components(
        q=q,
        q2=q2,
        opq2=opq2,
        nu=nu,
        chi1=chi1,
        chi2=chi2,
        chi1z=chi1z,
        chi2z=chi2z,
        sz=sz,
        s_par=s_par,
        spin_sq=spin_sq,
        perp_sq=opq2_sq,
        dperp=dperp,
        cos_phase=cos_phase,
    )


@dataclass(frozen=True)
class Fit:
    """One published fitting formula (or parameter-free estimate) and what the tool knows of it."""

    name: str
    quantity: str
    citation: str
    summary: str
    calibrated: tuple[tuple[str, float], ...]
    in_default: bool
    kernel: Callable[[Components], NDArray[np.float64]]
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
        kernel=lambda c: spin._br09_kernel(c.q, c.q2, c.nu, c.sz, c.spin_sq, c.opq2),
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
        kernel=lambda c: spin._r08_kernel(c.q2, c.nu, c.sz, c.perp_sq),
        function=spin.rezzolla_2008,
    ),
    Fit(
        name="healy_lousto_zlochower_spin_2014",
        quantity="final_spin",
        citation="Healy, Lousto & Zlochower 2014, PRD 90, 104004",
        summary="aligned-spin final spin with spin-difference terms; in-plane spin in quadrature",
        calibrated=_NR_DOMAIN,
        in_default=True,
        kernel=lambda c: spin._bkl_magnitude(c.hlz14[0], c.perp_sq),
        function=spin.healy_lousto_zlochower_2014,
    ),
    Fit(
        name="buonanno_kidder_lehner_2008",
        quantity="final_spin",
        citation="Buonanno, Kidder & Lehner 2008, PRD 77, 026004",
        summary="parameter-free: spins + test-particle ISCO angular momentum of the final hole",
        calibrated=(),
        in_default=False,
        kernel=lambda c: spin._bkl_magnitude(spin._bkl_par(c.nu, c.s_par, c.bkl_w), c.perp_sq),
        function=spin.buonanno_kidder_lehner_2008,
    ),
    Fit(
        name="barausse_morozova_rezzolla_2012",
        quantity="final_mass",
        citation="Barausse, Morozova & Rezzolla 2012, ApJ 758, 63",
        summary="radiated energy from the ISCO binding energy plus an NR-fitted correction",
        calibrated=_NR_DOMAIN,
        in_default=True,
        kernel=lambda c: mass._bmr12_kernel(c.nu, c.s_par),
        function=mass.barausse_morozova_rezzolla_2012,
    ),
    Fit(
        name="healy_lousto_zlochower_mass_2014",
        quantity="final_mass",
        citation="Healy, Lousto & Zlochower 2014, PRD 90, 104004",
        summary="aligned-spin remnant mass with spin-difference terms and ISCO test-body limit",
        calibrated=_NR_DOMAIN,
        in_default=True,
        kernel=lambda c: c.hlz14[1],
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
        kernel=lambda c: mass._isco_binding_from_w(c.nu, c.bkl_w),
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
        kernel=lambda c: kick._lousto12_kernel(c.nu, c.s_par, *c.kick_units),
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
        kernel=lambda c: kick._campanelli07_kernel(c.nu, *c.kick_units),
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
