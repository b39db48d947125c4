"""End-to-end tests of `gwdeficit remnant` and `gwdeficit fits` through typer's CliRunner."""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
from typer.testing import CliRunner

from gwdeficit import schema
from gwdeficit import workdir as wd
from gwdeficit.cli import app
from gwdeficit.fits.registry import REGISTRY

runner = CliRunner()


def write_catalogue(path, n=50, q_min=0.3, chi_max=0.7, bad_chi_row=None):
    rng = np.random.default_rng(2)
    m1 = rng.uniform(10, 60, n)
    df = pd.DataFrame(
        {
            "event": [f"EV{i // 10}" for i in range(n)],
            "sample": np.arange(n) % 10,
            "weight": np.ones(n),
            "m1_msun": m1,
            "m2_msun": m1 * rng.uniform(q_min, 1, n),
            "chi1": rng.uniform(0, chi_max, n),
            "chi2": rng.uniform(0, chi_max, n),
            "tilt1_rad": rng.uniform(0, np.pi, n),
            "tilt2_rad": rng.uniform(0, np.pi, n),
            "phi12_rad": np.where(np.arange(n) % 3 == 0, np.nan, 1.0),
            "z": np.full(n, 0.1),
            "dl_mpc": np.full(n, 470.0),
            "kind": np.where(np.arange(n) % 5 == 0, "BNS", "BBH"),
            "spin_assumption": "full",
            "input_row": np.arange(1, n + 1),
        }
    )
    if bad_chi_row is not None:
        df.loc[bad_chi_row, "chi1"] = 1.5
    meta = {
        schema.META_PROVENANCE: [{"stage": "ingest"}],
        schema.META_COSMOLOGY: {"name": "Planck18"},
    }
    wd.write_parquet(df, path, meta)
    return df


def test_remnant_reads_the_working_folder_and_writes_remnants(workdir):
    cat = workdir / "catalogue.parquet"
    df = write_catalogue(cat)
    res = runner.invoke(app, ["remnant"])
    assert res.exit_code == 0, res.output
    out = workdir / "remnants.parquet"
    assert out.exists()
    table = wd.read_parquet(out)
    assert len(table) == len(df)
    assert list(table.columns[: len(df.columns)]) == list(df.columns)
    prov = table.attrs[schema.META_PROVENANCE]
    assert prov[0] == {"stage": "ingest"}
    assert prov[-1]["stage"] == "remnant"
    assert prov[-1]["inputs"] == {str(cat): wd.file_sha256(cat)}
    assert table.attrs[schema.META_DISCLAIMER] == schema.DISCLAIMER
    assert table.attrs[schema.META_COSMOLOGY] == {"name": "Planck18"}
    assert [m["name"] for m in table.attrs[schema.META_FITS]] == [f.name for f in REGISTRY]
    text = res.stdout
    assert f"rows       {len(df)} (BBH 40, BNS 10)" in text
    assert "erg" in text and "Msun" in text and "time" in text
    assert "not_estimated:no_tidal_deformability_or_radius" in text


def test_no_overwrite_without_force_and_explicit_catalogue(workdir, tmp_path):
    cat = tmp_path / "elsewhere.parquet"
    write_catalogue(cat)
    assert runner.invoke(app, ["remnant", str(cat)]).exit_code == 0
    res = runner.invoke(app, ["remnant", str(cat)])
    assert res.exit_code == 2 and "--force" in res.stderr
    res = runner.invoke(app, ["remnant", str(cat), "--force", "--seed", "4"])
    assert res.exit_code == 0
    table = wd.read_parquet(workdir / "remnants.parquet")
    assert table.attrs[schema.META_REMNANT_DRAWS]["seed"] == 4


def test_json_summary_and_seed(workdir):
    write_catalogue(workdir / "catalogue.parquet")
    res = runner.invoke(app, ["remnant", "--json", "--seed", "11"])
    assert res.exit_code == 0
    s = json.loads(res.stdout)
    assert s["rows"] == 50 and s["estimated"] == 40 and s["seed"] == 11
    assert s["status"] == {"estimated": 40, "not_estimated:no_tidal_deformability_or_radius": 10}
    assert set(s["deficit_quantiles"]) == {"p05", "p50", "p95"}
    assert s["phi12_drawn"] > 0


def test_out_of_range_rows_are_counted_and_warned(workdir):
    write_catalogue(workdir / "catalogue.parquet", q_min=0.05, chi_max=0.99)
    res = runner.invoke(app, ["remnant"])
    assert res.exit_code == 0
    table = wd.read_parquet(workdir / "remnants.parquet")
    n_out = int(((table["remnant_status"] == "estimated") & ~table["in_fit_range"]).sum())
    assert n_out > 0
    assert f"range      {n_out} estimated row(s) outside" in res.stdout
    assert "warning:" in res.stderr and f"{n_out} of 40" in res.stderr


def test_missing_catalogue_is_a_user_error(workdir):
    res = runner.invoke(app, ["remnant"])
    assert res.exit_code == 2
    assert "catalogue.parquet" in res.stderr and "ingest" in res.stderr


def test_bad_row_is_a_user_error_and_nothing_is_written(workdir):
    write_catalogue(workdir / "catalogue.parquet", bad_chi_row=6)
    res = runner.invoke(app, ["remnant"])
    assert res.exit_code == 2
    assert "chi1" in res.stderr and "rows 7" in res.stderr and "catalogue.parquet" in res.stderr
    assert not (workdir / "remnants.parquet").exists()


def test_fits_lists_the_registry():
    res = runner.invoke(app, ["fits"])
    assert res.exit_code == 0
    for f in REGISTRY:
        assert f.name in res.stdout
    assert "parameter-free" in res.stdout and "q >= 0.25" in res.stdout
    rows = json.loads(runner.invoke(app, ["fits", "--json"]).stdout)
    assert [r["name"] for r in rows] == [f.name for f in REGISTRY]
    assert {"name", "quantity", "paper", "calibrated", "in_default"} <= set(rows[0])


def test_progress_bar_path_on_large_inputs(workdir, monkeypatch):
    import gwdeficit.cli.remnant as cli_remnant

    monkeypatch.setattr(cli_remnant, "PROGRESS_MIN_ROWS", 10)
    write_catalogue(workdir / "catalogue.parquet")
    res = runner.invoke(app, ["remnant"])
    assert res.exit_code == 0, res.output
    table = wd.read_parquet(workdir / "remnants.parquet")
    assert len(table) == 50 and (table["remnant_status"] != "").all()
