"""Out-of-core engine: ingest, remnant and rate on inputs larger than memory, batch by batch.

Every stage here calls the same vectorised kernels as the in-memory path, one record batch at a
time, and keeps only mergeable partial aggregates between batches; memory is bounded by the
batch size (``batch_rows``) and, for the rate stage, by the sizes listed below.

- :func:`stream_ingest`: :func:`gwdeficit.io.ingest` (already batch-wise), with progress.
- :func:`stream_remnants`: catalogue (Parquet file or folder dataset) -> remnants.parquet
  through :func:`gwdeficit.remnant.compute_remnants` per batch, written with a
  ``pyarrow.parquet.ParquetWriter`` into a temporary file renamed on success
  (:func:`gwdeficit.workdir.atomic_path`): an interrupted run leaves no partial output.
  The random angles of row ``i`` (0-based position in the catalogue) are the ones the
  in-memory path gives it: ``compute_remnants`` draws the kick phases of all ``n`` rows from
  ``default_rng(seed)`` and then ``n`` replacements for missing phi12, so a batch starting at
  row ``o`` reads PCG64 outputs ``o..`` and ``n + o..`` (``PCG64.advance``; one output per
  double). Results are identical to the in-memory path whatever the batch size, except the
  last bit of a BNS row's inspiral energy (``erad_msun``, and ``erad_frac``, ``deficit_msun``,
  ``mf_msun``): its Newton iteration (``gwdeficit.fits.bns.x_energy_minimum``) stops when all
  rows of the array have converged, so the other rows of a batch matter. Neutron-star
  options (``ns_options``) go to every batch; when any row of the catalogue is a neutron-star
  kind (found by a pre-pass over the ``kind`` column, skipping row groups whose statistics say
  all BBH), batches without one get the neutron-star columns with the values the in-memory
  path gives black-hole rows, so every batch has the whole table's columns. The summary's
  deficit quantiles are exact order statistics found by a radix histogram over the float bits
  (two or more passes over one column of the written file), not approximations.
- :func:`stream_budget`: remnants -> the rate stage's :class:`gwdeficit.budget.RateBudget`
  through :func:`gwdeficit.budget.compute_budget` with a :class:`StreamPopulations` engine
  that replaces its three data-touching steps (event kinds, population preparation, the
  bootstrap). Two modes:

  ``events`` (posterior catalogues; the default unless every row is its own event): pass 1
  keeps per-event partial sums (rows, weights per kind and status, non-finite per-fit values,
  log chirp masses); then the needed columns are spilled to temporary Arrow files, one per
  *event group* (consecutive event labels holding at most ``group_rows`` rows; an event larger
  than that is a group of its own), and each group is prepared by
  :func:`gwdeficit.resample.prepare_population` and bootstrapped against the *global* random
  ingredients of :func:`gwdeficit.resample.run_bootstrap` (same generator, same order, kept in
  a temporary memory-mapped file): per draw, the group's partial numerator and denominator are
  added. Results equal the in-memory path's to float rounding (sums in another order).
  Memory: one group (``group_rows`` rows or the largest event), the per-event tallies, and one
  chunk of the random ingredients (the full ingredients, ``draws x events x 12`` bytes, live on
  disk).

  ``rows`` (weighted synthetic tables whose rows are their own events, as ingest labels them,
  ``row<N>``): a random-group Poisson bootstrap. Each row is assigned to one of
  :data:`POISSON_GROUPS` groups by a draw keyed by its position in the table (counter-based:
  ``default_rng(SeedSequence(seed, spawn_key=(block,)))`` per block of
  :data:`KEY_BLOCK_ROWS` rows), so the assignment does not depend on the batch size or the
  engine; each batch adds its rows' weighted sums to their groups (mergeable), and each
  bootstrap draw weighs the groups with independent Poisson(1) counts (Hanley & MacGibbon
  2006, Comput. Methods Programs Biomed. 83, 57; Chamandy et al. 2012, Google technical report
  "Estimating uncertainty for massive data streams"). The point estimate (every source held
  fixed) equals the in-memory one to float rounding; intervals agree with the in-memory
  multinomial bootstrap statistically (a different resampling scheme with the same variance
  for these ratio-of-sums statistics), not draw by draw. The posterior source has nothing to
  resample when every event has one row. Memory: one batch plus groups x statistics sums.
"""

from __future__ import annotations

import contextlib
import os
import tempfile
import warnings
from collections.abc import Callable, Iterator, Mapping, Sequence
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np
from numpy.typing import NDArray

from gwdeficit import schema
from gwdeficit.schema import InputFileError, OptionError, SchemaError

if TYPE_CHECKING:
    import pandas as pd
    import pyarrow as pa

__all__ = [
    "DEFAULT_BATCH_ROWS",
    "KEY_BLOCK_ROWS",
    "POISSON_GROUPS",
    "StreamPopulations",
    "exact_quantiles",
    "has_neutron_stars",
    "read_metadata",
    "row_progress",
    "stream_budget",
    "stream_ingest",
    "stream_remnants",
]

DEFAULT_BATCH_ROWS = 1 << 16  # peak RSS ~0.65 GB per stage (benchmarks/bench_stream_rss.py)
#: Rows per block of the counter-based per-row draws (fixed: independent of the batch size).
KEY_BLOCK_ROWS = 1 << 16
#: Groups of the random-group Poisson bootstrap (rows mode).
POISSON_GROUPS = 1 << 14
#: Rows per event group in events mode (memory bound of one group).
DEFAULT_GROUP_ROWS = 1 << 22
#: Below this many rows the rows mode is not chosen automatically (the exact path is cheap).
ROWS_MODE_MIN_ROWS = 10_000

_LABEL_COLUMNS = ["kind", "spin_assumption", "remnant_kind", "remnant_status"]

Progress = Callable[[int], None]


# --------------------------------------------------------------------------------------------
# Progress bars
# --------------------------------------------------------------------------------------------


@contextlib.contextmanager
def row_progress(
    description: str, total: int | None, enabled: bool = True
) -> Iterator[Callable[[int], None]]:
    """A rich progress bar on standard error with rows done and rows per second.

    Yields ``advance(n_rows)``. Disabled (a no-op) when ``enabled`` is false; the bar is
    transient, so finished runs leave only their summary on the terminal.
    """
    if not enabled:
        yield lambda n: None
        return
    from rich.console import Console
    from rich.progress import (
        BarColumn,
        MofNCompleteColumn,
        Progress,
        ProgressColumn,
        TextColumn,
        TimeElapsedColumn,
    )
    from rich.text import Text

    class _Speed(ProgressColumn):
        def render(self, task: Any) -> Text:
            speed = task.finished_speed or task.speed
            return Text("-- rows/s" if speed is None else f"{speed:,.0f} rows/s")

    bar = Progress(
        TextColumn("{task.description}"),
        BarColumn(),
        MofNCompleteColumn(),
        TextColumn("rows"),
        _Speed(),
        TimeElapsedColumn(),
        console=Console(stderr=True),
        transient=True,
    )
    task = bar.add_task(description, total=total)
    with bar:
        yield lambda n: bar.advance(task, n)


# --------------------------------------------------------------------------------------------
# Datasets
# --------------------------------------------------------------------------------------------


def read_metadata(path: str | os.PathLike[str]) -> dict[str, Any]:
    """The decoded ``gwdeficit.*`` metadata of a Parquet file or folder dataset."""
    import pyarrow as pa
    import pyarrow.dataset as ds
    import pyarrow.parquet as pq

    from gwdeficit.workdir import decode_meta

    p = Path(path)
    if not p.exists():
        raise InputFileError(f"{p}: no such file or folder")
    try:
        if p.is_dir():
            files = sorted(f.path for f in ds.dataset(p, format="parquet").get_fragments())
            raw = pq.read_schema(files[0]).metadata if files else None
        else:
            raw = pq.read_schema(p).metadata
    except (pa.ArrowInvalid, OSError, ValueError) as exc:
        raise InputFileError(f"{p}: not a readable Parquet file ({exc})") from exc
    return decode_meta(raw)


def _open(path: str | os.PathLike[str], batch_rows: int, columns: Sequence[str] | None = None):
    """(row count, batch iterator factory) of a Parquet file or folder, optionally projected."""
    import pyarrow as pa
    import pyarrow.dataset as ds

    from gwdeficit.io.formats import open_table

    if columns is None:
        raw = open_table(path, "parquet", batch_rows)
        return int(raw.n_rows or 0), raw.batches, list(raw.columns)
    try:
        dataset = ds.dataset(Path(path), format="parquet")
        n = dataset.count_rows()
    except (pa.ArrowInvalid, OSError, ValueError) as exc:
        raise InputFileError(f"{path}: not a readable Parquet table ({exc})") from exc
    names = dataset.schema.names
    missing = [c for c in columns if c not in names]
    if missing:
        raise SchemaError(f"{path}: missing column(s) {', '.join(missing)}")

    def batches() -> Iterator[pa.Table]:
        try:
            # little read-ahead, no pre-buffering: memory stays near one batch
            for rb in dataset.to_batches(
                columns=list(columns),
                batch_size=batch_rows,
                batch_readahead=1,
                fragment_readahead=1,
                fragment_scan_options=ds.ParquetFragmentScanOptions(pre_buffer=False),
            ):
                if rb.num_rows:
                    yield pa.Table.from_batches([rb])
        except (pa.ArrowInvalid, OSError) as exc:
            raise InputFileError(f"{path}: cannot read Parquet data ({exc})") from exc

    return int(n), batches, list(names)


def _check_batch_rows(batch_rows: int) -> int:
    batch_rows = int(batch_rows)
    if batch_rows < 1:
        raise OptionError(f"--batch-rows {batch_rows}: must be a positive number of rows")
    return batch_rows


# --------------------------------------------------------------------------------------------
# Ingest
# --------------------------------------------------------------------------------------------


def stream_ingest(
    source: str | os.PathLike[str],
    workdir: str | os.PathLike[str] | None = None,
    *,
    force: bool = False,
    options: Any = None,
    progress: Progress | None = None,
) -> dict[str, Any]:
    """Ingest ``source`` batch by batch (:func:`gwdeficit.io.ingest`), reporting rows read.

    The ingest stage is already out-of-core (one batch in memory, outputs written to temporary
    files renamed at the end); this adds the progress callback ``progress(rows_in_batch)``.
    """
    from gwdeficit.io import ingest

    kwargs: dict[str, Any] = {"force": force, "options": options}
    if progress is not None:
        kwargs["progress"] = progress
    return ingest(source, workdir, **kwargs)


