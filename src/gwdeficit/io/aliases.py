"""Column names: a generic alias table of trade terms and the plan of which column is what.

Input headers are matched case-, underscore-, hyphen-, dot- and space-insensitively against
the spellings below (``Mass_1``, ``mass 1`` and ``MASS1`` are the same). A frame marker before
or after a mass name (``_det``, ``_detector``, ``_detector_frame``, ``_source``, ``_src``) says
whether the mass is redshifted; a unit may trail the name in brackets (``m1 [kg]``) or, for a
few unit words, after an underscore (``m1_msun``, ``dl_gpc``, ``tilt1_deg``).

Each matched column becomes one *field* (the quantity it holds, see :data:`FIELDS`). The user
can map fields explicitly (``--column canonical=theirs``); explicit maps win over the table.

To add an alias: append the spelling to the field's list in :data:`_SPELLINGS` (body-numbered
spellings use ``{i}`` for 1 or 2) and add a test in tests/test_io_aliases.py.
"""

from __future__ import annotations

import re
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field

from gwdeficit.io.units import UnitConversion, conversion, split_header
from gwdeficit.schema import OptionError, SchemaError


@dataclass(frozen=True)
class Field:
    """A quantity an input column can hold: name, dimension, meaning."""

    name: str
    dimension: str  # "mass", "length", "angle", "dimensionless", "volume_time", "int", "str"
    doc: str

    @property
    def numeric(self) -> bool:
        return self.dimension not in ("str",)

    @property
    def is_mass(self) -> bool:
        return self.dimension == "mass"


_FIELD_LIST = (
    Field("event", "str", "event label"),
    Field("sample", "int", "sample index within the event"),
    Field("weight", "dimensionless", "row weight"),
    Field("m1", "mass", "primary component mass"),
    Field("m2", "mass", "secondary component mass"),
    Field("mchirp", "mass", "chirp mass"),
    Field("mtotal", "mass", "total mass"),
    Field("q", "dimensionless", "mass ratio (m2/m1 <= 1 or m1/m2 >= 1)"),
    Field("eta", "dimensionless", "symmetric mass ratio"),
    Field("chi1", "dimensionless", "spin magnitude of body 1"),
    Field("chi2", "dimensionless", "spin magnitude of body 2"),
    Field("chi1x", "dimensionless", "spin vector of body 1, x"),
    Field("chi1y", "dimensionless", "spin vector of body 1, y"),
    Field("chi1z", "dimensionless", "spin of body 1 along L (signed)"),
    Field("chi2x", "dimensionless", "spin vector of body 2, x"),
    Field("chi2y", "dimensionless", "spin vector of body 2, y"),
    Field("chi2z", "dimensionless", "spin of body 2 along L (signed)"),
    Field("chi_eff", "dimensionless", "effective aligned spin"),
    Field("tilt1", "angle", "tilt of spin 1 against L"),
    Field("tilt2", "angle", "tilt of spin 2 against L"),
    Field("cos_tilt1", "dimensionless", "cosine of tilt 1"),
    Field("cos_tilt2", "dimensionless", "cosine of tilt 2"),
    Field("phi12", "angle", "azimuth between the in-plane spins"),
    Field("z", "dimensionless", "redshift"),
    Field("dl", "length", "luminosity distance"),
    Field("lambda1", "dimensionless", "tidal deformability of body 1"),
    Field("lambda2", "dimensionless", "tidal deformability of body 2"),
    Field("vt", "volume_time", "sensitive volume-time"),
    Field("kind", "str", "BBH, NSBH or BNS"),
    Field("spin_assumption", "str", "full, aligned, effective or none"),
)
FIELDS: dict[str, Field] = {f.name: f for f in _FIELD_LIST}

