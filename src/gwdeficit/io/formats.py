"""Readers per file format, each yielding the input in bounded record batches.

Every reader returns a :class:`RawTable`: the column names as written, units stored in the file
itself (FITS, ECSV), and a function that yields ``pyarrow.Table`` batches of at most
``batch_rows`` rows, in file order. Text cells are kept as text (so rejected rows can be written
back verbatim); typed formats keep their types. Nothing here interprets a column.

Formats (detected from the file name, or forced with ``fmt``):

- ``csv``, ``tsv``, ``whitespace`` text, each optionally gzip/bz2/xz compressed; leading lines
  starting with ``#`` are comments (for whitespace tables whose first line is data, i.e. holds a
  number, the last comment line is the header, as numpy.savetxt writes it). Read with pandas in
  chunks.
- ``parquet`` (a file or a directory dataset) and ``feather`` (Arrow IPC), read with
  pyarrow.dataset record batches.
- ``fits`` and ``ecsv`` tables through astropy.table (first table HDU for FITS); column units
  come from the file.

To add a format: write a ``_read_<fmt>(path, batch_rows) -> RawTable`` function, add it to
:data:`READERS` and its file suffixes to :data:`SUFFIXES`, and add the format to the
same-catalogue test in tests/test_io_formats.py.
"""

from __future__ import annotations

import csv
import io
import os
import warnings
from collections.abc import Callable, Iterator, Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING

from gwdeficit.schema import InputFileError, OptionError

if TYPE_CHECKING:
    import pyarrow as pa

DEFAULT_BATCH_ROWS = 1 << 18  # ~100 MB of working arrays per batch

_COMPRESSION = {".gz": "gzip", ".bz2": "bz2", ".xz": "xz", ".zst": "zstd"}
SUFFIXES: dict[str, str] = {
    ".csv": "csv",
    ".tsv": "tsv",
    ".tab": "tsv",
    ".txt": "text",
    ".dat": "text",
    ".ssv": "whitespace",
    ".parquet": "parquet",
    ".pq": "parquet",
    ".parq": "parquet",
    ".feather": "feather",
    ".arrow": "feather",
    ".ipc": "feather",
    ".fits": "fits",
    ".fit": "fits",
    ".fts": "fits",
    ".ecsv": "ecsv",
}
FORMATS: tuple[str, ...] = ("csv", "tsv", "whitespace", "parquet", "feather", "fits", "ecsv")


@dataclass(frozen=True)
class RawTable:
    """An opened input table: its names, its own units, and a batch iterator factory."""

    path: str
    fmt: str
    columns: tuple[str, ...]
    units: Mapping[str, str] = field(default_factory=dict)
    n_rows: int | None = None
    _batches: Callable[[], Iterator[pa.Table]] = field(default=lambda: iter(()), repr=False)

    def batches(self) -> Iterator[pa.Table]:
        """Yield the table in record batches of bounded size, in file order."""
        return self._batches()


def _split_compression(path: Path) -> tuple[str, str | None]:
    suffixes = [s.lower() for s in path.suffixes]
    comp = _COMPRESSION.get(suffixes[-1]) if suffixes else None
    if comp:
        suffixes = suffixes[:-1]
    return (suffixes[-1] if suffixes else ""), comp


def detect_format(path: str | os.PathLike[str]) -> str:
    """Format name of an input from its file name (``text`` means: sniff the delimiter)."""
    p = Path(path)
    if p.is_dir():
        return "parquet"
    suffix, comp = _split_compression(p)
    fmt = SUFFIXES.get(suffix)
    if fmt is None:
        if comp or suffix == "":
            return "text"
        raise InputFileError(
            f"{p}: cannot tell the format from the suffix {suffix!r}; pass a format "
            f"({', '.join(FORMATS)})"
        )
    return fmt


def open_table(
    path: str | os.PathLike[str],
    fmt: str | None = None,
    batch_rows: int = DEFAULT_BATCH_ROWS,
) -> RawTable:
    """Open an input table for batch reading. Raises InputFileError if it cannot be read."""
    p = Path(path)
    if not p.exists():
        raise InputFileError(f"{p}: no such file or folder")
    if batch_rows < 1:
        raise OptionError(f"batch size {batch_rows}: must be a positive number of rows")
    chosen = (fmt or "").strip().lower() or None
    if chosen in (None, "auto"):
        chosen = detect_format(p)
    if chosen not in READERS:
        raise OptionError(f"format {fmt!r} is not known; valid: {', '.join(FORMATS)}")
    return READERS[chosen](p, batch_rows)


# --------------------------------------------------------------------------------------------
# Text
# --------------------------------------------------------------------------------------------


