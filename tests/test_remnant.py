"""The remnant stage API: compute_remnants on catalogue DataFrames and remnant_arrays on arrays.

Catalogue DataFrames are built here directly with the canonical columns. Physics check values
against published results live in tests/reference/test_ref_nr.py; these tests check the
bookkeeping (columns, counts, metadata, errors, reproducibility).
"""

from __future__ import annotations

import json
import warnings

import numpy as np
import pandas as pd
import pytest

import gwdeficit
from gwdeficit import schema
from gwdeficit.fits.registry import REGISTRY, FitRangeWarning
from gwdeficit.remnant import (
    BLOCK_ROWS,
    NS_EXTRA_COLUMNS,
    RemnantInputError,
    compute_remnants,
    remnant_arrays,
    summarize_remnants,
)

NR = [f for f in REGISTRY if f.in_default]


def catalogue(n=60, seed=1, kinds=("BBH",), q_min=0.3, chi_max=0.7, phi12_nan=0.5):
    """A canonical catalogue of ``n`` rows (inside the calibrated ranges by default)."""
    rng = np.random.default_rng(seed)
    m1 = rng.uniform(10, 60, n)
    m2 = m1 * rng.uniform(q_min, 1.0, n)
    phi12 = rng.uniform(0, 2 * np.pi, n)
    phi12[rng.uniform(size=n) < phi12_nan] = np.nan
    df = pd.DataFrame(
        {
            "event": [f"EV{i // 10:03d}" for i in range(n)],
            "sample": np.arange(n) % 10,
            "weight": np.ones(n),
            "m1_msun": m1,
            "m2_msun": m2,
            "chi1": rng.uniform(0, chi_max, n),
            "chi2": rng.uniform(0, chi_max, n),
            "tilt1_rad": np.arccos(rng.uniform(-1, 1, n)),
            "tilt2_rad": np.arccos(rng.uniform(-1, 1, n)),
            "phi12_rad": phi12,
            "z": np.full(n, 0.2),
            "dl_mpc": np.full(n, 1000.0),
            "kind": [kinds[i % len(kinds)] for i in range(n)],
            "spin_assumption": "full",
            "input_row": np.arange(2, n + 2),
        }
    )
    df.attrs[schema.META_COSMOLOGY] = {"name": "Planck18"}
    df.attrs[schema.META_CONVERSIONS] = ["example conversion note"]
    df.attrs[schema.META_PROVENANCE] = [{"stage": "ingest"}]
    return df


def quiet(fn, *args, **kw):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", FitRangeWarning)
        return fn(*args, **kw)


def test_columns_rows_and_inputs_are_kept():
    df = catalogue(kinds=("BBH", "NSBH", "BBH", "BNS"))
    df.index = np.arange(100, 100 + len(df))
    before = df.copy()
    out = compute_remnants(df, seed=3)
    assert list(out.columns[: len(df.columns)]) == list(df.columns)
    remnant_names = [c.name for c in schema.REMNANT_COLUMNS]
    assert list(out.columns[len(df.columns) : len(df.columns) + len(remnant_names)]) == (
        remnant_names
    )
    per_fit = [c for f in REGISTRY for c in f.columns]
    # neutron-star rows add the branch's own columns after the per-fit ones
    assert list(out.columns[len(df.columns) + len(remnant_names) :]) == [
        *per_fit,
        *NS_EXTRA_COLUMNS,
    ]
    assert len(out) == len(df) and (out.index == df.index).all()
    pd.testing.assert_frame_equal(out[df.columns], before)  # nothing altered
    pd.testing.assert_frame_equal(df, before)  # input untouched


def test_every_nr_final_mass_fit_has_mass_and_energy_columns():
    out = compute_remnants(catalogue(), seed=0)
    for f in NR:
        if f.quantity == "final_mass":
            assert f"mf_msun__{f.name}" in out and f"erad_msun__{f.name}" in out


def test_neutron_star_rows_without_tidal_information_are_not_estimated():
    # No lambda and no --ns-radius: never a silent default, never treated as black holes.
    out = compute_remnants(catalogue(kinds=("BBH", "NSBH", "BNS")), seed=0)
    ns = out[out["kind"] != "BBH"]
    assert (ns["remnant_status"] == "not_estimated:no_tidal_deformability_or_radius").all()
    assert (ns["remnant_kind"] == "").all()
    assert not ns["in_fit_range"].any()
    physics = ["mf_msun", "chif", "erad_msun", "deficit_msun", "vkick_kms"]
    physics += [c for f in REGISTRY for c in f.columns]
    assert ns[physics].isna().all().all()
    bbh = out[out["kind"] == "BBH"]
    assert (bbh["remnant_kind"] == "BH").all() and (bbh["remnant_status"] == "estimated").all()
    assert bbh[physics].notna().all().all()
    s = summarize_remnants(out)
    assert s["rows"] == len(out) == sum(s["kinds"].values()) == sum(s["status"].values())
    assert s["estimated"] == len(bbh)


