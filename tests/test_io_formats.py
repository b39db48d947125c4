"""Every loader format gives the same catalogue for the same data (gwdeficit.io.formats)."""

from __future__ import annotations

import gzip

import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.feather as feather
import pyarrow.parquet as pq
import pytest
from astropy.table import Table

from gwdeficit.io import load_catalogue
from gwdeficit.io.formats import detect_format, open_table
from gwdeficit.schema import InputFileError, OptionError, SchemaError

UNITS = {"m1": "Msun", "m2": "Msun", "tilt1": "deg", "tilt2": "deg", "dL": "Mpc"}


@pytest.fixture(scope="module")
def data() -> pd.DataFrame:
    rng = np.random.default_rng(42)
    n = 23
    m1 = rng.uniform(5, 60, n)
    return pd.DataFrame(
        {
            "event": np.repeat(["EV-A", "EV-B", "EV-C"], [10, 8, 5]),
            "m1": m1,
            "m2": m1 * rng.uniform(0.1, 1.0, n),
            "a1": rng.uniform(0, 1, n),
            "a2": rng.uniform(0, 1, n),
            "tilt1": rng.uniform(0, 180, n),
            "tilt2": rng.uniform(0, 180, n),
            "dL": rng.uniform(100, 5000, n),
        }
    )


def bracketed(df: pd.DataFrame) -> pd.DataFrame:
    return df.rename(columns={k: f"{k} [{u}]" for k, u in UNITS.items()})


def write_all(df: pd.DataFrame, folder) -> dict[str, object]:
    b = bracketed(df)
    paths = {}
    paths["csv"] = folder / "t.csv"
    b.to_csv(paths["csv"], index=False)
    paths["csv.gz"] = folder / "t.csv.gz"
    b.to_csv(paths["csv.gz"], index=False)
    paths["tsv"] = folder / "t.tsv"
    b.to_csv(paths["tsv"], index=False, sep="\t")
    paths["whitespace"] = folder / "t.txt"
    with open(paths["whitespace"], "w") as fh:
        fh.write("# produced by a test\n")
        fh.write("  ".join(b.columns) + "\n")
        for row in b.itertuples(index=False):
            fh.write("  ".join(repr(x) if isinstance(x, float) else str(x) for x in row) + "\n")
    paths["whitespace-commented-header"] = folder / "t.dat"
    with open(paths["whitespace-commented-header"], "w") as fh:
        fh.write("# " + " ".join(b.columns) + "\n")
        for row in b.itertuples(index=False):
            fh.write(" ".join(repr(x) if isinstance(x, float) else str(x) for x in row) + "\n")
    paths["parquet"] = folder / "t.parquet"
    b.to_parquet(paths["parquet"], index=False)
    ds_dir = folder / "dataset"
    ds_dir.mkdir()
    pq.write_table(pa.Table.from_pandas(b.iloc[:12], preserve_index=False), ds_dir / "a.parquet")
    pq.write_table(pa.Table.from_pandas(b.iloc[12:], preserve_index=False), ds_dir / "b.parquet")
    paths["parquet-dir"] = ds_dir
    paths["feather"] = folder / "t.feather"
    feather.write_feather(b, paths["feather"])
    t = Table.from_pandas(df)
    for k, u in UNITS.items():
        t[k].unit = u
    paths["fits"] = folder / "t.fits"
    t.write(paths["fits"], format="fits")
    paths["ecsv"] = folder / "t.ecsv"
    t.write(paths["ecsv"], format="ascii.ecsv")
    return paths


def test_every_format_gives_the_same_catalogue(data, tmp_path):
    paths = write_all(data, tmp_path)
    ref = load_catalogue(paths["csv"])
    assert len(ref) == len(data)
    # Independent of the loader: m1 >= m2, degrees became radians (pi/180; definition).
    np.testing.assert_allclose(ref["tilt1_rad"], np.radians(data["tilt1"]), rtol=1e-14)
    for name, path in paths.items():
        got = load_catalogue(path)
        pd.testing.assert_frame_equal(got, ref, check_exact=False, rtol=1e-13, obj=name)
        summary = got.attrs["gwdeficit.summary"]
        assert summary["rows_read"] == len(data), name


def test_batches_do_not_change_the_catalogue(data, tmp_path):
    # Sample numbering continues across batch boundaries within an event.
    p = tmp_path / "t.csv"
    bracketed(data).to_csv(p, index=False)
    whole = load_catalogue(p)
    pieces = load_catalogue(p, batch_rows=3)
    pd.testing.assert_frame_equal(pieces, whole)
    assert whole.groupby("event")["sample"].apply(list).to_dict() == {
        "EV-A": list(range(10)),
        "EV-B": list(range(8)),
        "EV-C": list(range(5)),
    }


