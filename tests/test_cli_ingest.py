"""End-to-end tests of `gwdeficit ingest` through typer's CliRunner."""

from __future__ import annotations

import json
from importlib import resources

import numpy as np
import pandas as pd
import pytest
from typer.testing import CliRunner

from gwdeficit import convert
from gwdeficit.cli import app
from gwdeficit.io import read_catalogue

runner = CliRunner()


def run(*args: str):
    return runner.invoke(app, ["ingest", *map(str, args)])


@pytest.fixture
def table(tmp_path):
    p = tmp_path / "cat.csv"
    p.write_text(
        "event,mchirp_det [Msun],q,dL [Gpc],a1,a2,tilt1 [deg],tilt2 [deg],phi12 [deg]\n"
        "GWA,30.2,0.8,0.41,0.1,0.2,30,60,90\n"
        "GWA,30.5,0.7,0.45,0.1,0.2,30,60,90\n"
        "GWB,1.2,0.9,0.04,0.0,0.0,0,0,0\n"
    )
    return p


def test_summary_and_outputs(table, workdir):
    res = run(table)
    assert res.exit_code == 0, res.output
    out = res.output
    assert "read 3 = accepted 3 + rejected 0" in out
    assert "events     2; samples per event min 1, median 1.5, max 2" in out
    assert "detector frame -> source frame" in out
    assert "kinds      BBH 2, BNS 1" in out
    assert str(workdir / "catalogue.parquet") in out
    cat = read_catalogue(workdir)
    # the first row, checked by hand: source chirp mass = 30.2 / (1 + z(410 Mpc))
    z = float(convert.redshift_from_distance(410.0))
    assert cat["z"].iloc[0] == pytest.approx(z)
    mc = convert.chirp_mass(cat["m1_msun"].iloc[0], cat["m2_msun"].iloc[0])
    assert mc == pytest.approx(30.2 / (1 + z), rel=1e-12)


def test_json_summary(table, workdir):
    res = run(table, "--json", "--workdir", workdir / "elsewhere")
    assert res.exit_code == 0, res.output
    s = json.loads(res.output)
    assert s["rows_read"] == s["rows_accepted"] + s["rows_rejected"] == 3
    assert s["catalogue"] == str(workdir / "elsewhere" / "catalogue.parquet")
    assert (workdir / "elsewhere" / "catalogue.parquet").exists()


def test_bad_rows_exit_2_without_traceback(tmp_path, workdir):
    p = tmp_path / "bad.csv"
    p.write_text("m1,m2,z\n30,20,0.1\n30,x,0.1\n")
    res = run(p)
    assert res.exit_code == 2
    assert "column 'm2': not a number in 1 row(s): rows 2" in res.output
    assert str(p) in res.output
    assert "Traceback" not in res.output
    assert not (workdir / "catalogue.parquet").exists()


def test_skip_writes_rejects(tmp_path, workdir):
    p = tmp_path / "bad.csv"
    p.write_text("m1,m2,z\n30,20,0.1\n30,x,0.1\n-1,2,0.1\n")
    res = run(p, "--on-bad", "skip")
    assert res.exit_code == 0, res.output
    assert "read 3 = accepted 1 + rejected 2" in res.output
    assert "column 'm2': not a number" in res.output
    rejects = pd.read_csv(workdir / "rejects.csv", dtype=str)
    assert rejects["input_row"].tolist() == ["2", "3"]
    assert rejects["m2"].tolist() == ["x", "2"]


def test_column_unit_cosmology_frame_options(tmp_path, workdir):
    p = tmp_path / "odd.csv"
    p.write_text("A,B,D\n3.0e31,2.0e31,0.5\n")
    res = run(
        p,
        "--column",
        "m1=A",
        "--column",
        "m2=B",
        "--column",
        "z=D",
        "--unit",
        "A=kg",
        "--unit",
        "B=kg",
        "--cosmology",
        "WMAP9",
        "--mass-frame",
        "detector",
    )
    assert res.exit_code == 0, res.output
    cat = read_catalogue(workdir)
    # 1 Msun = 1.988409870698051e30 kg (IAU 2015 nominal value); detector -> source by 1 + z.
    assert cat["m1_msun"].iloc[0] == pytest.approx(3.0e31 / 1.988409870698051e30 / 1.5)
    assert cat.attrs["gwdeficit.cosmology"]["name"] == "WMAP9"


@pytest.mark.parametrize(
    ("args", "message"),
    [
        (["--cosmology", "Nope"], "cosmology 'Nope' is not known"),
        (["--on-bad", "ignore"], "on-bad"),
        (["--column", "m1"], "KEY=VALUE"),
        (["--mass-frame", "lab"], "mass frame"),
        (["--format", "xls"], "format"),
    ],
)
def test_bad_options_exit_2(table, workdir, args, message):
    res = run(table, *args)
    assert res.exit_code == 2
    assert message in res.output


def test_no_overwrite_without_force(table, workdir):
    assert run(table).exit_code == 0
    res = run(table)
    assert res.exit_code == 2 and "--force" in res.output
    assert run(table, "--force").exit_code == 0


def test_missing_file_exit_2(tmp_path, workdir):
    res = run(tmp_path / "nope.csv")
    assert res.exit_code == 2 and "no such file" in res.output


def test_no_spins_is_said_loudly(tmp_path, workdir):
    p = tmp_path / "t.csv"
    p.write_text("m1,m2,z\n30,20,0.1\n")
    res = run(p)
    assert "WARNING: no spin columns were found" in res.output
    assert "spins: none given, set to zero (spin_assumption=none)" in res.output


@pytest.mark.parametrize(
    ("name", "spins"),
    [("campaign.csv", "full"), ("ns_event.csv", "aligned"), ("population.parquet", "effective")],
)
def test_bundled_demo_files_ingest(tmp_path, name, spins):
    # The demo files are invented inputs; only structure is checked here, never values.
    demo = resources.files("gwdeficit") / "data_demo" / name
    if not demo.is_file():
        pytest.skip(f"demo file {name} not present")
    res = run(demo, "--workdir", tmp_path / "w", "--on-bad", "skip", "--json")
    assert res.exit_code == 0, res.output
    s = json.loads(res.output)
    assert s["rows_read"] == s["rows_accepted"] + s["rows_rejected"]
    assert set(s["spin_assumption"]) == {spins}
    cat = read_catalogue(tmp_path / "w")
    assert (cat["m1_msun"] >= cat["m2_msun"]).all()
    assert np.isfinite(cat["z"]).all()