# Spellings per field (written with separators for readability; matching ignores them).
# ``{i}`` in a field and its spellings stands for body 1 and body 2.
_SPELLINGS: tuple[tuple[str, tuple[str, ...]], ...] = (
    ("event", ("event", "event_name", "event_id", "event_label", "evt", "name")),
    ("sample", ("sample", "sample_id", "sample_index", "sample_idx", "sample_no", "draw")),
    ("weight", ("weight", "weights", "wt", "sample_weight", "sampling_weight", "pop_weight")),
    ("m{i}", ("m{i}", "mass{i}", "mass_{i}", "component_mass_{i}")),
    ("mchirp", ("mchirp", "chirp_mass", "mc", "m_chirp")),
    ("mtotal", ("mtotal", "mtot", "m_total", "total_mass", "mass_total")),
    ("q", ("q", "mass_ratio")),
    ("eta", ("eta", "symmetric_mass_ratio", "sym_mass_ratio")),
    (
        "chi{i}",
        (
            "chi{i}",
            "a{i}",
            "spin{i}",
            "spin_magnitude_{i}",
            "spin{i}_magnitude",
            "chi{i}_mag",
        ),
    ),
    ("chi{i}x", ("chi{i}x", "spin{i}x", "s{i}x", "a{i}x")),
    ("chi{i}y", ("chi{i}y", "spin{i}y", "s{i}y", "a{i}y")),
    ("chi{i}z", ("chi{i}z", "spin{i}z", "s{i}z", "a{i}z")),
    ("chi_eff", ("chi_eff", "chieff", "xeff", "effective_spin", "chi_effective")),
    ("tilt{i}", ("tilt{i}", "theta{i}", "tilt_angle_{i}", "spin_tilt_{i}")),
    ("cos_tilt{i}", ("cos_tilt{i}", "cos_theta{i}", "cos_tilt_angle_{i}")),
    ("phi12", ("phi12", "phi_12", "delta_phi", "delta_phi12", "dphi12")),
    ("z", ("z", "redshift", "cosmological_redshift")),
    ("dl", ("dl", "d_l", "dlum", "lum_dist", "luminosity_distance", "distance", "dist")),
    ("lambda{i}", ("lambda{i}", "lam{i}", "tidal_deformability_{i}")),
    ("vt", ("vt", "sensitive_vt", "sensitive_volume_time")),
    ("kind", ("kind", "binary_kind", "binary_type", "source_type", "source_class")),
    ("spin_assumption", ("spin_assumption",)),
    ("m1", ("m_primary", "primary_mass", "mass_primary")),
    ("m2", ("m_secondary", "secondary_mass", "mass_secondary")),
)

# The canonical catalogue names themselves (re-ingesting a catalogue works): field, frame, unit.
_CANONICAL_NAMES: dict[str, tuple[str, str | None, str | None]] = {
    "m1_msun": ("m1", "source", "solMass"),
    "m2_msun": ("m2", "source", "solMass"),
    "tilt1_rad": ("tilt1", None, "rad"),
    "tilt2_rad": ("tilt2", None, "rad"),
    "phi12_rad": ("phi12", None, "rad"),
    "dl_mpc": ("dl", None, "Mpc"),
    "vt_gpc3_yr": ("vt", None, "Gpc3 yr"),
}

# Frame markers (normalised), longest first so that "detectorframe" wins over "det".
_FRAME_MARKERS: tuple[tuple[str, str], ...] = (
    ("detectorframe", "detector"),
    ("sourceframe", "source"),
    ("detframe", "detector"),
    ("srcframe", "source"),
    ("detector", "detector"),
    ("source", "source"),
    ("det", "detector"),
    ("src", "source"),
)

# Unit words that may trail a name after a separator (normalised suffix -> astropy unit).
_UNIT_SUFFIXES: tuple[tuple[str, str, str], ...] = (
    ("solmass", "solMass", "mass"),
    ("msun", "solMass", "mass"),
    ("kg", "kg", "mass"),
    ("gpc", "Gpc", "length"),
    ("mpc", "Mpc", "length"),
    ("kpc", "kpc", "length"),
    ("deg", "deg", "angle"),
    ("rad", "rad", "angle"),
)

_SEP = re.compile(r"[\s_\-\.]+")


def normalise(name: str) -> str:
    """Lower-case a name and drop spaces, underscores, hyphens and dots."""
    return _SEP.sub("", str(name).strip().lower())


