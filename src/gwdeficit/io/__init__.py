"""Catalogue ingest: any binary-parameter table -> the validated canonical catalogue.

Python API:

- :func:`load_catalogue` (file or DataFrame -> canonical catalogue DataFrame, metadata in
  ``.attrs``) and :func:`ingest_table` (the same plus the rejected rows and the summary);
- :func:`ingest` (writes ``catalogue.parquet`` and ``rejects.csv`` into the working folder,
  streaming batch by batch, atomically; returns the summary);
- :func:`read_catalogue` (reads a written catalogue back);
- :func:`iter_batches` / :class:`CatalogueStream` (the batch iterator the others are built on,
  for out-of-core work: memory is bounded by the batch size).

The stages are: :mod:`~gwdeficit.io.formats` opens the file and yields raw record batches,
:mod:`~gwdeficit.io.aliases` decides which column is which quantity (with
:mod:`~gwdeficit.io.units` for units), :mod:`~gwdeficit.io.validate` converts and checks each
batch. Results are research inputs; nothing is dropped or altered without being counted.
"""

from __future__ import annotations

import os
from collections.abc import Callable, Iterator, Mapping
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING, Any

from gwdeficit import convert
from gwdeficit.io.aliases import ColumnPlan, plan_columns
from gwdeficit.io.formats import DEFAULT_BATCH_ROWS, RawTable, open_table
from gwdeficit.io.validate import BatchConverter, ConvertedBatch, IngestOptions
from gwdeficit.schema import (
    CATALOGUE_COLUMNS,
    CATALOGUE_REQUIRED,
    META_CONVERSIONS,
    META_COSMOLOGY,
    META_PROVENANCE,
    META_SUMMARY,
    META_UNITS,
    InputFileError,
    SchemaError,
    units_of,
)

if TYPE_CHECKING:
    import pandas as pd
    import pyarrow as pa

__all__ = [
    "CatalogueStream",
    "IngestOptions",
    "IngestResult",
    "ingest",
    "ingest_table",
    "iter_batches",
    "load_catalogue",
    "read_catalogue",
]


def _frame_table(df: pd.DataFrame, batch_rows: int) -> RawTable:
    import pyarrow as pa

    try:
        table = pa.Table.from_pandas(df.rename(columns=str), preserve_index=False)
    except (pa.ArrowInvalid, pa.ArrowTypeError, TypeError, ValueError) as exc:
        raise InputFileError(f"<DataFrame>: cannot convert to a table ({exc})") from exc

    def batches() -> Iterator[pa.Table]:
        for start in range(0, table.num_rows, batch_rows):
            yield table.slice(start, batch_rows)

    return RawTable(
        "<DataFrame>", "dataframe", tuple(table.column_names), {}, table.num_rows, batches
    )


