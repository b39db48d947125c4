"""The remnant stage's neutron-star branch: NSBH and BNS rows through the neutron-star fits."""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest

from gwdeficit.remnant import NS_EXTRA_COLUMNS, compute_remnants, remnant_arrays


def _catalogue(rows: list[dict]) -> pd.DataFrame:
    base = dict(
        sample=0, weight=1.0, chi1=0.0, chi2=0.0, tilt1_rad=0.0, tilt2_rad=0.0,
        phi12_rad=np.nan, z=0.05, dl_mpc=230.0, lambda1=np.nan, lambda2=np.nan,
        spin_assumption="aligned",
    )  # fmt: skip
    df = pd.DataFrame([{**base, "event": f"e{i}", **r} for i, r in enumerate(rows)])
    df["input_row"] = np.arange(1, len(df) + 1)
    return df


def _run(df: pd.DataFrame, **ns) -> pd.DataFrame:
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return compute_remnants(df, seed=3, ns_options=ns)


def test_heavy_black_hole_nsbh_is_the_bbh_limit():
    # A 20 Msun non-spinning black hole with a 1.35 Msun neutron star (Q ~ 15) does not
    # disrupt the star (Foucart, Hinderer & Nissanke 2018, PRD 98, 081501; from memory: no
    # remnant matter at high mass ratio with low spin), so the binary-black-hole fits apply.
    df = _catalogue([{"m1_msun": 20.0, "m2_msun": 1.35, "lambda2": 400.0, "kind": "NSBH"}])
    out = _run(df)
    assert out.loc[0, "remnant_status"] == "estimated"
    assert out.loc[0, "remnant_kind"] == "BH"
    assert out.loc[0, "ejected_msun"] == 0.0
    assert not out.loc[0, "ns_disrupted"]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # q ~ 0.07 lies outside the BBH fits' range
        bbh = remnant_arrays(20.0, 1.35, 0.0, 0.0, 0.0, 0.0, 0.0, kick_phase=0.0)
    for col in ("mf_msun", "chif", "erad_msun"):
        assert out.loc[0, col] == pytest.approx(float(bbh[col]), rel=1e-6)
    # per-fit columns are filled like a BBH row's, so the rate stage's fit choice sees them
    assert np.isfinite(out.loc[0, "erad_msun__barausse_morozova_rezzolla_2012"])
    assert out.loc[0, "deficit_msun"] == pytest.approx(out.loc[0, "erad_msun"])


def test_disrupted_nsbh_reports_ejecta_and_says_what_is_missing():
    # Low mass ratio and high aligned black-hole spin disrupt the neutron star (Foucart,
    # Hinderer & Nissanke 2018, from memory).
    df = _catalogue(
        [{"m1_msun": 5.0, "m2_msun": 1.4, "chi1": 0.9, "kind": "NSBH", "lambda2": 600.0}]
    )
    out = _run(df)
    assert out.loc[0, "ns_disrupted"]
    assert out.loc[0, "ejected_msun"] > 0.01
    assert out.loc[0, "remnant_status"].startswith("not_estimated:")
    assert np.isnan(out.loc[0, "deficit_msun"])


def test_gw170817_like_bns_radiates_more_than_the_published_lower_limit():
    # GW170817: total mass about 2.74 Msun, E_rad > 0.025 Msun c^2 (Abbott et al. 2017,
    # PRL 119, 161101; from memory).
    df = _catalogue(
        [{"m1_msun": 1.46, "m2_msun": 1.27, "lambda1": 250.0, "lambda2": 500.0, "kind": "BNS"}]
    )
    out = _run(df)
    assert out.loc[0, "remnant_status"] == "estimated"
    assert out.loc[0, "erad_msun"] > 0.025
    assert out.loc[0, "ns_erad_lower_bound"]
    assert out.loc[0, "ejected_msun"] > 0
    assert out.loc[0, "deficit_msun"] == pytest.approx(
        out.loc[0, "erad_msun"] + out.loc[0, "ejected_msun"]
    )


def test_no_tidal_information_is_never_a_silent_default():
    df = _catalogue(
        [
            {"m1_msun": 1.4, "m2_msun": 1.3, "kind": "BNS"},
            {"m1_msun": 6.0, "m2_msun": 1.4, "kind": "NSBH"},
        ]
    )
    out = _run(df)
    assert (out["remnant_status"] == "not_estimated:no_tidal_deformability_or_radius").all()
    assert out["deficit_msun"].isna().all()
    # with a radius given, they are estimated and the choice is recorded
    out = _run(df, ns_radius_km=12.0)
    assert out.loc[0, "remnant_status"] == "estimated"
    assert out.attrs["gwdeficit.neutron_star"]["options"] == {"ns_radius_km": 12.0}
    assert "radius" in out.loc[0, "ns_tidal_source"]


def test_neutron_star_rows_do_not_change_black_hole_rows():
    bbh = {"m1_msun": 30.0, "m2_msun": 20.0, "chi1": 0.5, "tilt1_rad": 1.0, "kind": "BBH"}
    bbh["phi12_rad"] = 0.3
    bns = {"m1_msun": 1.4, "m2_msun": 1.3, "kind": "BNS", "lambda1": 400.0, "lambda2": 400.0}
    alone = _run(_catalogue([bbh, bbh]))
    mixed = _run(_catalogue([bbh, bbh, bns]))
    for col in ("mf_msun", "chif", "erad_msun", "vkick_kms"):
        np.testing.assert_array_equal(alone[col].to_numpy(), mixed[col].to_numpy()[:2])
    assert not set(NS_EXTRA_COLUMNS) & set(alone.columns)
    assert set(NS_EXTRA_COLUMNS) <= set(mixed.columns)


def test_unknown_neutron_star_option_is_a_user_error():
    from gwdeficit.schema import OptionError

    with pytest.raises(OptionError, match="ns_radius_km"):
        df = _catalogue([{"m1_msun": 1.4, "m2_msun": 1.3, "kind": "BNS"}])
        compute_remnants(df, ns_options={"radius": 12})


def test_remnant_command_takes_the_neutron_star_options(workdir):
    from typer.testing import CliRunner

    from gwdeficit import workdir as wd
    from gwdeficit.cli import app

    df = _catalogue(
        [
            {"m1_msun": 30.0, "m2_msun": 25.0, "kind": "BBH"},
            {"m1_msun": 1.4, "m2_msun": 1.3, "kind": "BNS"},
        ]
    )
    wd.write_parquet(df, workdir / wd.CATALOGUE_FILE, {})
    runner = CliRunner()
    res = runner.invoke(app, ["remnant", "--ns-radius", "12", "--mtov", "2.2", "--json"])
    assert res.exit_code == 0, res.output
    out = wd.read_parquet(workdir / wd.REMNANTS_FILE)
    assert (out["remnant_status"] == "estimated").all()
    assert out.attrs["gwdeficit.neutron_star"]["options"] == {
        "ns_radius_km": 12.0,
        "mtov_msun": 2.2,
    }
    res = runner.invoke(app, ["remnant", "--force", "--eos-relation", "nonsense"])
    assert res.exit_code == 2
    assert "nonsense" in res.output