def _build_aliases() -> dict[str, tuple[str, str | None, str | None]]:
    table: dict[str, tuple[str, str | None, str | None]] = {}

    def add(spelling: str, fld: str, frame: str | None = None, unit: str | None = None) -> None:
        key = normalise(spelling)
        if key in table and table[key][0] != fld:  # pragma: no cover - guards the table itself
            raise RuntimeError(f"alias {spelling!r} claimed by {table[key][0]} and {fld}")
        table[key] = (fld, frame, unit)

    for pattern, spellings in _SPELLINGS:
        for sp in spellings:
            if "{i}" in pattern:
                for i in ("1", "2"):
                    add(sp.replace("{i}", i), pattern.replace("{i}", i))
            else:
                add(sp, pattern)
    for name, (fld, frame, unit) in _CANONICAL_NAMES.items():
        add(name, fld, frame, unit)
    for fld in FIELDS:
        add(fld, fld)
    return table


ALIASES: dict[str, tuple[str, str | None, str | None]] = _build_aliases()


@dataclass(frozen=True)
class Match:
    """What a column name means: the field, an explicit frame, and a unit implied by the name."""

    field: str
    frame: str | None = None
    unit: str | None = None


def _lookup_frame(key: str) -> Match | None:
    if key in ALIASES:
        return Match(*ALIASES[key])
    for marker, frame in _FRAME_MARKERS:
        for rest in (
            key[: -len(marker)] if key.endswith(marker) else None,
            key[len(marker) :] if key.startswith(marker) else None,
        ):
            if rest and rest in ALIASES:
                fld, implied, unit = ALIASES[rest]
                if FIELDS[fld].is_mass and implied in (None, frame):
                    return Match(fld, frame, unit)
    return None


def match_name(name: str) -> Match | None:
    """The field a column name (without a bracketed unit) stands for, or None if unknown."""
    key = normalise(name)
    if not key:
        return None
    found = _lookup_frame(key)
    if found is not None:
        return found
    for suffix, unit, dimension in _UNIT_SUFFIXES:
        if key.endswith(suffix) and len(key) > len(suffix):
            inner = _lookup_frame(key[: -len(suffix)])
            if inner is not None and FIELDS[inner.field].dimension == dimension:
                return Match(inner.field, inner.frame, unit)
    return None


# --------------------------------------------------------------------------------------------
# The column plan
# --------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class PlannedColumn:
    """One input column assigned to a field, with its frame and unit conversion."""

    column: str  # the input column name as it appears in the file
    field: str
    frame: str | None  # "source" / "detector" for masses, else None
    frame_given: bool  # frame came from the name or the mapping, not from --mass-frame
    unit: UnitConversion
    unit_origin: str  # "header", "option", "metadata", "name", "assumed", "dimensionless"


@dataclass(frozen=True)
class ColumnPlan:
    """Which input column holds which field; the columns left unused."""

    columns: Mapping[str, PlannedColumn]
    ignored: tuple[str, ...] = field(default=())

    def has(self, *names: str) -> bool:
        return all(n in self.columns for n in names)

    def any(self, *names: str) -> bool:
        return any(n in self.columns for n in names)

    def __getitem__(self, name: str) -> PlannedColumn:
        return self.columns[name]


def _find_column(theirs: str, columns: Sequence[str], option: str) -> str:
    if theirs in columns:
        return theirs
    for stage in (
        lambda c: split_header(c)[0] == theirs,
        lambda c: split_header(c)[0].lower() == theirs.lower(),
        lambda c: normalise(split_header(c)[0]) == normalise(theirs),
    ):
        hits = [c for c in columns if stage(c)]
        if len(hits) == 1:
            return hits[0]
        if len(hits) > 1:
            raise SchemaError(
                f"{option} {theirs!r} matches several columns: {', '.join(map(repr, hits))}"
            )
    raise SchemaError(
        f"{option}: no column {theirs!r} in the input; columns are: "
        + ", ".join(map(repr, columns))
    )


def _field_of_key(key: str, option: str) -> Match:
    found = match_name(split_header(key)[0])
    if found is None:
        raise OptionError(
            f"{option} {key!r}: {key!r} is not a known quantity; use a catalogue column name "
            "(m1_msun, dl_mpc, ...) or a quantity such as mchirp, q, eta, mtotal, chi1z, chi_eff, "
            "cos_tilt1, z, dl"
        )
    return found


