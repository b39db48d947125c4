"""The mass-loss budget table: quantities, units, kinds, notes and counts, error budget,
determinism and metadata."""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from gwdeficit.budget import SUMMARY_COLUMNS, compute_budget, mass_loss_rates
from gwdeficit.rates import RateEvolution, parse_rate
from gwdeficit.schema import (
    ERROR_SOURCES,
    META_COSMOLOGY,
    META_FITS,
    META_PROVENANCE,
    META_RATE_MODEL,
    META_SUMMARY,
    RATE_SUMMARY_COLUMNS,
    OptionError,
    SchemaError,
)
from gwdeficit.volumes import parse_volume


def _pop(n_events=60, n_samples=6, kind="BBH", seed=0, scale=3.0, prefix="E") -> pd.DataFrame:
    """Synthetic remnants with two default final-mass fits and two recoil fits."""
    rng = np.random.default_rng(seed)
    theta = rng.lognormal(np.log(scale), 0.4, n_events)
    erad = (theta[:, None] * rng.lognormal(-0.005, 0.1, (n_events, n_samples))).ravel()
    n = n_events * n_samples
    ej = np.full(n, 0.01 if kind != "BBH" else 0.0)
    vk = rng.rayleigh(250.0, n)
    df = pd.DataFrame(
        {
            "event": np.repeat([f"{prefix}{e:03d}" for e in range(n_events)], n_samples),
            "sample": np.tile(np.arange(n_samples), n_events),
            "weight": 1.0,
            "kind": kind,
            "remnant_status": "estimated",
            "m1_msun": 30.0,
            "m2_msun": 20.0,
            "erad_msun": erad,
            "ejected_msun": ej,
            "deficit_msun": erad + ej,
            "vkick_kms": vk,
            "in_fit_range": True,
            "erad_msun__fa": erad * 1.03,
            "erad_msun__fb": erad * 0.97,
            "vkick_kms__ka": vk * 1.1,
            "vkick_kms__kb": vk * 0.9,
        }
    )
    df.attrs[META_FITS] = [
        {"name": "fa", "quantity": "final_mass", "in_default": True},
        {"name": "fb", "quantity": "final_mass", "in_default": True},
        {"name": "ka", "quantity": "recoil", "in_default": True},
        {"name": "kb", "quantity": "recoil", "in_default": True},
    ]
    df.attrs[META_COSMOLOGY] = {"name": "Planck18"}
    df.attrs[META_PROVENANCE] = [{"stage": "remnant"}]
    return df


def _mixed() -> pd.DataFrame:
    bbh, bns = _pop(), _pop(30, 4, kind="BNS", seed=1, scale=0.05, prefix="N")
    out = pd.concat([bbh, bns], ignore_index=True)
    out.attrs = dict(bbh.attrs)
    return out


def _get(table, volume, kind, quantity, unit=None):
    sel = (table.volume == volume) & (table.kind == kind) & (table.quantity == quantity)
    if unit is not None:
        sel &= table.unit == unit
    rows = table[sel]
    assert len(rows) == 1, (volume, kind, quantity, unit)
    return rows.iloc[0]


def test_tidy_table_columns_quantities_and_units():
    b = compute_budget(
        _pop(),
        volumes=["mw", "gpc3"],
        rate="24 +14 -9",
        escape_speeds_kms=[100, 500],
        n_draws=300,
        seed=1,
    )
    t = b.table
    assert tuple(t.columns) == SUMMARY_COLUMNS
    assert tuple(t.columns[: len(RATE_SUMMARY_COLUMNS)]) == RATE_SUMMARY_COLUMNS
    assert [c for c in t.columns if c.startswith("share_")] == [f"share_{s}" for s in ERROR_SOURCES]
    units = dict(zip(t.quantity + "|" + t.unit, t.unit, strict=True))
    for q, unit in [
        ("merger_rate", "1 / Myr"),
        ("deficit_rate", "solMass / Myr"),
        ("erad_rate", "solMass / Myr"),
        ("ejected_rate", "solMass / Myr"),
        ("gw_luminosity", "erg / s"),
        ("gw_luminosity", "solLum"),
        ("mean_deficit", "solMass"),
        ("mean_erad", "solMass"),
        ("mean_ejected", "solMass"),
        ("retained_fraction@100", ""),
        ("retained_fraction@500", ""),
    ]:
        assert f"{q}|{unit}" in units
    assert set(t.volume) == {"mw", "gpc3"} and set(t.kind) == {"BBH"}
    assert len(t) == 2 * 11
    ordered = t[["lo90", "lo68", "median", "hi68", "hi90"]].to_numpy()
    assert np.all(np.diff(ordered, axis=1) >= 0)


