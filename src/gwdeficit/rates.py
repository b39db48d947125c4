"""Merger-rate density models: the local value with its uncertainty, and redshift evolution.

A rate density is quoted at a reference redshift ``z_ref`` (often 0.2 for catalogue results) in
Gpc^-3 yr^-1 (source-frame time). Its evolution with redshift is a dimensionless shape
``s(z)``; the rate at any redshift is ``R(z) = R(z_ref) * s(z) / s(z_ref)``.

:class:`RateModel` holds the value at ``z_ref`` with its uncertainty (a fixed value, a median
with 90% bounds turned into a split lognormal, or posterior draws) and its
:class:`RateEvolution`; :func:`parse_rate` reads the text forms users give, with units through
astropy; :func:`load_rate_samples` reads posterior draws from a file column.
"""

from __future__ import annotations

import re
from collections.abc import Mapping
from dataclasses import dataclass, field, replace
from pathlib import Path

import numpy as np
from numpy.typing import ArrayLike, NDArray

from gwdeficit.schema import (
    KINDS,
    BadRowsError,
    InputFileError,
    OptionError,
    SchemaError,
    UnitError,
)

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


# --------------------------------------------------------------------------------------------
# Rate-density models: a value, a median with 90% bounds, a 90% range, or posterior draws
# --------------------------------------------------------------------------------------------

#: Canonical unit of a rate density inside the package (astropy syntax).
RATE_UNIT = "Gpc-3 yr-1"

#: Standard-normal quantile of 0.95: a central 90% interval spans +-Z90 standard deviations.
Z90 = 1.6448536269514722

RATE_FORMS_HELP = (
    "valid forms: a value ('24'), a median with 90% bounds ('24 +14 -9', '24+14-9', "
    "'24 +14/-9', '24 +-5'), a 90% range ('17.9..44'), each optionally followed by a unit "
    "('24 Gpc-3 yr-1'); posterior draws come from a file: 'samples:FILE[:COLUMN]' "
    "(--rate-samples FILE[:COLUMN] on the command line)"
)

#: Rates used when none is given: the 90% ranges of the third catalogue's population analysis,
#: Abbott et al. 2023, Phys. Rev. X 13, 011048, abstract (from memory): BBH 17.9-44 at z = 0.2,
#: NSBH 7.8-140 and BNS 10-1700 Gpc^-3 yr^-1 (assumed not to evolve, quoted at z = 0).
DEFAULT_RATES: dict[str, tuple[str, float]] = {
    "BBH": ("17.9..44", 0.2),
    "NSBH": ("7.8..140", 0.0),
    "BNS": ("10..1700", 0.0),
}
DEFAULT_RATES_SOURCE = "Abbott et al. 2023, Phys. Rev. X 13, 011048 (90% ranges, from memory)"

RATE_FORMS = ("fixed", "split-lognormal", "samples")

_NUM = r"[0-9]*\.?[0-9]+(?:[eE][+-]?[0-9]+)?"


