"""Validation and conversion of input batches into canonical catalogue rows.

:class:`BatchConverter` turns one raw record batch (columns as read) into accepted canonical
rows and rejected raw rows with a reason. It decides once, from the column plan, how masses,
distances and spins are obtained (the *parametrisation*), then applies that decision to every
batch with vectorised numpy. Each row gets the first reason it fails; with ``on_bad="error"``
the first failing check raises :class:`~gwdeficit.schema.BadRowsError` instead.

Checks (reason texts are stable; they are counted in the summary):
non-numeric cells, missing values (empty, null, NaN), infinite values, masses <= 0, mass ratios
<= 0, symmetric mass ratios outside (0, 1/4], spin magnitudes outside 0..1, spin components
outside -1..1, tilts outside 0..pi, cos(tilt) outside -1..1, redshift < 0, distance < 0,
weights < 0, tidal deformabilities < 0, sample indices that are not integers >= 0, unknown
kinds, and redundant columns that disagree with the primary parametrisation by more than 1e-3
(relative for masses and distance, absolute for spins and angles).
"""

from __future__ import annotations

import contextlib
from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

import numpy as np

from gwdeficit import convert
from gwdeficit.io.aliases import FIELDS, ColumnPlan
from gwdeficit.io.formats import DEFAULT_BATCH_ROWS
from gwdeficit.schema import (
    CATALOGUE_COLUMNS,
    INGEST_HINT,
    KINDS,
    SPIN_ASSUMPTIONS,
    BadRowsError,
    InputFileError,
    OptionError,
    SchemaError,
)

if TYPE_CHECKING:
    import pandas as pd
    import pyarrow as pa

#: Tolerance of the redundant-column checks (relative for masses and distance, absolute for
#: spins and angles). Common practice, no source: well above printed-table rounding.
REDUNDANCY_TOL = 1e-3
#: Default neutron-star maximum mass in Msun (common practice, no source).
NS_MAX_MASS = 3.0

MASS_MODES: tuple[tuple[str, str], ...] = (
    ("m1", "m2"),
    ("mchirp", "q"),
    ("mchirp", "eta"),
    ("mtotal", "q"),
    ("mtotal", "eta"),
    ("mchirp", "mtotal"),
)
_MASS_FIELDS = ("m1", "m2", "mchirp", "mtotal", "q", "eta")
_VECTOR_FIELDS = ("chi1x", "chi1y", "chi1z", "chi2x", "chi2y", "chi2z")
_KIND_SPELLINGS = {"BBH": 0, "BHBH": 0, "NSBH": 1, "BHNS": 1, "BNS": 2, "NSNS": 2}


@dataclass(frozen=True)
class IngestOptions:
    """Options of the ingest stage (the command line's options, as a typed value).

    columns: ``{canonical-or-quantity: their column}`` maps; units: ``{column-or-quantity:
    unit}``; cosmology: an astropy realization name; mass_frame: frame of masses whose name
    carries no frame marker; ns_max_mass: neutron-star maximum mass (Msun) used to classify
    bodies when there is no kind column; on_bad: ``"error"`` or ``"skip"``; fmt: input format
    (None: from the suffix); event: label for every row of a table without an event column
    (a single-event posterior file); batch_rows: rows per batch.
    """

    columns: Mapping[str, str] = field(default_factory=dict)
    units: Mapping[str, str] = field(default_factory=dict)
    cosmology: str = convert.DEFAULT_COSMOLOGY
    mass_frame: str = "source"
    ns_max_mass: float = NS_MAX_MASS
    on_bad: str = "error"
    fmt: str | None = None
    event: str | None = None
    batch_rows: int = DEFAULT_BATCH_ROWS

    def __post_init__(self) -> None:
        if self.mass_frame not in ("source", "detector"):
            raise OptionError(f"mass frame {self.mass_frame!r}: expected 'source' or 'detector'")
        if self.on_bad not in ("error", "skip"):
            raise OptionError(f"on-bad {self.on_bad!r}: expected 'error' or 'skip'")
        if not (np.isfinite(self.ns_max_mass) and self.ns_max_mass > 0):
            raise OptionError(f"neutron-star maximum mass {self.ns_max_mass!r}: must be > 0")
        if int(self.batch_rows) < 1:
            raise OptionError(f"batch size {self.batch_rows!r}: must be >= 1")
        if self.event is not None and not str(self.event).strip():
            raise OptionError("event label: must not be empty")
        convert.get_cosmology(self.cosmology)

    def describe(self) -> dict[str, Any]:
        """JSON-able form for provenance."""
        return {
            "columns": dict(self.columns),
            "units": dict(self.units),
            "cosmology": self.cosmology,
            "mass_frame": self.mass_frame,
            "ns_max_mass": self.ns_max_mass,
            "on_bad": self.on_bad,
            "format": self.fmt,
            "event": self.event,
        }


