"""Working folder, atomic writes, the no-overwrite rule, and provenance metadata.

Every stage writes one Parquet file into the working folder. Files are written to a temporary
name in the same folder and renamed into place, so a reader never sees half a file and an
interrupted run leaves the previous output intact. Temporary names start with
``.gwdeficit-tmp-``; stale ones left by a killed run are removed at the next write.
"""

from __future__ import annotations

import contextlib
import hashlib
import json
import os
import sys
import time
from collections.abc import Iterator, Mapping
from pathlib import Path
from typing import TYPE_CHECKING, Any

from gwdeficit import __version__
from gwdeficit.schema import (
    DISCLAIMER,
    META_DISCLAIMER,
    META_PROVENANCE,
    META_VERSION,
    InputFileError,
    OutputExistsError,
)

if TYPE_CHECKING:
    import pandas as pd
    import pyarrow as pa

ENV_WORKDIR = "GWDEFICIT_WORKDIR"
DEFAULT_WORKDIR = "gwdeficit-work"
TMP_PREFIX = ".gwdeficit-tmp-"

CATALOGUE_FILE = "catalogue.parquet"
REJECTS_FILE = "rejects.csv"
REMNANTS_FILE = "remnants.parquet"
RATES_FILE = "rates.parquet"
DRAWS_FILE = "rate_draws.parquet"
COSMIC_FILE = "cosmic.parquet"
FIGURES_DIR = "figures"


def resolve_workdir(workdir: str | os.PathLike[str] | None = None, create: bool = True) -> Path:
    """The working folder: the argument, else ``$GWDEFICIT_WORKDIR``, else ``./gwdeficit-work``."""
    chosen = workdir if workdir is not None else os.environ.get(ENV_WORKDIR) or DEFAULT_WORKDIR
    path = Path(chosen).expanduser()
    if path.exists() and not path.is_dir():
        raise OutputExistsError(f"working folder {path} exists and is not a folder")
    if create:
        path.mkdir(parents=True, exist_ok=True)
    return path


def file_sha256(path: str | os.PathLike[str], chunk: int = 1 << 20) -> str:
    """SHA-256 of a file (or, for a directory dataset, of its files in sorted order)."""
    p = Path(path)
    h = hashlib.sha256()
    files = sorted(q for q in p.rglob("*") if q.is_file()) if p.is_dir() else [p]
    try:
        for f in files:
            if p.is_dir():
                h.update(str(f.relative_to(p)).encode())
            with open(f, "rb") as fh:
                while block := fh.read(chunk):
                    h.update(block)
    except OSError as exc:
        raise InputFileError(f"{path}: cannot read: {exc.strerror or exc}") from exc
    return h.hexdigest()


def clean_stale_temporaries(folder: Path) -> list[Path]:
    """Remove temporary files a killed run left behind in ``folder``; return what was removed."""
    removed = []
    if folder.is_dir():
        for tmp in folder.glob(TMP_PREFIX + "*"):
            with contextlib.suppress(OSError):
                tmp.unlink()
                removed.append(tmp)
    return removed


def check_writable(out: Path, force: bool, inputs: tuple[str | os.PathLike[str], ...] = ()) -> None:
    """Apply the output rules: never overwrite an input, never overwrite without ``force``."""
    out_r = Path(out).resolve()
    for inp in inputs:
        if inp is not None and Path(inp).resolve() == out_r:
            raise OutputExistsError(f"{out}: refusing to write an output over its own input")
    if out_r.exists() and not force:
        raise OutputExistsError(f"{out} exists; pass --force to overwrite it")


@contextlib.contextmanager
def atomic_path(
    out: str | os.PathLike[str],
    force: bool = False,
    inputs: tuple[str | os.PathLike[str], ...] = (),
) -> Iterator[Path]:
    """Yield a temporary path beside ``out``; on success it is renamed onto ``out``.

    On any exception (including KeyboardInterrupt) the temporary file is removed and ``out``
    is left as it was.
    """
    out = Path(out)
    out.parent.mkdir(parents=True, exist_ok=True)
    check_writable(out, force, inputs)
    clean_stale_temporaries(out.parent)
    tmp = out.parent / f"{TMP_PREFIX}{os.getpid()}-{time.monotonic_ns()}-{out.name}"
    try:
        yield tmp
        with open(tmp, "rb+") as fh:
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, out)
    except BaseException:
        with contextlib.suppress(OSError):
            tmp.unlink()
        raise


def provenance_record(stage: str, inputs: Mapping[str, str] | None = None, **params: Any) -> dict:
    """One stage's provenance entry: stage, command line, version, input hashes, parameters."""
    return {
        "stage": stage,
        "version": __version__,
        "command": list(sys.argv),
        "time_utc": time.strftime("%Y-%m-%dT%H:%M:%SZ", time.gmtime()),
        "inputs": dict(inputs or {}),
        "params": params,
    }