@dataclass(frozen=True)
class RateModel:
    """A merger-rate density at ``evolution.z_ref`` in Gpc^-3 yr^-1, with its uncertainty.

    form:
      ``"fixed"``: no uncertainty; every draw is ``median``.
      ``"split-lognormal"``: two half-lognormals joined at the median. With ``u`` a standard
      normal draw, ``R = median * exp(u * s_hi)`` for ``u > 0`` and ``median * exp(u * s_lo)``
      otherwise, where ``s_hi = ln(hi90 / median) / Z90`` and ``s_lo = ln(median / lo90) / Z90``
      (Z90 = 1.645). Each half carries probability 1/2, so the median and both 90% bounds are
      reproduced exactly, the rate stays positive, and the skew follows the quoted asymmetry.
      This is our own documented convention for turning "median +up -low" into a distribution
      (common practice, no source); a symmetric range ``LO..HI`` gives a plain lognormal with
      median sqrt(LO * HI).
      ``"samples"``: posterior draws; ``draw`` resamples them with replacement.
    evolution: the redshift shape and the redshift ``z_ref`` at which the numbers apply.
    """

    median: float
    lo90: float
    hi90: float
    form: str = "fixed"
    evolution: RateEvolution = field(default_factory=RateEvolution)
    samples: NDArray[np.float64] | None = field(default=None, compare=False, repr=False)
    given: str = ""
    given_unit: str = RATE_UNIT
    source: str = ""

    def __post_init__(self) -> None:
        if self.form not in RATE_FORMS:
            raise OptionError(f"rate form {self.form!r} is not known; valid: {RATE_FORMS}")
        vals = (self.median, self.lo90, self.hi90)
        if not all(np.isfinite(v) and v > 0 for v in vals):
            raise OptionError(
                f"rate {self.given or self.median!r}: median and 90% bounds must be positive "
                f"finite numbers (got median {self.median:g}, 90% bounds {self.lo90:g} to "
                f"{self.hi90:g} {RATE_UNIT}); {RATE_FORMS_HELP}"
            )
        if not self.lo90 <= self.median <= self.hi90:
            raise OptionError(
                f"rate {self.given!r}: the 90% bounds {self.lo90:g}..{self.hi90:g} must enclose "
                f"the median {self.median:g}"
            )
        if self.samples is not None:
            arr = np.array(self.samples, dtype=np.float64)
            arr.setflags(write=False)
            object.__setattr__(self, "samples", arr)
        if self.form == "samples" and (self.samples is None or self.samples.size == 0):
            raise OptionError("a rate model of form 'samples' needs at least one sample")

    @property
    def sigma_hi(self) -> float:
        """Log-space width of the upper half (split-lognormal form)."""
        return float(np.log(self.hi90 / self.median) / Z90)

    @property
    def sigma_lo(self) -> float:
        """Log-space width of the lower half (split-lognormal form)."""
        return float(np.log(self.median / self.lo90) / Z90)

    def draw(self, n: int, rng: np.random.Generator) -> NDArray[np.float64]:
        """``n`` draws of the rate at ``z_ref`` in Gpc^-3 yr^-1."""
        if self.form == "fixed":
            return np.full(int(n), self.median)
        if self.form == "samples":
            assert self.samples is not None
            return self.samples[rng.integers(0, self.samples.size, int(n))]
        u = rng.standard_normal(int(n))
        return self.median * np.exp(u * np.where(u > 0, self.sigma_hi, self.sigma_lo))

    def quantile(self, p: ArrayLike) -> NDArray[np.float64]:
        """Quantile function of the rate at ``z_ref`` (exact for the analytic forms)."""
        p = np.asarray(p, dtype=np.float64)
        if self.form == "fixed":
            return np.full_like(p, self.median)
        if self.form == "samples":
            assert self.samples is not None
            return np.quantile(self.samples, p)
        from scipy.special import ndtri

        u = ndtri(p)
        return self.median * np.exp(u * np.where(u > 0, self.sigma_hi, self.sigma_lo))

    def with_evolution(self, evolution: RateEvolution) -> RateModel:
        """The same numbers with another redshift evolution / reference redshift."""
        return replace(self, evolution=evolution)

    def describe(self) -> dict:
        """JSON-able description for metadata (values in Gpc^-3 yr^-1 at ``z_ref``)."""
        out = {
            "form": self.form,
            "median": self.median,
            "lo90": self.lo90,
            "hi90": self.hi90,
            "unit": RATE_UNIT,
            "given": self.given,
            "given_unit": self.given_unit,
            "source": self.source,
            **self.evolution.describe(),
        }
        if self.form == "split-lognormal":
            out["sigma_lo"] = self.sigma_lo
            out["sigma_hi"] = self.sigma_hi
        if self.form == "samples":
            assert self.samples is not None
            out["n_samples"] = int(self.samples.size)
        return out


def rate_unit_factor(unit: str) -> float:
    """Factor converting a rate density in ``unit`` to Gpc^-3 yr^-1 (astropy units)."""
    import astropy.units as u

    try:
        given = u.Unit(str(unit).strip())
    except (ValueError, TypeError) as exc:
        raise UnitError(
            f"rate unit {unit!r} cannot be parsed; give an astropy unit string of the form "
            "number per volume per time, e.g. 'Gpc-3 yr-1' (default), 'Mpc-3 Myr-1', "
            "'1 / (Gpc3 yr)'"
        ) from exc
    target = u.Unit(RATE_UNIT)
    if not given.is_equivalent(target):
        raise UnitError(
            f"rate unit {unit!r} ({given}) is not a number per volume per time; valid examples: "
            "'Gpc-3 yr-1' (default), 'Mpc-3 Myr-1', '1 / (Gpc3 yr)'"
        )
    return float(given.to(target))


