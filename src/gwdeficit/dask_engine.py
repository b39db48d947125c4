"""Dask engine: the remnant and rate stages on a Dask cluster, with the local engine's kernels.

Imported only when ``--engine dask`` (or this module) is asked for; it needs the optional
``dask`` extra (``pip install 'gwdeficit[dask]'``, i.e. ``dask[dataframe,distributed]``).

The input (a Parquet file or folder dataset, readable by every worker at the same path) is cut
into *pieces*: whole row groups of one file, about ``batch_rows`` rows each, in the dataset's
order, so every piece knows the position of its first row. Each piece becomes a
``dask.delayed`` task calling the same function as one batch of the streamed engine
(:mod:`gwdeficit.stream`): :meth:`gwdeficit.stream.RemnantJob.run` for the remnant stage,
:func:`gwdeficit.stream.tally_part` and :func:`gwdeficit.stream.rows_part` for the rate stage.
Event groups of the rate stage's events mode are tasks too: each reads its events' rows with a
filter and runs :func:`gwdeficit.stream.group_part` (the random ingredients are regenerated
from the generator state on the worker). The client submits a bounded window of tasks, takes
the results in row order and merges them as the streamed engine does (the remnants file is
written on the client with one ParquetWriter, atomically), so the answers equal the local
engine's for the same seed: random numbers are keyed by row position, never by worker or
partition. A lost worker's tasks are recomputed by the scheduler (the tasks are pure), and the
answer stays the same.

``connect(None)`` starts a ``distributed.LocalCluster`` on 127.0.0.1 (processes, one thread
each, no dashboard); ``connect(ADDRESS)`` joins a running scheduler.
"""

from __future__ import annotations

import contextlib
import os
from collections import deque
from collections.abc import Callable, Iterable, Iterator, Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING, Any

from gwdeficit import stream
from gwdeficit.schema import GwdeficitError, InputFileError, OptionError

if TYPE_CHECKING:
    import pyarrow as pa
    from distributed import Client

__all__ = ["DaskPopulations", "Piece", "connect", "dask_budget", "dask_remnants", "pieces"]

#: Tasks in flight per worker (bounds the memory held by finished, unwritten results).
WINDOW_PER_WORKER = 2


def require() -> None:
    """Raise a clear :class:`OptionError` when the dask extra is not installed."""
    try:
        import dask  # noqa: F401
        import distributed  # noqa: F401
    except ImportError as exc:
        raise OptionError(
            f"--engine dask needs the optional Dask packages: pip install 'gwdeficit[dask]' ({exc})"
        ) from None


@contextlib.contextmanager
def connect(
    scheduler: str | None = None, n_workers: int | None = None, threads_per_worker: int = 1
) -> Iterator[Client]:
    """A ``distributed.Client``: to ``scheduler`` (an address), else to a new LocalCluster.

    The local cluster listens on 127.0.0.1 only, runs ``n_workers`` processes (default: the
    number of CPUs) with ``threads_per_worker`` threads each, and has no dashboard.
    """
    require()
    from distributed import Client, LocalCluster

    if scheduler:
        try:
            client = Client(scheduler, timeout="20s")
        except (OSError, TimeoutError, ValueError) as exc:
            raise InputFileError(f"--scheduler {scheduler}: cannot connect ({exc})") from None
        try:
            yield client
        finally:
            client.close()
        return
    with (
        LocalCluster(
            n_workers=n_workers or os.cpu_count() or 1,
            threads_per_worker=threads_per_worker,
            processes=True,
            host="127.0.0.1",
            dashboard_address=None,
        ) as cluster,
        Client(cluster) as client,
    ):
        yield client


@dataclass(frozen=True)
class Piece:
    """Row groups of one Parquet file, and the dataset position of its first row."""

    path: str
    row_groups: tuple[int, ...]
    n_rows: int
    offset: int

    def read(self, columns: Sequence[str] | None = None) -> pa.Table:
        """The piece's rows (optionally only some columns)."""
        import pyarrow.parquet as pq

        try:
            table = pq.ParquetFile(self.path).read_row_groups(
                list(self.row_groups), columns=None if columns is None else list(columns)
            )
        except OSError as exc:
            raise InputFileError(f"{self.path}: cannot read on a worker ({exc})") from exc
        return table.replace_schema_metadata(None)