def test_rates_scale_with_the_volume_and_products_hold_per_draw():
    b = compute_budget(
        _pop(),
        volumes=["mw", "stellar:6e10"],
        rate="24 +14 -9",
        n_draws=400,
        seed=2,
        keep_draws=True,
    )
    d = b.draws.pivot_table(
        index="draw", columns=["volume", "quantity", "unit"], values="value", observed=True
    )
    mw_rate = d[("mw", "merger_rate", "1 / Myr")]
    st_rate = d[("stellar:6e10", "merger_rate", "1 / Myr")]
    ratio = parse_volume("stellar:6e10").effective_gpc3() / parse_volume("mw").effective_gpc3()
    np.testing.assert_allclose(st_rate / mw_rate, ratio, rtol=1e-12)
    np.testing.assert_allclose(
        d[("mw", "deficit_rate", "solMass / Myr")],
        mw_rate * d[("mw", "mean_deficit", "solMass")],
        rtol=1e-12,
    )
    np.testing.assert_allclose(
        d[("mw", "gw_luminosity", "erg / s")] / d[("mw", "gw_luminosity", "solLum")],
        3.828e33,
        rtol=1e-9,  # IAU 2015 nominal solar luminosity (Resolution B3)
    )
    assert len(b.draws) == len(b.table) * 400


def test_fixed_rate_merger_rate_has_no_spread_and_no_shares():
    t = mass_loss_rates(_pop(), volumes=["gpc3"], rate="24", n_draws=200)
    mr = _get(t, "gpc3", "BBH", "merger_rate")
    assert mr["lo90"] == mr["hi90"] == pytest.approx(24e6)
    assert all(np.isnan(mr[f"share_{s}"]) for s in ERROR_SOURCES)


def test_error_budget_shares_sum_to_about_one():
    t = compute_budget(
        _pop(120, 8),
        volumes=["mw"],
        rate="24 +14 -9",
        escape_speeds_kms=[300],
        n_draws=2000,
        seed=4,
    ).table
    for q in ("deficit_rate", "mean_deficit", "retained_fraction@300"):
        row = _get(t, "mw", "BBH", q)
        total = sum(row[f"share_{s}"] for s in ERROR_SOURCES)
        assert total == pytest.approx(1.0, abs=0.12), (q, total)
    md = _get(t, "mw", "BBH", "mean_deficit")
    assert md["share_rate"] == 0.0 and md["share_catalogue"] > md["share_posterior"]
    mr = _get(t, "mw", "BBH", "merger_rate")
    assert mr["share_rate"] == pytest.approx(1.0) and mr["share_catalogue"] == 0.0


def test_per_kind_rates_and_the_all_rows():
    b = compute_budget(
        _mixed(),
        volumes=["gpc3"],
        rates_by_kind={"BBH": "24 +14 -9", "bns": "320 +490 -240"},
        n_draws=300,
        seed=5,
        keep_draws=True,
    )
    assert set(b.table.kind) == {"BBH", "BNS", "all"}
    d = b.draws.pivot_table(
        index="draw", columns=["kind", "quantity", "unit"], values="value", observed=True
    )
    for q, unit in (
        ("merger_rate", "1 / Myr"),
        ("deficit_rate", "solMass / Myr"),
        ("gw_luminosity", "erg / s"),
    ):
        np.testing.assert_allclose(d[("all", q, unit)], d[("BBH", q, unit)] + d[("BNS", q, unit)])
    np.testing.assert_allclose(
        d[("all", "mean_deficit", "solMass")],
        d[("all", "deficit_rate", "solMass / Myr")] / d[("all", "merger_rate", "1 / Myr")],
    )
    # ejected mass reported separately per kind: BNS only here
    assert _get(b.table, "gpc3", "BNS", "ejected_rate")["median"] > 0
    assert _get(b.table, "gpc3", "BBH", "ejected_rate")["median"] == 0