# --------------------------------------------------------------------------------------------
# Remnants
# --------------------------------------------------------------------------------------------


class _RowKeyedDraws:
    """Stands in for the run's generator in ``compute_remnants`` on the rows ``[o, o + k)``.

    ``compute_remnants`` asks for ``k`` uniforms (kick phases), then, when a black-hole row of
    the batch lacks phi12, ``k`` more. On the whole table (``n`` rows) these are PCG64 outputs
    ``0..n-1`` and ``n..2n-1`` of ``default_rng(seed)``; here the first call returns outputs
    ``o..o+k-1`` and the second ``n+o..n+o+k-1`` (``PCG64.advance``: one output per double).
    """

    def __init__(self, seed: int, offset: int, total: int) -> None:
        self._starts = [int(offset), int(total) + int(offset)]
        self._seed = seed

    def random(self, size: int) -> NDArray[np.float64]:
        if not self._starts:
            raise RuntimeError("the remnant stage asked for more random arrays than expected")
        bg = np.random.PCG64(self._seed)
        bg.advance(self._starts.pop(0))
        return np.random.Generator(bg).random(size)


@dataclass
class _RemnantTally:
    rows: int = 0
    estimated: int = 0
    outside: int = 0
    bbh: int = 0
    phi12_drawn: int = 0
    deficit_sum: float = 0.0
    kinds: dict[str, int] = field(default_factory=dict)
    status: dict[str, int] = field(default_factory=dict)
    outside_by_fit: dict[str, int] = field(default_factory=dict)
    # neutron-star kinds: rows with finite inputs, and rows per ns_out_of_range label
    ns_rows: dict[str, int] = field(default_factory=dict)
    ns_labels: dict[str, dict[str, int]] = field(default_factory=dict)

    def merge(self, other: _RemnantTally) -> None:
        """Add another part's counts (parts are disjoint row ranges)."""
        for name in ("rows", "estimated", "outside", "bbh", "phi12_drawn", "deficit_sum"):
            setattr(self, name, getattr(self, name) + getattr(other, name))
        for mine, theirs in (
            (self.kinds, other.kinds),
            (self.status, other.status),
            (self.outside_by_fit, other.outside_by_fit),
            (self.ns_rows, other.ns_rows),
        ):
            for k, v in theirs.items():
                mine[k] = mine.get(k, 0) + v
        for kind, labels in other.ns_labels.items():
            mine = self.ns_labels.setdefault(kind, {})
            for k, v in labels.items():
                mine[k] = mine.get(k, 0) + v

    def add(self, res: pd.DataFrame, attrs: Mapping[str, Any]) -> None:
        """Count one part: its remnant rows ``res`` and the stage metadata ``attrs`` of them."""
        from gwdeficit.remnant import STATUS_ESTIMATED

        self.rows += len(res)
        for key, tally in (("kind", self.kinds), ("remnant_status", self.status)):
            for k, v in res[key].astype(str).value_counts(sort=False).items():
                tally[str(k)] = tally.get(str(k), 0) + int(v)
        est = (res["remnant_status"].astype(str) == STATUS_ESTIMATED).to_numpy()
        self.estimated += int(est.sum())
        self.outside += int((est & ~res["in_fit_range"].to_numpy(dtype=bool)).sum())
        self.deficit_sum += float(res["deficit_msun"].to_numpy(np.float64)[est].sum())
        draws = attrs.get(schema.META_REMNANT_DRAWS, {})
        self.bbh += int(draws.get("kick_phase", {}).get("rows", 0))
        self.phi12_drawn += int(draws.get("phi12", {}).get("rows", 0))
        for meta in attrs.get(schema.META_FITS, []):
            name = meta["name"]
            self.outside_by_fit[name] = self.outside_by_fit.get(name, 0) + int(
                meta.get("n_outside_range", 0)
            )
        if "ns_out_of_range" in res.columns:
            self._add_ns_ranges(res)

    def _add_ns_ranges(self, res: pd.DataFrame) -> None:
        """Per neutron-star kind: rows the neutron-star fits saw with finite inputs, and rows
        per ``ns_out_of_range`` label (what the in-memory warning of each kind counts)."""
        from gwdeficit.fits.neutron_star import STATUS_BAD_INPUT

        kind = res["kind"].astype(str)
        finite = res["remnant_status"].astype(str) != STATUS_BAD_INPUT
        for k in schema.KINDS:
            if k == "BBH":
                continue
            is_k = (kind == k).to_numpy()
            if not is_k.any():
                continue
            self.ns_rows[k] = self.ns_rows.get(k, 0) + int(finite.to_numpy()[is_k].sum())
            labels = self.ns_labels.setdefault(k, {})
            counts = res["ns_out_of_range"].astype(str)[is_k].value_counts(sort=False)
            for label, v in counts.items():
                if label:
                    labels[str(label)] = labels.get(str(label), 0) + int(v)

    def ns_outside(self) -> dict[str, dict[str, int]]:
        """Per neutron-star kind, rows outside each neutron-star fit's range, in fit order.

        A row's ``ns_out_of_range`` lists the fits in the neutron-star module's order; the
        whole order is merged from the labels seen (names never seen together keep the order
        of first appearance).
        """
        out: dict[str, dict[str, int]] = {}
        for kind, labels in self.ns_labels.items():
            seqs = [label.split(";") for label in labels]
            names: list[str] = []
            for seq in seqs:
                for name in seq:
                    if name not in names:
                        names.append(name)
            after = {n: set() for n in names}  # n -> names that come after n somewhere
            for seq in seqs:
                for i, a in enumerate(seq):
                    after[a].update(seq[i + 1 :])
            order: list[str] = []
            todo = list(names)
            while todo:  # first name (in appearance order) that no remaining name precedes
                nxt = next(
                    (n for n in todo if not any(n in after[m] for m in todo if m != n)), todo[0]
                )
                order.append(nxt)
                todo.remove(nxt)
            counts = dict.fromkeys(order, 0)
            for label, v in labels.items():
                for name in label.split(";"):
                    counts[name] += v
            out[kind] = counts
        return out


def _sorted_counts(d: Mapping[str, int]) -> dict[str, int]:
    return dict(sorted(d.items(), key=lambda kv: (-kv[1], kv[0])))


def stream_remnants(
    catalogue: str | os.PathLike[str],
    out: str | os.PathLike[str],
    *,
    seed: int = 0,
    fits: Sequence[str] | None = None,
    batch_rows: int = DEFAULT_BATCH_ROWS,
    force: bool = False,
    progress: Progress | None = None,
    inputs: Mapping[str, str] | None = None,
    ns_options: Mapping[str, Any] | None = None,
    threads: int | None = None,
) -> dict[str, Any]:
    """Remnants of a catalogue (Parquet file or folder) written batch by batch to ``out``.

    Same rows, columns, values and random angles as ``compute_remnants`` on the whole table
    with ``seed`` (module docstring) and ``ns_options`` (the neutron-star keywords of
    :func:`gwdeficit.remnant.compute_remnants`; None values are left out, as there);
    metadata as the in-memory stage writes it (``gwdeficit.neutron_star`` too), with the
    provenance record naming the engine and batch size. Range warnings as the
    in-memory stage emits them, counted over the whole table: one per neutron-star kind that
    has rows outside a neutron-star fit's range, then one for the black-hole fits. Returns the
    summary of :func:`gwdeficit.remnant.summarize_remnants` (exact deficit quantiles) plus
    ``phi12_drawn`` and, when the table holds neutron-star rows, ``neutron_star`` (the
    ``gwdeficit.neutron_star`` metadata). ``threads``: threads for the black-hole fits within
    a batch (:func:`gwdeficit.remnant.default_threads`; values do not depend on it). Raises
    what ``compute_remnants`` raises for bad rows (named by ``input_row``) and bad options.
    """

    from gwdeficit import workdir as wd
    from gwdeficit.fits.registry import select_fits

    batch_rows = _check_batch_rows(batch_rows)
    if seed is None or int(seed) < 0:
        raise OptionError(f"seed {seed!r}: the streamed remnant stage needs a seed >= 0")
    seed = int(seed)
    cat = Path(catalogue)
    n_total, batches, _ = _open(cat, batch_rows)
    meta_in = read_metadata(cat)
    chosen = [f.name for f in select_fits(fits)]
    src = str(cat)
    if inputs is None:
        inputs = {src: wd.file_sha256(cat)}
    job = RemnantJob(
        seed,
        n_total,
        tuple(chosen),
        meta_in,
        src,
        dict(inputs),
        ns_options=_ns_options(ns_options),
        has_ns=has_neutron_stars(cat),
        threads=threads,
    )

    def parts() -> Iterator[tuple[pa.Table, _RemnantTally, dict[str, Any]]]:
        offset = 0
        for table in batches():
            yield job.run(table, offset)
            offset += table.num_rows

    return write_remnants(cat, out, job, parts(), batch_rows, force, progress, engine="stream")


def _ns_options(ns_options: Mapping[str, Any] | None) -> dict[str, Any]:
    """The neutron-star options as ``compute_remnants`` keeps them (None values left out)."""
    return {k: v for k, v in dict(ns_options or {}).items() if v is not None}


