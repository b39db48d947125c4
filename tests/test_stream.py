"""The out-of-core engine (gwdeficit.stream) against the in-memory path and outside references.

The streamed stages must give the in-memory stages' answers on the same data and seed: the
reference here is the package's own in-memory path (remnant.compute_remnants,
budget.compute_budget), run side by side on a multi-file Parquet dataset, and numpy for the
exact quantiles. The rows mode's Poisson bootstrap is checked against the textbook standard
error of a ratio estimator.
"""

from __future__ import annotations

import warnings
from pathlib import Path

import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.parquet as pq
import pytest

from binaries import random_binaries
from gwdeficit import workdir as wd
from gwdeficit.budget import compute_budget
from gwdeficit.io import IngestOptions, ingest
from gwdeficit.remnant import compute_remnants, summarize_remnants
from gwdeficit.schema import BadRowsError, OptionError, SchemaError
from gwdeficit.stream import (
    KEY_BLOCK_ROWS,
    _row_groups,
    exact_quantiles,
    row_progress,
    stream_budget,
    stream_remnants,
)

NUMERIC = ["median", "lo68", "hi68", "lo90", "hi90"]


def _dataset(folder: Path, df: pd.DataFrame, n_files: int) -> Path:
    folder.mkdir(parents=True)
    for i, idx in enumerate(np.array_split(np.arange(len(df)), n_files)):
        table = pa.Table.from_pandas(df.iloc[idx], preserve_index=False)
        pq.write_table(table, folder / f"part-{i:02d}.parquet")
    return folder


def _remnants_in_memory(catalogue: Path, out: Path, seed: int) -> pd.DataFrame:
    df = wd.read_parquet(catalogue)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        rem = compute_remnants(df, seed=seed, source=str(catalogue))
    wd.write_parquet(rem, out, rem.attrs)
    return rem


@pytest.fixture(scope="module")
def posterior(tmp_path_factory) -> dict[str, Path]:
    """A 2e5-row, 4-file posterior-style dataset (80 events), ingested, with remnants."""
    root = tmp_path_factory.mktemp("posterior")
    src = _dataset(root / "input", random_binaries(200_000, 80, seed=11), 4)
    ingest(src, root, options=IngestOptions(batch_rows=50_000))
    cat = root / wd.CATALOGUE_FILE
    _remnants_in_memory(cat, root / "remnants_mem.parquet", seed=5)
    return {"root": root, "catalogue": cat, "remnants": root / "remnants_mem.parquet"}


@pytest.fixture(scope="module")
def synthetic(tmp_path_factory) -> dict[str, Path]:
    """A 3e4-row weighted synthetic table without an event column, ingested, with remnants."""
    root = tmp_path_factory.mktemp("synthetic")
    src = _dataset(root / "input", random_binaries(30_000, 0, seed=12), 3)
    ingest(src, root)
    cat = root / wd.CATALOGUE_FILE
    rem = _remnants_in_memory(cat, root / "remnants_mem.parquet", seed=5)
    return {"root": root, "catalogue": cat, "remnants": root / "remnants_mem.parquet", "df": rem}


# --------------------------------------------------------------------------------------------
# Remnants
# --------------------------------------------------------------------------------------------


def test_streamed_remnants_equal_the_in_memory_stage(posterior):
    out = posterior["root"] / "remnants_stream.parquet"
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        summary = stream_remnants(posterior["catalogue"], out, seed=5, batch_rows=30_011)
    mem = wd.read_parquet(posterior["remnants"])
    got = wd.read_parquet(out)
    pd.testing.assert_frame_equal(got, mem, check_dtype=False)
    # same summary (quantiles exact, counts summed), one range warning for the whole table
    ref = summarize_remnants(mem)
    for key, value in ref.items():
        if key == "total_deficit_msun":
            assert summary[key] == pytest.approx(value, rel=1e-12)
        else:
            assert summary[key] == value, key
    assert sum("outside the calibrated range" in str(w.message) for w in caught) == 1
    for key in ("gwdeficit.fits", "gwdeficit.units", "gwdeficit.remnant_draws"):
        assert got.attrs[key] == mem.attrs[key], key
    record = got.attrs["gwdeficit.provenance"][-1]
    assert record["params"]["engine"] == "stream"
    assert record["params"]["rows"] == len(mem)


