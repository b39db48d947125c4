"""Neutron-star options through the out-of-core (stream) and Dask engines.

The reference is the package's own in-memory remnant stage (``compute_remnants`` on the whole
table, same seed, same ``ns_options``), whose neutron-star branch is checked against published
results in tests/test_remnant_ns.py and tests/test_fits_neutron_star.py. The catalogues are
made by the real ingest stage from random BBH + NSBH + BNS rows (tests/binaries.py) and written
as a multi-file Parquet dataset with several row groups per file; the leading rows are all BBH,
so the first batches hold no neutron star (their columns must still match the whole table's).

Exactness: a row's values depend only on that row's inputs and its random angles, which the
streamed engine keys by row position, so every column is bit-identical to the in-memory one.
This includes the BNS inspiral energy, whose Newton iteration
(``gwdeficit.fits.bns.x_energy_minimum``) stops each row at its own convergence; it once
stopped when every row of the array had converged, which changed the last bit of 1 BNS row in
3000 between batchings, and these tests then allowed a relative 1e-15 there.
"""

from __future__ import annotations

import json
import warnings
from pathlib import Path

import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.parquet as pq
import pytest

from binaries import mixed_binaries
from gwdeficit import workdir as wd
from gwdeficit.io import ingest
from gwdeficit.remnant import NS_EXTRA_COLUMNS, compute_remnants
from gwdeficit.stream import has_neutron_stars, stream_remnants

N_ROWS = 6_000
BBH_HEAD = 1_300  # rows 0..1299 are BBH: the first batches of BATCH rows hold no neutron star
BBH_TAIL = 800  # and so does the last batch
BATCH = 700  # several batches, crossing file and row-group boundaries
NO_TIDAL = "not_estimated:no_tidal_deformability_or_radius"


def _catalogue(root: Path, df: pd.DataFrame) -> Path:
    """Ingest ``df`` and rewrite the catalogue as a 4-file dataset with 500-row row groups."""
    root.mkdir(parents=True)
    df.to_csv(root / "input.csv", index=False)
    ingest(root / "input.csv", root)
    cat = pq.read_table(root / wd.CATALOGUE_FILE)
    meta = cat.schema.metadata
    folder = root / "catalogue"
    folder.mkdir()
    for i, start in enumerate(range(0, cat.num_rows, 1_500)):
        part = cat.slice(start, 1_500).replace_schema_metadata(meta)
        pq.write_table(part, folder / f"part-{i:02d}.parquet", row_group_size=500)
    return folder


@pytest.fixture(scope="module")
def catalogues(tmp_path_factory) -> dict[str, Path]:
    root = tmp_path_factory.mktemp("stream_ns")
    return {
        "tidal": _catalogue(
            root / "tidal",
            mixed_binaries(N_ROWS, seed=31, bbh_head=BBH_HEAD, bbh_tail=BBH_TAIL, tidal=True),
        ),
        "no_tidal": _catalogue(
            root / "no_tidal",
            mixed_binaries(N_ROWS, seed=32, bbh_head=BBH_HEAD, bbh_tail=BBH_TAIL, tidal=False),
        ),
    }


def _in_memory(catalogue: Path, seed: int, ns_options: dict) -> tuple[pd.DataFrame, list[str]]:
    """The in-memory stage on the whole table, its output read back from Parquet, warnings."""
    df = wd.read_parquet(catalogue)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        res = compute_remnants(
            df,
            seed=seed,
            source=str(catalogue),
            inputs={str(catalogue): wd.file_sha256(catalogue)},
            ns_options=ns_options,
        )
    path = catalogue.parent / f"memory-{seed}-{len(ns_options)}.parquet"
    wd.write_parquet(res, path, res.attrs, force=True)
    return wd.read_parquet(path), [str(w.message) for w in caught]


def _assert_same_remnants(got: pd.DataFrame, ref: pd.DataFrame) -> None:
    """Column by column, bit-identical (NaN where NaN)."""
    assert list(got.columns) == list(ref.columns)
    assert len(got) == len(ref)
    for col in ref.columns:
        a, b = got[col].to_numpy(), ref[col].to_numpy()
        if b.dtype.kind != "f":
            assert (got[col].astype(str) == ref[col].astype(str)).all(), col
            continue
        np.testing.assert_array_equal(a, b, err_msg=col)


