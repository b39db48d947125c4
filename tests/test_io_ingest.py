"""Writing the catalogue: atomic outputs, the no-overwrite rule, metadata (gwdeficit.io.ingest)."""

from __future__ import annotations

import hashlib

import pandas as pd
import pyarrow.parquet as pq
import pytest

from gwdeficit import __version__
from gwdeficit.io import ingest, iter_batches, load_catalogue, read_catalogue
from gwdeficit.schema import (
    META_CONVERSIONS,
    META_COSMOLOGY,
    META_DISCLAIMER,
    META_PROVENANCE,
    META_SUMMARY,
    META_UNITS,
    META_VERSION,
    BadRowsError,
    OutputExistsError,
    SchemaError,
)
from gwdeficit.workdir import TMP_PREFIX

TEXT = (
    "event,m1,m2,dL [Gpc],chi1z,chi2z\nA,30,20,0.4,0.1,0.0\nA,31,21,0.5,0.1,0.1\nB,9,1.4,0.1,0,0\n"
)


@pytest.fixture
def table(tmp_path):
    p = tmp_path / "in.csv"
    p.write_text(TEXT)
    return p


def test_ingest_writes_catalogue_and_rejects(table, workdir):
    summary = ingest(table)
    out = workdir / "catalogue.parquet"
    assert summary["catalogue"] == str(out)
    cat = read_catalogue(out)
    pd.testing.assert_frame_equal(
        cat, load_catalogue(table), check_exact=False, rtol=1e-15, check_like=False
    )
    rejects = pd.read_csv(workdir / "rejects.csv")
    assert list(rejects.columns) == [
        "input_row",
        "event",
        "m1",
        "m2",
        "dL [Gpc]",
        "chi1z",
        "chi2z",
        "reason",
    ]
    assert len(rejects) == 0
    # read_catalogue also takes the working folder, or nothing ($GWDEFICIT_WORKDIR)
    assert len(read_catalogue(workdir)) == 3 == len(read_catalogue())


def test_metadata(table, workdir):
    ingest(table)
    cat = read_catalogue(workdir / "catalogue.parquet")
    m = cat.attrs
    assert m[META_VERSION] == __version__
    assert "research estimate" in m[META_DISCLAIMER].lower()
    assert m[META_UNITS]["dl_mpc"] == "Mpc" and m[META_UNITS]["tilt1_rad"] == "rad"
    assert set(m[META_UNITS]) >= {"m1_msun", "m2_msun", "chi1", "z", "weight"}
    (record,) = m[META_PROVENANCE]
    # SHA-256 from hashlib (reference implementation of FIPS 180-4)
    assert record["inputs"] == {str(table): hashlib.sha256(table.read_bytes()).hexdigest()}
    assert record["params"]["cosmology"] == "Planck18"
    assert m[META_COSMOLOGY]["name"] == "Planck18"
    conv = m[META_CONVERSIONS]
    assert any(c.startswith("'dL [Gpc]': Gpc -> Mpc (x 1000") for c in conv)
    assert "'m1': no unit given, taken as solMass" in conv
    assert m[META_SUMMARY]["rows_read"] == 3


def test_no_overwrite_without_force_and_never_over_the_input(table, workdir):
    ingest(table)
    before = (workdir / "catalogue.parquet").read_bytes()
    with pytest.raises(OutputExistsError, match="--force"):
        ingest(table)
    assert (workdir / "catalogue.parquet").read_bytes() == before
    ingest(table, force=True)
    # An input inside the working folder under the output's name is refused even with force.
    with pytest.raises(OutputExistsError, match="input"):
        ingest(workdir / "catalogue.parquet", force=True)


def test_an_error_leaves_no_output_and_the_input_untouched(tmp_path, workdir):
    p = tmp_path / "bad.csv"
    p.write_text("m1,m2,z\n" + "30,20,0.1\n" * 50 + "30,-1,0.1\n")
    digest = hashlib.sha256(p.read_bytes()).hexdigest()
    with pytest.raises(BadRowsError):
        ingest(p, batch_rows=10)  # the error comes after some batches were written
    assert sorted(x.name for x in workdir.iterdir()) == []
    assert not list(workdir.glob(TMP_PREFIX + "*"))
    assert hashlib.sha256(p.read_bytes()).hexdigest() == digest
    # An existing catalogue survives a failed rerun with --force.
    good = tmp_path / "good.csv"
    good.write_text("m1,m2,z\n30,20,0.1\n")
    ingest(good)
    with pytest.raises(BadRowsError):
        ingest(p, force=True)
    assert len(read_catalogue(workdir)) == 1


def test_skip_mode_streams_rejects_across_batches(tmp_path, workdir):
    lines = ["m1,m2,z"] + [("30,-1,0.1" if i % 7 == 3 else "30,20,0.1") for i in range(40)]
    p = tmp_path / "t.csv"
    p.write_text("\n".join(lines) + "\n")
    s = ingest(p, on_bad="skip", batch_rows=8)
    rejects = pd.read_csv(workdir / "rejects.csv")
    expected = [i + 1 for i in range(40) if i % 7 == 3]
    assert rejects["input_row"].tolist() == expected
    assert (s["rows_read"], s["rows_accepted"], s["rows_rejected"]) == (40, 34, 6)
    assert pq.read_metadata(workdir / "catalogue.parquet").num_rows == 34


def test_iter_batches_is_bounded(tmp_path):
    p = tmp_path / "t.csv"
    p.write_text("m1,m2,z\n" + "30,20,0.1\n" * 25)
    sizes = [b.accepted.num_rows for b in iter_batches(p, _opts(batch_rows=10))]
    assert sizes == [10, 10, 5]


def _opts(**kw):
    from gwdeficit.io import IngestOptions

    return IngestOptions(**kw)


def test_read_catalogue_rejects_other_tables(tmp_path):
    p = tmp_path / "x.parquet"
    pd.DataFrame({"a": [1]}).to_parquet(p)
    with pytest.raises(SchemaError, match="not a gwdeficit catalogue"):
        read_catalogue(p)
