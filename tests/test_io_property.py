"""Property: any numeric table either loads into a valid catalogue or fails with a typed error.

The example counts are modest for the default suite; the dedicated hostile-input run (marker
``fuzz``) is added separately.
"""

from __future__ import annotations

import csv
import io
import tempfile
from pathlib import Path

import numpy as np
import pandas as pd
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from gwdeficit.io import ingest_table
from gwdeficit.schema import KINDS, SPIN_ASSUMPTIONS, GwdeficitError

NAMES = [
    "m1", "m2", "mass_1", "mchirp", "chirp_mass_det", "q", "eta", "total_mass", "z", "redshift",
    "dL", "distance [Gpc]", "a1", "a2", "tilt1", "tilt2 [deg]", "cos_tilt1", "phi12", "chi1z",
    "chi2z", "spin1x", "chi_eff", "weight", "lambda1", "snr", "sample", "vt",
]  # fmt: skip

hostile = st.one_of(
    st.floats(allow_nan=True, allow_infinity=True, width=64),
    st.floats(min_value=0.0, max_value=100.0),
    st.integers(min_value=-3, max_value=10**6).map(float),
)
# Mostly plausible values (so that rows are accepted too), sometimes anything at all.
plausible = st.floats(min_value=0.01, max_value=0.24)
cells = st.integers(min_value=0, max_value=5).flatmap(lambda k: hostile if k == 0 else plausible)


# Column sets that form a valid parametrisation, so that accepting paths are exercised too.
MASSES = [["m1", "m2"], ["mass_1", "mass_2 [kg]"], ["mchirp", "q"], ["chirp_mass_det", "eta"],
          ["total_mass", "q"], ["mchirp", "mtotal"]]  # fmt: skip
DISTANCES = [["z"], ["dL"], ["distance [Gpc]"], ["redshift", "luminosity_distance"]]
SPINS = [[], ["a1", "a2", "tilt1", "tilt2 [deg]"], ["chi1z", "chi2z"], ["chi_eff"],
         ["spin1x", "spin1y", "spin1z", "spin2x", "spin2y", "spin2z"], ["a1", "a2", "cos_tilt1",
         "cos_tilt2"]]  # fmt: skip
EXTRAS = ["snr", "weight", "lambda1", "lambda2", "phi12", "vt", "chi_eff", "eta", "sample"]


@st.composite
def numeric_tables(draw) -> pd.DataFrame:
    if draw(st.integers(min_value=0, max_value=3)) == 0:  # a quarter: any names at all
        cols = draw(st.lists(st.sampled_from(NAMES), min_size=1, max_size=9, unique=True))
    else:
        cols = [*draw(st.sampled_from(MASSES)), *draw(st.sampled_from(DISTANCES)),
                *draw(st.sampled_from(SPINS))]  # fmt: skip
        extra = draw(st.lists(st.sampled_from(EXTRAS), max_size=3, unique=True))
        cols += [c for c in extra if c not in cols]
    n = draw(st.integers(min_value=0, max_value=8))
    return pd.DataFrame({c: draw(st.lists(cells, min_size=n, max_size=n)) for c in cols})


def check_catalogue(res) -> None:
    cat, s = res.catalogue, res.summary
    assert s["rows_read"] == s["rows_accepted"] + s["rows_rejected"]
    assert len(cat) == s["rows_accepted"] and len(res.rejects) == s["rows_rejected"]
    assert sum(s["rejects_by_reason"].values()) == s["rows_rejected"]
    if len(cat) == 0:
        return
    # Only phi12 and an optional tidal deformability that was not supplied may be missing.
    lam = [c for c in ("lambda1", "lambda2") if c in cat.columns]
    num = cat.drop(columns=["event", "kind", "spin_assumption", "phi12_rad", *lam])
    assert np.isfinite(num.to_numpy(dtype=float)).all()
    for c in lam:
        assert (cat[c].isna() | (cat[c] >= 0)).all()
        missing_noted = any("not given, left missing (NaN)" in n for n in s["conversions"])
        assert cat[c].notna().all() or missing_noted
    assert (cat["m1_msun"] >= cat["m2_msun"]).all() and (cat["m2_msun"] > 0).all()
    for c in ("chi1", "chi2"):
        assert cat[c].between(0, 1).all()
    for c in ("tilt1_rad", "tilt2_rad"):
        assert cat[c].between(0, np.pi).all()
    phi = cat["phi12_rad"].dropna()
    assert ((phi >= 0) & (phi < 2 * np.pi)).all()
    assert (cat["z"] >= 0).all() and (cat["dl_mpc"] >= 0).all() and (cat["weight"] >= 0).all()
    assert set(cat["kind"]) <= set(KINDS)
    assert set(cat["spin_assumption"]) <= set(SPIN_ASSUMPTIONS)
    assert sorted(cat["input_row"].tolist() + res.rejects["input_row"].tolist()) == list(
        range(1, s["rows_read"] + 1)
    )


@settings(max_examples=200, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(numeric_tables(), st.sampled_from(["error", "skip"]))
def test_numeric_tables_load_or_fail_typed(df, on_bad):
    try:
        res = ingest_table(df, on_bad=on_bad, batch_rows=5)
    except GwdeficitError:
        return
    check_catalogue(res)


text_cells = st.one_of(
    st.sampled_from(["", "nan", "NaN", "inf", "-inf", "1e400", "-0", "abc", " 3 ", "0.5", "2"]),
    st.floats(allow_nan=False, allow_infinity=False).map(repr),
    st.text(alphabet='0123456789.-+eE ,"x', max_size=6),
)


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(
    st.lists(st.sampled_from(NAMES), min_size=1, max_size=7, unique=True),
    st.integers(min_value=0, max_value=8),
    st.data(),
)
def test_text_tables_load_or_fail_typed(cols, n, data):
    buf = io.StringIO()
    w = csv.writer(buf)
    w.writerow(cols)
    for _ in range(n):
        w.writerow([data.draw(text_cells) for _ in cols])
    with tempfile.TemporaryDirectory() as d:
        p = Path(d) / "t.csv"
        p.write_text(buf.getvalue())
        try:
            res = ingest_table(p, on_bad="skip")
        except GwdeficitError:
            return
    check_catalogue(res)
