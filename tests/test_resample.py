"""Hierarchical bootstrap: coverage, determinism, row-order invariance, each source's switch,
weights, selection reweighting and the retained fraction (checked against analytic results)."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from gwdeficit.resample import (
    Stat,
    bootstrap_means,
    event_kinds,
    point_estimates,
    prepare_population,
    retained_fraction,
    run_bootstrap,
    variance_shares,
)
from gwdeficit.schema import META_FITS, BadRowsError, OptionError, SchemaError

POP = ("catalogue", "posterior")


def _remnants(values_by_event, weights_by_event=None, kind="BBH") -> pd.DataFrame:
    """A remnants table from per-event lists of deficits (erad = deficit, nothing ejected)."""
    rows = []
    for e, vals in enumerate(values_by_event):
        ws = weights_by_event[e] if weights_by_event is not None else [1.0] * len(vals)
        for s, (v, w) in enumerate(zip(vals, ws, strict=True)):
            rows.append((f"E{e:04d}", s, w, kind, "estimated", v, v, 0.0, 100.0))
    cols = [
        "event",
        "sample",
        "weight",
        "kind",
        "remnant_status",
        "deficit_msun",
        "erad_msun",
        "ejected_msun",
        "vkick_kms",
    ]
    return pd.DataFrame(rows, columns=cols)


def _lognormal_population(rng, n_events, n_samples, mu, sigma, noise=0.1):
    """True deficits theta_e ~ LogNormal(mu, sigma); posterior samples theta_e * LogNormal with
    mean one, so that each event's posterior mean is unbiased for theta_e."""
    theta = rng.lognormal(mu, sigma, n_events)
    x = (theta[:, None] * rng.lognormal(-(noise**2) / 2, noise, (n_events, n_samples))).ravel()
    return pd.DataFrame(
        {
            "event": np.repeat([f"E{e:04d}" for e in range(n_events)], n_samples),
            "sample": np.tile(np.arange(n_samples), n_events),
            "weight": 1.0,
            "kind": "BBH",
            "remnant_status": "estimated",
            "deficit_msun": x,
            "erad_msun": x,
            "ejected_msun": 0.0,
            "vkick_kms": 100.0,
        }
    )


def test_coverage_of_the_90_percent_interval():
    # Statistical property: on populations drawn from a lognormal of known mean
    # exp(mu + sigma^2 / 2), the 90% percentile interval covers the truth in about 90% of
    # repeats (accept 85-95% over 400 repeats; binomial scatter 1.5%).
    mu, sigma = np.log(2.0), 0.5
    truth = np.exp(mu + sigma**2 / 2)
    rng = np.random.default_rng(20240611)
    repeats, hits = 400, 0
    for _ in range(repeats):
        df = _lognormal_population(rng, n_events=100, n_samples=8, mu=mu, sigma=sigma)
        d = bootstrap_means(df, ["deficit_msun"], 200, rng, sources=POP)["deficit_msun"]
        lo, hi = np.quantile(d, [0.05, 0.95])
        hits += lo <= truth <= hi
    coverage = hits / repeats
    assert 0.85 <= coverage <= 0.95, coverage


def test_same_seed_same_draws_other_seed_other_draws():
    df = _lognormal_population(np.random.default_rng(1), 30, 5, 1.0, 0.5)
    a = bootstrap_means(df, ["deficit_msun"], 200, np.random.default_rng(5))
    b = bootstrap_means(df, ["deficit_msun"], 200, np.random.default_rng(5))
    c = bootstrap_means(df, ["deficit_msun"], 200, np.random.default_rng(6))
    assert np.array_equal(a["deficit_msun"], b["deficit_msun"])
    assert not np.array_equal(a["deficit_msun"], c["deficit_msun"])


def test_row_order_does_not_matter():
    rng = np.random.default_rng(2)
    df = _lognormal_population(rng, 40, 6, 1.0, 0.5)
    df["weight"] = rng.uniform(0.5, 2.0, len(df))  # non-uniform: exercises the weighted search
    df["erad_msun__fa"] = df["erad_msun"] * 1.1
    df["erad_msun__fb"] = df["erad_msun"] * 0.9
    shuffled = df.sample(frac=1.0, random_state=9).reset_index(drop=True)
    kw = {"columns": ["deficit_msun", "erad_msun"], "n_draws": 300, "escape_speeds_kms": [50.0]}
    a = bootstrap_means(df, rng=np.random.default_rng(3), **kw)
    b = bootstrap_means(shuffled, rng=np.random.default_rng(3), **kw)
    for key in a:
        assert np.array_equal(a[key], b[key]), key