def test_bbh_bookkeeping_and_default_is_mean_of_nr_fits():
    out = compute_remnants(catalogue(), seed=0)
    mtot = out["m1_msun"] + out["m2_msun"]
    np.testing.assert_allclose(out["erad_msun"], mtot - out["mf_msun"], rtol=1e-12)
    np.testing.assert_allclose(out["deficit_msun"], out["erad_msun"], rtol=0)
    assert (out["ejected_msun"] == 0).all()
    np.testing.assert_allclose(out["erad_frac"], out["erad_msun"] / mtot, rtol=1e-12)
    for col, qty in (("chif", "final_spin"), ("erad_msun", "final_mass"), ("vkick_kms", "recoil")):
        vals = np.column_stack([out[f"{col}__{f.name}"] for f in NR if f.quantity == qty])
        np.testing.assert_allclose(out[col], vals.mean(axis=1), rtol=1e-12)
        np.testing.assert_allclose(out[f"{col}_range"], np.ptp(vals, axis=1), atol=1e-12)
        np.testing.assert_allclose(out[f"{col}_std"], vals.std(axis=1), atol=1e-12)
    for f in REGISTRY:
        if f.quantity == "final_mass":
            np.testing.assert_allclose(
                out[f"mf_msun__{f.name}"] + out[f"erad_msun__{f.name}"], mtot, rtol=1e-12
            )
    np.testing.assert_allclose(out["mf_msun_range"], out["erad_msun_range"], rtol=0)


def test_metadata():
    df = catalogue(kinds=("BBH", "NSBH"))
    out = compute_remnants(df, seed=42, inputs={"cat.parquet": "abc123"})
    meta = out.attrs
    assert meta[schema.META_COSMOLOGY] == {"name": "Planck18"}
    assert meta[schema.META_CONVERSIONS] == ["example conversion note"]
    prov = meta[schema.META_PROVENANCE]
    assert prov[0] == {"stage": "ingest"} and prov[-1]["stage"] == "remnant"
    assert prov[-1]["inputs"] == {"cat.parquet": "abc123"}
    assert prov[-1]["params"]["seed"] == 42
    fits_meta = meta[schema.META_FITS]
    assert [m["name"] for m in fits_meta] == [f.name for f in REGISTRY]
    for m in fits_meta:
        assert {"name", "quantity", "citation", "calibrated", "in_default"} <= set(m)
    units = meta[schema.META_UNITS]
    for c in out.columns:
        if out[c].dtype.kind == "f":
            assert c in units, c
    assert units["vkick_kms__lousto_2012"] == "km / s"
    draws = meta[schema.META_REMNANT_DRAWS]
    assert draws["seed"] == 42
    assert draws["kick_phase"]["rows"] == int((df["kind"] == "BBH").sum())
    bbh = df["kind"] == "BBH"
    expected = int((bbh & df["phi12_rad"].isna()).sum())  # random tilts: in-plane spins
    assert draws["phi12"]["rows"] == expected > 0
    json.dumps(meta)  # storable as JSON metadata


def test_seed_reproducibility_and_what_the_draws_touch():
    df = catalogue()
    a = compute_remnants(df, seed=7)
    b = compute_remnants(df, seed=7)
    c = compute_remnants(df, seed=8)
    pd.testing.assert_frame_equal(a, b)
    # the radiated energy does not depend on the drawn angles; the kick does
    np.testing.assert_array_equal(a["erad_msun"], c["erad_msun"])
    assert not np.allclose(a["vkick_kms"], c["vkick_kms"])
    # rows with a known phi12 keep their final spin across seeds
    known = df["phi12_rad"].notna().to_numpy()
    np.testing.assert_array_equal(a["chif"][known], c["chif"][known])
    g = compute_remnants(df, rng=np.random.default_rng(7))
    np.testing.assert_array_equal(g["vkick_kms"], a["vkick_kms"])
    assert g.attrs[schema.META_REMNANT_DRAWS]["seed"] is None


