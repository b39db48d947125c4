"""Rate-density models: text forms, units, the split lognormal, posterior draws from files."""

from __future__ import annotations

import astropy.units as u
import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from gwdeficit.rates import (
    DEFAULT_RATES,
    RATE_UNIT,
    Z90,
    RateEvolution,
    RateModel,
    default_rate,
    load_rate_samples,
    parse_kind_rates,
    parse_rate,
    rate_unit_factor,
)
from gwdeficit.schema import (
    BadRowsError,
    GwdeficitError,
    InputFileError,
    OptionError,
    SchemaError,
    UnitError,
)


def test_fixed_value():
    m = parse_rate("24")
    assert m.form == "fixed"
    assert m.median == m.lo90 == m.hi90 == 24.0
    assert np.all(m.draw(5, np.random.default_rng(0)) == 24.0)
    assert parse_rate(24).median == 24.0


@pytest.mark.parametrize(
    "text", ["24 +14 -9", "24+14-9", "24 +14/-9", "24^{+14}_{-9}", "24 (+14, -9)", "2.4e1 +14 -9"]
)
def test_median_with_90_bounds_spellings(text):
    m = parse_rate(text)
    assert (m.form, m.median, m.lo90, m.hi90) == ("split-lognormal", 24.0, 15.0, 38.0)


def test_symmetric_bounds():
    for text in ("24 +-5", "24 ± 5", "24 +/-5"):
        m = parse_rate(text)
        assert (m.lo90, m.median, m.hi90) == (19.0, 24.0, 29.0)


def test_split_lognormal_reproduces_median_and_bounds_exactly():
    m = parse_rate("24 +14 -9")
    np.testing.assert_allclose(m.quantile([0.05, 0.5, 0.95]), [15.0, 24.0, 38.0], rtol=1e-12)
    # the two halves' widths are the log-distances to the bounds over the normal 95% quantile
    assert m.sigma_hi == pytest.approx(np.log(38 / 24) / 1.6448536269514722)
    assert m.sigma_lo == pytest.approx(np.log(24 / 15) / Z90)


def test_split_lognormal_draws_follow_the_quantiles():
    # Monte-Carlo check of the sampler against its own analytic quantiles (200k draws: the
    # sample 5% / 95% quantiles scatter by about 0.3%).
    m = parse_rate("24 +14 -9")
    d = m.draw(200_000, np.random.default_rng(1))
    assert d.min() > 0
    np.testing.assert_allclose(np.quantile(d, [0.05, 0.5, 0.95]), [15, 24, 38], rtol=0.01)


def test_range_form_is_a_lognormal_with_geometric_median():
    m = parse_rate("17.9..44")
    assert m.median == pytest.approx(np.sqrt(17.9 * 44))
    assert m.sigma_lo == pytest.approx(m.sigma_hi)
    np.testing.assert_allclose(m.quantile([0.05, 0.95]), [17.9, 44.0], rtol=1e-12)


def test_units_are_converted_with_astropy():
    k = u.Unit("Mpc-3 Myr-1").to(u.Unit("Gpc-3 yr-1"))  # astropy as reference library
    assert rate_unit_factor("Mpc-3 Myr-1") == pytest.approx(k)
    m = parse_rate("0.024 +0.014 -0.009", unit="Mpc-3 Myr-1")
    assert m.median == pytest.approx(0.024 * k)
    assert m.hi90 == pytest.approx(0.038 * k)
    # a unit written after the numbers overrides the unit argument
    assert parse_rate("24e-9 Mpc-3 yr-1", unit="m-3 s-1").median == pytest.approx(24.0)
    assert parse_rate("24 1 / (Gpc3 yr)").median == pytest.approx(24.0)
    assert parse_rate("24 Mpc-3 Myr-1").given_unit == "Mpc-3 Myr-1"


@pytest.mark.parametrize("unit", ["kg", "Gpc-3", "yr-1", "not a unit"])
def test_bad_units_raise_unit_error_with_examples(unit):
    with pytest.raises(UnitError, match="Gpc-3 yr-1"):
        parse_rate("24", unit=unit)


@pytest.mark.parametrize("text", ["", "abc", "24 +14", "24 -9", "-5", "24..", "1..2..3", "24 + -9"])
def test_unreadable_rates_list_the_valid_forms(text):
    with pytest.raises(OptionError, match="valid forms"):
        parse_rate(text)


def test_invalid_values():
    with pytest.raises(OptionError, match="positive"):
        parse_rate("0")
    with pytest.raises(OptionError, match="lower 90% bound"):
        parse_rate("24 +30 -30")
    with pytest.raises(OptionError, match="LO < HI"):
        parse_rate("44..17.9")
    with pytest.raises(OptionError, match="enclose"):
        RateModel(24.0, 30.0, 40.0, "split-lognormal")