def has_neutron_stars(path: str | os.PathLike[str]) -> bool:
    """True when a row of the Parquet file or folder has a ``kind`` other than ``BBH``.

    Row groups whose statistics give min = max = "BBH" are skipped (a null there makes the
    remnant stage fail on its batch anyway); others have their ``kind`` column read, one row
    group at a time, until a non-BBH row is found. False without a ``kind`` column (the
    remnant stage then reports the missing column).
    """
    import pyarrow as pa
    import pyarrow.compute as pc
    import pyarrow.dataset as ds

    try:
        dataset = ds.dataset(Path(path), format="parquet")
        if "kind" not in dataset.schema.names:
            return False
        for frag in dataset.get_fragments():
            for rg in frag.row_groups:
                stats = (rg.statistics or {}).get("kind") or {}
                if stats.get("min") == "BBH" and stats.get("max") == "BBH":
                    continue
                col = frag.subset(row_group_ids=[rg.id]).to_table(columns=["kind"])["kind"]
                try:
                    bbh = pc.equal(col.cast(pa.string()), "BBH")
                except (pa.ArrowInvalid, pa.ArrowNotImplementedError, pa.ArrowTypeError):
                    return True  # not text: the remnant stage names the bad rows
                if not pc.all(pc.fill_null(bbh, False)).as_py():
                    return True
    except (pa.ArrowInvalid, OSError, ValueError) as exc:
        raise InputFileError(f"{path}: cannot read Parquet data ({exc})") from exc
    return False


#: Values of the neutron-star columns on black-hole rows (as ``compute_remnants`` fills them).
_NS_COLUMN_FILL: dict[str, Any] = {
    "ns_disrupted": False,
    "ns_erad_lower_bound": False,
    "ns_erad_method": "",
    "ns_tidal_source": "",
    "ns_out_of_range": "",
}


@dataclass(frozen=True)
class RemnantJob:
    """The remnant stage on one batch or partition (picklable: engines ship it to workers).

    ``ns_options``: the neutron-star keywords of ``compute_remnants``; ``has_ns``: whether any
    row of the whole table is a neutron-star kind (then every batch gets the neutron-star
    columns, filled as the in-memory path fills black-hole rows where a batch has none).
    """

    seed: int
    n_total: int
    fits: tuple[str, ...]
    meta_in: dict[str, Any]
    source: str
    inputs: dict[str, str]
    ns_options: dict[str, Any] = field(default_factory=dict)
    has_ns: bool = False
    threads: int | None = None  # for the black-hole fits (gwdeficit.remnant.default_threads)

    def run(self, table: pa.Table, offset: int) -> tuple[pa.Table, _RemnantTally, dict[str, Any]]:
        """Rows ``offset ..`` of the catalogue -> (remnant rows, their tally, their metadata)."""
        import pyarrow as pa

        from gwdeficit.fits.registry import FitRangeWarning
        from gwdeficit.remnant import compute_remnants

        df = table.to_pandas()
        df.attrs.update(self.meta_in)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", FitRangeWarning)
            res = compute_remnants(
                df,
                rng=_RowKeyedDraws(self.seed, offset, self.n_total),  # type: ignore[arg-type]
                fits=list(self.fits),
                source=self.source,
                inputs=self.inputs,
                ns_options=self.ns_options,
                threads=self.threads,
            )
        from gwdeficit.remnant import NS_EXTRA_COLUMNS

        # pandas deep-copies attrs into every column taken from ``res`` (from_pandas takes
        # each one): keep the stage metadata aside and the frame without it
        attrs = dict(res.attrs)
        res.attrs = {}
        present = [c for c in NS_EXTRA_COLUMNS if c in res.columns]
        if present and not self.has_ns:
            raise RuntimeError("a batch holds neutron-star rows that the pre-pass did not see")
        if self.has_ns and not present:
            unknown = [c for c in NS_EXTRA_COLUMNS if c not in _NS_COLUMN_FILL]
            if unknown:
                raise RuntimeError(f"no black-hole value known for column(s) {unknown}")
            res = res.assign(**{c: _NS_COLUMN_FILL[c] for c in NS_EXTRA_COLUMNS})
        tally = _RemnantTally()
        tally.add(res, attrs)
        new = [c for c in res.columns if c not in df.columns]
        extra = pa.Table.from_pandas(res[new], preserve_index=False)
        for name in new:
            table = table.append_column(name, extra.column(name))
        return table.replace_schema_metadata(None), tally, attrs


def write_remnants(
    cat: Path,
    out: str | os.PathLike[str],
    job: RemnantJob,
    parts: Iterator[tuple[pa.Table, _RemnantTally, dict[str, Any]]],
    batch_rows: int,
    force: bool,
    progress: Progress | None,
    engine: str,
) -> dict[str, Any]:
    """Write the parts (in row order) atomically to ``out``; return the stage summary."""
    import pyarrow.parquet as pq

    from gwdeficit import workdir as wd
    from gwdeficit.remnant import STATUS_ESTIMATED, _warn_outside

    tally = _RemnantTally()
    last_attrs: dict[str, Any] = {}
    ns_meta: dict[str, Any] | None = None
    out = Path(out)
    with wd.atomic_path(out, force=force, inputs=(cat,)) as tmp:
        writer = None  # written behind: the next part is computed while one is written
        try:
            for result, part, attrs in parts:
                tally.merge(part)
                last_attrs = attrs
                ns_meta = _merge_ns_meta(ns_meta, attrs.get(schema.META_NEUTRON_STAR))
                if writer is None:
                    labels = [c for c in _LABEL_COLUMNS if c in result.column_names]
                    writer = wd.WriteBehind(
                        pq.ParquetWriter(
                            tmp,
                            result.schema,
                            compression="zstd",
                            use_dictionary=labels,
                            store_schema=False,
                        )
                    )
                elif result.schema != writer.writer.schema:
                    result = result.cast(writer.writer.schema)
                writer.write(result)
                if progress is not None:
                    progress(result.num_rows)
            if writer is None:  # an empty catalogue: still a valid, empty remnants table
                import pyarrow.dataset as ds

                empty = ds.dataset(cat, format="parquet").schema.empty_table()
                result, part, last_attrs = job.run(empty.replace_schema_metadata(None), 0)
                writer = wd.WriteBehind(
                    pq.ParquetWriter(tmp, result.schema, compression="zstd", store_schema=False)
                )
                writer.write(result)
            attrs = _remnant_metadata(
                last_attrs,
                job.meta_in,
                tally,
                job.seed,
                job.fits,
                job.inputs,
                batch_rows,
                engine,
                ns_meta=ns_meta,
                ns_options=job.ns_options,
            )
            writer.wait()
            writer.writer.add_key_value_metadata(_encoded(attrs))
        finally:
            if writer is not None:
                writer.close()
        quantiles = _deficit_quantiles(tmp, batch_rows, tally.estimated, STATUS_ESTIMATED)

    _warn_ns_outside(tally)
    _warn_outside(tally.outside, tally.estimated, tally.outside_by_fit, stacklevel=3)
    summary = _remnant_summary(tally, quantiles, job.fits)
    if ns_meta is not None:
        summary["neutron_star"] = ns_meta
    return summary


def _merge_ns_meta(
    merged: dict[str, Any] | None, part: Mapping[str, Any] | None
) -> dict[str, Any] | None:
    """The ``gwdeficit.neutron_star`` metadata of the parts seen so far.

    It holds the options, the fits and the note, no counts: the parts that have it (those with
    neutron-star rows) must agree, and any difference is a bug, not something to merge.
    """
    if part is None:
        return merged
    if merged is None:
        return dict(part)
    if dict(part) != merged:
        keys = sorted(k for k in set(part) | set(merged) if part.get(k) != merged.get(k))
        raise RuntimeError(f"batches disagree on the neutron-star metadata ({', '.join(keys)})")
    return merged


def _warn_ns_outside(t: _RemnantTally) -> None:
    """The neutron-star fits' range warnings of the in-memory stage, counted over all batches.

    One :class:`FitRangeWarning` per neutron-star kind with rows outside a fit's range, the
    same warning ``gwdeficit.fits.neutron_star`` gives (once per kind) in memory.
    """
    from gwdeficit.fits.neutron_star import out_of_range_warning

    outside = t.ns_outside()
    for kind in schema.KINDS:
        warning = out_of_range_warning(outside.get(kind, {}), t.ns_rows.get(kind, 0))
        if warning is not None:
            warnings.warn(warning, stacklevel=3)


def _encoded(meta: Mapping[str, Any]) -> dict[bytes, bytes]:
    import pandas as pd

    from gwdeficit.workdir import table_from_frame

    raw = table_from_frame(pd.DataFrame(), meta).schema.metadata or {}
    return {k: v for k, v in raw.items() if k.startswith(b"gwdeficit.")}


def _remnant_metadata(
    attrs: Mapping[str, Any],
    meta_in: Mapping[str, Any],
    t: _RemnantTally,
    seed: int,
    chosen: Sequence[str],
    inputs: Mapping[str, str],
    batch_rows: int,
    engine: str = "stream",
    ns_meta: Mapping[str, Any] | None = None,
    ns_options: Mapping[str, Any] | None = None,
) -> dict[str, Any]:
    """The whole table's metadata from the last batch's: counts summed, one provenance record,
    the neutron-star metadata of the batches that hold neutron stars (``ns_meta``)."""
    from gwdeficit import workdir as wd

    out = dict(attrs)
    out.pop(schema.META_NEUTRON_STAR, None)
    if ns_meta is not None:
        out[schema.META_NEUTRON_STAR] = dict(ns_meta)
    fits_meta = []
    for m in attrs.get(schema.META_FITS, []):
        m = dict(m)
        m["n_outside_range"] = t.outside_by_fit.get(m["name"], 0)
        fits_meta.append(m)
    out[schema.META_FITS] = fits_meta
    draws = dict(attrs.get(schema.META_REMNANT_DRAWS, {}))
    draws["seed"] = seed
    draws["generator"] = "numpy.random.default_rng(seed)"
    draws["kick_phase"] = {**draws.get("kick_phase", {}), "rows": t.bbh}
    draws["phi12"] = {**draws.get("phi12", {}), "rows": t.phi12_drawn}
    out[schema.META_REMNANT_DRAWS] = draws
    record = wd.provenance_record(
        "remnant",
        inputs=inputs,
        seed=seed,
        fits=list(chosen),
        rows=t.rows,
        rows_estimated=t.estimated,
        phi12_drawn=t.phi12_drawn,
        ns_options=dict(ns_options or {}),
        engine=engine,
        batch_rows=batch_rows,
    )
    out[schema.META_PROVENANCE] = wd.merge_provenance(meta_in, record)
    for key in (schema.META_COSMOLOGY, schema.META_CONVERSIONS):
        if key in meta_in:
            out[key] = meta_in[key]
    return out


