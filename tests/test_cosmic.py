"""The cosmic-budget API: grids and integrals, draws and tables, the remnants-table wiring.

Physics checks against outside references live in tests/reference/test_ref_cosmic.py; here the
bookkeeping is checked with identities that must hold exactly (before + since = total, sums over
kinds, linearity in weights) and the contract of :func:`gwdeficit.cosmic.cosmic_budget`.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from astropy.cosmology import WMAP9, Planck18

from gwdeficit import cosmic
from gwdeficit.rates import RateEvolution, parse_rate
from gwdeficit.schema import (
    META_COSMOLOGY,
    META_PROVENANCE,
    META_RATE_MODEL,
    META_SUMMARY,
    META_UNITS,
    OptionError,
    SchemaError,
)


def _rate(text, evolution=None):
    return parse_rate(text, evolution=evolution or RateEvolution("none"))


def _remnants(n_events=20, n_samples=10, kind="BBH", seed=0, prefix="e"):
    rng = np.random.default_rng(seed)
    n = n_events * n_samples
    if kind == "BNS":
        m1 = rng.uniform(1.2, 1.6, n)
        m2 = m1 * rng.uniform(0.8, 1.0, n)
        ejected = rng.uniform(0.005, 0.05, n)
    else:
        m1 = rng.uniform(10.0, 40.0, n)
        m2 = m1 * rng.uniform(0.4, 1.0, n)
        ejected = np.zeros(n)
    erad = 0.045 * (m1 + m2)
    df = pd.DataFrame(
        {
            "event": np.repeat([f"{prefix}{i:03d}" for i in range(n_events)], n_samples),
            "sample": np.tile(np.arange(n_samples), n_events),
            "weight": rng.uniform(0.5, 1.5, n),
            "kind": kind,
            "m1_msun": m1,
            "m2_msun": m2,
            "mf_msun": m1 + m2 - erad - ejected,
            "erad_msun": erad,
            "ejected_msun": ejected,
            "deficit_msun": erad + ejected,
            "remnant_status": "estimated",
        }
    )
    df.attrs[META_PROVENANCE] = [{"stage": "remnant"}]
    return df


def _budget(df, rate, **kw):
    kw.setdefault("n_draws", 300)
    return cosmic.cosmic_budget(df, rate, **kw)


def _get(table, quantity, section="total", kind=None):
    rows = table[(table["section"] == section) & (table["quantity"] == quantity)]
    if kind is not None:
        rows = rows[rows["kind"] == kind]
    return rows


# --- grids and integrals -----------------------------------------------------------------------
def test_redshift_grid_rejects_bad_values():
    for bad in (0.0, -1.0, np.inf, np.nan):
        with pytest.raises(OptionError):
            cosmic.redshift_grid(bad)
    with pytest.raises(OptionError):
        cosmic.redshift_grid(1.0, n=2)
    z = cosmic.redshift_grid(3.0, 101)
    assert z[0] == 0.0 and z[-1] == pytest.approx(3.0) and np.all(np.diff(z) > 0)


def test_cumulative_integral_of_powers_matches_calculus():
    # integral_0^z (1+z')^k dz' = ((1+z)^(k+1) - 1) / (k+1): calculus, no source needed.
    z = cosmic.redshift_grid(9.0, 801)
    for k in (-2.5, -1.0 / 3.0, 0.0, 1.7):
        got = cosmic.cumulative_in_redshift(z, (1 + z) ** k)
        np.testing.assert_allclose(got[1:], ((1 + z[1:]) ** (k + 1) - 1) / (k + 1), rtol=1e-7)


def test_frequency_grid_limits_and_errors():
    f = cosmic.frequency_grid(1e-3, 1e3, per_decade=10)
    assert f[0] == pytest.approx(1e-3) and f[-1] == pytest.approx(1e3) and f.size == 61
    with pytest.raises(OptionError):
        cosmic.frequency_grid(10.0, 1.0)


def test_spectrum_is_linear_in_weighted_rows():
    kernels = cosmic.redshift_kernels(RateEvolution("powerlaw", kappa=2.0), Planck18, 5.0)
    rho_c = cosmic.critical_density(Planck18)
    f = np.geomspace(1e-3, 400.0, 30)
    mc, fc = np.array([5.0, 25.0]), np.array([400.0, 90.0])
    one = [
        cosmic.omega_gw_inspiral(f, mc[i : i + 1], fc[i : i + 1], [1.0], kernels, rho_c)
        for i in range(2)
    ]
    both = cosmic.omega_gw_inspiral(f, mc, fc, [1.0, 3.0], kernels, rho_c, chunk=7)
    np.testing.assert_allclose(both, 0.25 * one[0] + 0.75 * one[1], rtol=1e-12)
    for bad in ([1.0, -1.0], [0.0, 0.0]):
        with pytest.raises(OptionError):
            cosmic.omega_gw_inspiral(f, mc, fc, bad, kernels, rho_c)


# --- draws and the tidy table --------------------------------------------------------------------
def _blocks(rate=20.0, n=50, zmax=6.0):
    kernels = cosmic.redshift_kernels(RateEvolution("madau-dickinson", z_ref=0.2), Planck18, zmax)
    rng = np.random.default_rng(5)
    rates = rate * rng.lognormal(0, 0.4, n)
    means = {"erad_msun": rng.uniform(2, 3, n), "ejected_msun": rng.uniform(0, 0.01, n)}
    means["deficit_msun"] = means["erad_msun"] + means["ejected_msun"]
    return kernels, rates, means, cosmic.budget_draws(kernels, rates, means, 1.27e11)


def test_before_plus_since_is_total_and_rate_is_pinned_at_z_ref():
    _, rates, means, blocks = _blocks()
    by = {b.key: b for b in blocks}
    for q in ("erad", "ejected", "deficit"):
        total = by[("total", f"{q}_density")].values
        both = (
            by[("history", f"{q}_density_before")].values
            + by[("history", f"{q}_density_since")].values
        )
        np.testing.assert_allclose(both, np.broadcast_to(total, both.shape), rtol=1e-12)
    merger = by[("history", "merger_rate")]
    at_ref = np.interp(0.2, merger.z, merger.values[0])
    assert at_ref == pytest.approx(rates[0], rel=1e-4)
    # Draw d pairs rate d with mean d: omega_gw is their product times one kernel number.
    om = by[("total", "omega_gw")].values[:, 0]
    np.testing.assert_allclose(
        om / (rates * means["erad_msun"]), om[0] / (rates[0] * means["erad_msun"][0])
    )


def test_budget_draws_rejects_unpaired_draws():
    kernels, rates, means, _ = _blocks()
    with pytest.raises(OptionError):
        cosmic.budget_draws(kernels, rates[:-1], means, 1.0)


def test_table_columns_quantiles_and_sum_over_kinds():
    _, _, _, a = _blocks(rate=20.0)
    _, _, _, b = _blocks(rate=200.0)
    summed = cosmic.sum_draws([a, b])
    table = cosmic.budget_table({"BBH": a, "BNS": b, "all": summed})
    assert tuple(table.columns) == cosmic.TABLE_COLUMNS
    assert set(table["section"]) == {"total", "history"}
    ordered = table[["lo90", "lo68", "median", "hi68", "hi90"]].to_numpy()
    assert np.all(np.diff(ordered, axis=1) >= 0)
    tot = {k: _get(table, "erad_density", kind=k)["median"].item() for k in ("BBH", "BNS", "all")}
    # Same seed in _blocks: the two kinds' draws are proportional, so medians add up exactly.
    assert tot["all"] == pytest.approx(tot["BBH"] + tot["BNS"], rel=1e-12)
    hist = _get(table, "erad_density_since", "history", "BBH")
    assert hist["z"].notna().all() and hist["f_hz"].isna().all()
    assert hist["lookback_gyr"].is_monotonic_increasing


# --- the API on a remnants table ----------------------------------------------------------------
def test_cosmic_budget_outputs_and_metadata():
    df = _remnants()
    evo = RateEvolution("madau-dickinson", z_ref=0.2)
    res = _budget(df, _rate("25 +10 -8", evo), seed=3, zmax=10.0)
    t = res.table
    assert set(t["kind"]) == {"BBH"}
    assert set(t["section"]) == {"total", "history", "spectrum"}
    spec = _get(t, "omega_gw_inspiral", "spectrum")
    assert spec["f_hz"].is_monotonic_increasing and spec["z"].isna().all()
    assert (spec["median"] > 0).any()
    # The spectrum integrates to the inspiral total (Phinney 2001; see the reference test).
    assert abs(res.summary["totals"]["BBH"]["spectrum_integral_rel_diff"]) < 1e-3
    # Inspiral energy to the ISCO is part of, and smaller than, the NR-fit radiated energy.
    om = _get(t, "omega_gw")["median"].item()
    assert 0 < _get(t, "omega_gw_inspiral")["median"].item() < om
    erg = _get(t, "gw_energy_density")["median"].item()
    msun = _get(t, "gw_energy_density_msun")["median"].item()
    assert erg == pytest.approx(float(cosmic.energy_density_erg_cm3(msun)), rel=1e-12)
    assert om == pytest.approx(msun / cosmic.critical_density(Planck18), rel=1e-12)
    meta = res.meta
    assert meta[META_UNITS]["lookback_gyr"] == "Gyr" and meta[META_UNITS]["f_hz"] == "Hz"
    assert meta[META_UNITS]["erad_density"] == "solMass / Mpc3"
    assert meta[META_RATE_MODEL]["median"] == 25.0
    assert meta[META_COSMOLOGY]["name"] == "Planck18"
    assert [r["stage"] for r in meta[META_PROVENANCE]] == ["remnant", "cosmic"]
    assert meta[META_PROVENANCE][-1]["params"]["seed"] == 3
    assert meta[META_SUMMARY]["draws"] == 300
    assert any("Madau" in w and "extrapolates" in w for w in res.warnings)  # zmax 10 > 8
    assert any("inspiral only" in n for n in res.notes)
    assert res.summary["warnings"] == list(res.warnings)


def test_seed_determinism():
    df = _remnants()
    a = _budget(df, _rate("25 +10 -8"), seed=7).table
    b = _budget(df, _rate("25 +10 -8"), seed=7).table
    c = _budget(df, _rate("25 +10 -8"), seed=8).table
    pd.testing.assert_frame_equal(a, b)
    assert not np.allclose(a["hi90"], c["hi90"], equal_nan=True)


def test_rate_source_off_holds_the_median_rate():
    df = _remnants()
    res = _budget(df, _rate("25 +10 -8"), sources=("posterior",), spectrum=False)
    rows = _get(res.table, "merger_density")
    assert rows["lo90"].item() == pytest.approx(rows["hi90"].item(), rel=1e-12)
    assert not (res.table["section"] == "spectrum").any()


def test_rows_without_remnant_estimate_are_left_out_counted_and_said():
    df = _remnants()
    bad = df.index[:15]
    df.loc[bad, ["erad_msun", "ejected_msun", "deficit_msun", "mf_msun"]] = np.nan
    df.loc[bad, "remnant_status"] = "not_estimated:outside_fit_range"
    res = _budget(df, _rate("25"), sources=())
    c = res.summary["counts"]["BBH"]
    assert c["rows_in"] == 200 and c["rows_not_estimated"] == 15 and c["rows_used"] == 185
    assert c["rows_used"] + c["rows_not_estimated"] + c["rows_zero_weight_events"] == c["rows_in"]
    assert c["not_estimated_reasons"] == {"not_estimated:outside_fit_range": 15}
    assert any("15 of 200" in w for w in res.warnings)
    assert np.isfinite(res.table[["median", "lo90", "hi90"]].to_numpy()).all()


def test_per_kind_rates_give_kinds_and_their_sum():
    df = pd.concat([_remnants(kind="BBH"), _remnants(kind="BNS", prefix="n", seed=1)])
    df = pd.concat([df, _remnants(n_events=2, kind="NSBH", prefix="x", seed=2)])
    rates = {
        "BBH": _rate("25 +10 -8"),
        "BNS": _rate("300 +200 -150", RateEvolution("powerlaw", 1.5)),
        "XYZ": _rate("1"),
    }
    res = _budget(df, rates, seed=1)
    assert set(res.table["kind"]) == {"BBH", "BNS", "all"}
    assert any("no rate given for NSBH" in w for w in res.warnings)
    assert any("XYZ" in w for w in res.warnings)
    ej = {k: _get(res.table, "ejected_density", kind=k)["median"].item() for k in ("BBH", "BNS")}
    assert ej["BBH"] == 0.0 and ej["BNS"] > 0.0
    assert any("neutron-star" in n for n in res.notes)
    # The summed spectrum still integrates to the summed inspiral total, draw by draw.
    for k in ("BBH", "BNS", "all"):
        assert res.summary["totals"][k]["spectrum_integral_rel_diff"] < 1e-3
    assert set(res.meta[META_RATE_MODEL]) == {"BBH", "BNS", "XYZ"}


def test_cosmology_comes_from_the_table_metadata():
    df = _remnants()
    df.attrs[META_COSMOLOGY] = {"name": "WMAP9", "H0": 69.3, "Om0": 0.286}
    res = _budget(df, _rate("25 +10 -8"), spectrum=False)
    assert res.summary["cosmology"]["name"] == "WMAP9"
    assert res.summary["critical_density_msun_mpc3"] == pytest.approx(
        cosmic.critical_density(WMAP9)
    )


def test_resolve_cosmology_forms_and_errors():
    assert cosmic.resolve_cosmology(None) is Planck18
    assert cosmic.resolve_cosmology("WMAP9") is WMAP9
    assert cosmic.resolve_cosmology({"name": "planck18", "H0_km_s_Mpc": 1.0}) is Planck18
    custom = cosmic.resolve_cosmology({"name": "mine", "H0": 70.0, "Om0": 0.3})
    assert custom.H0.value == 70.0 and custom.Om0 == 0.3
    again = cosmic.resolve_cosmology(cosmic.describe_cosmology(custom))
    assert again.H0.value == 70.0 and again.Om0 == 0.3 and again.name == "mine"
    assert cosmic.describe_cosmology(Planck18)["name"] == "Planck18"
    with pytest.raises(OptionError, match="not known"):
        cosmic.resolve_cosmology("Planck99")


def test_bad_inputs_raise_typed_errors():
    df = _remnants()
    with pytest.raises(SchemaError, match=r"mine\.parquet.*mf_msun"):
        _budget(df.drop(columns=["mf_msun"]), _rate("1"), source_name="mine.parquet")
    for kw in ({"zmax": -1.0}, {"zmax": np.nan}, {"n_draws": 0}, {"f_min_hz": -1.0}):
        with pytest.raises(OptionError):
            _budget(df, _rate("1"), **kw)
    with pytest.raises(OptionError, match="no population"):
        _budget(df, {"BNS": _rate("1")})


def test_spectrum_weights_follow_the_bootstrap_population_mean():
    # The spectrum's row weights must give the same population mean per merger as the
    # bootstrap's point estimate (resample.point_estimates), including single-row events that
    # carry their row weight and multi-row events that count once.
    from gwdeficit.resample import Stat, point_estimates, prepare_population

    df = pd.concat([_remnants(n_events=5), _remnants(n_events=7, n_samples=1, prefix="s", seed=4)])
    pop = prepare_population(df, ["erad_msun"])
    w = cosmic.population_weights(pop)
    assert w.sum() == pytest.approx(1.0)
    mine = float(np.sum(w * pop.values["erad_msun"][:, 0]))
    ref = point_estimates(pop, [Stat("erad_msun", "erad_msun")])["erad_msun"]
    assert mine == pytest.approx(ref, rel=1e-12)


def test_row_order_does_not_change_the_result():
    df = pd.concat([_remnants(), _remnants(kind="BNS", prefix="n", seed=1)], ignore_index=True)
    rates = {"BBH": _rate("25 +10 -8"), "BNS": _rate("300 +200 -150")}
    a = _budget(df, rates, seed=2).table
    b = _budget(df.sample(frac=1.0, random_state=1), rates, seed=2).table
    pd.testing.assert_frame_equal(a, b)


def test_default_zmax_stays_inside_the_star_formation_fit():
    res = _budget(_remnants(), _rate("25", RateEvolution("madau-dickinson")), spectrum=False)
    assert res.summary["zmax"] == cosmic.MADAU_DICKINSON_ZMAX
    assert not any("extrapolates" in w for w in res.warnings)


# --- the command line ----------------------------------------------------------------------------
def _write_remnants(folder, df):
    from gwdeficit.workdir import REMNANTS_FILE, write_parquet

    meta = {META_PROVENANCE: [{"stage": "remnant"}], META_COSMOLOGY: {"name": "Planck18"}}
    return write_parquet(df, folder / REMNANTS_FILE, meta)


def _run(*args):
    from typer.testing import CliRunner

    from gwdeficit.cli import app

    return CliRunner().invoke(app, ["cosmic", *args])


def test_cli_writes_table_metadata_figure_and_summary(workdir):
    import json

    from gwdeficit.workdir import COSMIC_FILE, FIGURES_DIR, file_sha256, read_parquet

    src = _write_remnants(workdir, _remnants())
    r = _run("--rate", "20 +10 -8", "--draws", "200", "--seed", "4")
    assert r.exit_code == 0, r.output
    assert "Omega_gw" in r.stdout and "rho_gw c^2" in r.stdout
    out = read_parquet(workdir / COSMIC_FILE)
    assert tuple(out.columns) == cosmic.TABLE_COLUMNS
    assert out.attrs[META_UNITS]["f_hz"] == "Hz"
    assert out.attrs[META_RATE_MODEL]["median"] == 20.0
    prov = out.attrs[META_PROVENANCE]
    assert [p["stage"] for p in prov] == ["remnant", "cosmic"]
    assert prov[-1]["inputs"] == {str(src): file_sha256(src)}
    assert prov[-1]["params"]["draws"] == 200 and prov[-1]["params"]["seed"] == 4
    png = workdir / FIGURES_DIR / "cosmic_mass_loss.png"
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    # Without --force nothing is overwritten (exit 2); with it, JSON on stdout.
    again = _run("--rate", "20", "--draws", "50")
    assert again.exit_code == 2 and "exists" in again.output
    r = _run("--rate", "20", "--draws", "50", "--force", "--json", "--no-spectrum", "--no-figure")
    assert r.exit_code == 0, r.output
    summary = json.loads(r.stdout)
    assert summary["totals"]["BBH"]["omega_gw"]["median"] > 0
    assert summary["spectrum"] is None and summary["figure"] is None
    assert not (read_parquet(workdir / COSMIC_FILE)["section"] == "spectrum").any()


def test_cli_default_rates_per_kind(workdir):
    df = pd.concat([_remnants(), _remnants(kind="BNS", prefix="n", seed=1)], ignore_index=True)
    _write_remnants(workdir, df)
    r = _run("--draws", "100", "--no-figure", "--json")
    assert r.exit_code == 0, r.output
    import json

    summary = json.loads(r.stdout)
    assert set(summary["totals"]) == {"BBH", "BNS", "all"}
    assert summary["kinds"]["BBH"]["rate_model"]["z_ref"] == 0.2  # the BBH default's redshift


@pytest.mark.parametrize(
    ("args", "needle"),
    [
        (["--rate", "fast"], "rate"),
        (["--rate", "20", "--rate-kind", "BBH=20"], "give one of"),
        (["--rate", "20", "--kappa", "2"], "kappa"),
        (["--evolution", "sudden"], "evolution"),
        (["--zmax", "-2"], "zmax"),
        (["--draws", "0"], "draws"),
        (["--rate", "20", "--rate-unit", "furlong"], "unit"),
        (["--rate-unit", "Mpc-3 Myr-1"], "applies to a given rate"),
    ],
)
def test_cli_bad_options_exit_2(workdir, args, needle):
    _write_remnants(workdir, _remnants(n_events=3))
    r = _run(*args)
    assert r.exit_code == 2, r.output
    assert needle in r.output


def test_cli_rate_samples_and_powerlaw(workdir, tmp_path):
    import json

    _write_remnants(workdir, _remnants(n_events=5))
    samples = tmp_path / "rate.csv"
    values = np.linspace(10.0, 30.0, 41)
    samples.write_text("draw,rate\n" + "".join(f"{i},{v}\n" for i, v in enumerate(values)))
    args = ["--rate-samples", f"{samples}:rate", "--evolution", "powerlaw", "--kappa", "2.7"]
    r = _run(*args, "--draws", "100", "--no-figure", "--json")
    assert r.exit_code == 0, r.output
    model = json.loads(r.stdout)["kinds"]["BBH"]["rate_model"]
    assert model["form"] == "samples" and model["evolution"] == "powerlaw"
    assert model["kappa"] == 2.7


def test_cli_missing_input_exit_2(workdir):
    r = _run("--rate", "20")
    assert r.exit_code == 2 and "no such file" in r.output


def test_cli_computes_remnants_from_a_catalogue(workdir):
    from gwdeficit.workdir import CATALOGUE_FILE, REMNANTS_FILE, read_parquet, write_parquet

    rng = np.random.default_rng(9)
    n = 60
    m1 = rng.uniform(10.0, 40.0, n)
    cat = pd.DataFrame(
        {
            "event": np.repeat([f"ev{i}" for i in range(6)], 10),
            "sample": np.tile(np.arange(10), 6),
            "weight": 1.0,
            "m1_msun": m1,
            "m2_msun": m1 * rng.uniform(0.4, 1.0, n),
            "chi1": rng.uniform(0, 0.8, n),
            "chi2": rng.uniform(0, 0.8, n),
            "tilt1_rad": rng.uniform(0, np.pi, n),
            "tilt2_rad": rng.uniform(0, np.pi, n),
            "phi12_rad": rng.uniform(0, 2 * np.pi, n),
            "z": rng.uniform(0.1, 0.5, n),
            "dl_mpc": 1000.0,
            "kind": "BBH",
            "spin_assumption": "full",
            "input_row": np.arange(1, n + 1),
        }
    )
    write_parquet(cat, workdir / CATALOGUE_FILE, {META_PROVENANCE: [{"stage": "ingest"}]})
    r = _run("--rate", "20", "--draws", "50", "--no-figure")
    assert r.exit_code == 0, r.output
    assert "computing its remnants first" in r.stderr
    rem = read_parquet(workdir / REMNANTS_FILE)
    assert len(rem) == n and "erad_msun" in rem.columns
    stages = [p["stage"] for p in read_parquet(workdir / "cosmic.parquet").attrs[META_PROVENANCE]]
    assert stages[0] == "ingest" and stages[-1] == "cosmic" and len(stages) == 3


def test_figure_draws_the_history_rows():
    from gwdeficit.figures_cosmic import cosmic_mass_loss_figure

    df = pd.concat([_remnants(), _remnants(kind="BNS", prefix="n", seed=1)], ignore_index=True)
    res = _budget(df, {"BBH": _rate("25 +10 -8"), "BNS": _rate("300 +200 -150")}, spectrum=False)
    plotted = cosmic_mass_loss_figure(res.table)
    drawn = plotted.data
    # all + BBH + BNS radiated, BNS ejected; "all" ejected repeats BNS and is not drawn.
    pairs = set(zip(drawn["kind"], drawn["quantity"], strict=True))
    assert pairs == {
        ("all", "erad_density_before"),
        ("BBH", "erad_density_before"),
        ("BNS", "erad_density_before"),
        ("BNS", "ejected_density_before"),
    }
    hist = _get(res.table, "erad_density_before", "history", "BBH")
    mine = drawn[(drawn["kind"] == "BBH") & (drawn["quantity"] == "erad_density_before")]
    expect = hist[hist["median"] > 0].sort_values("lookback_gyr")["median"].to_numpy()
    np.testing.assert_array_equal(mine["median"].to_numpy(), expect)
    with pytest.raises(SchemaError):
        cosmic_mass_loss_figure(res.table.drop(columns=["lookback_gyr"]))