@dataclass
class Tally:
    """Running counts over batches, for the summary (mutable accumulator)."""

    rows_read: int = 0
    rows_accepted: int = 0
    rejects: dict[str, int] = field(default_factory=dict)
    swapped: int = 0
    phi12_wrapped: int = 0
    q_convention: str | None = None  # "m2/m1" or "m1/m2"
    kinds: dict[str, int] = field(default_factory=dict)
    spin_assumptions: dict[str, int] = field(default_factory=dict)
    event_counts: dict[str, int] = field(default_factory=dict)
    singleton_events: int = 0  # rows that are their own event (no event column)
    ranges: dict[str, list[float]] = field(default_factory=dict)

    def add_range(self, name: str, values: np.ndarray) -> None:
        if values.size == 0:
            return
        lo, hi = float(np.min(values)), float(np.max(values))
        if name in self.ranges:
            lo, hi = min(lo, self.ranges[name][0]), max(hi, self.ranges[name][1])
        self.ranges[name] = [lo, hi]

    def add_counts(self, target: dict[str, int], labels: np.ndarray, names: tuple[str, ...]):
        counts = np.bincount(labels, minlength=len(names))
        for name, c in zip(names, counts, strict=True):
            if c:
                target[name] = target.get(name, 0) + int(c)


@dataclass(frozen=True)
class ConvertedBatch:
    """One batch's outcome: canonical accepted rows and raw rejected rows with a reason."""

    accepted: pa.Table
    rejected: pd.DataFrame | None
    first_row: int
    n_read: int


def catalogue_schema(optional: tuple[str, ...]) -> pa.Schema:
    """Arrow schema of the catalogue: required columns plus the given optional ones."""
    import pyarrow as pa

    types = {"str": pa.string(), "int64": pa.int64(), "float64": pa.float64(), "bool": pa.bool_()}
    return pa.schema(
        [
            pa.field(c.name, types[c.dtype], nullable=c.name == "phi12_rad")
            for c in CATALOGUE_COLUMNS
            if c.required or c.name in optional
        ]
    )


def _unique_name(name: str, taken: list[str]) -> str:
    while name in taken:
        name += "_"
    return name