class CatalogueStream:
    """Converts an input batch by batch; summary and metadata are complete after iteration.

    Opening the stream reads only the header: the column plan and the parametrisation are
    decided (and schema errors raised) before any row is converted.
    """

    def __init__(self, source: Any, options: IngestOptions | None = None) -> None:
        import pandas as pd

        self.options = options or IngestOptions()
        if isinstance(source, pd.DataFrame):
            self.raw = _frame_table(source, int(self.options.batch_rows))
            self.sha256: str | None = None
        else:
            from gwdeficit.workdir import file_sha256

            self.raw = open_table(source, self.options.fmt, int(self.options.batch_rows))
            self.sha256 = file_sha256(source)
        self.path = self.raw.path
        self.plan: ColumnPlan = plan_columns(
            self.raw.columns,
            self.options.columns,
            self.options.units,
            self.raw.units,
            self.options.mass_frame,
            self.path,
        )
        self.converter = BatchConverter(self.plan, self.options, self.path, self.raw.columns)
        self._done = False

    @property
    def schema(self) -> pa.Schema:
        """Arrow schema of the accepted batches."""
        return self.converter.schema

    @property
    def reject_columns(self) -> list[str]:
        """Column names of the rejected-row frames: input_row, the input's columns, reason."""
        from gwdeficit.io.validate import _unique_name

        cols = list(self.raw.columns)
        row = _unique_name("input_row", cols)
        return [row, *cols, _unique_name("reason", [*cols, row])]

    def __iter__(self) -> Iterator[ConvertedBatch]:
        first = 1
        for table in self.raw.batches():
            out = self.converter.convert(table, first)
            first += table.num_rows
            yield out
        self._done = True

    def summary(self, **extra: Any) -> dict[str, Any]:
        """The ingest summary: counts, events, ranges, conversions, assumptions."""
        import numpy as np

        t = self.converter.tally
        counts = list(t.event_counts.values())
        if t.singleton_events:
            counts_arr = np.ones(t.singleton_events)
            counts_arr = np.concatenate([counts_arr, np.asarray(counts, dtype=float)])
        else:
            counts_arr = np.asarray(counts, dtype=float)
        per_event = (
            {
                "min": int(counts_arr.min()),
                "median": float(np.median(counts_arr)),
                "max": int(counts_arr.max()),
            }
            if counts_arr.size
            else {"min": 0, "median": 0.0, "max": 0}
        )
        rejected = int(sum(t.rejects.values()))
        return {
            "input": self.path,
            "format": self.raw.fmt,
            "sha256": self.sha256,
            "complete": self._done,
            "rows_read": t.rows_read,
            "rows_accepted": t.rows_accepted,
            "rows_rejected": rejected,
            "counts_add_up": t.rows_read == t.rows_accepted + rejected,
            "rejects_by_reason": dict(sorted(t.rejects.items(), key=lambda kv: -kv[1])),
            "on_bad": self.options.on_bad,
            "events": int(counts_arr.size),
            "samples_per_event": per_event,
            "kinds": t.kinds,
            "spin_assumption": t.spin_assumptions,
            "ranges": t.ranges,
            "m1_m2_swapped": t.swapped,
            "columns_used": {pc.column: f for f, pc in self.plan.columns.items()},
            "columns_ignored": list(self.plan.ignored),
            "cosmology": self.converter.grid.name,
            "conversions": self.conversions(),
            **extra,
        }

    def conversions(self) -> list[str]:
        """Every conversion and assumption applied, as human-readable lines."""
        return [*self.converter.notes, *self.converter.data_notes()]

    def metadata(self, **summary_extra: Any) -> dict[str, Any]:
        """The catalogue's ``gwdeficit.*`` metadata (units, provenance, cosmology, ...)."""
        from gwdeficit.workdir import provenance_record

        names = [f.name for f in self.schema]
        units = {k: v for k, v in units_of(CATALOGUE_COLUMNS).items() if k in names}
        record = provenance_record(
            "ingest",
            inputs={self.path: self.sha256 or ""},
            **self.options.describe(),
        )
        return {
            META_UNITS: units,
            META_PROVENANCE: [record],
            META_COSMOLOGY: convert.cosmology_record(self.options.cosmology),
            META_CONVERSIONS: self.conversions(),
            META_SUMMARY: self.summary(**summary_extra),
        }


def iter_batches(source: Any, options: IngestOptions | None = None) -> Iterator[ConvertedBatch]:
    """Yield converted batches (canonical accepted rows, raw rejected rows) of an input."""
    yield from CatalogueStream(source, options)


@dataclass(frozen=True)
class IngestResult:
    """The catalogue, the rejected rows (input columns as read, plus input_row and reason),
    and the summary."""

    catalogue: pd.DataFrame
    rejects: pd.DataFrame
    summary: dict[str, Any]


def _options(options: IngestOptions | None, kw: Mapping[str, Any]) -> IngestOptions:
    if options is not None and kw:
        raise TypeError("pass either options= or keyword options, not both")
    return options if options is not None else IngestOptions(**kw)


def ingest_table(source: Any, options: IngestOptions | None = None, **kw: Any) -> IngestResult:
    """Load a whole input: catalogue, rejected rows and summary (see :func:`load_catalogue`)."""
    import pandas as pd
    import pyarrow as pa

    stream = CatalogueStream(source, _options(options, kw))
    accepted: list[pa.Table] = []
    rejected: list[pd.DataFrame] = []
    for batch in stream:
        accepted.append(batch.accepted)
        if batch.rejected is not None:
            rejected.append(batch.rejected)
    table = pa.concat_tables(accepted) if accepted else stream.schema.empty_table()
    accepted.clear()
    # split_blocks + self_destruct: columns are handed over without a consolidating copy.
    df = table.to_pandas(split_blocks=True, self_destruct=True)
    del table
    meta = stream.metadata()
    df.attrs.update(meta)
    rej = (
        pd.concat(rejected, ignore_index=True)
        if rejected
        else pd.DataFrame(columns=stream.reject_columns)
    )
    return IngestResult(df, rej, meta[META_SUMMARY])