def test_array_api_matches_the_dataframe_api():
    df = catalogue()
    out = compute_remnants(df, seed=5)
    r = remnant_arrays(*(df[c] for c in schema.CATALOGUE_REQUIRED[3:10]), seed=5)
    for key in r:
        np.testing.assert_array_equal(r[key], out[key].to_numpy(), err_msg=key)
    assert r.n_phi12_drawn == out.attrs[schema.META_REMNANT_DRAWS]["phi12"]["rows"]


def test_blocks_do_not_change_results():
    n = BLOCK_ROWS + 37
    rng = np.random.default_rng(9)
    m1 = rng.uniform(10, 50, n)
    m2 = m1 * rng.uniform(0.3, 1, n)
    c1, c2 = rng.uniform(0, 0.7, n), rng.uniform(0, 0.7, n)
    t1, t2 = rng.uniform(0, np.pi, n), rng.uniform(0, np.pi, n)
    p12, ph = rng.uniform(0, 2 * np.pi, n), rng.uniform(0, 2 * np.pi, n)
    full = remnant_arrays(m1, m2, c1, c2, t1, t2, p12, kick_phase=ph)
    idx = np.r_[0:3, BLOCK_ROWS - 2 : BLOCK_ROWS + 2, n - 3 : n]
    part = remnant_arrays(m1[idx], m2[idx], c1[idx], c2[idx], t1[idx], t2[idx], p12[idx],
                          kick_phase=ph[idx])  # fmt: skip
    for key in full:
        np.testing.assert_array_equal(full[key][idx], part[key], err_msg=key)


def test_array_api_broadcasts_and_accepts_either_mass_order():
    r = quiet(remnant_arrays, np.array([[30.0], [20.0]]), np.array([10.0, 20.0, 25.0]), 0.2, 0.1)
    assert r["mf_msun"].shape == (2, 3)
    a = remnant_arrays(36.0, 29.0, 0.3, 0.1, 0.5, 1.0, 2.0, kick_phase=1.0)
    b = remnant_arrays(29.0, 36.0, 0.1, 0.3, 1.0, 0.5, -2.0, kick_phase=1.0)
    for key in a:
        assert float(a[key]) == pytest.approx(float(b[key]), rel=1e-12, abs=1e-12), key


def test_callable_module_and_package_export():
    r = gwdeficit.remnant(36.0, 29.0)
    assert 60 < float(r["mf_msun"]) < 64
    import gwdeficit.remnant as mod

    assert mod.compute_remnants is compute_remnants
    assert float(mod(36.0, 29.0)["mf_msun"]) == float(r["mf_msun"])
    assert gwdeficit.compute_remnants is compute_remnants


def test_out_of_range_rows_warn_and_are_flagged():
    df = catalogue(n=40, q_min=0.05, chi_max=0.99, seed=4)
    with pytest.warns(FitRangeWarning, match=r"\d+ of 40 binary-black-hole rows"):
        out = compute_remnants(df)
    q = out["m2_msun"] / out["m1_msun"]
    inside = (q >= 0.25) & (out["chi1"] <= 0.8) & (out["chi2"] <= 0.8)
    assert (out["in_fit_range"] == inside).all()
    assert 0 < (~inside).sum() < len(out)
    s = summarize_remnants(out)
    assert s["outside_fit_range"] == int((~inside).sum())
    with warnings.catch_warnings():
        warnings.simplefilter("error", FitRangeWarning)
        compute_remnants(catalogue())  # inside: no warning


def test_fit_selection():
    names = ["barausse_rezzolla_2009", "barausse_morozova_rezzolla_2012", "lousto_2012"]
    out = compute_remnants(catalogue(), fits=names)
    per_fit = [c for c in out.columns if "__" in c]
    assert per_fit == [
        "chif__barausse_rezzolla_2009",
        "mf_msun__barausse_morozova_rezzolla_2012",
        "erad_msun__barausse_morozova_rezzolla_2012",
        "vkick_kms__lousto_2012",
    ]
    assert (out["chif_std"] == 0).all()
    with pytest.raises(schema.OptionError):
        compute_remnants(catalogue(), fits=["bardeen_press_teukolsky_1972"])