def _assert_same_metadata(got: pd.DataFrame, ref: pd.DataFrame, engine: str) -> None:
    keys = set(ref.attrs) - {"gwdeficit.provenance"}
    assert set(got.attrs) - {"gwdeficit.provenance"} == keys
    for key in keys:
        assert got.attrs[key] == ref.attrs[key], key
    mine, theirs = got.attrs["gwdeficit.provenance"], ref.attrs["gwdeficit.provenance"]
    assert mine[:-1] == theirs[:-1]  # the ingest records, copied forward
    assert mine[-1]["inputs"] == theirs[-1]["inputs"]
    params = dict(mine[-1]["params"])
    assert params.pop("engine") == engine
    assert params.pop("batch_rows") == BATCH
    assert params == theirs[-1]["params"]  # rows, estimated, phi12 draws, ns_options, seed


OPTIONS = {"eos_relation": "maselli-2013", "mtov_msun": 2.2, "r16_km": 11.5}


def test_streamed_neutron_star_remnants_equal_the_in_memory_stage(catalogues, tmp_path):
    cat = catalogues["tidal"]
    ref, ref_warnings = _in_memory(cat, seed=4, ns_options=OPTIONS)
    out = tmp_path / "remnants.parquet"
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        summary = stream_remnants(cat, out, seed=4, batch_rows=BATCH, ns_options=OPTIONS)
    got = wd.read_parquet(out)
    kinds = ref["kind"].astype(str)
    assert set(kinds) == {"BBH", "NSBH", "BNS"}
    assert (kinds[:BBH_HEAD] == "BBH").all() and (kinds[-BBH_TAIL:] == "BBH").all()
    assert set(NS_EXTRA_COLUMNS) <= set(ref.columns)
    _assert_same_remnants(got, ref)
    _assert_same_metadata(got, ref, engine="stream")
    assert got.attrs["gwdeficit.neutron_star"]["options"] == OPTIONS
    # range warnings: the same texts (neutron-star fits per kind, then the BBH fits), counted
    # over the whole table, in the same order
    assert [str(w.message) for w in caught] == ref_warnings
    assert any(w.startswith("neutron-star rows outside") for w in ref_warnings)
    assert summary["neutron_star"] == ref.attrs["gwdeficit.neutron_star"]
    assert summary["estimated"] == int((ref["remnant_status"] == "estimated").sum())
    assert summary["status"] == ref["remnant_status"].value_counts().to_dict()


def test_neutron_stars_without_tidal_information_stay_not_estimated(catalogues, tmp_path):
    # No tidal deformability and no radius: never a silent default, in memory or streamed.
    cat = catalogues["no_tidal"]
    ref, _ = _in_memory(cat, seed=6, ns_options={"eos_relation": "maselli-2013"})
    out = tmp_path / "remnants.parquet"
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        stream_remnants(
            cat, out, seed=6, batch_rows=BATCH, ns_options={"eos_relation": "maselli-2013"}
        )
    got = wd.read_parquet(out)
    ns = (ref["kind"].astype(str) != "BBH").to_numpy()
    assert ns.sum() > 1_000
    assert (got["remnant_status"][ns] == NO_TIDAL).all()
    assert got["deficit_msun"][ns].isna().all()
    _assert_same_remnants(got, ref)
    _assert_same_metadata(got, ref, engine="stream")


def test_black_hole_only_catalogue_gets_no_neutron_star_columns(tmp_path):
    # as in memory: no ns_* columns and no neutron-star metadata without neutron-star rows
    cat = _catalogue(tmp_path / "bbh", mixed_binaries(2_000, seed=33, bbh_head=2_000))
    ref, _ = _in_memory(cat, seed=2, ns_options={"ns_radius_km": 12.0})
    out = tmp_path / "remnants.parquet"
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        summary = stream_remnants(
            cat, out, seed=2, batch_rows=BATCH, ns_options={"ns_radius_km": 12.0}
        )
    got = wd.read_parquet(out)
    assert not set(NS_EXTRA_COLUMNS) & set(got.columns)
    assert "gwdeficit.neutron_star" not in got.attrs and "neutron_star" not in summary
    _assert_same_remnants(got, ref)
    _assert_same_metadata(got, ref, engine="stream")


def test_pre_pass_finds_neutron_stars_past_all_bbh_row_groups(tmp_path):
    # kinds in the last row group only; the other row groups are skipped by their statistics
    kinds = ["BBH"] * 2_000 + ["BBH"] * 499 + ["BNS"]
    table = pa.table({"kind": pa.array(kinds).dictionary_encode(), "x": np.arange(2_500)})
    pq.write_table(table, tmp_path / "one.parquet", row_group_size=500)
    assert has_neutron_stars(tmp_path / "one.parquet")
    pq.write_table(table.slice(0, 2_499), tmp_path / "bbh.parquet", row_group_size=500)
    assert not has_neutron_stars(tmp_path / "bbh.parquet")
    pq.write_table(table.drop_columns(["kind"]), tmp_path / "nokind.parquet")
    assert not has_neutron_stars(tmp_path / "nokind.parquet")