def pieces(path: str | os.PathLike[str], batch_rows: int) -> list[Piece]:
    """Cut a Parquet file or folder into pieces of whole row groups, ~``batch_rows`` rows."""
    import pyarrow as pa
    import pyarrow.dataset as ds

    p = Path(path)
    if not p.exists():
        raise InputFileError(f"{p}: no such file or folder")
    try:
        fragments = list(ds.dataset(p, format="parquet").get_fragments())
    except (pa.ArrowInvalid, OSError, ValueError) as exc:
        raise InputFileError(f"{p}: not a readable Parquet table ({exc})") from exc
    out: list[Piece] = []
    offset = 0
    for frag in fragments:
        groups: list[int] = []
        rows = 0
        for rg in frag.row_groups:
            if groups and rows + rg.num_rows > batch_rows:
                out.append(Piece(frag.path, tuple(groups), rows, offset))
                offset += rows
                groups, rows = [], 0
            groups.append(rg.id)
            rows += rg.num_rows
        if groups:
            out.append(Piece(frag.path, tuple(groups), rows, offset))
            offset += rows
    return out


# --------------------------------------------------------------------------------------------
# Tasks: typed errors survive the trip back to the client
# --------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class _Failure:
    cls: type
    state: dict
    message: str

    def reraise(self) -> None:
        exc = self.cls.__new__(self.cls)
        exc.__dict__.update(self.state)
        exc.args = (self.message,)
        raise exc


def _guarded(fn: Callable[..., Any], *args: Any) -> Any:
    try:
        return fn(*args)
    except GwdeficitError as exc:
        return _Failure(type(exc), dict(exc.__dict__), str(exc))


def _piece_task(fn: Callable[..., Any], piece: Piece, columns: Any, args: tuple) -> Any:
    return _guarded(lambda: fn(piece.read(columns), piece.offset, *args))


def _ordered(client: Client, tasks: Iterable[Any]) -> Iterator[Any]:
    """Compute delayed tasks with a bounded window; yield their results in order."""
    window = max(1, WINDOW_PER_WORKER * max(1, len(client.scheduler_info()["workers"])))
    todo = iter(tasks)
    pending: deque = deque()
    for task in todo:
        pending.append(client.compute(task, optimize_graph=False))
        if len(pending) >= window:
            break
    while pending:
        fut = pending.popleft()
        result = fut.result()
        fut.release()
        nxt = next(todo, None)
        if nxt is not None:
            pending.append(client.compute(nxt, optimize_graph=False))
        if isinstance(result, _Failure):
            for f in pending:
                f.cancel()
            result.reraise()
        yield result


# --------------------------------------------------------------------------------------------
# Remnant stage
# --------------------------------------------------------------------------------------------


def dask_remnants(
    catalogue: str | os.PathLike[str],
    out: str | os.PathLike[str],
    *,
    client: Client,
    seed: int = 0,
    fits: Sequence[str] | None = None,
    batch_rows: int = stream.DEFAULT_BATCH_ROWS,
    force: bool = False,
    progress: Callable[[int], None] | None = None,
    inputs: dict[str, str] | None = None,
    ns_options: Mapping[str, Any] | None = None,
) -> dict[str, Any]:
    """:func:`gwdeficit.stream.stream_remnants` with the batches computed on the cluster.

    Same output file, metadata (provenance names the engine ``dask``), warnings and summary;
    ``ns_options`` are the neutron-star keywords of ``compute_remnants``, shipped to every
    task with the job. The client reads the catalogue's ``kind`` column once beforehand
    (:func:`gwdeficit.stream.has_neutron_stars`, row groups all BBH by their statistics are
    skipped).
    """
    import dask

    from gwdeficit import workdir as wd
    from gwdeficit.fits.registry import select_fits

    batch_rows = stream._check_batch_rows(batch_rows)
    if seed is None or int(seed) < 0:
        raise OptionError(f"seed {seed!r}: the remnant stage on Dask needs a seed >= 0")
    cat = Path(catalogue)
    parts = pieces(cat, batch_rows)
    n_total = sum(p.n_rows for p in parts)
    src = str(cat)
    job = stream.RemnantJob(
        int(seed),
        n_total,
        tuple(f.name for f in select_fits(fits)),
        stream.read_metadata(cat),
        src,
        dict(inputs) if inputs is not None else {src: wd.file_sha256(cat)},
        ns_options=stream._ns_options(ns_options),
        has_ns=stream.has_neutron_stars(cat),
        threads=1,  # the cluster runs tasks side by side: one fits thread per task
    )
    task = dask.delayed(_piece_task, pure=True)
    tasks = (task(_run_job, p, None, (job,)) for p in parts)
    return stream.write_remnants(
        cat, out, job, _ordered(client, tasks), batch_rows, force, progress, engine="dask"
    )