@pytest.mark.filterwarnings("ignore::gwdeficit.fits.registry.FitRangeWarning")
def test_streamed_remnants_do_not_depend_on_the_batch_size(synthetic, tmp_path):
    a = stream_remnants(synthetic["catalogue"], tmp_path / "a.parquet", seed=9, batch_rows=3_001)
    b = stream_remnants(synthetic["catalogue"], tmp_path / "b.parquet", seed=9, batch_rows=20_000)
    # the total is a sum of per-batch sums, so it may differ by rounding (documented in
    # docs/performance.md); every other summary item, and every row, is identical
    total_a, total_b = a.pop("total_deficit_msun"), b.pop("total_deficit_msun")
    assert total_a == pytest.approx(total_b, rel=1e-13)
    assert a == b
    pd.testing.assert_frame_equal(
        wd.read_parquet(tmp_path / "a.parquet"), wd.read_parquet(tmp_path / "b.parquet")
    )


def test_interrupted_stream_leaves_no_partial_output(posterior, tmp_path):
    out = tmp_path / "remnants.parquet"
    calls = []

    def stop(n: int) -> None:
        calls.append(n)
        if len(calls) == 2:
            raise KeyboardInterrupt

    with pytest.raises(KeyboardInterrupt):
        stream_remnants(posterior["catalogue"], out, seed=1, batch_rows=20_000, progress=stop)
    assert not out.exists()
    assert list(tmp_path.iterdir()) == []


def test_existing_output_needs_force(posterior, tmp_path):
    from gwdeficit.schema import OutputExistsError

    out = tmp_path / "remnants.parquet"
    out.write_text("previous")
    with pytest.raises(OutputExistsError):
        stream_remnants(posterior["catalogue"], out, seed=1)
    assert out.read_text() == "previous"


# --------------------------------------------------------------------------------------------
# Rate stage
# --------------------------------------------------------------------------------------------


def _compare_tables(a: pd.DataFrame, b: pd.DataFrame, rtol: float) -> None:
    keys = ["volume", "kind", "quantity", "unit"]
    assert a[keys].equals(b[keys])
    cols = NUMERIC + [c for c in a.columns if c.startswith("share_")]
    np.testing.assert_allclose(b[cols].to_numpy(), a[cols].to_numpy(), rtol=rtol, atol=1e-300)


@pytest.mark.parametrize("selection", ["none", "inspiral-volume"])
def test_events_mode_budget_equals_the_in_memory_budget(posterior, selection):
    kw = dict(volumes=["mw", "gpc3"], n_draws=60, seed=4, escape_speeds_kms=[150.0])
    path = posterior["remnants"]
    mem = compute_budget(wd.read_parquet(path), selection=selection, source=str(path), **kw)
    # small batches and event groups: many groups, events split across batches and files
    got = stream_budget(
        path, selection=selection, mode="events", batch_rows=17_000, group_rows=20_000, **kw
    )
    _compare_tables(mem.table, got.table, rtol=1e-9)
    assert got.counts == mem.counts
    assert set(got.notes) - set(mem.notes) == {
        "stream rate stage (events mode, batches of 17000 rows)"
    }
    assert got.meta["gwdeficit.summary"]["engine"]["mode"] == "events"


def test_rows_mode_point_estimate_equals_the_in_memory_one(synthetic):
    # every error source held fixed: the draws are the point estimate, exactly the same sums
    kw = dict(volumes=["mw"], n_draws=4, seed=1, sources=(), escape_speeds_kms=[200.0])
    path = synthetic["remnants"]
    mem = compute_budget(synthetic["df"], source=str(path), **kw)
    got = stream_budget(path, batch_rows=4_000, **kw)
    assert got.meta["gwdeficit.summary"]["engine"]["mode"] == "rows"
    np.testing.assert_allclose(got.table["median"], mem.table["median"], rtol=1e-12)
    assert got.counts == mem.counts


