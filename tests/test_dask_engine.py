"""The Dask engine against the local engine, on a LocalCluster of two worker processes.

The reference is the local (streamed) engine of the same package on the same multi-file
Parquet dataset with the same seed; the streamed engine itself is checked against the
in-memory stages in tests/test_stream.py.
"""

from __future__ import annotations

import os
import signal
import sys
import warnings
from pathlib import Path

import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.parquet as pq
import pytest

from binaries import random_binaries

pytest.importorskip(
    "distributed", reason="the optional dask extra is not installed (pip install 'gwdeficit[dask]')"
)

from gwdeficit import workdir as wd
from gwdeficit.io import ingest
from gwdeficit.schema import BadRowsError, OptionError
from gwdeficit.stream import stream_budget, stream_remnants

pytestmark = [
    pytest.mark.dask,
    pytest.mark.filterwarnings("ignore::gwdeficit.fits.registry.FitRangeWarning"),
]

NUMERIC = ["median", "lo68", "hi68", "lo90", "hi90"]


def _prepare(root: Path, df: pd.DataFrame) -> dict[str, Path]:
    """A 4-file input dataset -> catalogue (written as a 4-file dataset too) -> remnants."""
    src = root / "input"
    src.mkdir(parents=True)
    for i, idx in enumerate(np.array_split(np.arange(len(df)), 4)):
        pq.write_table(pa.Table.from_pandas(df.iloc[idx]), src / f"part-{i}.parquet")
    ingest(src, root)
    cat = pq.read_table(root / wd.CATALOGUE_FILE)
    meta = cat.schema.metadata
    folder = root / "catalogue"
    folder.mkdir()
    for i, start in enumerate(range(0, cat.num_rows, 3_000)):
        part = cat.slice(start, 3_000).replace_schema_metadata(meta)
        pq.write_table(part, folder / f"part-{i:02d}.parquet", row_group_size=1_000)
    rem = root / "remnants.parquet"
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        stream_remnants(folder, rem, seed=3, batch_rows=2_000)
    return {"root": root, "catalogue": folder, "remnants": rem}


@pytest.fixture(scope="module")
def data(tmp_path_factory) -> dict[str, dict[str, Path]]:
    root = tmp_path_factory.mktemp("dask")
    return {
        "events": _prepare(
            root / "events", random_binaries(8_000, 40, seed=21, ns_every=4, label_digits=3)
        ),
        "rows": _prepare(
            root / "rows", random_binaries(8_000, 0, seed=22, ns_every=4, label_digits=3)
        ),
    }


@pytest.fixture(scope="module")
def cluster():
    from distributed import Client, LocalCluster

    with (
        LocalCluster(
            n_workers=2,
            threads_per_worker=1,
            processes=True,
            host="127.0.0.1",
            dashboard_address=None,
        ) as lc,
        Client(lc) as client,
    ):
        yield lc, client


def _same_tables(a: pd.DataFrame, b: pd.DataFrame, rtol: float = 1e-12) -> None:
    keys = ["volume", "kind", "quantity", "unit"]
    assert a[keys].equals(b[keys])
    cols = NUMERIC + [c for c in a.columns if c.startswith("share_")]
    np.testing.assert_allclose(b[cols].to_numpy(), a[cols].to_numpy(), rtol=rtol, atol=1e-300)


def _same_summary(a: dict, b: dict) -> None:
    # the total is a sum of per-batch sums, which the engines cut differently: float rounding
    assert a["total_deficit_msun"] == pytest.approx(b["total_deficit_msun"], rel=1e-12)
    assert {k: v for k, v in a.items() if k != "total_deficit_msun"} == {
        k: v for k, v in b.items() if k != "total_deficit_msun"
    }