def test_all_sources_off_gives_the_weighted_point_estimate():
    vals = [[1.0, 3.0], [2.0], [10.0, 20.0, 30.0]]
    wts = [[1.0, 3.0], [5.0], [1.0, 1.0, 2.0]]
    df = _remnants(vals, wts)
    # each multi-row event counts once with its weighted posterior mean; the single-row event
    # carries its row weight (5): (2.5 + 5 * 2 + 22.5) / 7
    expected = (2.5 + 5 * 2.0 + 22.5) / 7
    d = bootstrap_means(df, ["deficit_msun"], 20, np.random.default_rng(0), sources=())
    np.testing.assert_allclose(d["deficit_msun"], expected, rtol=1e-14)
    pop = prepare_population(df, ["deficit_msun"])
    assert point_estimates(pop, [Stat("m", "deficit_msun")])["m"] == pytest.approx(expected)


def test_each_event_counts_once_whatever_its_sample_weight_scale():
    df = _remnants([[1.0] * 10, [3.0] * 10], [[1.0] * 10, [100.0] * 10])
    d = bootstrap_means(df, ["deficit_msun"], 5, np.random.default_rng(0), sources=())
    np.testing.assert_allclose(d["deficit_msun"], 2.0)


def test_catalogue_only_resamples_event_means():
    df = _remnants([[1.0, 3.0], [10.0, 30.0]])  # event means 2 and 20
    d = bootstrap_means(df, ["deficit_msun"], 400, np.random.default_rng(1), sources=("catalogue",))
    got = set(np.round(d["deficit_msun"], 12))
    assert got == {2.0, 11.0, 20.0}  # both draws of one event, or one of each


def test_posterior_only_picks_samples_by_weight_never_weight_zero():
    df = _remnants([[1.0, 2.0, 3.0]], [[0.0, 1.0, 3.0]])
    d = bootstrap_means(
        df, ["deficit_msun"], 4000, np.random.default_rng(4), sources=("posterior",)
    )
    vals, counts = np.unique(d["deficit_msun"], return_counts=True)
    assert list(vals) == [2.0, 3.0]
    # P(3) = 3/4: binomial test, two-sided
    assert stats.binomtest(int(counts[1]), 4000, 0.75).pvalue > 1e-3


def test_fits_only_draws_one_default_fit_per_draw():
    df = _remnants([[1.0, 2.0], [3.0]])
    df["ejected_msun"] = 0.5
    df["deficit_msun"] = df["erad_msun"] + 0.5
    df["erad_msun__fa"] = df["erad_msun"] * 2
    df["erad_msun__fb"] = df["erad_msun"] * 3
    df["erad_msun__fc"] = df["erad_msun"] * 100  # not in the default set: never drawn
    df.attrs[META_FITS] = [
        {"name": "fa", "quantity": "final_mass", "in_default": True},
        {"name": "fb", "quantity": "final_mass", "in_default": True},
        {"name": "fc", "quantity": "final_mass", "in_default": False},
    ]
    base = (1.5 + 3.0) / 2  # point estimate of erad
    d = bootstrap_means(
        df, ["deficit_msun", "erad_msun"], 300, np.random.default_rng(0), sources=("fits",)
    )
    assert set(np.round(d["erad_msun"], 12)) == {2 * base, 3 * base}
    np.testing.assert_allclose(d["deficit_msun"], d["erad_msun"] + 0.5)


def test_a_fit_with_missing_values_is_left_out_of_the_choice():
    df = _remnants([[1.0, 2.0], [3.0]])
    df["erad_msun__fa"] = df["erad_msun"] * 2
    df["erad_msun__fb"] = [1.0, np.nan, 1.0]
    pop = prepare_population(df, ["deficit_msun"])
    assert pop.info["fits"]["final_mass"] == ["fa"]
    assert "fb" in pop.info["fits_left_out"]