def _remnant_summary(
    t: _RemnantTally, quantiles: Mapping[float, float], chosen: Sequence[str]
) -> dict[str, Any]:
    """The keys of ``summarize_remnants`` from the streamed tallies."""
    import astropy.constants as const
    import astropy.units as u

    erg_per_msun = float((const.M_sun * const.c**2).to_value(u.erg))
    quant = {f"p{int(p):02d}": {"msun": v, "erg": v * erg_per_msun} for p, v in quantiles.items()}
    return {
        "rows": t.rows,
        "kinds": _sorted_counts(t.kinds),
        "estimated": t.estimated,
        "status": _sorted_counts(t.status),
        "deficit_quantiles": quant,
        "total_deficit_msun": t.deficit_sum,
        "outside_fit_range": t.outside,
        "outside_by_fit": {name: t.outside_by_fit.get(name, 0) for name in chosen},
        "fits": list(chosen),
        "erg_per_msun_c2": erg_per_msun,
        "phi12_drawn": t.phi12_drawn,
    }


def _deficit_quantiles(
    path: Path, batch_rows: int, n_estimated: int, estimated: str
) -> dict[float, float]:
    """5, 50, 95 per cent quantiles of deficit_msun over the estimated rows of a written file."""
    if n_estimated == 0:
        return {}
    _, batches, _ = _open(path, batch_rows, ["deficit_msun", "remnant_status"])

    def values() -> Iterator[NDArray[np.float64]]:
        import pyarrow.compute as pc

        for t in batches():
            status = t.column("remnant_status")
            keep = pc.equal(status, estimated).to_numpy(zero_copy_only=False)
            yield t.column("deficit_msun").to_numpy()[keep]

    return exact_quantiles(values, (5.0, 50.0, 95.0))


# --------------------------------------------------------------------------------------------
# Exact quantiles out of core
# --------------------------------------------------------------------------------------------


def _sort_keys(x: NDArray[np.float64]) -> NDArray[np.uint64]:
    """uint64 keys ordered like the float64 values (IEEE 754 bits, negatives flipped)."""
    u = np.ascontiguousarray(x, dtype=np.float64).view(np.uint64)
    neg = (u >> np.uint64(63)).astype(bool)
    return np.where(neg, ~u, u | np.uint64(1 << 63))


def exact_quantiles(
    values: Callable[[], Iterator[NDArray[np.float64]]],
    percents: Sequence[float],
    max_collect: int = 1 << 22,
) -> dict[float, float]:
    """``numpy.percentile`` (linear interpolation) of a stream of arrays, exactly, out of core.

    ``values()`` must yield the same arrays each time it is called. The order statistics that
    the percentiles interpolate between are located by histograms of successive bit fields of
    their sort keys (20 bits, then 22, ...), one pass each, until a bin holds at most
    ``max_collect`` values, which are then gathered and sorted. Memory: one array of the stream,
    a 2^22-bin histogram and ``max_collect`` values. NaN anywhere gives NaN (as numpy does).
    """
    n = 0
    has_nan = False
    for arr in values():
        n += arr.size
        has_nan = has_nan or bool(np.isnan(arr).any())
    if n == 0:
        return {}
    if has_nan:
        return {float(p): float("nan") for p in percents}
    plan: dict[float, tuple[int, int, float]] = {}
    ranks: set[int] = set()
    for p in percents:
        h = (n - 1) * (float(p) / 100.0)
        lo = int(np.floor(h))
        hi = min(lo + 1, n - 1)
        plan[float(p)] = (lo, hi, h - lo)
        ranks.update((lo, hi))
    # per rank: (key prefix, bits fixed, rank within the prefix, count with the prefix)
    state = {r: (0, 0, r, n) for r in ranks}
    found: dict[int, float] = {}
    first = True
    while True:
        open_ = {r: s for r, s in state.items() if r not in found and s[3] > max_collect}
        if not open_ or all(s[1] >= 64 for s in open_.values()):
            break
        groups: dict[tuple[int, int], list[int]] = {}
        for r, (prefix, bits, _, _) in open_.items():
            groups.setdefault((prefix, bits), []).append(r)
        width = {g: min(20 if first else 22, 64 - g[1]) for g in groups}
        hist = {g: np.zeros(1 << width[g], dtype=np.int64) for g in groups}
        for arr in values():
            k = _sort_keys(arr)
            for (prefix, bits), h in hist.items():
                sub = k if bits == 0 else k[(k >> np.uint64(64 - bits)) == np.uint64(prefix)]
                w = width[(prefix, bits)]
                field_ = (sub >> np.uint64(64 - bits - w)) & np.uint64((1 << w) - 1)
                h += np.bincount(field_.astype(np.int64), minlength=1 << w)
        for g, rs in groups.items():
            cum = np.cumsum(hist[g])
            for r in rs:
                within = state[r][2]
                b = int(np.searchsorted(cum, within, side="right"))
                before = int(cum[b - 1]) if b else 0
                state[r] = (
                    (g[0] << width[g]) | b,
                    g[1] + width[g],
                    within - before,
                    int(hist[g][b]),
                )
        first = False
    for r, (prefix, bits, _, _) in state.items():
        if bits >= 64:  # every value with this key is the same number
            found[r] = float(
                np.array([prefix ^ (1 << 63) if prefix >> 63 else ~prefix & ((1 << 64) - 1)])
                .astype(np.uint64)
                .view(np.float64)[0]
            )
    todo = {r: s for r, s in state.items() if r not in found}
    if todo:
        picked: dict[int, list[NDArray[np.float64]]] = {r: [] for r in todo}
        for arr in values():
            k = _sort_keys(arr)
            for r, (prefix, bits, _, _) in todo.items():
                sel = k == k if bits == 0 else (k >> np.uint64(64 - bits)) == np.uint64(prefix)
                picked[r].append(arr[sel])
        for r, (_, _, within, _) in todo.items():
            found[r] = float(np.sort(np.concatenate(picked[r]))[within])
    return {
        p: float(np.quantile(np.array([found[lo], found[hi]]), frac))
        for p, (lo, hi, frac) in plan.items()
    }


# --------------------------------------------------------------------------------------------
# Rate stage: the out-of-core population engine of compute_budget
# --------------------------------------------------------------------------------------------

_NOT_EST = "not_estimated"


@dataclass(frozen=True, eq=False)
class StreamPopulation:
    """A population prepared from the pass-1 tallies: what ``compute_budget`` reads (``info``,
    ``digest``) and what the streamed bootstrap needs."""

    kind: str | None
    columns: tuple[str, ...]
    info: dict[str, Any]
    digest: str
    fit_names: dict[str, tuple[str, ...]]
    n_events: int
    present: NDArray[np.bool_]  # per tallied key (event, or kind in rows mode)
    log_factor_mean: float = 0.0

    def n_alternatives(self, family: str) -> int:
        return len(self.fit_names.get(family, ()))


@dataclass(frozen=True)
class RateConfig:
    """What the per-batch kernels of the rate stage need (picklable, shipped to workers)."""

    source: str
    selection: str
    columns: tuple[str, ...]
    alt_columns: dict[str, str]  # default fit name -> its per-fit column
    seed: int
    n_groups: int
    fits_meta: list[Any] | None = None
    attrs: dict[str, Any] = field(default_factory=dict)


def _row_groups(seed: int, offset: int, n: int, n_groups: int) -> NDArray[np.int64]:
    """Poisson-bootstrap group of rows ``offset .. offset + n - 1`` (counter-based draws).

    Block ``j`` of :data:`KEY_BLOCK_ROWS` rows draws its groups from
    ``default_rng(SeedSequence(seed, spawn_key=(0x67726f7570, j)))``, so a row's group depends
    on the seed and its position only.
    """
    out = np.empty(n, dtype=np.int64)
    pos = 0
    while pos < n:
        row = offset + pos
        j, within = divmod(row, KEY_BLOCK_ROWS)
        take = min(KEY_BLOCK_ROWS - within, n - pos)
        gen = np.random.default_rng(np.random.SeedSequence(seed, spawn_key=(0x67726F7570, j)))
        block = gen.integers(0, n_groups, size=within + take, dtype=np.int64)
        out[pos : pos + take] = block[within:]
        pos += take
    return out


def _log_factor(df: pd.DataFrame) -> NDArray[np.float64]:
    """log of the raw inspiral-volume factor Mc^(-15/6) (NaN where Mc is not positive)."""
    from gwdeficit.convert import chirp_mass

    mc = chirp_mass(df["m1_msun"].to_numpy(np.float64), df["m2_msun"].to_numpy(np.float64))
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(np.isfinite(mc) & (mc > 0), (-15.0 / 6.0) * np.log(mc), np.nan)


def _is_row_labelled(df: pd.DataFrame) -> bool:
    """True when every event label is ingest's own ``row<input_row>`` (no event column)."""
    if "input_row" not in df.columns:
        return False
    import pyarrow as pa
    import pyarrow.compute as pc

    rows = pa.array(df["input_row"].to_numpy(np.int64))
    expect = pc.binary_join_element_wise("row", pc.cast(rows, pa.string()), "")
    # the labels as Arrow strings (no Python str per row)
    got = pc.cast(pa.array(df["event"].astype(str)), pa.string())
    return bool(pc.all(pc.equal(got, expect)).as_py())


