"""End-to-end tests of `gwdeficit rate` through typer's CliRunner."""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest
from typer.testing import CliRunner

from gwdeficit import schema
from gwdeficit import workdir as wd
from gwdeficit.cli import app
from gwdeficit.volumes import MWEG_DENSITY_MPC3, STELLAR_DENSITY_MSUN_MPC3

runner = CliRunner()


def write_remnants(path, kinds=("BBH",), n_events=12, n_samples=5, seed=0):
    """A remnants table (the columns the rate stage reads) written as the remnant stage would."""
    rng = np.random.default_rng(seed)
    n = n_events * n_samples
    ev = np.repeat(np.arange(n_events), n_samples)
    erad = rng.lognormal(np.log(2.0), 0.3, n)
    vk = rng.rayleigh(200.0, n)
    df = pd.DataFrame(
        {
            "event": [f"EV{e:03d}" for e in ev],
            "sample": np.tile(np.arange(n_samples), n_events),
            "weight": 1.0,
            "m1_msun": 30.0,
            "m2_msun": 25.0,
            "z": 0.2,
            "kind": [kinds[e % len(kinds)] for e in ev],
            "input_row": np.arange(2, n + 2),
            "erad_msun": erad,
            "ejected_msun": 0.0,
            "deficit_msun": erad,
            "vkick_kms": vk,
            "in_fit_range": True,
            "remnant_status": "estimated",
            "erad_msun__fa": erad * 1.02,
            "vkick_kms__ka": vk,
        }
    )
    meta = {
        schema.META_PROVENANCE: [{"stage": "ingest"}, {"stage": "remnant"}],
        schema.META_COSMOLOGY: {"name": "Planck18"},
        schema.META_FITS: [
            {"name": "fa", "quantity": "final_mass", "in_default": True},
            {"name": "ka", "quantity": "recoil", "in_default": True},
        ],
    }
    wd.write_parquet(df, path, meta)
    return df


def test_rate_writes_the_tidy_table_with_metadata(workdir):
    rem = workdir / wd.REMNANTS_FILE
    write_remnants(rem)
    res = runner.invoke(
        app,
        [
            "rate",
            "--volume",
            "mw,gpc3",
            "--volume",
            "sphere:100",
            "--rate",
            "24 +14 -9",
            "--escape-speed",
            "50",
            "--escape-speed",
            "500",
            "--draws",
            "200",
            "--json",
        ],
    )
    assert res.exit_code == 0, res.output
    out = json.loads(res.stdout)
    rows = pd.DataFrame(out["rates"])
    assert set(rows.volume) == {"mw", "gpc3", "sphere:100"}
    assert {
        "merger_rate",
        "deficit_rate",
        "gw_luminosity",
        "mean_deficit",
        "retained_fraction@50",
        "retained_fraction@500",
    } <= set(rows.quantity)
    table = wd.read_parquet(workdir / wd.RATES_FILE)
    assert list(table.columns[:9]) == list(schema.RATE_SUMMARY_COLUMNS)
    assert len(table) == len(rows)
    a = table.attrs
    assert a[schema.META_DISCLAIMER] == schema.DISCLAIMER and schema.META_VERSION in a
    assert a[schema.META_RATE_MODEL]["models"]["BBH"]["median"] == 24.0
    assert a[schema.META_COSMOLOGY]["name"] == "Planck18"
    assert a["gwdeficit.draws"] == 200 and a["gwdeficit.seed"] == 0
    prov = a[schema.META_PROVENANCE]
    assert [p["stage"] for p in prov] == ["ingest", "remnant", "rate"]
    assert prov[-1]["inputs"] == {str(rem): wd.file_sha256(rem)}


def test_human_table_and_no_overwrite_without_force(workdir):
    write_remnants(workdir / wd.REMNANTS_FILE)
    res = runner.invoke(app, ["rate", "--rate", "24", "--draws", "50"])
    assert res.exit_code == 0, res.output
    assert "merger_rate" in res.stdout and "Research estimate" in res.stdout
    assert "one Milky-Way-equivalent galaxy" in res.stdout
    res = runner.invoke(app, ["rate", "--rate", "24", "--draws", "50"])
    assert res.exit_code == 2 and "--force" in res.stderr
    res = runner.invoke(app, ["rate", "--rate", "24", "--draws", "50", "--force"])
    assert res.exit_code == 0


def test_same_seed_same_file_and_keep_draws(workdir, tmp_path):
    rem = tmp_path / "r.parquet"
    write_remnants(rem, kinds=("BBH", "BNS"))
    args = ["rate", str(rem), "--draws", "100", "--seed", "3", "--volume", "mw,cosmic:0.5"]
    assert runner.invoke(app, [*args, "--keep-draws"]).exit_code == 0
    first = wd.read_parquet(workdir / wd.RATES_FILE)
    draws = wd.read_parquet(workdir / wd.DRAWS_FILE)
    assert len(draws) == len(first) * 100
    assert set(draws.columns) == {"draw", "volume", "kind", "quantity", "unit", "value"}
    assert runner.invoke(app, [*args, "--force"]).exit_code == 0
    pd.testing.assert_frame_equal(first, wd.read_parquet(workdir / wd.RATES_FILE))
    assert {"BBH", "BNS", "all"} == set(first.kind)  # default rates per kind