def test_rows_not_estimated_are_left_out_and_counted():
    df = _remnants([[1.0, 2.0], [3.0], [4.0]])
    df.loc[1, "remnant_status"] = "not_estimated:outside_range"
    df.loc[3, "remnant_status"] = "not_estimated:neutron_star"
    df.loc[[1, 3], ["deficit_msun", "erad_msun"]] = np.nan
    pop = prepare_population(df, ["deficit_msun"])
    assert pop.info["rows_in"] == 4 and pop.info["rows_used"] == 2
    assert pop.info["rows_not_estimated"] == 2
    assert pop.info["events_in"] == 3 and pop.info["events_used"] == 2
    d = bootstrap_means(df, ["deficit_msun"], 5, np.random.default_rng(0), sources=())
    np.testing.assert_allclose(d["deficit_msun"], 2.0)  # events (1) and (3)


def test_events_whose_rows_all_weigh_zero_are_left_out_and_counted():
    df = _remnants([[1.0, 2.0], [5.0, 5.0]], [[1.0, 1.0], [0.0, 0.0]])
    pop = prepare_population(df, ["deficit_msun"])
    assert pop.info["events_zero_weight"] == 1 and pop.info["rows_zero_weight_events"] == 2
    assert pop.n_events == 1


def test_inspiral_volume_selection_recovers_the_intrinsic_mean():
    # Detected chirp masses drawn from p_det(Mc) ~ Mc^-1 on [5, 50]; with a sensitive volume
    # growing as Mc^(15/6) (common practice, no source) the intrinsic distribution is
    # p(Mc) ~ Mc^-3.5, whose mean is analytic: [(a^-1.5 - b^-1.5)/1.5] / [(a^-2.5 - b^-2.5)/2.5].
    a, b = 5.0, 50.0
    truth = ((a**-1.5 - b**-1.5) / 1.5) / ((a**-2.5 - b**-2.5) / 2.5)
    rng = np.random.default_rng(11)
    mc = a * (b / a) ** rng.random(40_000)
    m = mc * 2**0.2  # equal masses: Mc = m 2^(-1/5)
    df = _remnants([[x] for x in mc])
    df["m1_msun"] = m
    df["m2_msun"] = m
    d = bootstrap_means(df, ["deficit_msun"], 3, rng, sources=(), selection="inspiral-volume")
    assert d["deficit_msun"][0] == pytest.approx(truth, rel=0.02)
    assert np.mean(mc) > 1.5 * truth  # the unweighted mean is far off
    boot = bootstrap_means(df, ["deficit_msun"], 100, rng, sources=POP, selection="inspiral-volume")
    assert np.median(boot["deficit_msun"]) == pytest.approx(truth, rel=0.03)
    # the same through a user column of volume-time proportional to Mc^(15/6)
    df["vt_gpc3_yr"] = 3.0 * mc**2.5
    d2 = bootstrap_means(df, ["deficit_msun"], 3, rng, sources=(), selection="column")
    assert d2["deficit_msun"][0] == pytest.approx(d["deficit_msun"][0], rel=1e-9)


def test_retained_fraction_matches_the_maxwellian_cdf():
    # Recoils drawn from a Maxwellian of scale 300 km/s: the retained fraction below v is its
    # CDF (scipy.stats.maxwell as reference).
    rng = np.random.default_rng(12)
    n = 20_000
    df = _remnants([[1.0]] * n)
    df["vkick_kms"] = stats.maxwell.rvs(scale=300.0, size=n, random_state=rng)
    res = retained_fraction(df, [200.0, 600.0], 200, rng, sources=POP)
    for v, draws in res.items():
        ref = stats.maxwell.cdf(v, scale=300.0)
        assert np.median(draws) == pytest.approx(ref, abs=0.01)
        lo, hi = np.quantile(draws, [0.005, 0.995])
        assert lo < ref < hi


def test_missing_recoil_is_not_counted_as_retained():
    df = _remnants([[1.0], [1.0], [1.0]])
    df.loc[0, "vkick_kms"] = np.nan
    d = bootstrap_means(df, [], 4, np.random.default_rng(0), sources=(), escape_speeds_kms=[500])
    assert np.all(np.isnan(d["retained_fraction@500"]))


def test_single_source_runs_reuse_the_full_runs_random_numbers():
    df = _lognormal_population(np.random.default_rng(3), 25, 4, 0.5, 0.4)
    pop = prepare_population(df, ["deficit_msun"])
    st = [Stat("deficit_msun", "deficit_msun")]
    full, cat = run_bootstrap(pop, st, [POP, ("catalogue",)], 100, np.random.default_rng(8))
    cat_alone = bootstrap_means(
        df, ["deficit_msun"], 100, np.random.default_rng(8), sources=("catalogue",)
    )
    assert np.array_equal(cat["deficit_msun"], cat_alone["deficit_msun"])
    assert not np.array_equal(cat["deficit_msun"], full["deficit_msun"])


