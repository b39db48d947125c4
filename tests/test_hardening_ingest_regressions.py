"""Focused regressions for loader bugs the hostile-input fuzzing found (tests/fuzz).

Each test names the function that was at fault and the input that triggered it; all of them
were fixed in gwdeficit.io after the report.
"""

from __future__ import annotations

import astropy.units as u
import numpy as np
import pyarrow as pa
import pyarrow.parquet as pq
import pytest

from gwdeficit.io import ingest_table, load_catalogue
from gwdeficit.schema import GwdeficitError, UnitError


def _outcome(path, on_bad="skip"):
    """The loader's answer: ("ok", result) or ("typed", error); anything else propagates."""
    try:
        return "ok", ingest_table(path, on_bad=on_bad)
    except GwdeficitError as exc:
        return "typed", exc


# -- UTF-8 byte-order mark (io/formats.py, _text_head and the pandas reader in _read_text) ----


def test_csv_with_utf8_byte_order_mark_loads_like_without(tmp_path):
    # Spreadsheet programs write UTF-8 CSV with a BOM (Unicode Standard, sec. 23.8, from memory).
    body = "m1,m2,z\n30,20,0.1\n"
    plain, bom = tmp_path / "plain.csv", tmp_path / "bom.csv"
    plain.write_bytes(body.encode())
    bom.write_bytes(b"\xef\xbb\xbf" + body.encode())
    a, b = load_catalogue(plain), load_catalogue(bom)
    assert a["m1_msun"].tolist() == b["m1_msun"].tolist() == [30.0]


# -- logarithmic units (io/units.py, conversion) -------------------------------------------------


def test_logarithmic_mass_unit_is_refused_or_converted_correctly(tmp_path):
    # 2 dex(Msun) is 10**2 Msun (astropy.units logarithmic units as the reference); a linear
    # factor of 10 would give 20 Msun.
    p = tmp_path / "t.csv"
    p.write_text("m1 [dex(solMass)],m2,z\n2,1,0.1\n")
    reference = (2 * u.dex(u.solMass)).to_value(u.solMass)
    assert reference == pytest.approx(100.0)
    try:
        cat = load_catalogue(p)
    except UnitError:
        return
    assert cat["m1_msun"].iloc[0] == pytest.approx(reference)


# -- typed columns the converter cannot cast (io/validate.py, _Batch._to_float, _Batch.strings) -


def _parquet(tmp_path, **columns):
    p = tmp_path / "t.parquet"
    base = {"m1": pa.array([30.0, 10.0]), "m2": pa.array([20.0, 5.0]), "z": pa.array([0.1, 0.2])}
    pq.write_table(pa.table({**base, **columns}), p)
    return p


@pytest.mark.parametrize("on_bad", ["error", "skip"])
def test_integer_column_beyond_2_to_53(tmp_path, on_bad):
    # uint64 max does not fit a float64 exactly; pyarrow's safe cast raises ArrowInvalid.
    p = _parquet(tmp_path, m1=pa.array([2**64 - 1, 30], type=pa.uint64()))
    kind, _ = _outcome(p, on_bad)
    assert kind in ("ok", "typed")


@pytest.mark.parametrize("column", ["kind", "event"])
def test_list_typed_label_column(tmp_path, column):
    p = _parquet(tmp_path, **{column: pa.array([[1], [2]])})
    kind, _ = _outcome(p)
    assert kind in ("ok", "typed")


def test_binary_event_column_with_invalid_utf8(tmp_path):
    p = _parquet(tmp_path, event=pa.array([b"\xff\xfe", b"GW-B"], type=pa.binary()))
    kind, res = _outcome(p)
    assert kind in ("ok", "typed")
    if kind == "ok":  # counts still add up; nothing silently altered
        s = res.summary
        assert s["rows_read"] == s["rows_accepted"] + s["rows_rejected"] == 2


# -- fixed behaviour that the fuzzing checks too; kept here as plain regressions ----------------


@pytest.mark.parametrize(
    "column",
    [
        pa.array([True, False]),
        pa.array([1, 2], type=pa.date32()),
        pa.array([[1.0], [2.0]]),
        pa.array([{"a": 1}, {"a": 2}]),
        pa.array([b"30", b"10"], type=pa.binary()),
    ],
    ids=["bool", "date", "list", "struct", "binary"],
)
def test_non_numeric_arrow_types_in_a_mass_column_are_typed_errors(tmp_path, column):
    p = _parquet(tmp_path, m1=column)
    with pytest.raises(GwdeficitError, match="m1"):
        ingest_table(p, on_bad="skip")


def test_huge_spin_components_are_rejected_not_overflowed(tmp_path):
    p = tmp_path / "t.csv"
    p.write_text(
        "m1,m2,chi1x,chi1y,chi1z,chi2x,chi2y,chi2z,z\n"
        "10,10,1e200,1e200,0,0,0,0,0.1\n"
        "10,10,0.1,0.1,0,0,0,0,0.1\n"
    )
    with np.errstate(over="ignore", invalid="ignore"):
        res = ingest_table(p, on_bad="skip")
    assert res.summary["rows_rejected"] == 1
    assert res.catalogue["input_row"].tolist() == [2]


def test_plus_signed_numbers_are_not_misrounded_next_to_a_bad_cell(tmp_path):
    # Found by the fuzzing: a column with one unparseable cell went through pandas.to_numeric,
    # which reads '+1.0758693482536665' as 1.0758693482536663 (1 ulp off). Python's float() is
    # the reference (correctly rounded, IEEE 754 / David Gay's algorithm; from memory).
    # Fixed in io/validate.py, _Batch._to_float.
    rng = np.random.default_rng(12)
    x = rng.uniform(1, 100, 200)
    p = tmp_path / "t.csv"
    p.write_text("m1,m2,z\n" + "abc,1,0.1\n" + "".join(f"+{float(v)!r},1,0.1\n" for v in x))
    res = ingest_table(p, on_bad="skip")
    assert res.summary["rows_rejected"] == 1
    got = res.catalogue.sort_values("input_row")
    want = np.maximum([float(f"+{float(v)!r}") for v in x], 1.0)
    assert np.array_equal(got["m1_msun"].to_numpy(), want)


@pytest.mark.parametrize("column", ["event", "notes"])
def test_string_column_with_invalid_utf8_bytes_is_a_typed_error(tmp_path, column):
    # Found by the fuzzing (byte flips in Parquet/Feather): Arrow does not validate UTF-8 on
    # read, and ArrowInvalid escaped from the label conversion (or from writing the rejects).
    # Fixed in io/validate.py, _Batch._check_text.
    table = pa.table(
        {
            "event": ["AAAAQQQQ", "BBBBQQQQ"],
            "m1": [30.0, -20.0],
            "m2": [10.0, 5.0],
            "z": [0.1, 0.2],
            "notes": ["ZZZZZZZZ", "YYYYYYYY"],
        }
    )
    sink = pa.BufferOutputStream()
    pq.write_table(table, sink, compression="none")
    data = bytearray(sink.getvalue().to_pybytes())
    data[data.find(b"AAAAQQQQ" if column == "event" else b"ZZZZZZZZ")] = 0xFF
    p = tmp_path / "damaged.parquet"
    p.write_bytes(bytes(data))
    for on_bad in ("error", "skip"):
        with pytest.raises(GwdeficitError, match=f"'{column}'.*UTF-8"):
            ingest_table(p, on_bad=on_bad)