def tally_part(
    table: pa.Table, offset: int, cfg: RateConfig, rows_mode: bool
) -> tuple[pd.DataFrame | None, bool]:
    """Pass 1 on one batch: per key (event; kind in rows mode) sums of per-row counters.

    Returns (sums, whether every label is ``row<input_row>``); in rows mode a batch whose
    labels are not gives (None, False) and the engine falls back to the events mode.
    """
    import pandas as pd

    from gwdeficit.remnant import KindCodes
    from gwdeficit.resample import _row_numbers

    df = table.to_pandas()
    labelled = _is_row_labelled(df) if rows_mode else False
    if rows_mode and not labelled:
        return None, False
    w = pd.to_numeric(df["weight"], errors="coerce").to_numpy(np.float64)
    bad = np.flatnonzero(~(np.isfinite(w) & (w >= 0)))
    if bad.size:
        raise schema.BadRowsError(
            cfg.source,
            "weight",
            "weight is not a finite number >= 0",
            _row_numbers(df, bad),
            hint=schema.REMNANTS_HINT,
        )
    kinds = KindCodes.of(df["kind"])
    unknown = sorted(set(kinds.found) - set(schema.KINDS))
    if unknown:
        raise SchemaError(
            f"{cfg.source}: kind(s) {', '.join(map(repr, unknown))} not one of "
            f"{', '.join(schema.KINDS)}"
        )
    status = df["remnant_status"].astype(str)
    used = ~status.str.startswith(_NOT_EST).to_numpy()
    counted = used & (w > 0) if rows_mode else used
    cols: dict[str, Any] = {
        "rows": np.ones(w.size, dtype=np.int64),
        "used": used.astype(np.int64),
        "wused": np.where(used, w, 0.0),
        "used_zero": (used & (w == 0)).astype(np.int64),
    }
    for k in schema.KINDS:
        is_k = kinds.mask(k)
        cols[f"w:{k}"] = np.where(is_k, w, 0.0)
        cols[f"n:{k}"] = is_k.astype(np.int64)
    for name, col in cfg.alt_columns.items():
        x = df[col].to_numpy(np.float64)
        cols[f"bad:{name}"] = (counted & ~np.isfinite(x)).astype(np.int64)
    for c in cfg.columns:
        cols[f"nan:{c}"] = (counted & np.isnan(df[c].to_numpy(np.float64))).astype(np.int64)
    if "in_fit_range" in df.columns:
        cols["outside"] = (counted & ~df["in_fit_range"].to_numpy(dtype=bool)).astype(np.int64)
    if cfg.selection == "inspiral-volume":
        lf = _log_factor(df)
        ok = counted & np.isfinite(lf)
        cols["logs"] = np.where(ok, lf, 0.0)
        cols["nlogs"] = ok.astype(np.int64)
    frame = pd.DataFrame(cols)
    if not used.all():
        dummies = pd.get_dummies(status.where(~used), prefix="st", prefix_sep="|", dtype=np.int64)
        frame = pd.concat([frame, dummies.set_axis(frame.index)], axis=1)
    # grouped by integer codes, labelled after (same rows, order and sums as by the labels)
    if rows_mode:
        code, found = kinds.codes, np.asarray(kinds.found, dtype=object)
    else:
        code, uniques = pd.factorize(df["event"].astype(str))
        found = np.asarray([str(e) for e in uniques], dtype=object)
    sums = frame.groupby(code, sort=False).sum()
    return sums.set_axis(found[sums.index.to_numpy()]), labelled


def rows_part(
    table: pa.Table,
    offset: int,
    cfg: RateConfig,
    pops: Sequence[StreamPopulation],
    stats: Sequence[Any],
) -> list[tuple[NDArray, dict[str, NDArray]]]:
    """Rows mode on one batch: per population and Poisson group, sum of W s and of W s y."""
    import pandas as pd

    from gwdeficit.resample import _COLUMN_FAMILY, FIT_FAMILIES, _indicator, _row_numbers

    df = table.to_pandas()
    gid = _row_groups(cfg.seed, offset, len(df), cfg.n_groups)
    K = cfg.n_groups
    w = pd.to_numeric(df["weight"], errors="coerce").to_numpy(np.float64)
    used = ~df["remnant_status"].astype(str).str.startswith(_NOT_EST).to_numpy()
    kinds = df["kind"].astype(str).to_numpy(dtype=object)
    out = []
    for pop in pops:
        keep = used & (w > 0)
        if pop.kind is not None:
            keep &= kinds == pop.kind
        idx = np.flatnonzero(keep)
        if cfg.selection == "none":
            ws = w[idx]
        elif cfg.selection == "inspiral-volume":
            lf = _log_factor(df.iloc[idx])
            bad = np.flatnonzero(~np.isfinite(lf))
            if bad.size:
                raise schema.BadRowsError(
                    cfg.source,
                    "m1_msun",
                    "no positive chirp mass",
                    _row_numbers(df, idx[bad]),
                    hint=schema.REMNANTS_HINT,
                )
            ws = w[idx] * np.exp(lf - pop.log_factor_mean)
        else:
            vt = pd.to_numeric(df["vt_gpc3_yr"], errors="coerce").to_numpy(np.float64)[idx]
            bad = np.flatnonzero(~(np.isfinite(vt) & (vt > 0)))
            if bad.size:
                raise schema.BadRowsError(
                    cfg.source,
                    "vt_gpc3_yr",
                    "sensitive volume-time is not a positive number",
                    _row_numbers(df, idx[bad]),
                    hint=schema.REMNANTS_HINT,
                )
            ws = w[idx] / vt
        g = gid[idx]
        den = np.bincount(g, weights=ws, minlength=K)
        nums: dict[str, NDArray] = {}
        for st in stats:
            fam = _COLUMN_FAMILY.get(st.column)
            names = pop.fit_names.get(fam, ()) if fam else ()
            alts = [df[st.column].to_numpy(np.float64)[idx]]
            for name in names:
                col = f"{FIT_FAMILIES[fam]}{schema.PER_FIT_SEPARATOR}{name}"
                alt = df[col].to_numpy(np.float64)[idx]
                if st.column == "deficit_msun":
                    alt = alt + df["ejected_msun"].to_numpy(np.float64)[idx]
                alts.append(alt)
            arr = np.empty((K, len(alts)))
            for j, x in enumerate(alts):
                y = x if st.threshold is None else _indicator(x, st.threshold)
                arr[:, j] = np.bincount(g, weights=ws * y, minlength=K)
            nums[st.name] = arr
        out.append((den, nums))
    return out


def _generator(state: Mapping[str, Any]) -> np.random.Generator:
    bg = getattr(np.random, state["bit_generator"])()
    bg.state = state
    return np.random.Generator(bg)


def bootstrap_ingredients(
    rng_state: Mapping[str, Any],
    n_draws: int,
    n_ev: int,
    n_fm: int,
    n_rc: int,
    chunk: int,
) -> Iterator[tuple[int, int, NDArray, NDArray, NDArray, NDArray]]:
    """The random ingredients of :func:`gwdeficit.resample.run_bootstrap`, chunk by chunk.

    Same generator state, same order (sorted event picks, uniforms, fit choices), so any
    process can regenerate them: yields (b0, m, ev_cat, u_post, f_fm, f_rc).
    """
    rng = _generator(rng_state)
    idx_type = np.int32 if n_ev < 2**31 - 1 else np.int64
    for b0 in range(0, n_draws, chunk):
        m = min(chunk, n_draws - b0)
        ev_cat = rng.integers(0, n_ev, size=(m, n_ev), dtype=idx_type)
        ev_cat.sort(axis=1)
        u_post = rng.random((m, n_ev))
        f_fm = rng.integers(0, max(n_fm, 1), size=m)
        f_rc = rng.integers(0, max(n_rc, 1), size=m)
        yield b0, m, ev_cat, u_post, f_fm, f_rc


def _alternatives(cfg: frozenset[str], f_fm, f_rc, n_fm: int, n_rc: int, m: int) -> dict:
    zero = np.zeros(m, dtype=np.int64)
    on = "fits" in cfg
    return {
        "final_mass": (1 + f_fm) if (on and n_fm) else zero,
        "recoil": (1 + f_rc) if (on and n_rc) else zero,
        None: zero,
    }


def group_part(
    df: pd.DataFrame,
    cfg: RateConfig,
    pop: StreamPopulation,
    stats: Sequence[Any],
    cfgs: Sequence[frozenset[str]],
    n_draws: int,
    rng_state: Mapping[str, Any],
    chunk: int,
    offset: int,
    n_expected: int,
    kinds: pd.Series,
) -> dict[str, Any]:
    """Events mode on one event group (all rows of its events).

    Prepares the group with :func:`gwdeficit.resample.prepare_population`, then returns its
    events' means (posterior off), weights, and for every posterior-on configuration the
    group's partial numerators and denominators of each draw (picks of the global ingredients
    that fall on the group's events, global codes ``offset .. offset + n_expected - 1``).
    """
    from gwdeficit.resample import _COLUMN_FAMILY, _event_means, _indicator, _pick_rows
    from gwdeficit.resample import prepare_population as prepare

    df.attrs.update(cfg.attrs)
    if cfg.fits_meta is not None:
        df.attrs[schema.META_FITS] = cfg.fits_meta
    cols = list(pop.columns)
    if cfg.selection == "inspiral-volume":
        cols += ["m1_msun", "m2_msun"]
    gp = prepare(
        df, cols, selection=cfg.selection, kind=pop.kind, source=cfg.source, kinds_of_events=kinds
    )
    del df
    if gp.n_events != n_expected:
        raise RuntimeError("event group prepared with an unexpected number of events")
    if cfg.selection == "inspiral-volume":
        from gwdeficit.convert import chirp_mass

        mc = chirp_mass(gp.values["m1_msun"][:, 0], gp.values["m2_msun"][:, 0])
        gp = replace(gp, row_factor=np.exp((-15.0 / 6.0) * np.log(mc) - pop.log_factor_mean))
    n_ev, n_g, o = pop.n_events, gp.n_events, offset
    n_fm = pop.n_alternatives("final_mass")
    n_rc = pop.n_alternatives("recoil")
    den_e, num_e = _event_means(gp, stats)
    post = [i for i, c in enumerate(cfgs) if "posterior" in c]
    num = {i: {st.name: np.zeros(n_draws) for st in stats} for i in post}
    den = {i: np.zeros(n_draws) for i in post}
    flat = {c: v.ravel() for c, v in gp.values.items()}
    width = {c: v.shape[1] for c, v in gp.values.items()}
    if post:
        for b0, m, ev, u, f_fm, f_rc in bootstrap_ingredients(
            rng_state, n_draws, n_ev, n_fm, n_rc, chunk
        ):
            for i in post:
                if "catalogue" in cfgs[i]:
                    bi, ji = np.nonzero((ev >= o) & (ev < o + n_g))
                    evl = ev[bi, ji].astype(np.int64) - o
                    uu = u[bi, ji]
                else:
                    bi = np.repeat(np.arange(m), n_g)
                    evl = np.tile(np.arange(n_g, dtype=np.int64), m)
                    uu = u[:, o : o + n_g].ravel()
                rows = _pick_rows(gp, evl, uu)
                wgt = gp.event_weight[evl] * gp.row_factor[rows]
                den[i][b0 : b0 + m] += np.bincount(bi, weights=wgt, minlength=m)
                alt = _alternatives(cfgs[i], f_fm, f_rc, n_fm, n_rc, m)
                for st in stats:
                    k = width[st.column]
                    a = alt[_COLUMN_FAMILY.get(st.column)]
                    pos = rows * k + a[bi] if k > 1 else rows
                    x = flat[st.column].take(pos)
                    y = x if st.threshold is None else _indicator(x, st.threshold)
                    num[i][st.name][b0 : b0 + m] += np.bincount(bi, weights=wgt * y, minlength=m)
    return {
        "offset": o,
        "n": n_g,
        "den_e": den_e,
        "num_e": num_e,
        "w_e": gp.event_weight,
        "num": num,
        "den": den,
    }