def test_variance_shares():
    rng = np.random.default_rng(0)
    a, b = rng.normal(0, 1, 5000), rng.normal(0, 2, 5000)
    sh = variance_shares(a + b, {"a": a, "b": b})
    assert sh["a"] == pytest.approx(0.2, abs=0.03) and sh["b"] == pytest.approx(0.8, abs=0.05)
    assert np.isnan(variance_shares(np.ones(10), {"a": a})["a"])
    assert variance_shares(a, {"c": np.full(10, 3.0)})["c"] == 0.0


def test_errors_name_the_problem():
    df = _remnants([[1.0, 2.0]])
    with pytest.raises(SchemaError, match="vkick_kms"):
        bootstrap_means(
            df.drop(columns="vkick_kms"), [], 5, np.random.default_rng(0), escape_speeds_kms=[100]
        )
    bad = df.copy()
    bad["weight"] = [1.0, -1.0]
    bad["input_row"] = [7, 8]
    with pytest.raises(BadRowsError) as exc:
        bootstrap_means(bad, ["deficit_msun"], 5, np.random.default_rng(0))
    assert exc.value.column == "weight" and exc.value.rows == [8]
    assert "--on-bad" not in str(exc.value) and "rerun" in str(exc.value)  # no rejects here
    with pytest.raises(OptionError, match="inspiral-volume"):
        bootstrap_means(df, ["deficit_msun"], 5, np.random.default_rng(0), selection="magic")
    with pytest.raises(OptionError, match="catalogue"):
        bootstrap_means(df, ["deficit_msun"], 5, np.random.default_rng(0), sources=("luck",))
    with pytest.raises(SchemaError, match="vt_gpc3_yr"):
        bootstrap_means(df, ["deficit_msun"], 5, np.random.default_rng(0), selection="column")
    df["vt_gpc3_yr"] = [1.0, 0.0]
    with pytest.raises(BadRowsError, match="volume-time"):
        bootstrap_means(df, ["deficit_msun"], 5, np.random.default_rng(0), selection="column")
    with pytest.raises(OptionError, match="escape speed"):
        bootstrap_means(df, [], 5, np.random.default_rng(0), escape_speeds_kms=[-3])


def test_an_event_counts_once_in_its_majority_kind():
    df = _remnants([[1.0, 2.0, 3.0, 4.0], [5.0, 6.0]], [[1.0, 1.0, 1.0, 0.5], [1.0, 1.0]])
    df["kind"] = ["BNS", "NSBH", "NSBH", "BNS", "BNS", "NSBH"]
    kinds = event_kinds(df)
    assert kinds.to_dict() == {"E0000": "NSBH", "E0001": "BNS"}  # weight 2 vs 1.5; tie -> BNS
    pop = prepare_population(df, ["deficit_msun"], kind="NSBH")
    assert pop.n_events == 1 and pop.info["rows_used"] == 4
    assert pop.info["events_mixed_kind"] == 1


def test_weighted_pick_equals_a_plain_cumulative_search():
    # The guide-table search must give exactly the row of a plain inverse-CDF search (numpy
    # searchsorted over the per-event cumulative keys), including u = 0, u just below 1 and
    # runs of zero weights; a zero-weight row is never picked.
    from gwdeficit.resample import _pick_rows

    rng = np.random.default_rng(21)
    counts = rng.integers(1, 40, 300)
    vals = [rng.random(c).tolist() for c in counts]
    wts = [(rng.random(c) ** 4 * (rng.random(c) > 0.4)).tolist() for c in counts]
    for w in wts:
        w[0] += 0.01
        w[-1] = 0.0 if len(w) > 1 else w[-1]  # trailing zero weight
    pop = prepare_population(_remnants(vals, wts), ["deficit_msun"])
    ev = rng.integers(0, pop.n_events, (60, pop.n_events))
    u = rng.random(ev.shape)
    u[0], u[1] = 0.0, np.nextafter(1.0, 0.0)
    rows = _pick_rows(pop, ev, u)
    last = pop.starts[ev] + pop.counts[ev] - 1
    ref = np.minimum(np.searchsorted(pop.key, ev + u[:, :], side="right"), last)
    ok = pop.row_weight[ref] > 0  # the plain search may round onto a trailing zero row
    assert np.array_equal(rows[ok], ref[ok])
    assert np.all(pop.row_weight[rows] > 0)