def plan_columns(
    columns: Sequence[str],
    mapping: Mapping[str, str] | None = None,
    units: Mapping[str, str] | None = None,
    metadata_units: Mapping[str, str] | None = None,
    mass_frame: str = "source",
    path: str = "input",
) -> ColumnPlan:
    """Assign input columns to fields.

    ``mapping`` is ``{canonical-or-quantity: their column}`` (``--column``), ``units`` is
    ``{column-or-quantity: unit}`` (``--unit``), ``metadata_units`` the units stored in the file
    itself (FITS, ECSV). Unlabelled masses take ``mass_frame``. Raises SchemaError for duplicate
    headers and for several columns matching one field (listing the candidates), UnitError for
    unusable units, OptionError for mappings that name nothing.
    """
    if mass_frame not in ("source", "detector"):
        raise OptionError(f"mass frame {mass_frame!r}: expected 'source' or 'detector'")
    columns = [str(c) for c in columns]
    dupes = sorted({c for c in columns if columns.count(c) > 1})
    if dupes:
        raise SchemaError(f"{path}: duplicate column name(s): {', '.join(map(repr, dupes))}")
    metadata_units = dict(metadata_units or {})

    chosen: dict[str, tuple[str, Match]] = {}  # field -> (column, match)
    for key, theirs in (mapping or {}).items():
        m = _field_of_key(key, "--column")
        col = _find_column(theirs, columns, f"--column {key}=")
        if m.field in chosen:
            raise OptionError(f"--column: {m.field} mapped twice ({chosen[m.field][0]!r}, {col!r})")
        if any(c == col for c, _ in chosen.values()):
            raise OptionError(f"--column: column {col!r} mapped to two quantities")
        chosen[m.field] = (col, m)

    used = {c for c, _ in chosen.values()}
    candidates: dict[str, list[tuple[str, Match]]] = {}
    ignored: list[str] = []
    for col in columns:
        if col in used:
            continue
        m = match_name(split_header(col)[0])
        if m is None or m.field in chosen:
            ignored.append(col)
            continue
        candidates.setdefault(m.field, []).append((col, m))
    for fld, hits in candidates.items():
        if len(hits) > 1:
            names = ", ".join(repr(c) for c, _ in hits)
            raise SchemaError(
                f"{path}: several columns could be {fld} ({FIELDS[fld].doc}): {names}; "
                f"choose one with --column {fld}=NAME"
            )
        chosen[fld] = hits[0]

    # Unit overrides: keyed by input column or by quantity.
    unit_for: dict[str, str] = {}
    for key, unit in (units or {}).items():
        col = None
        try:
            col = _find_column(key, columns, "--unit")
        except SchemaError:
            m = match_name(split_header(key)[0])
            if m is not None and m.field in chosen:
                col = chosen[m.field][0]
        if col is None or all(c != col for c, _ in chosen.values()):
            raise OptionError(
                f"--unit {key}={unit}: {key!r} is neither a used input column nor a quantity "
                "found in the input"
            )
        unit_for[col] = unit

    planned: dict[str, PlannedColumn] = {}
    for fld, (col, m) in chosen.items():
        dim = FIELDS[fld].dimension
        header_unit = split_header(col)[1]
        if col in unit_for:
            text, origin = unit_for[col], "option"
        elif header_unit is not None:
            text, origin = header_unit, "header"
        elif metadata_units.get(col):
            text, origin = metadata_units[col], "metadata"
        elif m.unit is not None:
            text, origin = m.unit, "name"
        else:
            text, origin = None, "assumed"
        if dim in ("str", "int"):
            if text not in (None, ""):
                raise SchemaError(f"{path}: column {col!r} ({fld}) cannot carry a unit ({text!r})")
            conv = UnitConversion("", "", 1.0)
            origin = "dimensionless"
        else:
            conv = conversion(text, dim, what=f"{path}: column {col!r}")
            if dim == "dimensionless" and origin == "assumed":
                origin = "dimensionless"
        frame = None
        frame_given = False
        if FIELDS[fld].is_mass:
            frame_given = m.frame is not None
            frame = m.frame if frame_given else mass_frame
        planned[fld] = PlannedColumn(col, fld, frame, frame_given, conv, origin)
    return ColumnPlan(columns=planned, ignored=tuple(ignored))