def parse_rate(
    text: str | float,
    unit: str = RATE_UNIT,
    evolution: RateEvolution | None = None,
    source: str = "",
) -> RateModel:
    """Parse a rate density given as text into a :class:`RateModel`.

    Forms: ``"24"`` (fixed), ``"24 +14 -9"`` / ``"24+14-9"`` / ``"24 +14/-9"`` / ``"24 +-5"``
    (median with 90% credible bounds, split-lognormal), ``"17.9..44"`` (90% range, lognormal),
    ``"samples:FILE[:COLUMN]"`` (posterior draws, see :func:`load_rate_samples`). A unit may
    follow the numbers and overrides ``unit``. Raises :class:`OptionError` / :class:`UnitError`
    naming the bad value and the valid forms.
    """
    evolution = evolution or RateEvolution()
    if isinstance(text, int | float) and not isinstance(text, bool):
        text = repr(float(text))
    raw = str(text).strip()
    if raw.lower().startswith("samples:"):
        return load_rate_samples(raw[len("samples:") :], unit=unit, evolution=evolution)
    # A trailing unit starts at the first letter that is not a number's exponent (optionally
    # preceded by "1 / (").
    unit_m = re.search(r"\s(?:1\s*/\s*)?\(?\s*(?<![0-9.])[A-Za-z].*$", raw)
    numbers, in_text_unit = (raw[: unit_m.start()], unit_m.group().strip()) if unit_m else (raw, "")
    norm = numbers.replace("±", " +- ").replace("+/-", " +- ")
    for ch in "(),/{}^_":
        norm = norm.replace(ch, " ")
    m = re.fullmatch(
        rf"\s*(?P<a>{_NUM})\s*(?:(?P<rng>\.\.)\s*(?P<b>{_NUM})"
        rf"|\+-\s*(?P<pm>{_NUM})|\+\s*(?P<up>{_NUM})\s*-\s*(?P<lo>{_NUM}))?\s*",
        norm,
    )
    if m is None:
        raise OptionError(f"rate {raw!r} cannot be read; {RATE_FORMS_HELP}")
    given_unit = in_text_unit or unit
    k = rate_unit_factor(given_unit)
    a = float(m["a"]) * k
    common = {"evolution": evolution, "given": raw, "given_unit": given_unit, "source": source}
    if m["rng"]:
        lo, hi = a, float(m["b"]) * k
        if not 0 < lo < hi:
            raise OptionError(f"rate range {raw!r}: need 0 < LO < HI; {RATE_FORMS_HELP}")
        return RateModel(float(np.sqrt(lo * hi)), lo, hi, "split-lognormal", **common)
    if m["pm"] or m["up"]:
        up = float(m["pm"] or m["up"]) * k
        low = float(m["pm"] or m["lo"]) * k
        if not low < a:
            raise OptionError(
                f"rate {raw!r}: the lower 90% bound {a - low:g} is not positive, which a "
                f"split-lognormal cannot represent; give a 90% range 'LO..HI' with LO > 0 or "
                f"posterior draws; {RATE_FORMS_HELP}"
            )
        if up == 0 and low == 0:
            return RateModel(a, a, a, "fixed", **common)
        if up == 0 or low == 0:
            raise OptionError(f"rate {raw!r}: both 90% bounds must differ from the median")
        return RateModel(a, a - low, a + up, "split-lognormal", **common)
    return RateModel(a, a, a, "fixed", **common)


def _split_file_column(spec: str) -> tuple[Path, str | None]:
    spec = spec.strip()
    p = Path(spec).expanduser()
    if p.exists():
        return p, None
    head, sep, col = spec.rpartition(":")
    if sep and head and Path(head).expanduser().exists():
        return Path(head).expanduser(), col.strip() or None
    raise InputFileError(
        f"rate samples {spec!r}: no such file (give FILE or FILE:COLUMN; FILE may be CSV/TSV/"
        "text, Parquet or .npy)"
    )