@pytest.mark.parametrize(
    "column,value,reason",
    [
        ("chi1", 1.2, "spin magnitude"),
        ("chi2", np.nan, "spin magnitude"),
        ("m2_msun", -1.0, "mass"),
        ("m1_msun", np.inf, "mass"),
        ("tilt1_rad", 4.0, "tilt"),
        ("phi12_rad", np.inf, "azimuth"),
    ],
)
def test_bad_bbh_rows_raise_a_typed_error_naming_file_row_and_column(column, value, reason):
    df = catalogue()
    df.loc[[3, 7], column] = value
    with pytest.raises(RemnantInputError, match=reason) as info:
        compute_remnants(df, source="cat.parquet")
    err = info.value
    assert isinstance(err, schema.GwdeficitError)
    assert err.column == column and err.path == "cat.parquet"
    assert err.rows == [int(df["input_row"][3]), int(df["input_row"][7])]
    assert "cat.parquet" in str(err) and column in str(err)


def test_bad_values_in_neutron_star_rows_are_left_to_their_branch():
    df = catalogue(kinds=("BBH", "NSBH"))
    df.loc[1, "chi1"] = 5.0  # an NSBH row
    out = compute_remnants(df)
    assert out.loc[1, "remnant_status"].startswith("not_estimated:")


def test_schema_errors():
    df = catalogue().drop(columns=["tilt2_rad"])
    with pytest.raises(schema.SchemaError, match="tilt2_rad"):
        compute_remnants(df, source="cat.parquet")
    out = compute_remnants(catalogue())
    with pytest.raises(schema.SchemaError, match="already has remnant"):
        compute_remnants(out)
    bad = catalogue()
    bad.loc[2, "kind"] = "WD"
    with pytest.raises(RemnantInputError, match="kind"):
        compute_remnants(bad)


def test_array_api_errors():
    with pytest.raises(RemnantInputError, match="chi1"):
        remnant_arrays([30.0, 30.0], [20.0, 20.0], [0.1, 1.5])
    with pytest.raises(schema.OptionError):
        remnant_arrays(np.ones(3) * 30, np.ones(4) * 20)


def test_progress_callback_reaches_the_total():
    calls = []
    compute_remnants(catalogue(kinds=("BBH", "BNS")), progress=lambda d, t: calls.append((d, t)))
    assert calls[-1] == (60, 60)
    assert [d for d, _ in calls] == sorted(d for d, _ in calls)


def test_summary_quantiles_and_erg():
    out = compute_remnants(catalogue())
    s = summarize_remnants(out)
    # Msun c^2 = 1.787e54 erg (IAU nominal solar mass and c; handbook value, from memory)
    assert s["erg_per_msun_c2"] == pytest.approx(1.787e54, rel=1e-3)
    p50 = s["deficit_quantiles"]["p50"]
    assert p50["msun"] == pytest.approx(float(np.median(out["deficit_msun"])))
    assert p50["erg"] == pytest.approx(p50["msun"] * s["erg_per_msun_c2"])
    assert s["total_deficit_msun"] == pytest.approx(float(out["deficit_msun"].sum()))


def test_array_core_agrees_with_the_float64_public_formulas():
    # the core evaluates angle cosines in float32 (errors <= 3e-7); the per-fit columns must
    # match the float64 reference functions of gwdeficit.fits to that level
    rng = np.random.default_rng(21)
    n = 5000
    m1 = rng.uniform(5, 80, n)
    m2 = m1 * rng.uniform(0.05, 1, n)
    c1, c2 = rng.uniform(0, 1, n), rng.uniform(0, 1, n)
    t1, t2 = np.arccos(rng.uniform(-1, 1, n)), np.arccos(rng.uniform(-1, 1, n))
    t1[:50], t2[50:100] = 1e-4, np.pi - 1e-4  # nearly aligned: in-plane parts from the sine
    p12, ph = rng.uniform(0, 2 * np.pi, n), rng.uniform(0, 2 * np.pi, n)
    r = quiet(remnant_arrays, m1, m2, c1, c2, t1, t2, p12, kick_phase=ph)
    q, mtot = m2 / m1, m1 + m2
    for f in REGISTRY:
        if f.quantity == "final_spin":
            np.testing.assert_allclose(
                r[f.columns[0]], f.function(q, c1, c2, t1, t2, p12), rtol=0, atol=2e-6
            )
        elif f.quantity == "final_mass":
            ref = mtot * f.function(q, c1, c2, t1, t2)
            np.testing.assert_allclose(r[f.columns[1]], ref, rtol=1e-5, atol=1e-9)
        else:
            ref = f.function(q, c1, c2, t1, t2, p12, ph)
            np.testing.assert_allclose(r[f.columns[0]], ref, rtol=1e-5, atol=5e-3)
    assert not r["erad_msun"].flags.writeable