def test_rows_mode_does_not_depend_on_the_batch_size(synthetic):
    kw = dict(volumes=["mw"], n_draws=200, seed=8, rate=1.0)
    a = stream_budget(synthetic["remnants"], batch_rows=3_000, **kw)
    b = stream_budget(synthetic["remnants"], batch_rows=11_111, **kw)
    _compare_tables(a.table, b.table, rtol=1e-11)


def test_row_groups_are_keyed_by_row_position():
    whole = _row_groups(3, 0, 3 * KEY_BLOCK_ROWS + 17, 1000)
    parts = np.concatenate(
        [
            _row_groups(3, o, k, 1000)
            for o, k in ((0, 5), (5, KEY_BLOCK_ROWS), (KEY_BLOCK_ROWS + 5, 2 * KEY_BLOCK_ROWS + 12))
        ]
    )
    np.testing.assert_array_equal(whole, parts)
    assert not np.array_equal(whole, _row_groups(4, 0, whole.size, 1000))


def test_rows_mode_error_matches_the_ratio_estimator_standard_error(synthetic):
    """Poisson-bootstrap spread of the weighted mean deficit vs the linearised standard error.

    Standard error of a ratio estimator sum(w x) / sum(w) for n i.i.d. units:
    se^2 = n / (n - 1) * sum(w_i^2 (x_i - r)^2) / (sum w)^2 (Cochran 1977, Sampling Techniques,
    3rd ed., Wiley, section 6.3; from memory). With 2000 draws the bootstrap standard deviation
    carries ~2% Monte-Carlo noise (common practice, no source): 8% tolerance.
    """
    kw = dict(volumes=["mw"], n_draws=2000, seed=2, rate=1.0, sources=("catalogue",))
    got = stream_budget(synthetic["remnants"], keep_draws=True, **kw)
    d = got.draws
    draws = d[d["quantity"] == "mean_deficit"]["value"].to_numpy()
    df = synthetic["df"]
    est = df[df["remnant_status"] == "estimated"]
    w, x = est["weight"].to_numpy(), est["deficit_msun"].to_numpy()
    n = w.size
    r = np.sum(w * x) / np.sum(w)
    se = np.sqrt(n / (n - 1) * np.sum(w**2 * (x - r) ** 2)) / np.sum(w)
    assert np.std(draws) == pytest.approx(se, rel=0.08)
    assert np.mean(draws) == pytest.approx(r, abs=4 * se / np.sqrt(2000) + 1e-12)


def test_bad_weight_is_named_by_row(tmp_path, synthetic):
    df = synthetic["df"].copy()
    df.loc[df.index[[5, 70]], "weight"] = -1.0
    path = wd.write_parquet(df, tmp_path / "bad.parquet", df.attrs)
    with pytest.raises(BadRowsError) as info:
        stream_budget(path, volumes=["mw"], n_draws=10, batch_rows=1_000)
    assert info.value.rows == [int(df["input_row"].iloc[5]), int(df["input_row"].iloc[70])]
    assert info.value.column == "weight"
    assert "--on-bad" not in str(info.value) and "rerun" in str(info.value)


def test_unknown_kind_is_a_schema_error_in_both_modes(tmp_path, synthetic):
    df = synthetic["df"].copy()
    df["kind"] = df["kind"].astype(object)
    df.loc[df.index[[3, 4000]], "kind"] = "XYZ"
    path = wd.write_parquet(df, tmp_path / "bad-kind.parquet", df.attrs)
    for mode in ("rows", "events"):
        with pytest.raises(SchemaError, match="kind\\(s\\) 'XYZ' not one of"):
            stream_budget(path, volumes=["mw"], n_draws=10, batch_rows=1_000, mode=mode)