class BatchConverter:
    """Applies one column plan to record batches of one input (see module docstring)."""

    def __init__(
        self,
        plan: ColumnPlan,
        options: IngestOptions,
        path: str,
        input_columns: tuple[str, ...],
    ) -> None:
        self.plan = plan
        self.options = options
        self.path = path
        self.input_columns = input_columns
        self.grid = convert.distance_grid(options.cosmology)
        self.tally = Tally()
        self.mass_mode = self._mass_mode()
        self.spin_mode = self._spin_mode()
        if not plan.any("z", "dl"):
            raise SchemaError(
                f"{path}: no redshift or luminosity distance column (looked for z, redshift, "
                "dl, distance, luminosity_distance, ...); map one with --column z=NAME or "
                "--column dl=NAME"
            )
        if options.event is not None and plan.has("event"):
            raise OptionError(
                f"--event {options.event!r}: the input already has an event column "
                f"({plan['event'].column!r})"
            )
        self.optional = tuple(
            name
            for name, fld in (("lambda1", "lambda1"), ("lambda2", "lambda2"), ("vt_gpc3_yr", "vt"))
            if plan.has(fld) or (name.startswith("lambda") and plan.any("lambda1", "lambda2"))
        )
        self.schema = catalogue_schema(self.optional)
        self._reasons: list[str] = [""]
        self.notes = self._plan_notes()

    # ---------------------------------------------------------------------------------------
    # Parametrisation, decided once per input
    # ---------------------------------------------------------------------------------------

    def _mass_mode(self) -> tuple[str, str]:
        for mode in MASS_MODES:
            if self.plan.has(*mode):
                return mode
        found = [f for f in _MASS_FIELDS if self.plan.has(f)]
        raise SchemaError(
            f"{self.path}: cannot form component masses; found "
            f"{', '.join(found) if found else 'no mass column'}; need one of: m1 and m2, "
            "chirp mass with q or eta, total mass with q or eta, chirp mass with total mass"
        )

    def _spin_mode(self) -> str:
        p = self.plan
        if p.any("chi1x", "chi1y", "chi2x", "chi2y"):
            missing = [f for f in _VECTOR_FIELDS if not p.has(f)]
            if missing:
                raise SchemaError(
                    f"{self.path}: spin vectors are incomplete; missing {', '.join(missing)}"
                )
            return "vectors"
        if p.any("chi1", "chi2"):
            missing = [f for f in ("chi1", "chi2") if not p.has(f)]
            missing += [
                f"tilt{i} (or cos_tilt{i})" for i in (1, 2) if not p.any(f"tilt{i}", f"cos_tilt{i}")
            ]
            if missing:
                raise SchemaError(
                    f"{self.path}: spin magnitudes need both bodies and their tilt angles; "
                    f"missing {', '.join(missing)}"
                )
            return "magnitudes"
        if p.any("tilt1", "tilt2", "cos_tilt1", "cos_tilt2"):
            raise SchemaError(f"{self.path}: tilt angles given without spin magnitudes")
        if p.any("chi1z", "chi2z"):
            missing = [f for f in ("chi1z", "chi2z") if not p.has(f)]
            if missing:
                raise SchemaError(
                    f"{self.path}: aligned spins need both bodies; missing {missing[0]}"
                )
            return "aligned"
        if p.has("chi_eff"):
            return "effective"
        return "none"

    @property
    def spin_assumption(self) -> str:
        return {"vectors": "full", "magnitudes": "full"}.get(self.spin_mode, self.spin_mode)

    def _col(self, fld: str) -> str:
        return self.plan[fld].column

    def _plan_notes(self) -> list[str]:
        p, notes = self.plan, []
        for fld, pc in p.columns.items():
            dim = FIELDS[fld].dimension
            if pc.unit.factor != 1.0:
                notes.append(
                    f"{pc.column!r}: {pc.unit.given} -> {pc.unit.canonical} "
                    f"(x {pc.unit.factor:.10g}; unit from {pc.unit_origin})"
                )
            elif pc.unit_origin == "assumed" and dim in ("mass", "length", "angle", "volume_time"):
                notes.append(f"{pc.column!r}: no unit given, taken as {pc.unit.canonical}")
        unlabelled = [pc.column for pc in p.columns.values() if pc.frame and not pc.frame_given]
        if unlabelled:
            notes.append(
                f"unlabelled masses taken as {self.options.mass_frame} frame "
                f"(--mass-frame {self.options.mass_frame}): {', '.join(map(repr, unlabelled))}"
            )
        named = [pc.column for pc in p.columns.values() if pc.frame == "source" and pc.frame_given]
        if named:
            notes.append("source-frame masses by name or mapping: " + ", ".join(map(repr, named)))
        detector = [pc.column for pc in p.columns.values() if pc.frame == "detector"]
        if detector:
            notes.append(
                "masses divided by (1+z): detector frame -> source frame: "
                + ", ".join(map(repr, detector))
            )
        cosmo = self.grid.name
        if p.has("z") and p.has("dl"):
            notes.append(
                f"redshift and luminosity distance both given: checked against each other with "
                f"{cosmo} (relative tolerance {REDUNDANCY_TOL:g})"
            )
        elif p.has("dl"):
            notes.append(
                f"z from luminosity distance with {cosmo} (cubic-spline inversion of a "
                f"{convert.GRID_POINTS}-point grid; error < 1e-6 in z)"
            )
        else:
            notes.append(f"luminosity distance from z with {cosmo}")
        a, b = self.mass_mode
        names = {
            "m1": "m1",
            "m2": "m2",
            "mchirp": "chirp mass",
            "mtotal": "total mass",
            "q": "mass ratio",
            "eta": "symmetric mass ratio",
        }
        if self.mass_mode != ("m1", "m2"):
            notes.append(f"component masses from {names[a]} and {names[b]} (m1 >= m2)")
        extra = [f for f in _MASS_FIELDS if p.has(f) and f not in self.mass_mode]
        if extra:
            notes.append(
                f"{', '.join(names[f] for f in extra)} also given: checked against the "
                f"component masses (relative tolerance {REDUNDANCY_TOL:g})"
            )
        spin_note = {
            "vectors": "spins: vectors -> magnitude, tilt and phi12 (spin_assumption=full)",
            "magnitudes": "spins: magnitudes and tilts given (spin_assumption=full)",
            "aligned": (
                "spins: signed aligned components -> magnitude and tilt 0 or pi; no in-plane "
                "spin (spin_assumption=aligned)"
            ),
            "effective": (
                "spins: only the effective spin given; set chi1z = chi2z = chi_eff "
                "(equal aligned spins, spin_assumption=effective)"
            ),
            "none": "spins: none given, set to zero (spin_assumption=none)",
        }[self.spin_mode]
        notes.append(spin_note)
        if p.has("spin_assumption"):
            notes.append(f"spin_assumption taken from column {self._col('spin_assumption')!r}")
        if not p.has("phi12"):
            if self.spin_mode == "magnitudes":
                notes.append("phi12: not given, left missing (NaN)")
            elif self.spin_mode != "vectors":
                notes.append("phi12: set to 0 (no in-plane spin, so its value has no effect)")
        if p.has("kind"):
            notes.append(f"kind from column {self._col('kind')!r}")
        else:
            notes.append(
                f"kind from source-frame masses: a body above {self.options.ns_max_mass:g} Msun "
                "is a black hole (--ns-max-mass; common practice, no source)"
            )
        if p.has("event"):
            if not p.has("sample"):
                notes.append(
                    "no sample column: samples numbered 0.. within each event, in file order"
                )
        elif self.options.event is not None:
            notes.append(
                f"no event column: every row belongs to event {self.options.event!r} (--event); "
                "samples numbered 0.. in file order"
            )
        else:
            notes.append("no event column: each row is its own event, labelled row<N>, sample 0")
            if p.has("sample"):
                notes.append(f"column {self._col('sample')!r} not used: each row is its own event")
        for a, b in (("lambda1", "lambda2"), ("lambda2", "lambda1")):
            if p.has(a) and not p.has(b):
                notes.append(
                    f"{b}: not given, left missing (NaN); in rows relabelled because m1 < m2 "
                    f"it is {a} that is missing"
                )
        if not p.has("weight"):
            notes.append("no weight column: weight = 1")
        if p.ignored:
            notes.append("input columns not used: " + ", ".join(map(repr, p.ignored)))
        return notes

    # ---------------------------------------------------------------------------------------
    # Per batch
    # ---------------------------------------------------------------------------------------

    def reason_code(self, text: str) -> int:
        if text not in self._reasons:
            self._reasons.append(text)
        return self._reasons.index(text)

    def convert(self, table: pa.Table, first_row: int) -> ConvertedBatch:
        """Convert one raw batch whose first row is data row ``first_row`` (1-based)."""
        # Hostile values (1e308, inf) overflow harmlessly in intermediate steps; such rows are
        # rejected by the checks, so numpy's floating-point warnings would only be noise.
        with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
            return _Batch(self, table, first_row).run()

    def data_notes(self) -> list[str]:
        """Notes that depend on the data seen so far (conventions detected, rows swapped)."""
        t, notes = self.tally, []
        if self.plan.has("q"):
            col = self._col("q")
            if t.q_convention == "m1/m2":
                notes.append(f"mass ratio {col!r} holds m1/m2 >= 1: inverted to q = m2/m1 <= 1")
            elif t.q_convention == "m2/m1":
                notes.append(f"mass ratio {col!r} holds q = m2/m1 <= 1")
            else:
                notes.append(f"mass ratio {col!r}: every value is 1 (equal masses)")
        if t.swapped:
            notes.append(
                f"m1 < m2 in {t.swapped} row(s): labels swapped together with their spins "
                "(and tidal deformabilities)"
            )
        if t.phi12_wrapped:
            notes.append(f"phi12 wrapped into [0, 2 pi) in {t.phi12_wrapped} row(s)")
        return notes