def test_samples_from_csv_column(tmp_path):
    p = tmp_path / "rate.csv"
    pd.DataFrame({"other": [1, 2, 3, 4], "R": [10.0, 20.0, 30.0, 40.0]}).to_csv(p, index=False)
    m = parse_rate(f"samples:{p}:R")
    assert m.form == "samples"
    assert m.median == 25.0
    assert m.describe()["n_samples"] == 4
    d = m.draw(1000, np.random.default_rng(0))
    assert set(np.unique(d)) <= {10.0, 20.0, 30.0, 40.0}
    assert len(np.unique(d)) == 4
    with pytest.raises(SchemaError, match="choose one"):
        load_rate_samples(p)
    with pytest.raises(SchemaError, match="other, R"):
        load_rate_samples(f"{p}:nope")


def test_samples_headerless_text_npy_and_parquet(tmp_path):
    t = tmp_path / "r.txt"
    t.write_text("# rate draws\n12\n18\n30\n")
    assert load_rate_samples(t).median == 18.0
    n = tmp_path / "r.npy"
    np.save(n, np.array([1.0, 2.0, 3.0]))
    assert load_rate_samples(n, unit="Mpc-3 yr-1").median == pytest.approx(2.0e9)
    q = tmp_path / "r.parquet"
    pd.DataFrame({"rate": [5.0, 7.0]}).to_parquet(q)
    assert load_rate_samples(q).median == 6.0


def test_bad_samples_name_file_column_and_rows(tmp_path):
    p = tmp_path / "r.csv"
    p.write_text("R\n10\n-1\nabc\n20\n")
    with pytest.raises(BadRowsError) as exc:
        load_rate_samples(f"{p}:R")
    assert exc.value.rows == [2, 3] and exc.value.column == "R"
    assert str(p) in str(exc.value)
    # the advice fits the rate stage: there is no --on-bad option (and no rejects file) here
    assert "--on-bad" not in str(exc.value) and "rate-samples file" in str(exc.value)
    with pytest.raises(InputFileError, match="no such file"):
        load_rate_samples(tmp_path / "missing.csv")
    z = tmp_path / "zeros.csv"
    z.write_text("R\n0\n0\n5\n")
    with pytest.raises(InputFileError, match="median of the rate samples is not positive"):
        load_rate_samples(z)


def test_evolution_and_reference_redshift():
    evo = RateEvolution("powerlaw", 2.7, 0.2)
    assert evo.factor(0.2) == pytest.approx(1.0)
    assert evo.factor(0.0) == pytest.approx(1.2**-2.7)
    m = parse_rate("24", evolution=evo)
    assert m.describe()["z_ref"] == 0.2 and m.describe()["evolution"] == "powerlaw"
    assert m.with_evolution(RateEvolution()).evolution.kind == "none"
    with pytest.raises(OptionError, match="valid"):
        RateEvolution("exponential")


def test_defaults_per_kind():
    # Abbott et al. 2023, Phys. Rev. X 13, 011048 (from memory): BBH 17.9-44 Gpc^-3 yr^-1 at
    # z = 0.2, NSBH 7.8-140, BNS 10-1700.
    bbh = default_rate("BBH")
    assert (bbh.lo90, bbh.hi90, bbh.evolution.z_ref) == (17.9, 44.0, 0.2)
    assert (default_rate("BNS").lo90, default_rate("BNS").hi90) == (10.0, 1700.0)
    assert (default_rate("NSBH").lo90, default_rate("NSBH").hi90) == (7.8, 140.0)
    assert set(DEFAULT_RATES) == {"BBH", "NSBH", "BNS"}
    md = default_rate("BBH", RateEvolution("madau-dickinson", 0.0, 0.0))
    assert md.evolution.kind == "madau-dickinson" and md.evolution.z_ref == 0.2


def test_parse_kind_rates(tmp_path):
    p = tmp_path / "bns.csv"
    p.write_text("rate\n100\n300\n")
    models = parse_kind_rates({"bbh": "24 +14 -9", "BNS": f"samples:{p}:rate"})
    assert set(models) == {"BBH", "BNS"}
    assert models["BNS"].form == "samples" and models["BNS"].median == 200.0
    with pytest.raises(OptionError, match="BBH, NSBH, BNS"):
        parse_kind_rates({"XRB": "3"})


def test_draws_are_reproducible_with_a_seed():
    m = parse_rate("24 +14 -9")
    a = m.draw(50, np.random.default_rng(7))
    b = m.draw(50, np.random.default_rng(7))
    assert np.array_equal(a, b)
    assert not np.array_equal(a, m.draw(50, np.random.default_rng(8)))


def test_describe_is_json_ready():
    import json

    d = parse_rate("24 +14 -9").describe()
    json.dumps(d)
    assert d["unit"] == RATE_UNIT and d["form"] == "split-lognormal"


@settings(max_examples=300, deadline=None)
@given(
    st.one_of(
        st.text(max_size=30),
        st.text(alphabet="0123456789.+-eE ±/()^_{},.GMpcyr", max_size=20),
        st.from_regex(r"\A-?[0-9.e]{1,6} ?\+?[0-9.]{0,4} ?-?[0-9.]{0,4}( Mpc-3 yr-1)?\Z"),
    )
)
def test_any_text_gives_a_model_or_a_user_error(text):
    # exit-code contract: bad input raises the typed error family, never anything else
    try:
        m = parse_rate(text)
    except GwdeficitError:
        return
    assert m.median > 0 and m.lo90 <= m.median <= m.hi90