def test_bad_options_are_typed_errors(synthetic):
    with pytest.raises(OptionError):
        stream_budget(synthetic["remnants"], mode="sideways", n_draws=10)
    with pytest.raises(OptionError):
        stream_remnants(synthetic["catalogue"], synthetic["root"] / "x.parquet", batch_rows=0)


# --------------------------------------------------------------------------------------------
# Exact quantiles and progress
# --------------------------------------------------------------------------------------------


@pytest.mark.parametrize(
    "values",
    [
        np.random.default_rng(0).lognormal(0.0, 2.0, 10_001),
        np.random.default_rng(1).normal(0.0, 1.0, 5_000),  # negative values
        np.repeat([3.5, -1.25, 7.0], [4_000, 10, 2_000]),  # ties: refinement to all 64 bits
        np.array([2.0]),
    ],
)
def test_exact_quantiles_equal_numpy_percentile(values):
    parts = np.array_split(values, 7)
    percents = (0.0, 5.0, 50.0, 95.0, 100.0)
    got = exact_quantiles(lambda: iter(parts), percents, max_collect=64)
    ref = np.percentile(values, percents)  # numpy as the reference implementation
    np.testing.assert_allclose([got[p] for p in percents], ref, rtol=1e-15, atol=0)


def test_row_progress_counts_rows():
    seen = []
    with row_progress("rows", 10, enabled=True) as advance:
        for k in (3, 7):
            advance(k)
            seen.append(k)
    assert sum(seen) == 10
    with row_progress("rows", None, enabled=False) as advance:
        advance(5)  # a no-op


# --------------------------------------------------------------------------------------------
# Command line
# --------------------------------------------------------------------------------------------


@pytest.mark.filterwarnings("ignore::gwdeficit.fits.registry.FitRangeWarning")
def test_cli_streams_inputs_larger_than_one_batch(synthetic, tmp_path):
    import json

    from typer.testing import CliRunner

    from gwdeficit.cli import app

    cat = str(synthetic["catalogue"])
    runner = CliRunner()
    whole = runner.invoke(app, ["remnant", cat, "--workdir", str(tmp_path / "a"), "--seed", "5"])
    assert whole.exit_code == 0, whole.output
    parts = runner.invoke(
        app,
        ["remnant", cat, "--workdir", str(tmp_path / "b"), "--seed", "5", "--batch-rows", "7000"],
    )
    assert parts.exit_code == 0, parts.output
    a = wd.read_parquet(tmp_path / "a" / wd.REMNANTS_FILE)
    b = wd.read_parquet(tmp_path / "b" / wd.REMNANTS_FILE)
    pd.testing.assert_frame_equal(a, b, check_dtype=False)
    assert b.attrs["gwdeficit.provenance"][-1]["params"]["batch_rows"] == 7000

    res = runner.invoke(
        app,
        [
            "rate",
            "--workdir",
            str(tmp_path / "b"),
            "--draws",
            "50",
            "--batch-rows",
            "7000",
            "--json",
        ],
    )
    assert res.exit_code == 0, res.output
    out = json.loads(res.stdout)
    assert out["counts"]["rows_in"] == len(b)
    table = wd.read_parquet(tmp_path / "b" / wd.RATES_FILE)
    assert table.attrs["gwdeficit.summary"]["engine"]["mode"] == "rows"


def test_cli_engine_options_are_checked(synthetic, tmp_path):
    from typer.testing import CliRunner

    from gwdeficit.cli import app

    runner = CliRunner()
    cat = str(synthetic["catalogue"])
    bad = runner.invoke(app, ["remnant", cat, "--workdir", str(tmp_path), "--engine", "gpu"])
    assert bad.exit_code == 2 and "--engine 'gpu' is not known" in bad.output
    bad = runner.invoke(app, ["remnant", cat, "--workdir", str(tmp_path), "--scheduler", "x:1"])
    assert bad.exit_code == 2 and "--scheduler applies to --engine dask only" in bad.output
    assert not (tmp_path / wd.REMNANTS_FILE).exists()
