"""Validation, parametrisations, labels and the counts identity (gwdeficit.io.validate)."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from gwdeficit import convert
from gwdeficit.io import ingest_table, load_catalogue
from gwdeficit.schema import (
    CATALOGUE_REQUIRED,
    META_CONVERSIONS,
    BadRowsError,
    OptionError,
    SchemaError,
)


def csv(tmp_path, text: str, name: str = "t.csv"):
    p = tmp_path / name
    p.write_text(text.strip() + "\n")
    return p


GOOD = "m1,m2,z\n30,20,0.1\n"


# --------------------------------------------------------------------------------------------
# Bad rows: one case per class; error mode names file, column, rows; skip mode keeps counts.
# --------------------------------------------------------------------------------------------

BAD_CASES = [
    # (header, bad row, column named, reason fragment)
    ("m1,m2,z", "abc,20,0.1", "m1", "not a number"),
    ("m1,m2,z", "30,,0.1", "m2", "missing value"),
    ("m1,m2,z", "30,nan,0.1", "m2", "missing value"),
    ("m1,m2,z", "inf,20,0.1", "m1", "infinite"),
    ("m1,m2,z", "-30,20,0.1", "m1", "mass <= 0"),
    ("m1,m2,z", "30,0,0.1", "m2", "mass <= 0"),
    ("m1,m2,z", "30,20,-0.1", "z", "redshift < 0"),
    ("m1,m2,dl", "30,20,-5", "dl", "distance < 0"),
    ("m1,m2,z,chi1,chi2,tilt1,tilt2", "30,20,0.1,1.2,0,0,0", "chi1", "outside 0..1"),
    ("m1,m2,z,chi1,chi2,tilt1,tilt2", "30,20,0.1,0.5,0.5,0,4", "tilt2", "outside 0..pi"),
    ("m1,m2,z,chi1z,chi2z", "30,20,0.1,0.5,-1.5", "chi2z", "outside -1..1"),
    (
        "m1,m2,z,spin1x,spin1y,spin1z,spin2x,spin2y,spin2z",
        "30,20,0.1,0.8,0.8,0,0,0,0",
        "spin1x",
        "longer than 1",
    ),
    ("mchirp,q,z", "20,0,0.1", "q", "mass ratio <= 0"),
    ("mchirp,eta,z", "20,0.3,0.1", "eta", "outside (0, 0.25]"),
    ("m1,m2,z,weight", "30,20,0.1,-1", "weight", "weight < 0"),
    ("m1,m2,z,lambda1,lambda2", "1.4,1.3,0.01,-3,100", "lambda1", "tidal deformability < 0"),
    ("event,sample,m1,m2,z", "A,1.5,30,20,0.1", "sample", "not an integer"),
    ("event,m1,m2,z", ",30,20,0.1", "event", "missing event label"),
    ("m1,m2,z,kind", "30,20,0.1,XYZ", "kind", "unknown kind"),
    ("m1,m2,z,cos_tilt1,chi1,chi2,tilt2", "30,20,0.1,1.5,0.1,0.1,0", "cos_tilt1", "outside -1..1"),
    # redundant columns that disagree (chirp mass 1% off; Mc(30, 20) = 21.24 Msun)
    ("m1,m2,mchirp,z", "30,20,21.5,0.1", "mchirp", "disagrees with the component masses"),
    ("m1,m2,q,z", "30,20,0.5,0.1", "q", "disagrees"),
    ("m1,m2,z,dl", "30,20,0.1,300", "dl", "disagrees with the redshift"),
    ("m1,m2,z,chi1z,chi2z,chi_eff", "30,20,0.1,0.5,0.5,0.1", "chi_eff", "disagrees"),
    ("mchirp,mtotal,z", "40,50,0.1", "mchirp, mtotal", "no pair of positive masses"),
]


@pytest.mark.parametrize(("header", "row", "column", "reason"), BAD_CASES)
def test_bad_row_error_mode(tmp_path, header, row, column, reason):
    good = ",".join(_good_values(header))
    p = csv(tmp_path, f"{header}\n{good}\n{row}\n{good}\n")
    with pytest.raises(BadRowsError) as info:
        load_catalogue(p)
    err = info.value
    assert err.path == str(p)
    assert err.column == column
    assert reason in err.reason
    assert err.rows == [2]
    assert "--on-bad skip" in str(err)


@pytest.mark.parametrize(("header", "row", "column", "reason"), BAD_CASES)
def test_bad_row_skip_mode_keeps_the_row_verbatim(tmp_path, header, row, column, reason):
    good = ",".join(_good_values(header))
    p = csv(tmp_path, f"{header}\n{good}\n{row}\n{good}\n")
    res = ingest_table(p, on_bad="skip")
    s = res.summary
    assert (s["rows_read"], s["rows_accepted"], s["rows_rejected"]) == (3, 2, 1)
    assert s["rows_read"] == s["rows_accepted"] + s["rows_rejected"]
    assert res.catalogue["input_row"].tolist() == [1, 3]
    assert res.rejects["input_row"].tolist() == [2]
    cells = res.rejects.drop(columns=["input_row", "reason"]).iloc[0].tolist()
    assert cells == row.split(",")  # verbatim text as read
    (text,) = s["rejects_by_reason"]
    assert reason in text and column.split(",")[0] in text
    assert res.rejects["reason"].iloc[0] == text


def _good_values(header: str) -> list[str]:
    good = {
        "m1": "30",
        "m2": "20",
        "z": "0.1",
        "dl": "500",
        "chi1": "0.5",
        "chi2": "0.5",
        "tilt1": "1",
        "tilt2": "1",
        "chi1z": "0.5",
        "chi2z": "0.5",
        "mchirp": repr(float(convert.chirp_mass(30.0, 20.0))),
        "q": repr(20 / 30),
        "eta": "0.24",
        "weight": "1",
        "lambda1": "300",
        "lambda2": "300",
        "event": "A",
        "sample": "0",
        "kind": "BBH",
        "cos_tilt1": "0.5",
        "mtotal": "50",
        "spin1x": "0",
        "spin1y": "0",
        "spin1z": "0",
        "spin2x": "0",
        "spin2y": "0",
        "spin2z": "0",
        "chi_eff": "0.5",
    }
    cols = header.split(",")
    values = [good[c] for c in cols]
    if "dl" in cols and "z" in cols:
        values[cols.index("dl")] = repr(float(convert.luminosity_distance(0.1)))
    if "lambda1" in cols:
        values[cols.index("m1")], values[cols.index("m2")] = "1.4", "1.3"
    return values


def test_error_lists_first_20_rows_and_the_total(tmp_path):
    rows = "\n".join(["-1,1,0.1"] * 25)
    p = csv(tmp_path, f"m1,m2,z\n{rows}\n")
    with pytest.raises(BadRowsError) as info:
        load_catalogue(p)
    assert info.value.n_total == 25
    assert "rows 1, 2, 3" in str(info.value) and "(and 5 more)" in str(info.value)


def test_first_failing_column_wins_and_reasons_are_counted(tmp_path):
    p = csv(tmp_path, "m1,m2,z\nabc,-1,0.1\n30,-1,0.1\n30,20,-1\n30,20,0.1\n30,-2,0.1\n")
    s = ingest_table(p, on_bad="skip").summary
    assert s["rejects_by_reason"] == {
        "column 'm2': mass <= 0": 2,
        "column 'm1': not a number": 1,
        "column 'z': redshift < 0": 1,
    }
    assert s["rows_read"] == 5 == s["rows_accepted"] + s["rows_rejected"]


def test_degree_values_without_a_unit_get_a_hint(tmp_path):
    p = csv(tmp_path, "m1,m2,z,a1,a2,tilt1,tilt2\n30,20,0.1,0.5,0.5,45,90\n")
    with pytest.raises(BadRowsError, match=r"look like degrees.*--unit tilt1=deg"):
        load_catalogue(p)
    cat = load_catalogue(p, units={"tilt1": "deg", "tilt2": "deg"})
    assert cat["tilt1_rad"].iloc[0] == pytest.approx(np.pi / 4)


# --------------------------------------------------------------------------------------------
# Schema-level errors
# --------------------------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("text", "match"),
    [
        ("m1,z\n30,0.1", "cannot form component masses"),
        ("m1,m2\n30,20", "no redshift or luminosity distance"),
        ("m1,m2,z,s1x,s1y,s1z\n30,20,0.1,0,0,0", "spin vectors are incomplete"),
        ("m1,m2,z,chi1,chi2\n30,20,0.1,0,0", "tilt"),
        ("m1,m2,z,tilt1,tilt2\n30,20,0.1,0,0", "without spin magnitudes"),
        ("m1,m2,z,chi1z\n30,20,0.1,0", "missing chi2z"),
        ("m1,mass_1,m2,z\n30,30,20,0.1", "several columns could be m1"),
        ("m1 [parsec],m2,z\n30,20,0.1", "cannot be converted"),
        ("m1 [blorp],m2,z\n30,20,0.1", "not a unit"),
    ],
)
def test_schema_errors(tmp_path, text, match):
    with pytest.raises(SchemaError, match=match):
        load_catalogue(csv(tmp_path, text))


def test_option_errors(tmp_path):
    p = csv(tmp_path, GOOD)
    with pytest.raises(OptionError, match="cosmology"):
        load_catalogue(p, cosmology="Nope")
    with pytest.raises(OptionError, match="mass frame"):
        load_catalogue(p, mass_frame="lab")
    with pytest.raises(OptionError, match="on-bad"):
        load_catalogue(p, on_bad="ignore")
    with pytest.raises(OptionError):
        load_catalogue(p, ns_max_mass=-1)


def test_mixed_mass_ratio_conventions(tmp_path):
    p = csv(tmp_path, "mchirp,q,z\n20,0.5,0.1\n20,2.0,0.1\n")
    with pytest.raises(SchemaError, match="mixed mass-ratio conventions"):
        load_catalogue(p, on_bad="skip")
    # ... also when the two conventions sit in different batches
    with pytest.raises(SchemaError, match="mixed"):
        load_catalogue(p, batch_rows=1)


# --------------------------------------------------------------------------------------------
# Parametrisations
# --------------------------------------------------------------------------------------------


def test_q_above_one_is_detected_and_inverted(tmp_path):
    a = load_catalogue(csv(tmp_path, "mchirp,q,z\n20,0.5,0.1\n20,1,0.1", "a.csv"))
    b = load_catalogue(csv(tmp_path, "mchirp,q,z\n20,2.0,0.1\n20,1,0.1", "b.csv"))
    np.testing.assert_allclose(b["m1_msun"], a["m1_msun"], rtol=1e-14)
    assert any("m1/m2 >= 1: inverted" in c for c in b.attrs[META_CONVERSIONS])
    assert any("q = m2/m1 <= 1" in c for c in a.attrs[META_CONVERSIONS])


def test_all_mass_parametrisations_agree(tmp_path):
    m1, m2, z = 35.0, 12.0, 0.3
    mc, mt = float(convert.chirp_mass(m1, m2)), m1 + m2
    q, eta = m2 / m1, float(convert.symmetric_mass_ratio(m1, m2))
    tables = {
        "m1,m2": f"{m1},{m2}",
        "mchirp,q": f"{mc!r},{q!r}",
        "mchirp,eta": f"{mc!r},{eta!r}",
        "mtotal,q": f"{mt!r},{q!r}",
        "mtotal,eta": f"{mt!r},{eta!r}",
        "chirp_mass,total_mass": f"{mc!r},{mt!r}",
        "m1,m2,mchirp,mtotal,q,eta": f"{m1},{m2},{mc!r},{mt!r},{q!r},{eta!r}",
    }
    for i, (head, row) in enumerate(tables.items()):
        cat = load_catalogue(csv(tmp_path, f"{head},z\n{row},{z}", f"{i}.csv"))
        np.testing.assert_allclose(cat[["m1_msun", "m2_msun"]].iloc[0], [m1, m2], rtol=1e-7)


def test_detector_frame_masses(tmp_path):
    # m_source = m_det / (1 + z) (Krolak & Schutz 1987, GRG 19, 1163; from memory).
    labelled = load_catalogue(csv(tmp_path, "m1_det,m2_det,z\n32.7,21.8,0.09", "a.csv"))
    np.testing.assert_allclose(labelled[["m1_msun", "m2_msun"]].iloc[0], [30.0, 20.0])
    plain = csv(tmp_path, "m1,m2,z\n32.7,21.8,0.09", "b.csv")
    np.testing.assert_allclose(load_catalogue(plain)["m1_msun"], [32.7])
    det = load_catalogue(plain, mass_frame="detector")
    np.testing.assert_allclose(det["m1_msun"], [30.0])
    assert any("--mass-frame detector" in c for c in det.attrs[META_CONVERSIONS])
    src = load_catalogue(
        csv(tmp_path, "m1_source,m2_source,z\n32.7,21.8,0.09", "c.csv"), mass_frame="detector"
    )
    np.testing.assert_allclose(src["m1_msun"], [32.7])


def test_distance_and_redshift(tmp_path):
    cat = load_catalogue(csv(tmp_path, "m1,m2,dL [Gpc]\n30,20,1.0", "a.csv"))
    assert cat["dl_mpc"].iloc[0] == 1000.0
    assert cat["z"].iloc[0] == pytest.approx(float(convert.redshift_from_distance(1000.0)))
    cat = load_catalogue(csv(tmp_path, "m1,m2,redshift\n30,20,0.5", "b.csv"), cosmology="WMAP9")
    assert cat["dl_mpc"].iloc[0] == pytest.approx(float(convert.luminosity_distance(0.5, "WMAP9")))
    assert cat.attrs["gwdeficit.cosmology"]["name"] == "WMAP9"


# --------------------------------------------------------------------------------------------
# Spins
# --------------------------------------------------------------------------------------------


def test_spin_vectors(tmp_path):
    p = csv(tmp_path, "m1,m2,z,s1x,s1y,s1z,s2x,s2y,s2z\n30,20,0.1,0.3,0,0.4,0,-0.5,0")
    cat = load_catalogue(p)
    r = cat.iloc[0]
    assert (r.chi1, r.chi2) == (pytest.approx(0.5), pytest.approx(0.5))
    assert r.tilt1_rad == pytest.approx(np.arccos(0.8))
    assert r.tilt2_rad == pytest.approx(np.pi / 2)
    assert r.phi12_rad == pytest.approx(1.5 * np.pi)
    assert r.spin_assumption == "full"


def test_aligned_effective_and_no_spins(tmp_path):
    aligned = load_catalogue(csv(tmp_path, "m1,m2,z,chi1z,chi2z\n30,20,0.1,0.4,-0.2", "a.csv"))
    r = aligned.iloc[0]
    assert (r.chi1, r.chi2, r.tilt1_rad, r.tilt2_rad) == (0.4, 0.2, 0.0, np.pi)
    assert r.spin_assumption == "aligned"
    eff = load_catalogue(csv(tmp_path, "m1,m2,z,chi_eff\n30,20,0.1,-0.3", "b.csv"))
    r = eff.iloc[0]
    assert (r.chi1, r.chi2, r.tilt1_rad, r.tilt2_rad) == (0.3, 0.3, np.pi, np.pi)
    assert r.spin_assumption == "effective"
    # equal aligned spins reproduce chi_eff (Ajith et al. 2011, PRL 106, 241101; definition)
    assert convert.effective_spin(30, 20, r.chi1, r.chi2, r.tilt1_rad, r.tilt2_rad) == (
        pytest.approx(-0.3)
    )
    none = load_catalogue(csv(tmp_path, GOOD, "c.csv"))
    assert none[["chi1", "chi2"]].iloc[0].tolist() == [0.0, 0.0]
    assert none.attrs["gwdeficit.summary"]["spin_assumption"] == {"none": 1}
    assert "spins: none given, set to zero (spin_assumption=none)" in none.attrs[META_CONVERSIONS]


def test_phi12_may_be_missing_with_magnitudes(tmp_path):
    p = csv(
        tmp_path,
        "m1,m2,z,a1,a2,tilt1,tilt2,phi12\n30,20,0.1,0.5,0.5,1,1,\n30,20,0.1,0.5,0.5,1,1,-1",
    )
    cat = load_catalogue(p)
    assert np.isnan(cat["phi12_rad"].iloc[0])
    assert cat["phi12_rad"].iloc[1] == pytest.approx(2 * np.pi - 1)


def test_swap_when_m1_below_m2_moves_spins_and_tides(tmp_path):
    p = csv(
        tmp_path,
        "m1,m2,z,a1,a2,tilt1,tilt2,phi12,lambda1,lambda2\n"
        "1.2,1.5,0.01,0.01,0.03,0.5,1.0,1.0,800,300\n"
        "1.5,1.2,0.01,0.01,0.03,0.5,1.0,1.0,300,800\n",
    )
    cat = load_catalogue(p)
    a = cat.iloc[0]
    assert (a.m1_msun, a.m2_msun, a.chi1, a.chi2) == (1.5, 1.2, 0.03, 0.01)
    assert (a.tilt1_rad, a.tilt2_rad, a.lambda1, a.lambda2) == (1.0, 0.5, 300.0, 800.0)
    assert a.phi12_rad == pytest.approx(2 * np.pi - 1.0)
    assert cat.attrs["gwdeficit.summary"]["m1_m2_swapped"] == 1
    assert any("swapped" in c for c in cat.attrs[META_CONVERSIONS])


# --------------------------------------------------------------------------------------------
# Labels: kind, events, samples, weights, pass-through columns
# --------------------------------------------------------------------------------------------


def test_kind_from_masses_and_threshold(tmp_path):
    # Neutron-star maximum mass 3 Msun: common practice, no source.
    p = csv(tmp_path, "m1,m2,z\n30,20,0.1\n10,1.4,0.1\n1.5,1.3,0.01\n2.9,2.5,0.01")
    assert load_catalogue(p)["kind"].tolist() == ["BBH", "NSBH", "BNS", "BNS"]
    assert load_catalogue(p, ns_max_mass=2.0)["kind"].tolist() == ["BBH", "NSBH", "BNS", "BBH"]
    q = csv(tmp_path, "m1,m2,z,kind\n30,20,0.1,bhns\n1.5,1.3,0.01, bbh", "k.csv")
    assert load_catalogue(q)["kind"].tolist() == ["NSBH", "BBH"]


def test_events_and_samples(tmp_path):
    solo = load_catalogue(csv(tmp_path, "m1,m2,z\n30,20,0.1\n31,20,0.1", "a.csv"))
    assert solo["event"].tolist() == ["row1", "row2"] and solo["sample"].tolist() == [0, 0]
    numbered = load_catalogue(
        csv(tmp_path, "event,m1,m2,z\nA,30,20,0.1\nB,30,20,0.1\nA,1,1,0", "b.csv")
    )
    assert numbered["sample"].tolist() == [0, 0, 1]
    s = numbered.attrs["gwdeficit.summary"]
    assert (s["events"], s["samples_per_event"]) == (2, {"min": 1, "median": 1.5, "max": 2})
    given = load_catalogue(csv(tmp_path, "event,sample,m1,m2,z\nA,7,30,20,0.1", "c.csv"))
    assert given["sample"].tolist() == [7]
    one = load_catalogue(csv(tmp_path, "m1,m2,z\n30,20,0.1\n31,20,0.1", "d.csv"), event="GWX")
    assert one["event"].tolist() == ["GWX", "GWX"] and one["sample"].tolist() == [0, 1]
    with pytest.raises(OptionError, match="already has an event column"):
        load_catalogue(csv(tmp_path, "event,m1,m2,z\nA,30,20,0.1", "e.csv"), event="GWX")


def test_weights_vt_and_canonical_columns(tmp_path):
    p = csv(tmp_path, "m1,m2,z,weight,vt [Gpc3 yr]\n30,20,0.1,0.25,3.5")
    cat = load_catalogue(p)
    assert cat["weight"].tolist() == [0.25] and cat["vt_gpc3_yr"].tolist() == [3.5]
    assert list(cat.columns[: len(CATALOGUE_REQUIRED) - 3]) == list(CATALOGUE_REQUIRED[:-3])
    assert cat.attrs["gwdeficit.units"]["vt_gpc3_yr"] == "Gpc3 yr"
    plain = load_catalogue(csv(tmp_path, GOOD, "b.csv"))
    assert plain["weight"].tolist() == [1.0]
    assert "vt_gpc3_yr" not in plain.columns and "lambda1" not in plain.columns


def test_a_catalogue_can_be_ingested_again(tmp_path):
    p = csv(tmp_path, "event,m1,m2,dl,a1,a2,tilt1,tilt2,phi12\nA,30,20,400,0.5,0.2,1,2,3")
    first = load_catalogue(p)
    again_path = tmp_path / "again.parquet"
    first.to_parquet(again_path)
    again = load_catalogue(again_path)
    pd.testing.assert_frame_equal(again, first, check_exact=False, rtol=1e-12)


def test_dataframe_input_and_metadata(tmp_path):
    df = pd.DataFrame({"mass_1": [30.0, 10.0], "mass_2": [20.0, 5.0], "redshift": [0.1, 0.2]})
    cat = load_catalogue(df)
    assert len(cat) == 2
    meta = cat.attrs
    assert meta["gwdeficit.units"]["m1_msun"] == "solMass"
    assert meta["gwdeficit.provenance"][0]["stage"] == "ingest"
    assert meta["gwdeficit.cosmology"]["name"] == "Planck18"
    assert meta["gwdeficit.summary"]["counts_add_up"] is True