def test_bad_neutron_star_option_is_a_user_error_when_streamed(catalogues, tmp_path):
    from gwdeficit.schema import OptionError

    out = tmp_path / "remnants.parquet"
    with pytest.raises(OptionError, match="ns_radius_km"):
        stream_remnants(catalogues["tidal"], out, batch_rows=BATCH, ns_options={"radius": 12})
    with pytest.raises(OptionError, match="nonsense"):
        stream_remnants(
            catalogues["tidal"], out, batch_rows=BATCH, ns_options={"eos_relation": "nonsense"}
        )
    assert not out.exists()


# --------------------------------------------------------------------------------------------
# Dask
# --------------------------------------------------------------------------------------------


@pytest.fixture(scope="module")
def client():
    pytest.importorskip(
        "distributed",
        reason="the optional dask extra is not installed (pip install 'gwdeficit[dask]')",
    )
    from distributed import Client, LocalCluster

    with (
        LocalCluster(
            n_workers=2,
            threads_per_worker=1,
            processes=True,
            host="127.0.0.1",
            dashboard_address=None,
        ) as lc,
        Client(lc) as c,
    ):
        yield c


@pytest.mark.dask
def test_dask_neutron_star_remnants_equal_the_in_memory_stage(catalogues, client, tmp_path):
    from gwdeficit.dask_engine import dask_remnants

    cat = catalogues["tidal"]
    ref, ref_warnings = _in_memory(cat, seed=4, ns_options=OPTIONS)
    out = tmp_path / "remnants.parquet"
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        summary = dask_remnants(
            cat, out, client=client, seed=4, batch_rows=BATCH, ns_options=OPTIONS
        )
    got = wd.read_parquet(out)
    _assert_same_remnants(got, ref)
    _assert_same_metadata(got, ref, engine="dask")
    assert [str(w.message) for w in caught] == ref_warnings
    assert summary["neutron_star"] == ref.attrs["gwdeficit.neutron_star"]


# --------------------------------------------------------------------------------------------
# Command line
# --------------------------------------------------------------------------------------------


def test_cli_streams_neutron_star_options(catalogues, tmp_path):
    from typer.testing import CliRunner

    from gwdeficit.cli import app

    cat = str(catalogues["no_tidal"])
    runner = CliRunner()
    args = ["remnant", cat, "--seed", "5", "--ns-radius", "12", "--json"]
    whole = runner.invoke(app, [*args, "--workdir", str(tmp_path / "a")])
    assert whole.exit_code == 0, whole.output
    streamed = runner.invoke(
        app, [*args, "--workdir", str(tmp_path / "b"), "--batch-rows", str(BATCH)]
    )
    assert streamed.exit_code == 0, streamed.output
    b = wd.read_parquet(tmp_path / "b" / wd.REMNANTS_FILE)
    assert b.attrs["gwdeficit.provenance"][-1]["params"]["engine"] == "stream"
    bns = b["kind"].astype(str) == "BNS"
    assert (b["remnant_status"][bns] == "estimated").sum() > 1_000
    assert b["ns_tidal_source"][bns].eq("radius,radius").all()
    _assert_same_remnants(b, wd.read_parquet(tmp_path / "a" / wd.REMNANTS_FILE))
    # the same note on standard error and the same JSON field as the in-memory path
    note = [line for line in streamed.stderr.splitlines() if line.startswith("note: ")]
    assert note and note == [ln for ln in whole.stderr.splitlines() if ln.startswith("note: ")]
    assert "lower bound" in note[0]
    got, ref = json.loads(streamed.stdout), json.loads(whole.stdout)
    assert got["neutron_star"] == ref["neutron_star"] == b.attrs["gwdeficit.neutron_star"]
    assert got["neutron_star"]["options"] == {"ns_radius_km": 12.0}
    warned = [ln for ln in streamed.stderr.splitlines() if ln.startswith("warning: ")]
    assert warned == [ln for ln in whole.stderr.splitlines() if ln.startswith("warning: ")]
    for key in ("rows", "estimated", "status", "kinds", "deficit_quantiles", "phi12_drawn"):
        assert got[key] == ref[key], key