def test_rate_samples_and_per_kind_rates(workdir, tmp_path):
    write_remnants(workdir / wd.REMNANTS_FILE, kinds=("BBH", "BNS"))
    samples = tmp_path / "draws.csv"
    pd.DataFrame({"R": np.linspace(10, 40, 50)}).to_csv(samples, index=False)
    res = runner.invoke(app, ["rate", "--rate-samples", f"{samples}:R", "--draws", "50", "--json"])
    assert res.exit_code == 0, res.output
    out = json.loads(res.stdout)
    assert out["rate_model"]["models"]["all"]["form"] == "samples"
    res = runner.invoke(
        app, ["rate", "--rate-kind", "BBH=24 +14 -9", "--draws", "50", "--force", "--json"]
    )
    assert res.exit_code == 0, res.output
    out = json.loads(res.stdout)
    assert {r["kind"] for r in out["rates"]} == {"BBH"}
    assert "kind BNS: no rate given; left out" in res.stderr
    res = runner.invoke(
        app,
        [
            "rate",
            "--rate-kind",
            f"BNS=samples:{samples}:R",
            "--rate-kind",
            "bbh=24",
            "--rate-unit",
            "Gpc-3 yr-1",
            "--draws",
            "50",
            "--force",
            "--json",
        ],
    )
    assert res.exit_code == 0, res.output
    assert {r["kind"] for r in json.loads(res.stdout)["rates"]} == {"BBH", "BNS", "all"}


def test_evolution_options(workdir):
    write_remnants(workdir / wd.REMNANTS_FILE)
    base = ["rate", "--rate", "24", "--volume", "gpc3", "--draws", "20", "--json", "--force"]
    flat = json.loads(runner.invoke(app, base).stdout)
    res = runner.invoke(app, [*base, "--evolution", "powerlaw", "--kappa", "3", "--rate-z", "0.2"])
    assert res.exit_code == 0, res.output
    evolved = json.loads(res.stdout)

    def mr(out):
        return next(r["median"] for r in out["rates"] if r["quantity"] == "merger_rate")

    # the rate quoted at z = 0.2 is R (1/1.2)^3 today
    assert mr(evolved) == pytest.approx(mr(flat) / 1.2**3, rel=1e-9)


@pytest.mark.parametrize(
    ("args", "message"),
    [
        (["--volume", "galaxy"], "valid forms"),
        (["--volume", "sphere:-4"], "positive"),
        (["--rate", "lots"], "valid forms"),
        (["--rate", "24", "--rate-unit", "kg"], "not a number per volume per time"),
        (["--rate", "24", "--rate-kind", "BBH=24"], "give one of"),
        (["--rate-kind", "XRB=3"], "BBH, NSBH, BNS"),
        (["--rate-kind", "BBH"], "KEY=VALUE"),
        (["--rate", "24", "--evolution", "powerlaw"], "--kappa"),
        (["--rate", "24", "--kappa", "2"], "powerlaw only"),
        (["--rate", "24", "--evolution", "steep"], "valid"),
        (["--rate", "24", "--escape-speed", "fast"], "--escape-speed"),
        (["--rate", "24", "--selection", "magic"], "inspiral-volume"),
        (["--rate", "24", "--galaxy-density", "0"], "galaxy density"),
        (["--rate", "24", "--draws", "1"], "at least 2"),
        (["--rate-unit", "Mpc-3 yr-1"], "none given"),
        (["--rate-samples", "missing.csv:R"], "no such file"),
    ],
)
def test_bad_options_exit_2_with_a_clear_message(workdir, args, message):
    write_remnants(workdir / wd.REMNANTS_FILE)
    res = runner.invoke(app, ["rate", *args])
    assert res.exit_code == 2, res.output
    assert message in res.stderr


def test_missing_input_exit_2(workdir):
    res = runner.invoke(app, ["rate"])
    assert res.exit_code == 2 and "gwdeficit ingest" in res.stderr


def test_a_catalogue_gets_its_remnants_first(workdir):
    rng = np.random.default_rng(4)
    n = 40
    m1 = rng.uniform(15, 50, n)
    cat = pd.DataFrame(
        {
            "event": [f"EV{i // 8}" for i in range(n)],
            "sample": np.arange(n) % 8,
            "weight": 1.0,
            "m1_msun": m1,
            "m2_msun": m1 * rng.uniform(0.4, 1.0, n),
            "chi1": rng.uniform(0, 0.6, n),
            "chi2": rng.uniform(0, 0.6, n),
            "tilt1_rad": rng.uniform(0, np.pi, n),
            "tilt2_rad": rng.uniform(0, np.pi, n),
            "phi12_rad": 1.0,
            "z": 0.1,
            "dl_mpc": 470.0,
            "kind": "BBH",
            "spin_assumption": "full",
            "input_row": np.arange(2, n + 2),
        }
    )
    wd.write_parquet(
        cat, workdir / wd.CATALOGUE_FILE, {schema.META_COSMOLOGY: {"name": "Planck18"}}
    )
    res = runner.invoke(app, ["rate", "--rate", "24", "--draws", "50"])
    assert res.exit_code == 0, res.output
    assert (workdir / wd.REMNANTS_FILE).exists() and (workdir / wd.RATES_FILE).exists()
    prov = wd.read_parquet(workdir / wd.RATES_FILE).attrs[schema.META_PROVENANCE]
    assert [p["stage"] for p in prov][-2:] == ["remnant", "rate"]


def test_cli_defaults_match_the_library_constants():
    import inspect

    from gwdeficit.cli.rate import rate

    sig = inspect.signature(rate)
    assert sig.parameters["galaxy_density"].default == MWEG_DENSITY_MPC3
    assert sig.parameters["stellar_density"].default == STELLAR_DENSITY_MSUN_MPC3