def _read_numeric_table(path: Path):
    import pandas as pd

    suffix = path.suffix.lower()
    try:
        if suffix in (".parquet", ".pq"):
            return pd.read_parquet(path)
        if suffix == ".npy":
            arr = np.load(path, allow_pickle=False)
            if arr.ndim == 1:
                return pd.DataFrame({"0": arr})
            if arr.ndim == 2:
                return pd.DataFrame(arr, columns=[str(i) for i in range(arr.shape[1])])
            raise InputFileError(f"{path}: a .npy rate file must hold a 1-D or 2-D array")
        first = ""
        with open(path, encoding="utf-8", errors="replace") as fh:
            for line in fh:
                if line.strip() and not line.lstrip().startswith("#"):
                    first = line
                    break
        fields = [f for f in re.split(r"[\s,;]+", first.strip()) if f]
        try:
            [float(f) for f in fields]
            header = None
        except ValueError:
            header = 0
        sep = next((d for d in (",", "\t", ";") if d in first), r"\s+")
        df = pd.read_csv(path, sep=sep, comment="#", header=header, skip_blank_lines=True)
        if header is None:
            df.columns = [str(c) for c in df.columns]
        return df
    except InputFileError:
        raise
    except Exception as exc:
        raise InputFileError(f"{path}: cannot read rate samples ({exc})") from exc


def load_rate_samples(
    spec: str | Path,
    unit: str = RATE_UNIT,
    evolution: RateEvolution | None = None,
    column: str | None = None,
) -> RateModel:
    """Posterior draws of a rate density from ``FILE[:COLUMN]`` as a :class:`RateModel`.

    FILE: CSV/TSV/whitespace text (with or without a header line; ``#`` comments), Parquet,
    or ``.npy``. COLUMN may be omitted when the file has a single column. Every value must be a
    finite number >= 0 in ``unit``; otherwise :class:`BadRowsError` names the file, column and
    1-based data rows. Nothing is dropped.
    """
    import pandas as pd

    path, col = _split_file_column(str(spec))
    col = column or col
    df = _read_numeric_table(path)
    cols = [str(c) for c in df.columns]
    df.columns = cols
    if col is None:
        if len(cols) != 1:
            raise SchemaError(
                f"{path}: {len(cols)} columns; choose one with {path}:COLUMN, one of: "
                f"{', '.join(cols)}"
            )
        col = cols[0]
    if col not in cols:
        raise SchemaError(f"{path}: no column {col!r}; columns are: {', '.join(cols)}")
    values = pd.to_numeric(df[col], errors="coerce").to_numpy(dtype=np.float64)
    bad = np.flatnonzero(~(np.isfinite(values) & (values >= 0)))
    if bad.size:
        raise BadRowsError(
            str(path), col, "not a finite rate >= 0", (bad + 1).tolist(),
            hint="Fix these rows in the rate-samples file.",
        )  # fmt: skip
    if values.size == 0:
        raise InputFileError(f"{path}: column {col!r} holds no rate samples")
    k = rate_unit_factor(unit)
    values = values * k
    med = float(np.median(values))
    lo, hi = (float(x) for x in np.quantile(values, [0.05, 0.95]))
    if not med > 0:
        raise InputFileError(
            f"{path}: column {col!r}: the median of the rate samples is not positive ({med:g})"
        )
    return RateModel(
        med,
        min(lo, med),
        max(hi, med),
        "samples",
        evolution=evolution or RateEvolution(),
        samples=values,
        given=f"samples:{path}:{col}",
        given_unit=unit,
        source=f"{path}:{col}",
    )


def default_rate(kind: str, evolution: RateEvolution | None = None) -> RateModel:
    """The rate used for ``kind`` when none is given (see :data:`DEFAULT_RATES`).

    The evolution's shape is kept; its reference redshift is the one the default is quoted at.
    """
    if kind not in DEFAULT_RATES:
        raise OptionError(f"no default rate for kind {kind!r}; known: {', '.join(DEFAULT_RATES)}")
    text, z_ref = DEFAULT_RATES[kind]
    evo = evolution or RateEvolution()
    evo = RateEvolution(evo.kind, evo.kappa, z_ref)
    return parse_rate(text, evolution=evo, source=f"default for {kind}: {DEFAULT_RATES_SOURCE}")


def parse_kind_rates(
    specs: Mapping[str, str],
    unit: str = RATE_UNIT,
    evolution: RateEvolution | None = None,
) -> dict[str, RateModel]:
    """Per-kind rates from ``{"BBH": "24 +14 -9", "BNS": "samples:bns.csv:rate", ...}``.

    Kind names are case-insensitive and must be one of schema.KINDS.
    """
    out: dict[str, RateModel] = {}
    for key, text in specs.items():
        kind = str(key).strip().upper()
        if kind not in KINDS:
            raise OptionError(f"rate kind {key!r} is not known; valid: {', '.join(KINDS)}")
        if kind in out:
            raise OptionError(f"rate for kind {kind} given twice")
        out[kind] = parse_rate(text, unit=unit, evolution=evolution)
    return out
