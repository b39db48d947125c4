"""Canonical tables, their columns and units, metadata keys, and the typed user errors.

Every stage of gwdeficit reads and writes one of the tables described here. Column names carry
their unit where it could be unclear (``m1_msun``, ``dl_mpc``, ``tilt1_rad``); dimensionless
quantities (spins, redshift, mass ratios) carry none.

Errors that a user can cause (bad files, bad options, bad rows) are raised as subclasses of
:class:`GwdeficitError`; the command line turns them into a message and exit code 2. Anything
else escaping a command is a bug and exits with code 1.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

# --------------------------------------------------------------------------------------------
# Canonical catalogue
# --------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class Column:
    """One canonical column: name, dtype family, unit string (astropy syntax) and meaning."""

    name: str
    dtype: str  # "str", "int64", "float64", "bool"
    unit: str  # astropy unit string; "" for dimensionless, "-" for non-numeric
    required: bool
    doc: str


CATALOGUE_COLUMNS: tuple[Column, ...] = (
    Column("event", "str", "-", True, "event label; rows with the same label are one merger"),
    Column("sample", "int64", "-", True, "posterior-sample index, 0.. within its event"),
    Column("weight", "float64", "", True, "row weight >= 0 (sample or population weight)"),
    Column("m1_msun", "float64", "solMass", True, "source-frame primary mass, m1 >= m2"),
    Column("m2_msun", "float64", "solMass", True, "source-frame secondary mass"),
    Column("chi1", "float64", "", True, "dimensionless spin magnitude of body 1, 0..1"),
    Column("chi2", "float64", "", True, "dimensionless spin magnitude of body 2, 0..1"),
    Column("tilt1_rad", "float64", "rad", True, "angle between spin 1 and orbital L, 0..pi"),
    Column("tilt2_rad", "float64", "rad", True, "angle between spin 2 and orbital L, 0..pi"),
    Column("phi12_rad", "float64", "rad", True, "azimuth between in-plane spins; NaN if unknown"),
    Column("z", "float64", "", True, "cosmological redshift"),
    Column("dl_mpc", "float64", "Mpc", True, "luminosity distance"),
    Column("lambda1", "float64", "", False, "dimensionless tidal deformability of body 1"),
    Column("lambda2", "float64", "", False, "dimensionless tidal deformability of body 2"),
    Column("vt_gpc3_yr", "float64", "Gpc3 yr", False, "sensitive volume-time for this row"),
    Column("kind", "str", "-", True, "BBH, NSBH or BNS"),
    Column("spin_assumption", "str", "-", True, "full, aligned, effective or none"),
    Column("input_row", "int64", "-", True, "1-based data-row number in the input file"),
)

CATALOGUE_REQUIRED: tuple[str, ...] = tuple(c.name for c in CATALOGUE_COLUMNS if c.required)
CATALOGUE_OPTIONAL: tuple[str, ...] = tuple(c.name for c in CATALOGUE_COLUMNS if not c.required)

KINDS: tuple[str, ...] = ("BBH", "NSBH", "BNS")
SPIN_ASSUMPTIONS: tuple[str, ...] = ("full", "aligned", "effective", "none")

# --------------------------------------------------------------------------------------------
# Remnant table: every catalogue column, then these. Per-fit columns are named
# f"{quantity}__{fit_name}", e.g. "chif__barausse_rezzolla_2009".
# --------------------------------------------------------------------------------------------

REMNANT_COLUMNS: tuple[Column, ...] = (
    Column("mf_msun", "float64", "solMass", True, "remnant mass, mean of the NR-calibrated fits"),
    Column("chif", "float64", "", True, "remnant dimensionless spin, mean of the NR fits"),
    Column("erad_msun", "float64", "solMass", True, "energy radiated in GWs, in Msun c^2"),
    Column("erad_frac", "float64", "", True, "erad_msun / (m1_msun + m2_msun)"),
    Column("ejected_msun", "float64", "solMass", True, "baryonic mass left outside the remnant"),
    Column("deficit_msun", "float64", "solMass", True, "erad_msun + ejected_msun"),
    Column("vkick_kms", "float64", "km / s", True, "recoil speed of the remnant"),
    Column("mf_msun_range", "float64", "solMass", True, "max - min of mf over the NR fits"),
    Column("mf_msun_std", "float64", "solMass", True, "standard deviation of mf over the NR fits"),
    Column("chif_range", "float64", "", True, "max - min of chif over the NR fits"),
    Column("chif_std", "float64", "", True, "standard deviation of chif over the NR fits"),
    Column("erad_msun_range", "float64", "solMass", True, "max - min of erad over the NR fits"),
    Column("erad_msun_std", "float64", "solMass", True, "standard deviation of erad, NR fits"),
    Column("vkick_kms_range", "float64", "km / s", True, "max - min of vkick over the fits"),
    Column("vkick_kms_std", "float64", "km / s", True, "standard deviation of vkick, fits"),
    Column("in_fit_range", "bool", "-", True, "inside every used fit's calibrated range"),
    Column("remnant_kind", "str", "-", True, "BH, HMNS, SMNS, NS, or '' when not estimated"),
    Column("remnant_status", "str", "-", True, "estimated, or not_estimated:<reason>"),
)

PER_FIT_SEPARATOR = "__"

# --------------------------------------------------------------------------------------------
# Rate summary table (rates.parquet): tidy, one row per volume x quantity (x kind).
# --------------------------------------------------------------------------------------------

RATE_SUMMARY_COLUMNS: tuple[str, ...] = (
    "volume",  # volume spec as given, e.g. "mw", "gpc3", "sphere:100", "cosmic:1"
    "kind",  # BBH, NSBH, BNS, or "all"
    "quantity",  # merger_rate, deficit_rate, erad_rate, ejected_rate, gw_luminosity, ...
    "unit",  # astropy unit string of the numbers in this row
    "median",
    "lo68",
    "hi68",
    "lo90",
    "hi90",
    # then one "share_<source>" float column per error-budget source
)
ERROR_SOURCES: tuple[str, ...] = ("catalogue", "posterior", "rate", "fits")

# --------------------------------------------------------------------------------------------
# Metadata keys (Parquet schema metadata; values are JSON text)
# --------------------------------------------------------------------------------------------

META_PREFIX = "gwdeficit."
META_UNITS = "gwdeficit.units"  # {column: unit string}
META_PROVENANCE = "gwdeficit.provenance"  # [stage record, ...] oldest first
META_COSMOLOGY = "gwdeficit.cosmology"  # {"name", "H0_km_s_Mpc", "Om0", ...} (convert.py)
META_CONVERSIONS = "gwdeficit.conversions"  # [text, ...]
META_VERSION = "gwdeficit.version"
META_DISCLAIMER = "gwdeficit.disclaimer"
META_FITS = "gwdeficit.fits"
META_REMNANT_DRAWS = "gwdeficit.remnant_draws"  # angles the remnant stage drew, with the seed
META_RATE_MODEL = "gwdeficit.rate_model"
META_SUMMARY = "gwdeficit.summary"
META_NEUTRON_STAR = "gwdeficit.neutron_star"  # neutron-star fits, options and notes

DISCLAIMER = (
    "Research estimate from published fitting formulas and rate models; not a reviewed "
    "analysis. Check calibrated ranges and the error budget before quoting."
)


def units_of(columns: Sequence[Column]) -> dict[str, str]:
    """Map column name to unit string for the numeric columns of a table description."""
    return {c.name: c.unit for c in columns if c.unit != "-"}


# --------------------------------------------------------------------------------------------
# Typed user errors
# --------------------------------------------------------------------------------------------


class GwdeficitError(Exception):
    """Base of every error a user can cause; the CLI prints it and exits with code 2."""

    exit_code = 2


class InputFileError(GwdeficitError):
    """An input file cannot be found, opened or parsed."""


class SchemaError(GwdeficitError):
    """Columns are missing, ambiguous, duplicated or carry units that cannot be used."""


class UnitError(SchemaError):
    """A unit string could not be parsed or is not convertible to the canonical unit."""


#: The advice of :class:`BadRowsError` at ingest, where bad rows can be set aside.
INGEST_HINT = "Fix the input, or pass --on-bad skip to write such rows to a rejects file."
#: ... and at the stages that read the remnants table (weights, masses, sensitive volume).
REMNANTS_HINT = "Fix these rows in the input table and rerun the stages from ingest."


class BadRowsError(GwdeficitError):
    """Rows failed validation. Carries the file, the reason and the 1-based row numbers.

    ``hint`` ends the message with what the user can do (ingest: :data:`INGEST_HINT`; later
    stages, which have no rejects file, say which table to fix).
    """

    def __init__(
        self,
        path: str,
        column: str,
        reason: str,
        rows: Sequence[int],
        n_total: int | None = None,
        hint: str = "Fix these rows in the input.",
    ) -> None:
        self.path = str(path)
        self.column = column
        self.reason = reason
        self.rows = [int(r) for r in rows]
        self.n_total = len(self.rows) if n_total is None else int(n_total)
        self.hint = hint
        shown = ", ".join(str(r) for r in self.rows[:20])
        more = f" (and {self.n_total - 20} more)" if self.n_total > 20 else ""
        super().__init__(
            f"{self.path}: column '{column}': {reason} in {self.n_total} row(s): "
            f"rows {shown}{more}. {hint}"
        )


class OptionError(GwdeficitError):
    """A command-line option or API argument has an invalid value."""


class OutputExistsError(GwdeficitError):
    """An output file exists and --force was not given, or would overwrite an input."""