def _run_job(table: pa.Table, offset: int, job: stream.RemnantJob) -> Any:
    return job.run(table, offset)


# --------------------------------------------------------------------------------------------
# Rate stage
# --------------------------------------------------------------------------------------------


def _group_task(
    path: str,
    labels: list[str],
    columns: list[str],
    cfg: stream.RateConfig,
    pop: stream.StreamPopulation,
    kinds: Any,
    args: tuple,
) -> Any:
    def run() -> Any:
        import pyarrow.compute as pc
        import pyarrow.dataset as ds

        dataset = ds.dataset(path, format="parquet")
        table = dataset.to_table(
            columns=columns, filter=pc.field("event").isin(labels), batch_readahead=1
        )
        stats, cfgs, n_draws, state, chunk, offset, n_g = args
        return stream.group_part(
            table.to_pandas(), cfg, pop, stats, cfgs, n_draws, state, chunk, offset, n_g, kinds
        )

    return _guarded(run)


class DaskPopulations(stream.StreamPopulations):
    """:class:`gwdeficit.stream.StreamPopulations` with its batch work done on a cluster."""

    engine_name = "dask"

    def __init__(self, path: str | os.PathLike[str], *, client: Client, **kw: Any) -> None:
        super().__init__(path, **kw)
        self.client = client
        self.pieces = pieces(self.path, self.batch_rows)

    def map_batches(
        self, columns: Sequence[str], fn: Callable[..., Any], *args: Any
    ) -> Iterator[tuple[int, Any]]:
        import dask

        task = dask.delayed(_piece_task, pure=True)
        cols = list(dict.fromkeys(columns))
        tasks = (task(fn, p, cols, args) for p in self.pieces)
        yield from zip((p.n_rows for p in self.pieces), _ordered(self.client, tasks), strict=True)

    def group_results(self, pop: stream.StreamPopulation, *args: Any) -> Iterator[tuple[int, Any]]:
        import dask

        self._plan_groups()
        cfg = self._group_config(pop)
        kinds = self.event_kinds()
        labels = self._tallies.index.to_numpy(dtype=object)
        rows = self._tallies["rows"].to_numpy()
        cols = self._group_columns()
        task = dask.delayed(_group_task, pure=True)
        plan: list[tuple[int, Any]] = []
        offset = 0
        for e0, e1 in self._group_event_ranges:
            n_g = int(pop.present[e0:e1].sum())
            rows_g = int(rows[e0:e1].sum())
            if n_g:
                sel = [str(x) for x in labels[e0:e1]]
                plan.append(
                    (
                        rows_g,
                        task(
                            str(self.path),
                            sel,
                            cols,
                            cfg,
                            pop,
                            kinds.iloc[e0:e1],
                            (*args, offset, n_g),
                        ),
                    )
                )
            else:
                plan.append((rows_g, None))
            offset += n_g
        results = _ordered(self.client, (t for _, t in plan if t is not None))
        for rows_g, t in plan:
            yield rows_g, (next(results) if t is not None else None)


def dask_budget(remnants: str | os.PathLike[str], *, client: Client, **kwargs: Any) -> Any:
    """:func:`gwdeficit.stream.stream_budget` with the batch work on the cluster.

    Same arguments (without ``engine_factory``) and the same result as the local engine for
    the same seed; the notes and summary name the engine ``dask``.
    """

    def factory(path: Any, **kw: Any) -> DaskPopulations:
        return DaskPopulations(path, client=client, **kw)

    return stream.stream_budget(remnants, engine_factory=factory, **kwargs)
