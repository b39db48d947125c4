"""Column aliases, frame markers, header units and the column plan (gwdeficit.io.aliases/units)."""

from __future__ import annotations

import math

import astropy.constants as const
import pytest

from gwdeficit.io.aliases import match_name, normalise, plan_columns
from gwdeficit.io.units import conversion, split_header
from gwdeficit.schema import OptionError, SchemaError, UnitError

# Ordinary trade spellings a user's table may carry -> the quantity we read from them.
SPELLINGS = {
    "event": "event",
    "Event_Name": "event",
    "sample": "sample",
    "weight": "weight",
    "m1": "m1",
    "mass_1": "m1",
    "mass1": "m1",
    "Mass 2": "m2",
    "primary_mass": "m1",
    "secondary_mass": "m2",
    "chirp_mass": "mchirp",
    "mchirp": "mchirp",
    "Mc": "mchirp",
    "mass_ratio": "q",
    "q": "q",
    "total_mass": "mtotal",
    "mtot": "mtotal",
    "eta": "eta",
    "symmetric_mass_ratio": "eta",
    "luminosity_distance": "dl",
    "distance": "dl",
    "dL": "dl",
    "redshift": "z",
    "z": "z",
    "chi1": "chi1",
    "spin1": "chi1",
    "a_1": "chi1",
    "a2": "chi2",
    "spin1x": "chi1x",
    "s1y": "chi1y",
    "chi1z": "chi1z",
    "spin_2z": "chi2z",
    "tilt_1": "tilt1",
    "theta2": "tilt2",
    "cos_tilt_1": "cos_tilt1",
    "phi12": "phi12",
    "phi_12": "phi12",
    "chi_eff": "chi_eff",
    "lambda1": "lambda1",
    "lambda_2": "lambda2",
    "kind": "kind",
    "vt_gpc3_yr": "vt",
}


@pytest.mark.parametrize(("name", "field"), sorted(SPELLINGS.items()))
def test_trade_spellings(name, field):
    m = match_name(name)
    assert m is not None and m.field == field


@pytest.mark.parametrize("name", ["MASS_1", "mass-1", "Mass 1", "mass.1", " mass_1 "])
def test_matching_ignores_case_and_separators(name):
    assert normalise(name) == "mass1"
    assert match_name(name).field == "m1"


@pytest.mark.parametrize(
    ("name", "field", "frame"),
    [
        ("mchirp_det", "mchirp", "detector"),
        ("m1_source", "m1", "source"),
        ("mass_1_detector_frame", "m1", "detector"),
        ("total_mass_src", "mtotal", "source"),
        ("chirp_mass_source", "mchirp", "source"),
        ("m2_detector", "m2", "detector"),
        ("m1", "m1", None),
    ],
)
def test_frame_markers(name, field, frame):
    m = match_name(name)
    assert (m.field, m.frame) == (field, frame)


def test_frame_markers_only_apply_to_masses():
    assert match_name("redshift_det") is None


@pytest.mark.parametrize(
    ("header", "name", "unit"),
    [
        ("m1 [kg]", "m1", "kg"),
        ("dL (Gpc)", "dL", "Gpc"),
        ("tilt1 {deg}", "tilt1", "deg"),
        ("mchirp_det [Msun]", "mchirp_det", "Msun"),
        ("q", "q", None),
        ("(weird)", "(weird)", None),
    ],
)
def test_units_in_headers(header, name, unit):
    assert split_header(header) == (name, unit)


def test_unit_words_after_the_name():
    assert match_name("m1_msun").unit == "solMass"
    assert match_name("dl_gpc").unit == "Gpc"
    assert match_name("tilt2_deg").unit == "deg"