def load_catalogue(
    source: Any,
    *,
    columns: Mapping[str, str] | None = None,
    units: Mapping[str, str] | None = None,
    cosmology: str = convert.DEFAULT_COSMOLOGY,
    mass_frame: str = "source",
    ns_max_mass: float = 3.0,
    on_bad: str = "error",
    fmt: str | None = None,
    event: str | None = None,
    batch_rows: int = DEFAULT_BATCH_ROWS,
) -> pd.DataFrame:
    """Read a binary-parameter table (file path or DataFrame) into the canonical catalogue.

    Columns are recognised through the alias table (``columns`` maps canonical or quantity
    names to the input's names, e.g. ``{"mchirp": "Mc"}``); units come from headers, the file's
    metadata, or ``units`` (``{"Mc": "kg"}``). Masses, distances and spins are converted to the
    canonical parametrisation (see :class:`IngestOptions` for the options). Returns one row per
    accepted binary with the columns of :data:`gwdeficit.schema.CATALOGUE_COLUMNS`; the
    ``gwdeficit.*`` metadata (units, provenance, cosmology, conversions, summary) is in
    ``.attrs``. With ``on_bad="error"`` a bad row raises
    :class:`~gwdeficit.schema.BadRowsError`; with ``"skip"`` bad rows are left out and counted
    in the summary (use :func:`ingest_table` to get them).
    """
    opts = IngestOptions(
        columns=dict(columns or {}),
        units=dict(units or {}),
        cosmology=cosmology,
        mass_frame=mass_frame,
        ns_max_mass=ns_max_mass,
        on_bad=on_bad,
        fmt=fmt,
        event=event,
        batch_rows=batch_rows,
    )
    return ingest_table(source, opts).catalogue


def ingest(
    source: str | os.PathLike[str],
    workdir: str | os.PathLike[str] | None = None,
    *,
    force: bool = False,
    options: IngestOptions | None = None,
    progress: Callable[[int], None] | None = None,
    **kw: Any,
) -> dict[str, Any]:
    """Ingest a file into ``<workdir>/catalogue.parquet`` and ``<workdir>/rejects.csv``.

    ``progress(n)`` is called after each batch with the number of rows it read.

    Both are written batch by batch to temporary files and renamed into place only when the
    whole input has been read, so an error leaves no partial output. Existing outputs are not
    overwritten unless ``force``; an output never replaces the input. ``rejects.csv`` holds the
    rejected rows as read (plus ``input_row`` and ``reason``) and is written on every successful
    run (header only if nothing was rejected). Returns the summary.
    """
    import pyarrow.parquet as pq

    from gwdeficit.workdir import (
        CATALOGUE_FILE,
        REJECTS_FILE,
        WriteBehind,
        atomic_path,
        resolve_workdir,
        table_from_frame,
    )

    opts = _options(options, kw)
    folder = resolve_workdir(workdir)
    out, rej_out = folder / CATALOGUE_FILE, folder / REJECTS_FILE
    src = Path(source)
    with (
        atomic_path(out, force=force, inputs=(src,)) as tmp,
        atomic_path(rej_out, force=force, inputs=(src,)) as rej_tmp,
    ):
        stream = CatalogueStream(src, opts)
        # Dictionary-encode only label columns with few distinct values; trying it on floats
        # or on one-label-per-row events costs time for nothing.
        labels = ["kind", "spin_assumption"]
        if stream.plan.has("event") or opts.event is not None:
            labels.append("event")
        writer = WriteBehind(  # the next batch is parsed while one is written
            pq.ParquetWriter(
                tmp, stream.schema, compression="zstd", use_dictionary=labels, store_schema=False
            )
        )
        header = True
        try:
            with open(rej_tmp, "w", encoding="utf-8", newline="") as fh:
                for batch in stream:
                    if batch.accepted.num_rows:
                        writer.write(batch.accepted)
                    if batch.rejected is not None:
                        batch.rejected.to_csv(fh, header=header, index=False)
                        header = False
                    if progress is not None:
                        progress(batch.n_read)
                if header:
                    fh.write(",".join(_csv_quote(c) for c in stream.reject_columns) + "\n")
            meta = stream.metadata(catalogue=str(out), rejects=str(rej_out))
            import pandas as pd

            encoded = table_from_frame(pd.DataFrame(), meta).schema.metadata or {}
            writer.wait()
            writer.writer.add_key_value_metadata(
                {k: v for k, v in encoded.items() if k.startswith(b"gwdeficit.")}
            )
        finally:
            writer.close()
    return meta[META_SUMMARY]


def _csv_quote(name: str) -> str:
    if any(ch in name for ch in ',"\n\r'):
        return '"' + name.replace('"', '""') + '"'
    return name


def read_catalogue(path: str | os.PathLike[str] | None = None) -> pd.DataFrame:
    """Read a catalogue written by :func:`ingest`: a Parquet file, or a working folder.

    ``None`` means the working folder (``--workdir`` default, ``$GWDEFICIT_WORKDIR``). The
    ``gwdeficit.*`` metadata is decoded into ``.attrs``.
    """
    from gwdeficit.workdir import CATALOGUE_FILE, read_parquet, resolve_workdir

    p = resolve_workdir(None, create=False) if path is None else Path(path)
    if p.is_dir():
        p = p / CATALOGUE_FILE
    df = read_parquet(p)
    missing = [c for c in CATALOGUE_REQUIRED if c not in df.columns]
    if missing:
        raise SchemaError(
            f"{p}: not a gwdeficit catalogue (missing columns: {', '.join(missing)}); "
            "make one with `gwdeficit ingest`"
        )
    return df