def _text_head(path: Path, comp: str | None, n_lines: int = 200) -> list[str]:
    opener: Callable[..., io.TextIOBase]
    if comp == "gzip":
        import gzip

        opener = gzip.open
    elif comp == "bz2":
        import bz2

        opener = bz2.open
    elif comp == "xz":
        import lzma

        opener = lzma.open
    elif comp is None:
        opener = open
    else:
        raise InputFileError(f"{path}: {comp} compression is not supported for text tables")
    lines: list[str] = []
    try:
        # utf-8-sig: a byte-order mark (as spreadsheet programs write) is not part of the header
        with opener(path, "rt", encoding="utf-8-sig", newline="") as fh:
            for line in fh:
                lines.append(line.rstrip("\r\n"))
                if len(lines) >= n_lines:
                    break
    except (OSError, UnicodeDecodeError, EOFError) as exc:
        raise InputFileError(f"{path}: cannot read as text: {exc}") from exc
    return lines


def _is_number(token: str) -> bool:
    try:
        float(token)
    except ValueError:
        return False
    return True


def _whitespace_header(line: str) -> list[str]:
    """Split a whitespace header, keeping a bracketed unit with its name (``m1 [Msun]``)."""
    names: list[str] = []
    for tok in line.split():
        if names and tok[:1] in "[({" and not names[-1].rstrip().endswith(("]", ")", "}")):
            names[-1] = f"{names[-1]} {tok}"
        elif names and names[-1].count("[") > names[-1].count("]"):
            names[-1] = f"{names[-1]} {tok}"
        else:
            names.append(tok)
    return names


def _read_text(path: Path, batch_rows: int, fmt: str = "text") -> RawTable:
    import pandas as pd
    import pyarrow as pa

    _, comp = _split_compression(path)
    head = _text_head(path, comp)
    n_comment = 0
    while n_comment < len(head) and (
        head[n_comment].lstrip().startswith("#") or not head[n_comment].strip()
    ):
        n_comment += 1
    if n_comment >= len(head):
        raise InputFileError(f"{path}: no header line found (the file is empty or all comments)")
    first = head[n_comment]
    if fmt == "text":
        fmt = "csv" if "," in first else "tsv" if "\t" in first else "whitespace"

    header_from_comment = False
    if fmt == "whitespace":
        tokens = first.split()
        comments = [h for h in head[:n_comment] if h.strip()]
        if tokens and any(_is_number(t) for t in tokens) and comments:
            names = _whitespace_header(comments[-1].lstrip().lstrip("#"))
            header_from_comment = True
        else:
            names = _whitespace_header(first)
        sep: str = r"\s+"
    else:
        sep = "," if fmt == "csv" else "\t"
        names = next(csv.reader([first], delimiter=sep))
    names = [n.strip() for n in names]
    if not names or any(not n for n in names):
        raise InputFileError(f"{path}: the header line has an empty column name")
    dupes = sorted({n for n in names if names.count(n) > 1})
    if dupes:
        raise InputFileError(f"{path}: duplicate column name(s): {', '.join(map(repr, dupes))}")
    skip = n_comment + (0 if header_from_comment else 1)

    def batches() -> Iterator[pa.Table]:
        try:
            reader = pd.read_csv(
                path,
                sep=sep,
                header=None,
                names=names,
                skiprows=skip,
                dtype=str,
                keep_default_na=False,
                na_filter=False,
                skip_blank_lines=True,
                comment=None,
                compression=comp,
                chunksize=batch_rows,
                encoding="utf-8-sig",
                engine="c",
                index_col=False,
            )
            first = 1
            with reader:
                while True:
                    # pandas only warns when a row has more fields than the header and drops
                    # the excess; that would lose data, so it is an error here.
                    with warnings.catch_warnings():
                        warnings.simplefilter("error", pd.errors.ParserWarning)
                        try:
                            chunk = next(reader)
                        except StopIteration:
                            break
                        except pd.errors.ParserWarning as exc:
                            raise InputFileError(
                                f"{path}: a row among data rows {first}..{first + batch_rows - 1}"
                                f" has more fields than the header ({len(names)})"
                            ) from exc
                    first += len(chunk)
                    yield pa.Table.from_pandas(chunk, preserve_index=False)
        except (pd.errors.ParserError, UnicodeDecodeError, OSError, EOFError) as exc:
            raise InputFileError(f"{path}: cannot parse as {fmt}: {exc}") from exc
        except pd.errors.EmptyDataError:
            return

    return RawTable(str(path), fmt, tuple(names), {}, None, batches)


def _read_csv(path: Path, batch_rows: int) -> RawTable:
    return _read_text(path, batch_rows, "csv")