def test_fits_units_come_from_the_file(tmp_path):
    # 1 Msun = 1.988409870698051e30 kg (IAU 2015 nominal value, via astropy.constants).
    t = Table({"m1": [3.0e31], "m2": [2.0e31], "z": [0.1]})
    t["m1"].unit = "kg"
    t["m2"].unit = "kg"
    t.write(tmp_path / "k.fits")
    cat = load_catalogue(tmp_path / "k.fits")
    assert cat["m1_msun"].iloc[0] == pytest.approx(3.0e31 / 1.988409870698051e30, rel=1e-9)


def test_format_detection_and_errors(tmp_path):
    assert detect_format("x.csv.gz") == "csv"
    assert detect_format("x.TSV") == "tsv"
    assert detect_format("x.fits.gz") == "fits"
    assert detect_format(tmp_path) == "parquet"
    with pytest.raises(InputFileError, match="suffix"):
        detect_format("x.xlsx")
    with pytest.raises(InputFileError, match="no such file"):
        open_table(tmp_path / "missing.csv")
    with pytest.raises(OptionError, match="format"):
        open_table(tmp_path, fmt="hdf5")
    bad = tmp_path / "bad.parquet"
    bad.write_bytes(b"not parquet at all")
    with pytest.raises(InputFileError, match="not a readable parquet"):
        load_catalogue(bad)
    empty = tmp_path / "empty.csv"
    empty.write_text("# only a comment\n")
    with pytest.raises(InputFileError, match="no header"):
        load_catalogue(empty)
    broken = tmp_path / "broken.csv.gz"
    broken.write_bytes(gzip.compress(b"m1,m2,z\n1,2,3\n")[:-8])
    with pytest.raises(InputFileError):
        load_catalogue(broken)


def test_forced_format_and_ragged_text(tmp_path):
    p = tmp_path / "table.data"
    p.write_text("m1,m2,z\n30,20,0.1\n")
    assert len(load_catalogue(p, fmt="csv")) == 1
    ragged = tmp_path / "ragged.csv"
    ragged.write_text("m1,m2,z\n30,20,0.1,7\n")
    with pytest.raises(InputFileError, match=r"ragged\.csv"):
        load_catalogue(ragged)


def test_text_cells_are_not_altered_on_the_way_to_rejects(tmp_path):
    # Rejected text rows keep their cells exactly as written.
    p = tmp_path / "t.csv"
    p.write_text("event,m1,m2,z\nA, 3.0e1 ,20,0.1\nB,abc,20,0.1\n")
    from gwdeficit.io import ingest_table

    res = ingest_table(p, on_bad="skip")
    assert res.catalogue["m1_msun"].tolist() == [30.0]
    assert res.rejects.loc[0, "m1"] == "abc"
    assert res.rejects.loc[0, "input_row"] == 2


def test_byte_order_mark_is_not_part_of_the_header(tmp_path):
    # Spreadsheet programs write UTF-8 CSV with a byte-order mark (Unicode Standard; from memory).
    p = tmp_path / "bom.csv"
    p.write_bytes(b"\xef\xbb\xbfm1,m2,z\n30,20,0.1\n")
    assert load_catalogue(p)["m1_msun"].tolist() == [30.0]


def test_typed_columns_that_are_not_numbers_or_text(tmp_path):
    base = {"m1": pa.array([30.0, 10.0]), "m2": pa.array([20.0, 5.0]), "z": pa.array([0.1, 0.2])}
    p = tmp_path / "big.parquet"
    pq.write_table(pa.table({**base, "m1": pa.array([2**64 - 1, 30], type=pa.uint64())}), p)
    assert load_catalogue(p)["m1_msun"].iloc[0] == pytest.approx(2.0**64)
    p = tmp_path / "list.parquet"
    pq.write_table(pa.table({**base, "kind": pa.array([[1], [2]])}), p)
    with pytest.raises(SchemaError, match="kind"):
        load_catalogue(p)
    p = tmp_path / "bytes.parquet"
    pq.write_table(pa.table({**base, "event": pa.array([b"\xff\xfe", b"GW-B"])}), p)
    from gwdeficit.io import ingest_table

    res = ingest_table(p, on_bad="skip")
    assert res.catalogue["event"].tolist() == ["GW-B"]
    assert res.summary["rejects_by_reason"] == {"column 'event': label is not valid UTF-8 text": 1}