def test_unit_conversions_against_astropy_constants():
    # 1 Msun = 1.988409870698051e30 kg (IAU 2015 Resolution B3 nominal value, via astropy).
    assert conversion("kg", "mass").factor == pytest.approx(1 / const.M_sun.value, rel=1e-12)
    assert conversion("Msun", "mass").factor == 1.0
    assert conversion("Gpc", "length").factor == pytest.approx(1000.0, rel=1e-15)
    assert conversion("kpc", "length").factor == pytest.approx(1e-3, rel=1e-15)
    assert conversion("deg", "angle").factor == pytest.approx(math.pi / 180, rel=1e-15)
    assert conversion("degrees", "angle").factor == pytest.approx(math.pi / 180, rel=1e-15)
    assert conversion("Gpc3 yr", "volume_time").factor == 1.0
    assert conversion("Mpc3 yr", "volume_time").factor == pytest.approx(1e-9, rel=1e-12)
    assert conversion(None, "mass").factor == 1.0


def test_bad_units():
    with pytest.raises(UnitError, match="flubs"):
        conversion("flubs", "mass")
    with pytest.raises(UnitError, match="cannot be converted"):
        conversion("Mpc", "mass")
    # 2 dex(Msun) is 100 Msun, not a scale factor (astropy logarithmic units): refused.
    with pytest.raises(UnitError, match="logarithmic"):
        conversion("dex(solMass)", "mass")


def test_plan_units_from_header_metadata_option():
    plan = plan_columns(
        ["m1 [kg]", "m2", "dist", "tilt1"],
        units={"m2": "g", "tilt1": "deg"},
        metadata_units={"dist": "kpc"},
    )
    assert plan["m1"].unit.factor == pytest.approx(1 / const.M_sun.value)
    assert plan["m1"].unit_origin == "header"
    assert plan["m2"].unit.factor == pytest.approx(1e-3 / const.M_sun.value)
    assert plan["m2"].unit_origin == "option"
    assert plan["dl"].unit_origin == "metadata"
    assert plan["tilt1"].unit.factor == pytest.approx(math.pi / 180)


def test_plan_ambiguous_columns_list_candidates():
    with pytest.raises(SchemaError, match=r"'m1'.*'mass_1'.*--column m1="):
        plan_columns(["m1", "mass_1", "m2", "z"])
    # Same quantity in two frames is ambiguous too; the user picks one.
    with pytest.raises(SchemaError, match="m1_source"):
        plan_columns(["m1_source", "m1_det", "m2", "z"])


def test_plan_user_mapping_wins_and_leaves_the_other_unused():
    plan = plan_columns(["m1_source", "m1_det", "m2", "z"], mapping={"m1_msun": "m1_source"})
    assert plan["m1"].column == "m1_source"
    assert plan["m1"].frame == "source"
    assert "m1_det" in plan.ignored


def test_plan_user_mapping_of_unknown_names():
    plan = plan_columns(["A [kg]", "B", "Dee"], mapping={"m1": "A", "m2": "b", "dl": "Dee"})
    assert plan["m1"].column == "A [kg]" and plan["m2"].column == "B"
    with pytest.raises(SchemaError, match="no column 'C'"):
        plan_columns(["A", "B"], mapping={"m1": "C"})
    with pytest.raises(OptionError, match="not a known quantity"):
        plan_columns(["A", "B"], mapping={"flux": "A"})
    with pytest.raises(OptionError, match="neither"):
        plan_columns(["m1", "m2"], units={"zz": "kg"})


def test_plan_mass_frame_option_applies_only_to_unlabelled_masses():
    plan = plan_columns(["m1", "m2_source", "z"], mass_frame="detector")
    assert (plan["m1"].frame, plan["m1"].frame_given) == ("detector", False)
    assert (plan["m2"].frame, plan["m2"].frame_given) == ("source", True)


def test_plan_rejects_duplicates_and_units_on_labels():
    with pytest.raises(SchemaError, match="duplicate"):
        plan_columns(["m1", "m1", "m2"])
    with pytest.raises(SchemaError, match="cannot carry a unit"):
        plan_columns(["event [kg]", "m1", "m2"])


def test_unknown_columns_are_listed_as_ignored():
    plan = plan_columns(["m1", "m2", "z", "snr", "log_likelihood"])
    assert plan.ignored == ("snr", "log_likelihood")