def test_a_kind_without_rate_is_left_out_and_said_so():
    df = _mixed()
    b = compute_budget(df, volumes=["mw"], rates_by_kind={"BBH": "24"}, n_draws=50)
    assert set(b.table.kind) == {"BBH"}
    assert any("BNS" in n and "left out" in n for n in b.notes)
    c = b.counts
    assert c["rows_in"] == len(df)
    assert c["rows_in"] == sum(p["rows_in"] for p in c["populations"].values()) + sum(
        c["rows_in_kinds_left_out"].values()
    )
    assert b.meta[META_RATE_MODEL]["left_out"] == {"BNS": "no rate"}
    b2 = compute_budget(
        _pop(), volumes=["mw"], rates_by_kind={"BBH": "24", "NSBH": "50"}, n_draws=20
    )
    assert any("NSBH" in n and "no NSBH events" in n for n in b2.notes)


def test_a_kind_with_no_estimated_rows_is_left_out_and_said_so():
    df = _mixed()
    df.loc[df.kind == "BNS", "remnant_status"] = "not_estimated:neutron_star"
    df.loc[df.kind == "BNS", ["erad_msun", "deficit_msun", "vkick_kms"]] = np.nan
    b = compute_budget(df, volumes=["mw"], n_draws=50)
    assert set(b.table.kind) == {"BBH"}
    assert any("BNS" in n and "no estimated rows" in n for n in b.notes)
    assert b.meta[META_RATE_MODEL]["left_out"]["BNS"].startswith("no estimated rows")
    with pytest.raises(OptionError, match="nothing to fold"):
        compute_budget(df[df.kind == "BNS"], volumes=["mw"], n_draws=50)


def test_not_estimated_rows_are_counted_and_do_not_enter_the_mean():
    df = _pop(20, 3)
    bad = df.index[:4]
    df.loc[bad, "remnant_status"] = "not_estimated:outside_range"
    df.loc[bad, ["erad_msun", "deficit_msun", "erad_msun__fa", "erad_msun__fb"]] = np.nan
    b = compute_budget(df, volumes=["mw"], rate="24", n_draws=50, sources=())
    md = _get(b.table, "mw", "BBH", "mean_deficit")["median"]
    ok = df.drop(index=bad)
    assert md == pytest.approx(ok.groupby("event").deficit_msun.mean().mean(), rel=1e-12)
    pop = b.counts["populations"]["BBH"]
    assert pop["rows_not_estimated"] == 4 and pop["rows_used"] == len(df) - 4
    assert any("4 row(s) not estimated" in n for n in b.notes)


def test_single_rate_labels():
    assert set(mass_loss_rates(_pop(), rate="24", n_draws=20).kind) == {"BBH"}
    assert set(mass_loss_rates(_mixed(), rate="24", n_draws=20).kind) == {"all"}


def test_defaults_when_no_rate_is_given():
    b = compute_budget(_pop(), volumes=["mw"], n_draws=50)
    m = b.meta[META_RATE_MODEL]
    assert m["defaults_used"] and m["models"]["BBH"]["lo90"] == 17.9
    assert m["models"]["BBH"]["z_ref"] == 0.2
    assert any("default rate" in n for n in b.notes)
    evo = RateEvolution("powerlaw", 2.0, 0.0)
    b2 = compute_budget(_pop(), volumes=["mw"], n_draws=50, evolution=evo, default_rate_z=0.5)
    assert b2.meta[META_RATE_MODEL]["models"]["BBH"]["z_ref"] == 0.5
    # local rate = R(0.5) (1/1.5)^2: the mw merger-rate median scales accordingly
    r = _get(b2.table, "mw", "BBH", "merger_rate")["median"]
    r0 = _get(b.table, "mw", "BBH", "merger_rate")["median"]
    assert r == pytest.approx(r0 / 1.5**2, rel=1e-9)


def test_deterministic_and_row_order_invariant():
    df = _mixed()
    kw = {"volumes": ["mw", "cosmic:1"], "escape_speeds_kms": [200], "n_draws": 200, "seed": 9}
    a = mass_loss_rates(df, **kw)
    b = mass_loss_rates(df.sample(frac=1.0, random_state=1).reset_index(drop=True), **kw)
    pd.testing.assert_frame_equal(a, b)
    assert a.attrs["gwdeficit.input_hash"] == b.attrs["gwdeficit.input_hash"]
    c = mass_loss_rates(df, **{**kw, "seed": 10})
    assert not np.allclose(a["median"], c["median"])