def test_dask_remnants_equal_the_local_engine(data, cluster, tmp_path):
    from gwdeficit.dask_engine import dask_remnants

    _, client = cluster
    cat = data["events"]["catalogue"]
    local = stream_remnants(cat, tmp_path / "local.parquet", seed=8, batch_rows=1_500)
    got = dask_remnants(cat, tmp_path / "dask.parquet", client=client, seed=8, batch_rows=1_500)
    _same_summary(got, local)
    a = wd.read_parquet(tmp_path / "local.parquet")
    b = wd.read_parquet(tmp_path / "dask.parquet")
    pd.testing.assert_frame_equal(a, b)
    assert b.attrs["gwdeficit.provenance"][-1]["params"]["engine"] == "dask"


@pytest.mark.parametrize("mode", ["events", "rows"])
def test_dask_budget_equals_the_local_engine(data, cluster, mode):
    from gwdeficit.dask_engine import dask_budget

    _, client = cluster
    path = data[mode]["remnants"]
    kw = dict(
        volumes=["mw", "gpc3"],
        n_draws=80,
        seed=6,
        escape_speeds_kms=[120.0],
        mode=mode,
        batch_rows=2_000,
        group_rows=3_000,
    )
    local = stream_budget(path, **kw)
    got = dask_budget(path, client=client, **kw)
    _same_tables(local.table, got.table)
    assert got.counts == local.counts
    assert got.meta["gwdeficit.summary"]["engine"] == {
        "name": "dask",
        "mode": mode,
        "batch_rows": 2_000,
    }


def test_typed_errors_come_back_from_the_workers(data, cluster, tmp_path):
    from gwdeficit.dask_engine import dask_budget

    _, client = cluster
    df = wd.read_parquet(data["rows"]["remnants"])
    df.loc[df.index[1234], "weight"] = np.nan
    bad = wd.write_parquet(df, tmp_path / "bad.parquet", df.attrs)
    with pytest.raises(BadRowsError) as info:
        dask_budget(bad, client=client, n_draws=10, batch_rows=2_000)
    assert info.value.rows == [int(df["input_row"].iloc[1234])]


def test_cli_rate_on_a_running_scheduler(data, cluster, tmp_path):
    from typer.testing import CliRunner

    from gwdeficit.cli import app

    lc, _ = cluster
    rem = data["events"]["remnants"]
    args = ["rate", str(rem), "--draws", "40", "--volume", "mw", "--batch-rows", "4000"]
    local = CliRunner().invoke(app, [*args, "--workdir", str(tmp_path / "l"), "--json"])
    remote = CliRunner().invoke(
        app,
        [
            *args,
            "--engine",
            "dask",
            "--scheduler",
            lc.scheduler_address,
            "--workdir",
            str(tmp_path / "d"),
            "--json",
        ],
    )
    assert local.exit_code == 0, local.output
    assert remote.exit_code == 0, remote.output
    a = pd.read_parquet(tmp_path / "l" / wd.RATES_FILE)
    b = pd.read_parquet(tmp_path / "d" / wd.RATES_FILE)
    _same_tables(a, b)


def test_missing_extra_is_a_clear_option_error(monkeypatch):
    from gwdeficit import dask_engine

    monkeypatch.setitem(sys.modules, "distributed", None)  # import now raises ImportError
    with pytest.raises(OptionError, match=r"gwdeficit\[dask\]"):
        dask_engine.require()


def test_job_survives_a_killed_worker(data, cluster, tmp_path):
    """A worker process is killed mid-run; its tasks are recomputed and the answer is the same."""
    from gwdeficit.dask_engine import dask_remnants

    _, client = cluster
    cat = data["rows"]["catalogue"]
    local = stream_remnants(cat, tmp_path / "local.parquet", seed=2, batch_rows=1_000)
    pids = client.run(os.getpid)
    killed = []

    def kill_one(n: int) -> None:
        if not killed:
            victim = sorted(pids.values())[0]
            os.kill(victim, signal.SIGKILL)
            killed.append(victim)

    got = dask_remnants(
        cat, tmp_path / "dask.parquet", client=client, seed=2, batch_rows=1_000, progress=kill_one
    )
    assert killed
    _same_summary(got, local)
    pd.testing.assert_frame_equal(
        wd.read_parquet(tmp_path / "local.parquet"), wd.read_parquet(tmp_path / "dask.parquet")
    )