def _encode_meta(meta: Mapping[str, Any]) -> dict[bytes, bytes]:
    return {
        k.encode(): json.dumps(v, sort_keys=True, default=str).encode() for k, v in meta.items()
    }


def decode_meta(raw: Mapping[bytes, bytes] | None) -> dict[str, Any]:
    """Decode the ``gwdeficit.*`` keys of Parquet schema metadata from JSON."""
    out: dict[str, Any] = {}
    for k, v in (raw or {}).items():
        key = k.decode(errors="replace")
        if not key.startswith("gwdeficit."):
            continue
        try:
            out[key] = json.loads(v)
        except ValueError:
            out[key] = v.decode(errors="replace")
    return out


def merge_provenance(previous: Mapping[str, Any] | None, record: dict) -> list[dict]:
    """Previous stages' provenance followed by this stage's record."""
    prev = list((previous or {}).get(META_PROVENANCE, []) or [])
    return [*prev, record]


def table_from_frame(df: pd.DataFrame, meta: Mapping[str, Any]) -> pa.Table:
    """Arrow table from a DataFrame with ``gwdeficit.*`` schema metadata (JSON values).

    The package version and the research-estimate disclaimer are always added.
    """
    import pyarrow as pa

    table = pa.Table.from_pandas(df, preserve_index=False)
    full = {META_VERSION: __version__, META_DISCLAIMER: DISCLAIMER, **meta}
    existing = {k: v for k, v in (table.schema.metadata or {}).items() if k == b"pandas"}
    return table.replace_schema_metadata({**existing, **_encode_meta(full)})


def write_parquet(
    df: pd.DataFrame,
    out: str | os.PathLike[str],
    meta: Mapping[str, Any],
    force: bool = False,
    inputs: tuple[str | os.PathLike[str], ...] = (),
) -> Path:
    """Write ``df`` atomically as Parquet with JSON metadata; return the final path."""
    import pyarrow as pa
    import pyarrow.parquet as pq

    table = table_from_frame(df, meta)
    # Dictionary encoding pays off for label columns only; numeric columns are written plain.
    labels = [
        f.name
        for f in table.schema
        if pa.types.is_string(f.type) or pa.types.is_large_string(f.type)
    ]
    with atomic_path(out, force=force, inputs=inputs) as tmp:
        pq.write_table(table, tmp, compression="zstd", use_dictionary=labels)
    return Path(out)


class WriteBehind:
    """Batches written to a ``pyarrow.parquet.ParquetWriter`` on one background thread.

    Tables are written in the order given, with at most one write pending: pyarrow encodes
    and compresses without holding the GIL, so a stage computes its next batch while the
    previous one is written (at the cost of one more batch in memory). An error of a write is
    raised by the next :meth:`write` or :meth:`wait`. Call :meth:`wait` before touching the
    writer (metadata) on the success path; :meth:`close` (always, e.g. in ``finally``) waits
    for a pending write without raising its error, so that an error already on its way out
    is the one reported, then closes the writer.
    """

    def __init__(self, writer: Any) -> None:
        from concurrent.futures import ThreadPoolExecutor

        self.writer = writer
        self._pool = ThreadPoolExecutor(max_workers=1, thread_name_prefix="gwdeficit-write")
        self._pending: Any = None

    def write(self, table: pa.Table) -> None:
        """Queue ``table`` after waiting for the previous write (which may raise)."""
        self.wait()
        self._pending = self._pool.submit(self.writer.write_table, table)

    def wait(self) -> None:
        """Wait for the pending write; raise its error, if any."""
        pending, self._pending = self._pending, None
        if pending is not None:
            pending.result()

    def close(self) -> None:
        """Wait for a pending write (its error not raised), stop the thread, close the writer."""
        self._pending = None
        try:
            self._pool.shutdown(wait=True)  # returns once the pending write has finished
        finally:
            self.writer.close()


def write_text(
    text: str,
    out: str | os.PathLike[str],
    force: bool = False,
    inputs: tuple[str | os.PathLike[str], ...] = (),
) -> Path:
    """Write a text file atomically."""
    with atomic_path(out, force=force, inputs=inputs) as tmp:
        tmp.write_text(text, encoding="utf-8")
    return Path(out)


def read_parquet(path: str | os.PathLike[str]) -> pd.DataFrame:
    """Read one of gwdeficit's Parquet outputs; metadata (decoded JSON) goes into ``df.attrs``."""
    import pyarrow.parquet as pq

    p = Path(path)
    if not p.exists():
        raise InputFileError(f"{p}: no such file")
    try:
        table = pq.read_table(p)
    except Exception as exc:  # pyarrow raises several types for corrupt files
        raise InputFileError(f"{p}: not a readable Parquet file ({exc})") from exc
    df = table.to_pandas()
    df.attrs.update(decode_meta(table.schema.metadata))
    return df