def test_metadata():
    b = compute_budget(
        _pop(),
        volumes=["mw"],
        rate=parse_rate("24 +14 -9"),
        n_draws=50,
        seed=3,
        escape_speeds_kms=[100],
    )
    m = b.meta
    json.dumps(m, default=str)
    assert m[META_RATE_MODEL]["models"]["BBH"]["form"] == "split-lognormal"
    assert m[META_COSMOLOGY]["name"] == "Planck18"
    assert m["gwdeficit.galaxy_density_mpc3"] == 0.0116
    assert m["gwdeficit.draws"] == 50 and m["gwdeficit.seed"] == 3
    assert m[META_FITS]["used"]["BBH"] == {"final_mass": ["fa", "fb"], "recoil": ["ka", "kb"]}
    assert len(m["gwdeficit.input_hash"]) == 64
    assert [p["stage"] for p in m[META_PROVENANCE]] == ["remnant", "rate"]
    assert m[META_SUMMARY]["counts"]["rows_in"] == 360
    assert b.table.attrs[META_RATE_MODEL] == m[META_RATE_MODEL]


def test_sources_held_fixed():
    b = compute_budget(
        _pop(), volumes=["mw"], rate="24 +14 -9", n_draws=100, sources=("catalogue", "rate")
    )
    row = _get(b.table, "mw", "BBH", "deficit_rate")
    assert np.isnan(row["share_posterior"]) and np.isnan(row["share_fits"])
    assert any("held fixed: posterior, fits" in n for n in b.notes)


def test_invalid_arguments():
    df = _pop(5, 2)
    with pytest.raises(OptionError, match="not both"):
        compute_budget(df, rate="24", rates_by_kind={"BBH": "24"})
    with pytest.raises(OptionError, match="valid forms"):
        compute_budget(df, volumes=["galaxy"])
    with pytest.raises(OptionError, match="at least 2"):
        compute_budget(df, rate="24", n_draws=1)
    with pytest.raises(OptionError, match="escape speed"):
        compute_budget(df, rate="24", escape_speeds_kms=[0])
    with pytest.raises(OptionError, match="BBH, NSBH, BNS"):
        compute_budget(df, rates_by_kind={"XRB": "3"})
    with pytest.raises(OptionError, match="galaxy density"):
        compute_budget(df, rate="24", galaxy_density_mpc3=-1)


def test_madau_dickinson_beyond_its_range_is_said():
    evo = RateEvolution("madau-dickinson", 0.0, 0.0)
    b = compute_budget(
        _pop(5, 2), volumes=["cosmic:10"], rate=parse_rate("24", evolution=evo), n_draws=20
    )
    assert any("extrapolated" in n for n in b.notes)


@settings(max_examples=25, deadline=None)
@given(
    st.lists(
        st.tuples(
            st.integers(0, 5),  # event
            st.sampled_from(["BBH", "NSBH", "BNS"]),
            st.sampled_from([0.0, 0.5, 1.0, 2.0]),  # weight
            st.booleans(),  # estimated
            st.floats(0.01, 10.0),  # deficit
        ),
        min_size=1,
        max_size=25,
    ),
    st.sets(st.sampled_from(["BBH", "NSBH", "BNS"])),
    st.randoms(use_true_random=False),
)
def test_counts_add_up_and_row_order_never_matters(rows, rated, rnd):
    df = pd.DataFrame(rows, columns=["e", "kind", "weight", "ok", "deficit_msun"])
    df["event"] = "E" + df.pop("e").astype(str)
    df["sample"] = df.groupby("event").cumcount()
    ok = df.pop("ok")
    df["remnant_status"] = np.where(ok, "estimated", "not_estimated:test")
    df.loc[~ok, "deficit_msun"] = np.nan
    df["erad_msun"] = df["deficit_msun"]
    df["ejected_msun"] = np.where(ok, 0.0, np.nan)
    df["vkick_kms"] = 100.0
    kw = {
        "volumes": ["mw"],
        "rates_by_kind": {k: "24 +14 -9" for k in sorted(rated)} or None,
        "n_draws": 20,
        "seed": 1,
    }
    try:
        a = compute_budget(df, **kw)
    except (OptionError, SchemaError):
        return
    c = a.counts
    assert c["rows_in"] == len(df)
    assert c["rows_in"] == sum(p["rows_in"] for p in c["populations"].values()) + sum(
        c["rows_in_kinds_left_out"].values()
    )
    for p in c["populations"].values():
        assert (
            p["rows_in"] == p["rows_used"] + p["rows_not_estimated"] + p["rows_zero_weight_events"]
        )
    order = list(range(len(df)))
    rnd.shuffle(order)
    b = compute_budget(df.iloc[order].reset_index(drop=True), **kw)
    pd.testing.assert_frame_equal(a.table, b.table)