class _Batch:
    """The work on one batch; holds the per-row reason codes."""

    def __init__(self, conv: BatchConverter, table: pa.Table, first_row: int) -> None:
        self.c = conv
        self.plan = conv.plan
        self.table = table
        self.n = table.num_rows
        self.rows = np.arange(first_row, first_row + self.n, dtype=np.int64)
        self.code = np.zeros(self.n, dtype=np.int32)
        self.first_row = first_row
        self._check_text()

    def _check_text(self) -> None:
        """Text columns must hold valid UTF-8 (Arrow does not check on read; a damaged or
        carelessly written Parquet/Feather file can break that promise)."""
        import pyarrow as pa

        for name, col in zip(self.table.column_names, self.table.columns, strict=True):
            t = col.type.value_type if pa.types.is_dictionary(col.type) else col.type
            if pa.types.is_string(t) or pa.types.is_large_string(t):
                try:
                    col.validate(full=True)
                except pa.ArrowInvalid as exc:
                    last = self.first_row + self.n - 1
                    raise InputFileError(
                        f"{self.c.path}: column {name!r} holds text that is not valid UTF-8 "
                        f"(among data rows {self.first_row}..{last}); the file may be damaged"
                    ) from exc

    # -- marking --------------------------------------------------------------------------

    def mark(self, mask: np.ndarray, column: str, reason: str) -> None:
        new = np.asarray(mask, dtype=bool) & (self.code == 0)
        if not new.any():
            return
        if self.c.options.on_bad == "error":
            bad = self.rows[new]
            raise BadRowsError(
                self.c.path, column, reason, bad[:20], n_total=int(bad.size), hint=INGEST_HINT
            )
        self.code[new] = self.c.reason_code(f"column {column!r}: {reason}")

    @property
    def ok(self) -> np.ndarray:
        return self.code == 0

    # -- reading cells ---------------------------------------------------------------------

    def _to_float(self, fld: str) -> tuple[np.ndarray, np.ndarray]:
        """Values and a status per cell: 0 ok, 1 missing, 2 not a number, 3 infinite."""
        import pandas as pd
        import pyarrow as pa
        import pyarrow.compute as pc

        col = self.c._col(fld)
        arr = self.table.column(col)
        t = arr.type
        if pa.types.is_dictionary(t):
            arr = arr.cast(t.value_type)
            t = arr.type
        status = np.zeros(self.n, dtype=np.int8)
        if pa.types.is_integer(t) or pa.types.is_floating(t) or pa.types.is_decimal(t):
            # unsafe cast: integers beyond 2^53 become the nearest float64 instead of failing
            vals = np.asarray(pc.cast(arr, pa.float64(), safe=False).to_numpy(), dtype=np.float64)
            nulls = arr.is_null().to_numpy() if arr.null_count else np.zeros(self.n, bool)
        elif pa.types.is_string(t) or pa.types.is_large_string(t):
            try:
                f = pc.cast(arr, pa.float64())
                vals = np.asarray(f.to_numpy(), dtype=np.float64)
                nulls = arr.is_null().to_numpy() if arr.null_count else np.zeros(self.n, bool)
            except (pa.ArrowInvalid, pa.ArrowNotImplementedError):
                s = pd.Series(arr.to_pandas(), dtype=object)
                stripped = s.str.strip()
                vals = np.array(pd.to_numeric(stripped, errors="coerce"), dtype=np.float64)
                finite = np.isfinite(vals)
                if finite.any():
                    # pandas' parser misrounds some spellings (a leading '+': 1 ulp off); the
                    # cells it accepted are re-read with Arrow's correctly rounded parser.
                    cells = pa.array(stripped[finite].to_numpy(dtype=object), type=pa.string())
                    with contextlib.suppress(pa.ArrowInvalid, pa.ArrowNotImplementedError):
                        vals[finite] = pc.cast(cells, pa.float64()).to_numpy()
                low = stripped.str.lower()
                nulls = (s.isna() | stripped.eq("") | low.isin(("nan", "+nan", "-nan"))).to_numpy(
                    dtype=bool
                )
                status[np.isnan(vals) & ~nulls] = 2
        elif pa.types.is_null(t):
            vals = np.full(self.n, np.nan)
            nulls = np.ones(self.n, dtype=bool)
        else:
            raise SchemaError(
                f"{self.c.path}: column {col!r} ({fld}) holds {t} values, not numbers"
            )
        status[(nulls | np.isnan(vals)) & (status == 0)] = 1
        status[np.isinf(vals)] = 3
        return vals, status

    def number(self, fld: str, allow_missing: bool = False) -> np.ndarray:
        """Canonical-unit float values of a field; bad cells marked, and NaN."""
        vals, status = self._to_float(fld)
        col = self.c._col(fld)
        self.mark(status == 2, col, "not a number")
        if not allow_missing:
            self.mark(status == 1, col, "missing value (empty, null or NaN)")
        self.mark(status == 3, col, "infinite value")
        vals = np.where(status == 0, vals, np.nan)
        factor = self.plan[fld].unit.factor
        return vals * factor if factor != 1.0 else vals

    def strings(self, fld: str) -> pa.ChunkedArray:
        import pyarrow as pa
        import pyarrow.compute as pc

        col = self.c._col(fld)
        arr = self.table.column(col)
        if pa.types.is_dictionary(arr.type):
            arr = arr.cast(arr.type.value_type)
        t = arr.type
        if pa.types.is_binary(t) or pa.types.is_large_binary(t):
            try:
                arr = arr.cast(pa.string())
            except pa.ArrowInvalid:  # some cells are not UTF-8: those rows are rejected
                cells = arr.to_pylist()
                text: list[str | None] = []
                bad = np.zeros(self.n, dtype=bool)
                for i, b in enumerate(cells):
                    try:
                        text.append(None if b is None else b.decode("utf-8"))
                    except UnicodeDecodeError:
                        text.append(None)
                        bad[i] = True
                self.mark(bad, col, "label is not valid UTF-8 text")
                arr = pa.chunked_array([pa.array(text, type=pa.string())])
        elif pa.types.is_integer(t) or pa.types.is_floating(t):
            arr = pc.cast(arr, pa.string())
        elif not (pa.types.is_string(t) or pa.types.is_large_string(t)):
            raise SchemaError(f"{self.c.path}: column {col!r} ({fld}) holds {t} values, not text")
        return pc.utf8_trim_whitespace(arr.cast(pa.string()))

    def _missing_str(self, arr: pa.ChunkedArray) -> np.ndarray:
        import pyarrow.compute as pc

        empty = pc.fill_null(pc.equal(arr, ""), True)
        return np.asarray(empty.to_numpy(zero_copy_only=False), dtype=bool)

    def choice(self, fld: str, values: dict[str, int], what: str) -> np.ndarray:
        """Index of each cell's value among ``values`` (case-insensitive); -1 marked bad."""
        import pyarrow as pa
        import pyarrow.compute as pc

        arr = pc.utf8_upper(self.strings(fld))
        keys = list(values)
        idx = pc.index_in(arr, value_set=pa.array(keys))
        pos = np.asarray(pc.fill_null(idx, -1).to_numpy(zero_copy_only=False), dtype=np.int64)
        lookup = np.array([values[k] for k in keys], dtype=np.int64)
        out = np.where(pos >= 0, lookup[np.maximum(pos, 0)], -1)
        self.mark(out < 0, self.c._col(fld), what)
        return out

    # -- checks ----------------------------------------------------------------------------

    def range_check(
        self, fld: str, v: np.ndarray, lo: float, hi: float, reason: str, lo_open: bool = False
    ) -> None:
        bad = (v <= lo if lo_open else v < lo) | (v > hi)
        self.mark(bad & ~np.isnan(v), self.c._col(fld), reason)

    def agree(
        self,
        fld: str,
        given: np.ndarray,
        derived: np.ndarray,
        what: str,
        relative: bool = True,
        angle: bool = False,
    ) -> None:
        if angle:
            diff = np.abs(np.mod(given - derived + np.pi, 2 * np.pi) - np.pi)
        else:
            diff = np.abs(given - derived)
        tol = REDUNDANCY_TOL * np.abs(given) if relative else REDUNDANCY_TOL
        kind = "relative" if relative else "absolute"
        self.mark(
            (diff > tol) & ~np.isnan(given) & ~np.isnan(derived),
            self.c._col(fld),
            f"disagrees with {what} ({kind} difference > {REDUNDANCY_TOL:g})",
        )

    # -- the pipeline ----------------------------------------------------------------------

    def run(self) -> ConvertedBatch:
        import pyarrow as pa

        c, p, opts = self.c, self.plan, self.c.options
        pi = np.pi
        # 1. read every used numeric column, in input-column order (first bad column wins)
        v: dict[str, np.ndarray] = {}
        order = sorted(p.columns, key=lambda f: c.input_columns.index(p[f].column))
        sample_used = p.has("event") or opts.event is not None
        for fld in order:
            if FIELDS[fld].dimension != "str" and (fld != "sample" or sample_used):
                v[fld] = self.number(fld, allow_missing=fld == "phi12")

        # 2. ranges of the raw values
        for fld in ("m1", "m2", "mchirp", "mtotal"):
            if fld in v:
                self.range_check(fld, v[fld], 0.0, np.inf, "mass <= 0", lo_open=True)
        if "q" in v:
            self.range_check("q", v["q"], 0.0, np.inf, "mass ratio <= 0", lo_open=True)
        if "eta" in v:
            self.range_check(
                "eta",
                v["eta"],
                0.0,
                0.25 * (1 + 1e-12),
                "symmetric mass ratio outside (0, 0.25]",
                lo_open=True,
            )
        for fld in ("chi1", "chi2"):
            if fld in v:
                self.range_check(fld, v[fld], 0.0, 1.0, "spin magnitude outside 0..1")
        for fld in (*_VECTOR_FIELDS, "chi_eff"):
            if fld in v:
                self.range_check(fld, v[fld], -1.0, 1.0, "spin component outside -1..1")
        for fld in ("cos_tilt1", "cos_tilt2"):
            if fld in v:
                self.range_check(fld, v[fld], -1.0, 1.0, "cos(tilt) outside -1..1")
        for fld in ("tilt1", "tilt2"):
            if fld in v:
                reason = "tilt outside 0..pi"
                if p[fld].unit_origin == "assumed" and np.nanmax(v[fld], initial=0) <= 180.0:
                    reason += (
                        f" (values look like degrees: write '{fld} [deg]' or --unit {fld}=deg)"
                    )
                self.range_check(fld, v[fld], 0.0, pi * (1 + 1e-12), reason)
        if "z" in v:
            self.range_check("z", v["z"], 0.0, np.inf, "redshift < 0")
            self.range_check(
                "z",
                v["z"],
                0.0,
                c.grid.z_max,
                f"redshift above {c.grid.z_max:g} (distance grid limit)",
            )
        if "dl" in v:
            self.range_check("dl", v["dl"], 0.0, np.inf, "luminosity distance < 0")
            self.range_check(
                "dl",
                v["dl"],
                0.0,
                c.grid.dl_max,
                f"luminosity distance beyond z = {c.grid.z_max:g} (grid limit)",
            )
        if "weight" in v:
            self.range_check("weight", v["weight"], 0.0, np.inf, "weight < 0")
        for fld in ("lambda1", "lambda2"):
            if fld in v:
                self.range_check(fld, v[fld], 0.0, np.inf, "tidal deformability < 0")
        if "vt" in v:
            self.range_check("vt", v["vt"], 0.0, np.inf, "volume-time < 0")
        if "sample" in v:
            s = v["sample"]
            self.mark(
                ~np.isnan(s) & ((s < 0) | (s != np.floor(s)) | (s > 2.0**53)),
                c._col("sample"),
                "sample index is not an integer >= 0",
            )

        # 3. mass-ratio convention
        if "q" in v:
            v["q"] = self._q_convention(v["q"])

        # 4. redshift and distance
        if "z" in v:
            z = v["z"]
            dl = c.grid.dl_of_z(z)
            if "dl" in v:
                self.agree("dl", v["dl"], dl, f"the redshift under {c.grid.name}")
                dl = v["dl"]
        else:
            dl = v["dl"]
            z = c.grid.z_of_dl(dl)

        # 5. masses in the source frame
        src: dict[str, np.ndarray] = {}
        for fld in ("m1", "m2", "mchirp", "mtotal"):
            if fld in v:
                det = p[fld].frame == "detector"
                src[fld] = convert.source_frame_mass(v[fld], z) if det else v[fld]
        a, b = c.mass_mode
        swap = np.zeros(self.n, dtype=bool)
        if (a, b) == ("m1", "m2"):
            m1, m2 = src["m1"], src["m2"]
            swap = m1 < m2
            m1, m2 = np.where(swap, m2, m1), np.where(swap, m1, m2)
        else:
            fn = {
                ("mchirp", "q"): convert.masses_from_chirp_q,
                ("mchirp", "eta"): convert.masses_from_chirp_eta,
                ("mtotal", "q"): convert.masses_from_total_q,
                ("mtotal", "eta"): convert.masses_from_total_eta,
                ("mchirp", "mtotal"): convert.masses_from_chirp_total,
            }[(a, b)]
            first = src.get(a, v.get(a))
            second = src.get(b, v.get(b))
            m1, m2 = fn(first, second)
            inputs_ok = ~np.isnan(first) & ~np.isnan(second)
            self.mark(
                np.isnan(m1) & inputs_ok,
                f"{c._col(a)}, {c._col(b)}",
                "no pair of positive masses has these values",
            )
        if "mchirp" in src and "mchirp" not in c.mass_mode:
            self.agree("mchirp", src["mchirp"], convert.chirp_mass(m1, m2), "the component masses")
        if "mtotal" in src and "mtotal" not in c.mass_mode:
            self.agree("mtotal", src["mtotal"], m1 + m2, "the component masses")
        if "q" in v and "q" not in c.mass_mode:
            self.agree("q", v["q"], m2 / m1, "the component masses")
        if "eta" in v and "eta" not in c.mass_mode:
            self.agree(
                "eta", v["eta"], convert.symmetric_mass_ratio(m1, m2), "the component masses"
            )

        # 6. spins (in the input's labelling; swapped with the masses afterwards)
        chi1, chi2, t1, t2, phi = self._spins(v, m1, m2, swap)
        if "phi12" in v:
            given = v["phi12"]
            wrapped = convert.wrap_angle(given)
            changed = ~np.isnan(given) & (wrapped != given)
            if c.spin_mode == "vectors":
                inplane = (chi1 * np.sin(t1) > REDUNDANCY_TOL) & (
                    chi2 * np.sin(t2) > REDUNDANCY_TOL
                )
                self.agree(
                    "phi12",
                    np.where(inplane, wrapped, np.nan),
                    phi,
                    "the spin vectors",
                    relative=False,
                    angle=True,
                )
            else:
                phi = wrapped
        else:
            changed = np.zeros(self.n, dtype=bool)
        chi1, chi2 = np.where(swap, chi2, chi1), np.where(swap, chi1, chi2)
        t1, t2 = np.where(swap, t2, t1), np.where(swap, t1, t2)
        phi = np.where(swap, convert.wrap_angle(-phi), phi)
        lam = {}
        for fld in ("lambda1", "lambda2"):
            if fld in c.optional:
                lam[fld] = v.get(fld, np.full(self.n, np.nan))
        if lam:
            lam["lambda1"], lam["lambda2"] = (
                np.where(swap, lam["lambda2"], lam["lambda1"]),
                np.where(swap, lam["lambda1"], lam["lambda2"]),
            )

        # 7. labels: kind, spin assumption, event, sample
        if p.has("kind"):
            kind = self.choice("kind", _KIND_SPELLINGS, "unknown kind (expected BBH, NSBH or BNS)")
        else:
            nbh = (m1 > opts.ns_max_mass).astype(np.int64) + (m2 > opts.ns_max_mass)
            kind = 2 - nbh
        if p.has("spin_assumption"):
            spin_a = self.choice(
                "spin_assumption",
                {s.upper(): i for i, s in enumerate(SPIN_ASSUMPTIONS)},
                f"unknown spin assumption (expected {', '.join(SPIN_ASSUMPTIONS)})",
            )
        else:
            spin_a = np.full(self.n, SPIN_ASSUMPTIONS.index(c.spin_assumption), dtype=np.int64)
        events = None
        if p.has("event"):
            events = self.strings("event")
            self.mark(self._missing_str(events), c._col("event"), "missing event label")

        # 8. assemble
        ok = self.ok
        n_ok = int(ok.sum())
        t = c.tally
        t.rows_read += self.n
        t.rows_accepted += n_ok
        if n_ok < self.n:
            t.add_counts(t.rejects, self.code[~ok], tuple(c._reasons))
            t.rejects.pop("", None)
        t.swapped += int((swap & ok).sum())
        t.phi12_wrapped += int((changed & ok).sum())
        t.add_counts(t.kinds, kind[ok], KINDS)
        t.add_counts(t.spin_assumptions, spin_a[ok], SPIN_ASSUMPTIONS)
        for name, arr in (("m1_msun", m1), ("m2_msun", m2), ("z", z), ("dl_mpc", dl)):
            t.add_range(name, arr[ok])

        rows_ok = self.rows[ok]
        event_arr, sample = self._events(events, ok, rows_ok, v.get("sample"))
        weight = v["weight"][ok] if "weight" in v else np.ones(n_ok)
        data: dict[str, Any] = {
            "event": event_arr,
            "sample": sample,
            "weight": weight,
            "m1_msun": m1[ok],
            "m2_msun": m2[ok],
            "chi1": chi1[ok],
            "chi2": chi2[ok],
            "tilt1_rad": t1[ok],
            "tilt2_rad": t2[ok],
            "phi12_rad": pa.array(phi[ok], type=pa.float64(), from_pandas=True),
            "z": z[ok],
            "dl_mpc": dl[ok],
            "kind": pa.array(list(KINDS)).take(pa.array(kind[ok])),
            "spin_assumption": pa.array(list(SPIN_ASSUMPTIONS)).take(pa.array(spin_a[ok])),
            "input_row": rows_ok,
        }
        for fld, arr in lam.items():
            data[fld] = arr[ok]
        if "vt_gpc3_yr" in c.optional:
            data["vt_gpc3_yr"] = v["vt"][ok]
        accepted = pa.Table.from_arrays([data[f.name] for f in c.schema], schema=c.schema)
        rejected = None
        if n_ok < self.n:
            rejected = self._rejected(~ok)
        return ConvertedBatch(accepted, rejected, self.first_row, self.n)

    def _q_convention(self, q: np.ndarray) -> np.ndarray:
        c, t = self.c, self.c.tally
        good = self.ok & ~np.isnan(q)
        below = good & (q < 1 - 1e-9)
        above = good & (q > 1 + 1e-9)
        seen = t.q_convention
        if (
            (below.any() and above.any())
            or (seen == "m2/m1" and above.any())
            or (seen == "m1/m2" and below.any())
        ):
            lo = self.rows[below][:10].tolist() or "earlier rows"
            hi = self.rows[above][:10].tolist() or "earlier rows"
            raise SchemaError(
                f"{c.path}: column {c._col('q')!r}: mixed mass-ratio conventions: values below 1 "
                f"(rows {lo}) and above 1 (rows {hi}); use one convention throughout "
                "(q = m2/m1 <= 1 or q = m1/m2 >= 1)"
            )
        if below.any():
            t.q_convention = "m2/m1"
        elif above.any():
            t.q_convention = "m1/m2"
        with np.errstate(divide="ignore"):
            return np.where(q > 0, np.minimum(q, 1.0 / q), q)

    def _spins(self, v, m1, m2, swap):
        """(chi1, chi2, tilt1, tilt2, phi12) in the input's labelling, with redundancy checks."""
        c, n = self.c, self.n
        mode = c.spin_mode
        if mode == "vectors":
            chi1, chi2, t1, t2, phi = convert.spin_angles(*(v[f] for f in _VECTOR_FIELDS))
            self.mark(chi1 > 1, c._col("chi1x"), "spin vector 1 longer than 1")
            self.mark(chi2 > 1, c._col("chi2x"), "spin vector 2 longer than 1")
        elif mode == "magnitudes":
            chi1, chi2 = v["chi1"], v["chi2"]
            tilts = []
            for i in (1, 2):
                if f"tilt{i}" in v:
                    tilt = v[f"tilt{i}"]
                    if f"cos_tilt{i}" in v:
                        self.agree(
                            f"cos_tilt{i}",
                            v[f"cos_tilt{i}"],
                            np.cos(tilt),
                            f"tilt{i}",
                            relative=False,
                        )
                else:
                    tilt = np.arccos(np.clip(v[f"cos_tilt{i}"], -1, 1))
                tilts.append(tilt)
            t1, t2 = tilts
            phi = np.full(n, np.nan)
        elif mode == "aligned":
            chi1, t1 = convert.aligned_spin(v["chi1z"])
            chi2, t2 = convert.aligned_spin(v["chi2z"])
            phi = np.zeros(n)
        elif mode == "effective":
            chi1, t1 = convert.aligned_spin(v["chi_eff"])
            chi2, t2 = chi1.copy(), t1.copy()
            phi = np.zeros(n)
        else:
            chi1, chi2, t1, t2, phi = (np.zeros(n) for _ in range(5))
        # redundant spin columns
        for i, chi, tilt in ((1, chi1, t1), (2, chi2, t2)):
            if mode == "vectors":
                if f"chi{i}" in v:
                    self.agree(f"chi{i}", v[f"chi{i}"], chi, "the spin vector", relative=False)
                defined = chi > REDUNDANCY_TOL
                if f"tilt{i}" in v:
                    self.agree(
                        f"tilt{i}",
                        np.where(defined, v[f"tilt{i}"], np.nan),
                        tilt,
                        "the spin vector",
                        relative=False,
                    )
                if f"cos_tilt{i}" in v:
                    self.agree(
                        f"cos_tilt{i}",
                        np.where(defined, v[f"cos_tilt{i}"], np.nan),
                        np.cos(tilt),
                        "the spin vector",
                        relative=False,
                    )
            elif mode == "magnitudes" and f"chi{i}z" in v:
                self.agree(
                    f"chi{i}z",
                    v[f"chi{i}z"],
                    chi * np.cos(tilt),
                    f"chi{i} cos(tilt{i})",
                    relative=False,
                )
        if "chi_eff" in v and mode != "effective":
            # chi_eff is symmetric under relabelling, so the input labels can be used as they are
            mm1, mm2 = np.where(swap, m2, m1), np.where(swap, m1, m2)
            self.agree(
                "chi_eff",
                v["chi_eff"],
                convert.effective_spin(mm1, mm2, chi1, chi2, t1, t2),
                "the component spins",
                relative=False,
            )
        return chi1, chi2, t1, t2, phi

    def _events(self, events, ok, rows_ok, sample_given):
        import pandas as pd
        import pyarrow as pa
        import pyarrow.compute as pc

        c, t = self.c, self.c.tally
        n_ok = rows_ok.size
        if events is None and c.options.event is None:
            t.singleton_events += n_ok
            label = pc.binary_join_element_wise("row", pc.cast(pa.array(rows_ok), pa.string()), "")
            return label, np.zeros(n_ok, dtype=np.int64)
        if events is None:
            ev = pa.array(np.full(n_ok, str(c.options.event), dtype=object), type=pa.string())
        else:
            ev = events.filter(pa.array(ok)).combine_chunks()
        codes, uniques = pd.factorize(ev.to_numpy(zero_copy_only=False))
        counts = np.bincount(codes, minlength=len(uniques)) if n_ok else np.zeros(0, np.int64)
        offsets = np.fromiter(
            (t.event_counts.get(u, 0) for u in uniques), dtype=np.int64, count=len(uniques)
        )
        for u, k, o in zip(uniques, counts, offsets, strict=True):
            t.event_counts[u] = int(o + k)
        if sample_given is not None and events is not None:
            sample = sample_given[ok].astype(np.int64)
        else:
            within = pd.Series(codes).groupby(codes).cumcount().to_numpy(dtype=np.int64)
            sample = offsets[codes] + within if n_ok else np.zeros(0, np.int64)
        return ev, sample

    def _rejected(self, bad: np.ndarray) -> pd.DataFrame:
        import pyarrow as pa

        df = self.table.filter(pa.array(bad)).to_pandas()
        taken = list(df.columns)
        row_col = _unique_name("input_row", taken)
        reason_col = _unique_name("reason", [*taken, row_col])
        df.insert(0, row_col, self.rows[bad])
        df[reason_col] = np.asarray(self.c._reasons, dtype=object)[self.code[bad]]
        return df
