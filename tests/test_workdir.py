"""Working folder, atomic writes, no-overwrite rule, provenance metadata."""

from __future__ import annotations

import hashlib

import pandas as pd
import pytest

from gwdeficit import __version__
from gwdeficit.schema import META_DISCLAIMER, META_VERSION, OutputExistsError
from gwdeficit.workdir import (
    TMP_PREFIX,
    atomic_path,
    file_sha256,
    read_parquet,
    resolve_workdir,
    write_parquet,
)


def test_resolve_workdir_env_and_argument(tmp_path, monkeypatch):
    monkeypatch.setenv("GWDEFICIT_WORKDIR", str(tmp_path / "env"))
    assert resolve_workdir() == tmp_path / "env"
    assert resolve_workdir(tmp_path / "arg") == tmp_path / "arg"
    assert (tmp_path / "arg").is_dir()


def test_sha256_matches_hashlib(tmp_path):
    # hashlib is the reference implementation of SHA-256 (FIPS 180-4).
    p = tmp_path / "x.bin"
    p.write_bytes(b"abc" * 100_000)
    assert file_sha256(p) == hashlib.sha256(b"abc" * 100_000).hexdigest()


def test_parquet_round_trip_keeps_metadata(tmp_path):
    df = pd.DataFrame({"a": [1.0, 2.0], "b": ["x", "y"]})
    out = write_parquet(df, tmp_path / "t.parquet", {"gwdeficit.units": {"a": "solMass"}})
    back = read_parquet(out)
    pd.testing.assert_frame_equal(back, df, check_dtype=False)
    assert back.attrs["gwdeficit.units"] == {"a": "solMass"}
    assert back.attrs[META_VERSION] == __version__
    assert "research estimate" in back.attrs[META_DISCLAIMER].lower()


def test_no_overwrite_without_force(tmp_path):
    df = pd.DataFrame({"a": [1.0]})
    out = write_parquet(df, tmp_path / "t.parquet", {})
    with pytest.raises(OutputExistsError, match="--force"):
        write_parquet(df, out, {})
    write_parquet(pd.DataFrame({"a": [3.0]}), out, {}, force=True)
    assert read_parquet(out)["a"].tolist() == [3.0]


def test_never_over_its_input(tmp_path):
    p = tmp_path / "in.parquet"
    write_parquet(pd.DataFrame({"a": [1.0]}), p, {})
    with pytest.raises(OutputExistsError, match="input"):
        write_parquet(pd.DataFrame({"a": [2.0]}), p, {}, force=True, inputs=(p,))


def test_failed_write_leaves_previous_output_and_no_temporaries(tmp_path):
    out = tmp_path / "t.txt"
    out.write_text("old")
    with pytest.raises(RuntimeError), atomic_path(out, force=True) as tmp:
        tmp.write_text("half")
        raise RuntimeError("killed")
    assert out.read_text() == "old"
    assert not list(tmp_path.glob(TMP_PREFIX + "*"))


def test_stale_temporaries_removed_on_next_write(tmp_path):
    stale = tmp_path / f"{TMP_PREFIX}999-1-t.parquet"
    stale.write_text("junk")
    write_parquet(pd.DataFrame({"a": [1.0]}), tmp_path / "t.parquet", {})
    assert not stale.exists()


class _RecordingWriter:
    """Stands in for a ParquetWriter: records tables, fails on request, slow on request."""

    def __init__(self, fail_on=None, delay=0.0):
        self.tables, self.closed, self.fail_on, self.delay = [], False, fail_on, delay

    def write_table(self, table):
        import time

        time.sleep(self.delay)
        if table == self.fail_on:
            raise OSError("disk full")
        self.tables.append(table)

    def close(self):
        self.closed = True


def test_write_behind_keeps_order_and_round_trips_through_parquet(tmp_path):
    import pyarrow as pa
    import pyarrow.parquet as pq

    from gwdeficit.workdir import WriteBehind

    parts = [pa.table({"i": pa.array(range(k * 1000, (k + 1) * 1000))}) for k in range(7)]
    writer = WriteBehind(pq.ParquetWriter(tmp_path / "t.parquet", parts[0].schema))
    try:
        for part in parts:
            writer.write(part)
        writer.wait()
        writer.writer.add_key_value_metadata({"k": "v"})
    finally:
        writer.close()
    back = pq.read_table(tmp_path / "t.parquet")
    assert back["i"].to_pylist() == list(range(7000))
    assert pq.read_metadata(tmp_path / "t.parquet").metadata[b"k"] == b"v"


def test_write_behind_raises_a_write_error_on_the_next_call_and_still_closes():
    from gwdeficit.workdir import WriteBehind

    fake = _RecordingWriter(fail_on="b")
    writer = WriteBehind(fake)
    writer.write("a")
    writer.write("b")
    with pytest.raises(OSError, match="disk full"):
        writer.write("c")  # waits for "b", which failed
    writer.close()
    assert fake.tables == ["a"] and fake.closed


def test_write_behind_close_waits_for_the_pending_write_and_keeps_the_first_error():
    from gwdeficit.workdir import WriteBehind

    fake = _RecordingWriter(fail_on="slow", delay=0.2)
    writer = WriteBehind(fake)
    with pytest.raises(KeyError):  # an error of the stage itself, while a write is pending
        try:
            writer.write("slow")
            raise KeyError("stage failed")
        finally:
            writer.close()  # does not replace the KeyError with the write's OSError
    assert fake.closed and fake.tables == []
    ok = _RecordingWriter(delay=0.2)
    behind = WriteBehind(ok)
    behind.write("x")
    behind.close()  # the pending write finishes before the writer is closed
    assert ok.tables == ["x"] and ok.closed
