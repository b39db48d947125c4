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