def _read_tsv(path: Path, batch_rows: int) -> RawTable:
    return _read_text(path, batch_rows, "tsv")


def _read_whitespace(path: Path, batch_rows: int) -> RawTable:
    return _read_text(path, batch_rows, "whitespace")


def _read_sniffed(path: Path, batch_rows: int) -> RawTable:
    return _read_text(path, batch_rows, "text")


# --------------------------------------------------------------------------------------------
# Arrow formats
# --------------------------------------------------------------------------------------------


def _read_dataset(path: Path, batch_rows: int, fmt: str) -> RawTable:
    import pyarrow as pa
    import pyarrow.dataset as ds

    try:
        dataset = ds.dataset(path, format="ipc" if fmt == "feather" else "parquet")
        names = tuple(dataset.schema.names)
        n_rows = dataset.count_rows()
    except (pa.ArrowInvalid, OSError, ValueError) as exc:
        raise InputFileError(f"{path}: not a readable {fmt} table ({exc})") from exc
    if not names:
        raise InputFileError(f"{path}: the {fmt} table has no columns")

    def batches() -> Iterator[pa.Table]:
        try:
            # Little read-ahead and no pre-buffering of whole files: memory stays near one
            # batch instead of growing with the file.
            extra = (
                {"fragment_scan_options": ds.ParquetFragmentScanOptions(pre_buffer=False)}
                if fmt == "parquet"
                else {}
            )
            for rb in dataset.to_batches(
                batch_size=batch_rows, batch_readahead=1, fragment_readahead=1, **extra
            ):
                if rb.num_rows:
                    yield pa.Table.from_batches([rb])
        except (pa.ArrowInvalid, OSError) as exc:
            raise InputFileError(f"{path}: cannot read {fmt} data ({exc})") from exc

    return RawTable(str(path), fmt, names, {}, n_rows, batches)


def _read_parquet(path: Path, batch_rows: int) -> RawTable:
    return _read_dataset(path, batch_rows, "parquet")


def _read_feather(path: Path, batch_rows: int) -> RawTable:
    return _read_dataset(path, batch_rows, "feather")


# --------------------------------------------------------------------------------------------
# astropy tables
# --------------------------------------------------------------------------------------------


def _column_to_arrow(name: str, col: object, path: Path) -> pa.Array:
    import numpy as np
    import pyarrow as pa

    data = np.ma.asarray(col)
    if data.ndim != 1:
        raise InputFileError(
            f"{path}: column {name!r} is not one value per row (shape {data.shape})"
        )
    mask = np.ma.getmaskarray(data)
    values = np.ma.getdata(data)
    if values.dtype.kind == "S":
        try:
            values = np.char.decode(values, "utf-8")
        except UnicodeDecodeError as exc:
            raise InputFileError(f"{path}: column {name!r} holds text that is not UTF-8") from exc
    if values.dtype.kind == "U":
        values = np.char.strip(values)
        return pa.array(values.astype(object), type=pa.string(), mask=mask)
    if values.dtype.kind in "biuf":
        values = values.astype(values.dtype.newbyteorder("="), copy=False)  # FITS is big-endian
        return pa.array(values, mask=mask if mask.any() else None)
    raise InputFileError(f"{path}: column {name!r} has an unsupported type {values.dtype}")


def _read_astropy(path: Path, batch_rows: int, fmt: str) -> RawTable:
    import pyarrow as pa
    from astropy.table import Table

    try:
        table = Table.read(path, format=fmt, **({"memmap": True} if fmt == "fits" else {}))
    except Exception as exc:  # astropy raises many types for unreadable files
        raise InputFileError(f"{path}: not a readable {fmt} table ({exc})") from exc
    names = tuple(table.colnames)
    units = {n: str(table[n].unit) for n in names if table[n].unit is not None}

    def batches() -> Iterator[pa.Table]:
        for start in range(0, len(table), batch_rows):
            part = table[start : start + batch_rows]
            arrays = [_column_to_arrow(n, part[n], path) for n in names]
            yield pa.Table.from_arrays(arrays, names=list(names))

    return RawTable(str(path), fmt, names, units, len(table), batches)


def _read_fits(path: Path, batch_rows: int) -> RawTable:
    return _read_astropy(path, batch_rows, "fits")


def _read_ecsv(path: Path, batch_rows: int) -> RawTable:
    return _read_astropy(path, batch_rows, "ascii.ecsv")


READERS: dict[str, Callable[[Path, int], RawTable]] = {
    "text": _read_sniffed,
    "csv": _read_csv,
    "tsv": _read_tsv,
    "whitespace": _read_whitespace,
    "parquet": _read_parquet,
    "feather": _read_feather,
    "fits": _read_fits,
    "ecsv": _read_ecsv,
}