def _merge_sums(parts: Sequence[pd.DataFrame | None]) -> pd.DataFrame | None:
    import pandas as pd

    frames = [p for p in parts if p is not None]
    if not frames:
        return None
    if len(frames) == 1:
        return frames[0]
    return pd.concat(frames).fillna(0).groupby(level=0, sort=False).sum()


class StreamPopulations:
    """The rate stage's data steps on a remnants Parquet file or folder, out of core.

    Pass it as ``engine=`` to :func:`gwdeficit.budget.compute_budget` (or use
    :func:`stream_budget`). ``mode``: ``"events"``, ``"rows"`` or ``"auto"`` (rows when every
    label is ingest's own ``row<input_row>``, i.e. the table had no event column, and there
    are at least :data:`ROWS_MODE_MIN_ROWS` rows). See the module docstring for the methods and
    the memory bounds. Use as a context manager (the temporary files go at exit). Subclasses
    (the Dask engine) replace :meth:`map_batches` and :meth:`group_results`.
    """

    engine_name = "stream"

    def __init__(
        self,
        path: str | os.PathLike[str],
        *,
        seed: int,
        columns: Sequence[str],
        selection: str = "none",
        mode: str = "auto",
        batch_rows: int = DEFAULT_BATCH_ROWS,
        group_rows: int = DEFAULT_GROUP_ROWS,
        n_groups: int = POISSON_GROUPS,
        source: str | None = None,
        digest: str = "",
        progress: Callable[[str, int | None], Any] | None = None,
        tmpdir: str | os.PathLike[str] | None = None,
    ) -> None:
        import pandas as pd

        from gwdeficit.resample import SELECTIONS, default_fits

        if mode not in ("auto", "events", "rows"):
            raise OptionError(f"mode {mode!r} is not known; valid: auto, events, rows")
        if selection not in SELECTIONS:
            raise OptionError(
                f"selection {selection!r} is not known; valid: {', '.join(SELECTIONS)}"
            )
        self.path = Path(path)
        self.seed = int(seed)
        self.columns = tuple(dict.fromkeys(columns))
        self.selection = selection
        self.batch_rows = _check_batch_rows(batch_rows)
        self.group_rows = max(1, int(group_rows))
        self.n_groups = int(n_groups)
        self.source = source or str(path)
        self.digest = digest
        self._progress = progress
        self._tmp_parent = tmpdir
        self._tmp: tempfile.TemporaryDirectory | None = None
        self.n_rows, _, self.names = _open(self.path, self.batch_rows, [])
        self.attrs = read_metadata(self.path)
        self.frame = pd.DataFrame(columns=self.names)
        self.frame.attrs.update(self.attrs)
        self.fits_by_family = default_fits(self.frame)
        self.mode = mode
        self._tallies: pd.DataFrame | None = None
        self._status_cols: list[str] = []
        self._pops: list[StreamPopulation] = []
        self._spilled: list[Path] | None = None
        self._group_event_ranges: list[tuple[int, int]] = []
        self._row_sums: list[tuple[NDArray, dict[str, NDArray]]] | None = None
        self._stats: list[Any] = []
        self.config = RateConfig(
            source=self.source,
            selection=selection,
            columns=self.columns,
            alt_columns=self._alt_columns(),
            seed=self.seed,
            n_groups=self.n_groups,
        )

    # -- context and plumbing -------------------------------------------------------------------

    def __enter__(self) -> StreamPopulations:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    def close(self) -> None:
        """Remove the temporary files."""
        if self._tmp is not None:
            self._tmp.cleanup()
            self._tmp = None

    def _tmpdir(self) -> Path:
        if self._tmp is None:
            self._tmp = tempfile.TemporaryDirectory(
                prefix="gwdeficit-stream-", dir=self._tmp_parent
            )
        return Path(self._tmp.name)

    @contextlib.contextmanager
    def _bar(self, what: str, total: int | None) -> Iterator[Callable[[int], None]]:
        if self._progress is None:
            yield lambda n: None
        else:
            with self._progress(what, total) as advance:
                yield advance

    def map_batches(
        self, columns: Sequence[str], fn: Callable[..., Any], *args: Any
    ) -> Iterator[tuple[int, Any]]:
        """Yield (rows, fn(table, offset, *args)) for each batch of the table, in row order."""
        _, batches, _ = _open(self.path, self.batch_rows, list(dict.fromkeys(columns)))
        offset = 0
        for table in batches():
            yield table.num_rows, fn(table, offset, *args)
            offset += table.num_rows

    def _alt_columns(self) -> dict[str, str]:
        """Per default fit used by the statistics: its per-fit column."""
        from gwdeficit.resample import _COLUMN_FAMILY, FIT_FAMILIES

        out = {}
        for fam, prefix in FIT_FAMILIES.items():
            if any(_COLUMN_FAMILY.get(c) == fam for c in self.columns):
                for name in self.fits_by_family[fam]:
                    out[name] = f"{prefix}{schema.PER_FIT_SEPARATOR}{name}"
        return out

    def _scan_columns(self) -> list[str]:
        need = ["event", "weight", "kind", "remnant_status", *self.columns]
        if "deficit_msun" in self.columns:
            need.append("ejected_msun")
        if self.selection == "inspiral-volume":
            need += ["m1_msun", "m2_msun"]
        missing = [c for c in dict.fromkeys(need) if c not in self.names]
        if missing:
            raise SchemaError(
                f"{self.source}: missing column(s) {', '.join(missing)} needed for the bootstrap"
            )
        extra = [c for c in ("input_row", "in_fit_range") if c in self.names]
        return list(dict.fromkeys([*need, *extra, *self._alt_columns().values()]))

    # -- pass 1 ---------------------------------------------------------------------------------

    def _scan(self) -> None:
        if self._tallies is not None:
            return
        rows_mode = self.mode == "rows" or (
            self.mode == "auto" and self.n_rows >= ROWS_MODE_MIN_ROWS
        )
        acc = None
        parts = []
        with self._bar("rate: tallies", self.n_rows) as advance:
            for n, (part, labelled) in self.map_batches(
                self._scan_columns(), tally_part, self.config, rows_mode
            ):
                if rows_mode and not labelled:
                    if self.mode == "rows":
                        raise OptionError(
                            f"{self.source}: the rows mode needs every event label to be "
                            "row<input_row> (a table without an event column)"
                        )
                    self.mode = "events"
                    return self._scan()
                parts.append(part)
                if len(parts) >= 16:
                    acc = _merge_sums([acc, *parts])
                    parts = []
                advance(n)
        acc = _merge_sums([acc, *parts])
        if acc is None:
            raise SchemaError(f"{self.source}: the remnants table has no rows")
        self.mode = "rows" if rows_mode else "events"
        self._tallies = acc.fillna(0).sort_index()
        self._status_cols = sorted(c for c in acc.columns if c.startswith("st|"))

    # -- the engine interface of compute_budget -------------------------------------------------

    def event_kinds(self) -> pd.Series:
        """Majority kind of each event (rows mode: each kind present once)."""
        import pandas as pd

        self._scan()
        t = self._tallies
        kinds = sorted(k for k in schema.KINDS if t[f"n:{k}"].sum() > 0)
        if self.mode == "rows":
            return pd.Series(kinds, index=pd.Index(kinds, name="event"), name="kind")
        weight = np.column_stack([t[f"w:{k}"].to_numpy() for k in kinds])
        present = np.column_stack([t[f"n:{k}"].to_numpy() > 0 for k in kinds])
        best = np.argmax(np.where(present, weight, -np.inf), axis=1)
        return pd.Series(
            np.asarray(kinds, dtype=object)[best],
            index=pd.Index(t.index.to_numpy(dtype=object), name="event"),
            name="kind",
        )

    def prepare_population(
        self,
        remnants: pd.DataFrame,
        columns: Sequence[str],
        selection: str = "none",
        kind: str | None = None,
        source: str = "remnants table",
        digest: bool = False,
        kinds_of_events: pd.Series | None = None,
    ) -> StreamPopulation:
        """The population's counts and fit choice from the tallies (as ``prepare_population``).

        Raises the same :class:`SchemaError` when no estimated row with weight > 0 is left.
        """
        import hashlib

        from gwdeficit.resample import _COLUMN_FAMILY, FIT_FAMILIES

        if selection != self.selection or not set(columns) <= set(self.columns):
            raise OptionError(
                "the streamed populations were set up for other columns or another selection"
            )
        self._scan()
        t = self._tallies
        kinds = self.event_kinds() if kinds_of_events is None else kinds_of_events
        rows_mode = self.mode == "rows"
        col = {c: t[c].to_numpy() for c in t.columns}
        if kind is None:
            keep = np.ones(len(t), dtype=bool)
        elif rows_mode:
            keep = np.asarray(t.index == kind)
        else:
            keep = kinds.reindex(t.index).to_numpy() == kind
        info: dict[str, Any] = {"rows_in": int(col["rows"][keep].sum())}
        if kind is None:
            info["rows_in"] = self.n_rows
        elif rows_mode:
            info["events_mixed_kind"] = 0
        else:
            n_kinds = sum((col[f"n:{k}"] > 0).astype(int) for k in schema.KINDS)
            info["events_mixed_kind"] = int((keep & (n_kinds > 1)).sum())
        rows, used = col["rows"], col["used"]
        info["rows_not_estimated"] = int((rows - used)[keep].sum())
        info["not_estimated_reasons"] = {
            c.split("|", 1)[1]: int(col[c][keep].sum())
            for c in self._status_cols
            if col[c][keep].sum() > 0
        }
        if rows_mode:
            info["events_in"] = info["rows_in"]
            zero_rows = int(col["used_zero"][keep].sum())
            info["events_zero_weight"] = zero_rows
            info["rows_zero_weight_events"] = zero_rows
            present = keep.copy()
            rows_used = int(used[keep].sum()) - zero_rows
            n_events = rows_used
        else:
            info["events_in"] = int(keep.sum())
            zero_ev = keep & (used > 0) & (col["wused"] <= 0)
            info["events_zero_weight"] = int(zero_ev.sum())
            info["rows_zero_weight_events"] = int(used[zero_ev].sum())
            present = keep & (used > 0) & (col["wused"] > 0)
            rows_used = int(used[present].sum())
            n_events = int(present.sum())
        if rows_used == 0:
            raise SchemaError(
                f"{source}: no estimated rows with weight > 0"
                + (f" of kind {kind}" if kind else "")
                + f" ({info['rows_not_estimated']} row(s) not estimated)"
            )
        fit_names: dict[str, tuple[str, ...]] = {}
        ineligible: dict[str, str] = {}
        for fam in FIT_FAMILIES:
            if not any(_COLUMN_FAMILY.get(c) == fam for c in columns):
                continue
            ok = []
            for name in self.fits_by_family[fam]:
                n_bad = int(col[f"bad:{name}"][present].sum())
                if n_bad == 0:
                    ok.append(name)
                else:
                    ineligible[name] = f"not finite on {n_bad} used row(s)"
            fit_names[fam] = tuple(ok)
        info["fits"] = {fam: list(v) for fam, v in fit_names.items()}
        info["fits_left_out"] = ineligible
        nan_values = {}
        for c in dict.fromkeys(columns):
            n_nan = int(col[f"nan:{c}"][present].sum())
            if n_nan:
                nan_values[c] = n_nan
        info.update(
            rows_used=rows_used,
            events_used=n_events,
            rows_outside_calibration=(
                int(col["outside"][present].sum()) if "outside" in col else None
            ),
            nan_values=nan_values,
            selection=selection,
        )
        log_mean = 0.0
        if selection == "inspiral-volume":
            n_logs = int(col["nlogs"][present].sum())
            if n_logs:
                log_mean = float(col["logs"][present].sum() / n_logs)
        h = hashlib.sha256(
            f"{self.digest}|{self.mode}|{kind}|{selection}|{','.join(columns)}".encode()
        ).hexdigest()
        pop = StreamPopulation(
            kind=kind,
            columns=tuple(dict.fromkeys(columns)),
            info=info,
            digest=h if digest else "",
            fit_names=fit_names,
            n_events=n_events,
            present=present,
            log_factor_mean=log_mean,
        )
        self._pops.append(pop)
        return pop

    def counts(
        self,
        remnants: pd.DataFrame,
        groups: Sequence[Any],
        left_out: Mapping[str, str],
        kinds_of_events: pd.Series,
    ) -> dict[str, Any]:
        """Row and event counts as :func:`gwdeficit.budget._counts` gives them."""
        from gwdeficit.budget import _counts

        out = _counts(remnants, groups, {}, kinds_of_events.iloc[:0])
        out["rows_in"] = self.n_rows
        t = self._tallies
        rows_left = {}
        for k in left_out:
            if self.mode == "rows":
                rows_left[k] = int(t["rows"].get(k, 0))
            else:
                sel = kinds_of_events.reindex(t.index).to_numpy() == k
                rows_left[k] = int(t["rows"].to_numpy()[sel].sum())
        out["rows_in_kinds_left_out"] = rows_left
        return out

    def run_bootstrap(
        self,
        pop: StreamPopulation,
        stats: Sequence[Any],
        configs: Sequence[Any],
        n_draws: int,
        rng: np.random.Generator,
        progress: Callable[[int], None] | None = None,
        chunk_picks: int | None = None,
    ) -> list[dict[str, NDArray[np.float64]]]:
        """Bootstrap draws of every stat under each configuration (as ``run_bootstrap``)."""
        from gwdeficit.resample import CHUNK_PICKS, _check_sources

        n_draws = int(n_draws)
        if n_draws < 1:
            raise OptionError(f"number of draws {n_draws} must be at least 1")
        cfgs = [_check_sources(c) for c in configs]
        for st in stats:
            if st.column not in pop.columns:
                raise SchemaError(f"statistic {st.name!r}: column {st.column!r} was not prepared")
        picks = CHUNK_PICKS if chunk_picks is None else int(chunk_picks)
        if self.mode == "rows":
            return self._rows_bootstrap(pop, list(stats), cfgs, n_draws, rng, progress, picks)
        return self._events_bootstrap(pop, list(stats), cfgs, n_draws, rng, progress, picks)

    # -- events mode ----------------------------------------------------------------------------

    def _group_config(self, pop: StreamPopulation) -> RateConfig:
        """Config whose fit list names only the population's eligible default fits."""
        eligible = {n for names in pop.fit_names.values() for n in names}
        fits = self.attrs.get(schema.META_FITS)
        meta = None
        if isinstance(fits, list):
            meta = [
                f
                for f in fits
                if not (isinstance(f, Mapping) and f.get("in_default")) or f.get("name") in eligible
            ]
        attrs = {k: v for k, v in self.attrs.items() if k != schema.META_FITS}
        return replace(self.config, fits_meta=meta, attrs=attrs)

    def _plan_groups(self) -> None:
        """Event groups: consecutive sorted labels, at most ``group_rows`` rows (256 at most)."""
        if self._group_event_ranges:
            return
        counts = self._tallies["rows"].to_numpy()
        limit = max(self.group_rows, -(-int(counts.sum()) // 256))
        group_of = np.empty(counts.size, dtype=np.int64)
        g, filled = 0, 0
        for i, c in enumerate(counts.tolist()):
            if filled and filled + c > limit:
                g, filled = g + 1, 0
            group_of[i] = g
            filled += c
        n_groups = g + 1 if counts.size else 0
        edges = np.searchsorted(group_of, np.arange(n_groups + 1))
        self._group_of = group_of
        self._group_event_ranges = [(int(edges[i]), int(edges[i + 1])) for i in range(n_groups)]

    def _group_columns(self) -> list[str]:
        cols = self._scan_columns()
        for c in ("sample", "vt_gpc3_yr"):
            if c in self.names and c not in cols:
                cols.append(c)
        return cols

    def _spill(self) -> None:
        """Write the needed columns into one Arrow file per event group."""
        import pandas as pd
        import pyarrow as pa

        if self._spilled is not None:
            return
        self._plan_groups()
        index = pd.Index(self._tallies.index.to_numpy(dtype=object))
        folder = self._tmpdir()
        paths = [folder / f"group-{i:04d}.arrow" for i in range(len(self._group_event_ranges))]
        writers: dict[int, Any] = {}
        _, batches, _ = _open(self.path, self.batch_rows, self._group_columns())
        try:
            with self._bar("rate: grouping events", self.n_rows) as advance:
                for table in batches():
                    labels = table.column("event").to_numpy(zero_copy_only=False).astype(str)
                    gid = self._group_of[index.get_indexer(labels)]
                    order = np.argsort(gid, kind="stable")
                    bounds = np.flatnonzero(np.diff(gid[order])) + 1
                    for part in np.split(order, bounds):
                        if not part.size:
                            continue
                        gi = int(gid[part[0]])
                        sub = table.take(pa.array(part))
                        if gi not in writers:
                            writers[gi] = pa.ipc.new_file(str(paths[gi]), sub.schema)
                        writers[gi].write_table(sub)
                    advance(table.num_rows)
        finally:
            for w in writers.values():
                w.close()
        self._spilled = paths

    def _read_group(self, i: int) -> pd.DataFrame:
        import pyarrow as pa

        with pa.memory_map(str(self._spilled[i])) as src:
            return pa.ipc.open_file(src).read_all().to_pandas()

    def group_results(self, pop: StreamPopulation, *args: Any) -> Iterator[tuple[int, Any]]:
        """Yield (rows, :func:`group_part` result) for every event group holding events of
        ``pop``; ``args`` follow ``group_part``'s (stats, cfgs, n_draws, rng_state, chunk)."""
        self._spill()
        cfg = self._group_config(pop)
        kinds = self.event_kinds()
        rows = self._tallies["rows"].to_numpy()
        offset = 0
        for gi, (e0, e1) in enumerate(self._group_event_ranges):
            n_g = int(pop.present[e0:e1].sum())
            rows_g = int(rows[e0:e1].sum())
            if n_g:
                df = self._read_group(gi)
                yield rows_g, group_part(df, cfg, pop, *args, offset, n_g, kinds)
            else:
                yield rows_g, None
            offset += n_g

    def _events_bootstrap(
        self,
        pop: StreamPopulation,
        stats: list[Any],
        cfgs: list[frozenset[str]],
        n_draws: int,
        rng: np.random.Generator,
        progress: Callable[[int], None] | None,
        chunk_picks: int,
    ) -> list[dict[str, NDArray[np.float64]]]:
        from gwdeficit.resample import _COLUMN_FAMILY

        n_ev = pop.n_events
        n_fm = pop.n_alternatives("final_mass")
        n_rc = pop.n_alternatives("recoil")
        chunk = max(1, int(chunk_picks) // max(n_ev, 1))
        state = rng.bit_generator.state
        post = [i for i, c in enumerate(cfgs) if "posterior" in c]
        out = [{st.name: np.zeros(n_draws) for st in stats} for _ in cfgs]
        den = {i: np.zeros(n_draws) for i in post}
        den_e = np.empty(n_ev)
        w_e = np.empty(n_ev)
        num_e: dict[str, NDArray] = {}
        with self._bar("rate: event groups", self.n_rows) as advance:
            for rows_g, res in self.group_results(pop, stats, cfgs, n_draws, state, chunk):
                if res is not None:
                    o, n_g = res["offset"], res["n"]
                    den_e[o : o + n_g] = res["den_e"]
                    w_e[o : o + n_g] = res["w_e"]
                    for name, arr in res["num_e"].items():
                        num_e.setdefault(name, np.empty((n_ev, arr.shape[1])))[o : o + n_g] = arr
                    for i in post:
                        den[i] += res["den"][i]
                        for name, v in res["num"][i].items():
                            out[i][name] += v
                advance(rows_g)
        for i in post:
            for st in stats:
                out[i][st.name] /= den[i]
        # Posterior off: the in-memory formula on the gathered per-event means.
        all_events = np.arange(n_ev, dtype=np.int64)
        for b0, m, ev_cat, _, f_fm, f_rc in bootstrap_ingredients(
            state, n_draws, n_ev, n_fm, n_rc, chunk
        ):
            for i, cfg in enumerate(cfgs):
                if "posterior" in cfg:
                    continue
                ev = ev_cat if "catalogue" in cfg else np.broadcast_to(all_events, (m, n_ev))
                alt = _alternatives(cfg, f_fm, f_rc, n_fm, n_rc, m)
                W = w_e[ev]
                dn = (W * den_e[ev]).sum(axis=1)
                for st in stats:
                    a = alt[_COLUMN_FAMILY.get(st.column)]
                    means = num_e[st.name]
                    k = means.shape[1]
                    pos = ev * k + a[:, None] if k > 1 else ev
                    out[i][st.name][b0 : b0 + m] = (W * means.ravel().take(pos)).sum(axis=1) / dn
            if progress is not None:
                progress(m)
        return out

    # -- rows mode ------------------------------------------------------------------------------

    def _rows_sums(self, stats: list[Any]) -> None:
        """One pass over the table: the Poisson-group sums of every prepared population."""
        if self._row_sums is not None:
            if [s.name for s in stats] != [s.name for s in self._stats]:
                raise OptionError("the streamed populations were summed for other statistics")
            return
        self._stats = stats
        cols = self._scan_columns()
        if self.selection == "column":
            cols.append("vt_gpc3_yr")
        sums: list[tuple[NDArray, dict[str, NDArray]]] | None = None
        with self._bar("rate: Poisson groups", self.n_rows) as advance:
            for n, parts in self.map_batches(cols, rows_part, self.config, self._pops, stats):
                if sums is None:
                    sums = parts
                else:
                    for (den, nums), (d2, n2) in zip(sums, parts, strict=True):
                        den += d2
                        for k, v in n2.items():
                            nums[k] += v
                advance(n)
        self._row_sums = sums or []

    def _rows_bootstrap(
        self,
        pop: StreamPopulation,
        stats: list[Any],
        cfgs: list[frozenset[str]],
        n_draws: int,
        rng: np.random.Generator,
        progress: Callable[[int], None] | None,
        chunk_picks: int,
    ) -> list[dict[str, NDArray[np.float64]]]:
        from gwdeficit.resample import _COLUMN_FAMILY

        self._rows_sums(stats)
        j = next(i for i, p in enumerate(self._pops) if p is pop)
        den_g, num_g = self._row_sums[j]
        K = self.n_groups
        n_fm = pop.n_alternatives("final_mass")
        n_rc = pop.n_alternatives("recoil")
        chunk = max(1, int(chunk_picks) // K)
        out = [{st.name: np.empty(n_draws) for st in stats} for _ in cfgs]
        # one matrix of every per-group sum: den, then each stat's alternatives
        names = [st.name for st in stats]
        stack = np.column_stack([den_g, *(num_g[k] for k in names)])
        start = np.cumsum([1, *(num_g[k].shape[1] for k in names)])
        fixed = stack.sum(axis=0)[None, :]
        for b0 in range(0, n_draws, chunk):
            m = min(chunk, n_draws - b0)
            counts = rng.poisson(1.0, size=(m, K)).astype(np.float64)
            f_fm = rng.integers(0, max(n_fm, 1), size=m)
            f_rc = rng.integers(0, max(n_rc, 1), size=m)
            resampled = counts @ stack
            rows = np.arange(m)
            for i, cfg in enumerate(cfgs):
                tot = resampled if "catalogue" in cfg else np.broadcast_to(fixed, resampled.shape)
                alt = _alternatives(cfg, f_fm, f_rc, n_fm, n_rc, m)
                for j2, st in enumerate(stats):
                    a = alt[_COLUMN_FAMILY.get(st.column)]
                    out[i][st.name][b0 : b0 + m] = tot[rows, start[j2] + a] / tot[:, 0]
            if progress is not None:
                progress(m)
        return out


def stream_budget(
    remnants: str | os.PathLike[str],
    *,
    mode: str = "auto",
    batch_rows: int = DEFAULT_BATCH_ROWS,
    group_rows: int = DEFAULT_GROUP_ROWS,
    rows_progress: Callable[[str, int | None], Any] | None = None,
    engine_factory: Callable[..., StreamPopulations] | None = None,
    **budget_kwargs: Any,
) -> Any:
    """The rate stage's budget of a remnants Parquet file or folder, out of core.

    ``budget_kwargs`` as for :func:`gwdeficit.budget.compute_budget` (volumes, rate,
    rates_by_kind, evolution, escape_speeds_kms, selection, n_draws, seed, cosmology,
    densities, sources, default_rate_z, keep_draws, progress of the draws, source, inputs);
    ``mode``, ``batch_rows`` and ``group_rows`` as for :class:`StreamPopulations`;
    ``rows_progress(description, total)`` returns a context manager yielding
    ``advance(rows)`` (for example :func:`row_progress`); ``engine_factory`` builds the engine
    (default :class:`StreamPopulations`; the Dask engine passes its own). Returns the
    :class:`~gwdeficit.budget.RateBudget`; its notes and summary name the engine and mode.
    """
    from gwdeficit import workdir as wd
    from gwdeficit.budget import MEAN_COLUMNS, compute_budget

    path = Path(remnants)
    kw = dict(budget_kwargs)
    kw.setdefault("source", str(path))
    if kw.get("inputs") is None:
        kw["inputs"] = {kw["source"]: wd.file_sha256(path)}
    speeds = sorted({float(v) for v in kw.get("escape_speeds_kms", ())})
    columns = list(dict.fromkeys([*MEAN_COLUMNS.values(), *(["vkick_kms"] if speeds else [])]))
    factory = engine_factory or StreamPopulations
    with factory(
        path,
        seed=int(kw.get("seed", 0)),
        columns=columns,
        selection=kw.get("selection", "none"),
        mode=mode,
        batch_rows=batch_rows,
        group_rows=group_rows,
        source=kw["source"],
        digest="".join(kw["inputs"].values()),
        progress=rows_progress,
    ) as engine:
        result = compute_budget(engine.frame, engine=engine, **kw)
        note = f"{engine.engine_name} rate stage ({engine.mode} mode, batches of {batch_rows} rows)"
        if engine.mode == "rows":
            note += f": random-group Poisson bootstrap over {engine.n_groups} groups"
    notes = (*result.notes, note)
    meta = dict(result.meta)
    summary = dict(meta.get(schema.META_SUMMARY, {}))
    summary["notes"] = list(notes)
    summary["engine"] = {"name": engine.engine_name, "mode": engine.mode, "batch_rows": batch_rows}
    meta[schema.META_SUMMARY] = summary
    result.table.attrs.update(meta)
    return replace(result, meta=meta, notes=notes)


# --------------------------------------------------------------------------------------------
# Entry points of the command line (engine choice, progress bars)
# --------------------------------------------------------------------------------------------


def parquet_shape(path: str | os.PathLike[str]) -> tuple[int, list[str]]:
    """Number of rows and column names of a Parquet file or folder, from its metadata."""
    n, _, names = _open(path, DEFAULT_BATCH_ROWS, [])
    return n, names


def parquet_rows(path: str | os.PathLike[str]) -> int:
    """Number of rows of a Parquet file or folder, from its metadata."""
    return parquet_shape(path)[0]


def remnant_stage(
    catalogue: str | os.PathLike[str],
    out: str | os.PathLike[str],
    *,
    engine: str = "local",
    scheduler: str | None = None,
    seed: int = 0,
    batch_rows: int = DEFAULT_BATCH_ROWS,
    force: bool = False,
    show_progress: bool = False,
    inputs: Mapping[str, str] | None = None,
    ns_options: Mapping[str, Any] | None = None,
    threads: int | None = None,
) -> dict[str, Any]:
    """The remnant stage batch by batch on ``engine`` ("local" or "dask"), with a progress bar.

    ``ns_options``: the neutron-star keywords of ``compute_remnants``; ``threads``: threads for
    the black-hole fits per batch (local engine; on Dask each task uses one, as the cluster
    runs tasks side by side). Returns the summary of :func:`stream_remnants`.
    """
    total = parquet_rows(catalogue)
    with row_progress("remnants", total, show_progress) as advance:
        if engine == "dask":
            from gwdeficit import dask_engine

            with dask_engine.connect(scheduler) as client:
                return dask_engine.dask_remnants(
                    catalogue,
                    out,
                    client=client,
                    seed=seed,
                    batch_rows=batch_rows,
                    force=force,
                    progress=advance,
                    inputs=None if inputs is None else dict(inputs),
                    ns_options=ns_options,
                )
        return stream_remnants(
            catalogue,
            out,
            seed=seed,
            batch_rows=batch_rows,
            force=force,
            progress=advance,
            inputs=inputs,
            ns_options=ns_options,
            threads=threads,
        )


def budget_stage(
    remnants: str | os.PathLike[str],
    *,
    engine: str = "local",
    scheduler: str | None = None,
    batch_rows: int = DEFAULT_BATCH_ROWS,
    show_progress: bool = False,
    **budget_kwargs: Any,
) -> Any:
    """The rate stage out of core on ``engine`` ("local" or "dask"); arguments as
    :func:`stream_budget`. Progress bars (rows per pass) when ``show_progress``."""
    from functools import partial

    bars = partial(row_progress, enabled=True) if show_progress else None
    if engine == "dask":
        from gwdeficit import dask_engine

        with dask_engine.connect(scheduler) as client:
            return dask_engine.dask_budget(
                remnants, client=client, batch_rows=batch_rows, rows_progress=bars, **budget_kwargs
            )
    return stream_budget(remnants, batch_rows=batch_rows, rows_progress=bars, **budget_kwargs)
