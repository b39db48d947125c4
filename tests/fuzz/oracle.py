"""Checks that a hostile case was handled correctly, through the API and through the CLI."""

from __future__ import annotations

import csv
import io
import shutil
import tempfile
import warnings
from pathlib import Path

import numpy as np

from gwdeficit.schema import CATALOGUE_REQUIRED, KINDS, GwdeficitError

from .strategies import Case, planck18_dl

_TMP_ROOT = Path(tempfile.gettempdir())


def _write(case: Case, folder: Path) -> Path:
    path = folder / case.filename
    path.write_bytes(case.payload)
    return path


def check_api(case: Case, on_bad: str) -> None:
    """Load a case with :func:`gwdeficit.io.ingest_table` and check everything the oracle fixes.

    Any exception other than a GwdeficitError propagates and fails the test.
    """
    from gwdeficit.io import ingest_table

    folder = Path(tempfile.mkdtemp(prefix="gwdeficit-fuzz-", dir=_TMP_ROOT))
    try:
        path = _write(case, folder)
        try:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")  # astropy warns about damaged FITS headers
                res = ingest_table(path, on_bad=on_bad)
        except GwdeficitError as exc:
            assert str(exc), "a typed error without a message"
            assert case.outcome != "load" or _bad_rows_allowed(case, on_bad, exc), (
                f"valid input refused: {type(exc).__name__}: {exc}"
            )
            return
        assert case.outcome != "error", "input that must be refused was loaded"
        check_result(case, on_bad, res.catalogue, res.rejects, res.summary)
    finally:
        shutil.rmtree(folder, ignore_errors=True)


def _bad_rows_allowed(case: Case, on_bad: str, exc: BaseException | str) -> bool:
    """A BadRowsError is the right answer under on_bad='error' when some row is (or may be) bad."""
    from gwdeficit.schema import BadRowsError

    is_bad_rows = isinstance(exc, BadRowsError) or (
        isinstance(exc, str) and "Fix the input, or pass --on-bad skip" in exc
    )
    return on_bad == "error" and is_bad_rows and bool(case.must_reject or case.maybe_reject)


def _spins_match(got, want, swapped: bool) -> bool:
    other = {"chi1": "chi2", "chi2": "chi1", "tilt1_rad": "tilt2_rad", "tilt2_rad": "tilt1_rad"}
    return all(
        np.isclose(got[k], want[other[k] if swapped else k], rtol=1e-12, atol=1e-12) for k in other
    )


def check_result(case: Case, on_bad: str, cat, rej, summary) -> None:
    """The invariants of a loaded case (the catalogue, the rejects and the summary)."""
    read, acc, n_rej = summary["rows_read"], summary["rows_accepted"], summary["rows_rejected"]
    assert read == acc + n_rej, f"counts do not add up: {read} != {acc} + {n_rej}"
    assert summary["counts_add_up"] is True
    assert len(cat) == acc and len(rej) == n_rej
    assert sum(summary["rejects_by_reason"].values()) == n_rej
    if case.n_rows is not None:
        assert read == case.n_rows, f"{read} rows read, the file holds {case.n_rows}"
    if on_bad == "error":
        assert n_rej == 0
    # every data row is accounted for exactly once
    acc_rows = [int(r) for r in cat["input_row"]]
    rej_rows = [int(r) for r in rej.iloc[:, 0]] if n_rej else []
    assert sorted(acc_rows + rej_rows) == list(range(1, read + 1)), "rows lost or duplicated"
    # the catalogue itself is sane
    assert all(c in cat.columns for c in CATALOGUE_REQUIRED)
    if acc:
        m1, m2 = cat["m1_msun"].to_numpy(), cat["m2_msun"].to_numpy()
        assert np.all(np.isfinite(m1) & np.isfinite(m2) & (m2 > 0) & (m1 >= m2))
        for c in ("chi1", "chi2"):
            assert np.all((cat[c] >= 0) & (cat[c] <= 1))
        for c in ("tilt1_rad", "tilt2_rad"):
            assert np.all((cat[c] >= 0) & (cat[c] <= np.pi * (1 + 1e-12)))
        assert np.all((cat["z"] >= 0) & np.isfinite(cat["z"]))
        assert np.all((cat["dl_mpc"] >= 0) & np.isfinite(cat["dl_mpc"]))
        assert np.all((cat["weight"] >= 0) & np.isfinite(cat["weight"]))
        assert set(cat["kind"]) <= set(KINDS)
    by_row = {int(r): i for i, r in enumerate(acc_rows)}
    for r in case.must_reject:
        assert r not in by_row, f"row {r} must be rejected but was accepted"
    if on_bad == "error" and case.must_reject and read:
        raise AssertionError("bad rows present but no BadRowsError under on_bad='error'")
    assert not (set(case.expected) & case.must_reject)
    for r, want in case.expected.items():
        assert r in by_row, f"valid row {r} was not accepted"
        got = cat.iloc[by_row[r]]
        for key in ("m1_msun", "m2_msun", "weight"):
            if key in want:
                assert np.isclose(got[key], want[key], rtol=1e-12, atol=1e-12), (r, key)
        orders = [False, True] if want.get("_tie") else [False]  # equal masses: either order
        assert any(_spins_match(got, want, swapped) for swapped in orders), (
            r,
            "spins",
            [got[k] for k in ("chi1", "chi2", "tilt1_rad", "tilt2_rad")],
            want,
        )
        if "event" in want:
            assert got["event"] == want["event"], (r, got["event"], want["event"])
        if "dl_given_mpc" in want:
            assert np.isclose(got["dl_mpc"], want["dl_given_mpc"], rtol=1e-12, atol=1e-9)
    # Distances against astropy's Planck18, one vectorised call per case.
    rows = [r for r in case.expected]
    if not rows:
        return
    got_z = np.array([cat.iloc[by_row[r]]["z"] for r in rows], dtype=float)
    got_dl = np.array([cat.iloc[by_row[r]]["dl_mpc"] for r in rows], dtype=float)
    want_z = np.array([case.expected[r]["z"] for r in rows], dtype=float)
    if "distance:dl" in case.tags:
        # z from the loader's inversion: Planck18 d_L at that z gives back the given distance
        want_dl = np.array([case.expected[r]["dl_given_mpc"] for r in rows], dtype=float)
        assert np.allclose(planck18_dl(got_z), want_dl, rtol=1e-6, atol=1e-6), "z from d_L"
        assert np.allclose(got_z, want_z, rtol=1e-6, atol=1e-9), "z from d_L"
    else:
        assert np.array_equal(got_z, want_z), "z altered"
        assert np.allclose(got_dl, planck18_dl(want_z), rtol=1e-6, atol=1e-6), "d_L from z"


def check_cli(case: Case, on_bad: str) -> None:
    """Run ``gwdeficit ingest`` on a case: exit 0 or 2 (never 1), outputs consistent with it."""
    import pyarrow.parquet as pq
    from typer.testing import CliRunner

    from gwdeficit.cli import app
    from gwdeficit.workdir import TMP_PREFIX

    folder = Path(tempfile.mkdtemp(prefix="gwdeficit-fuzz-", dir=_TMP_ROOT))
    try:
        path = _write(case, folder)
        work = folder / "work"
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            res = CliRunner().invoke(
                app,
                ["ingest", str(path), "--workdir", str(work), "--on-bad", on_bad, "--json"],
                env={"GWDEFICIT_DEBUG": None, "GWDEFICIT_WORKDIR": None},
            )
        assert res.exit_code in (0, 2), f"exit {res.exit_code}: {res.output[-2000:]}"
        assert "Traceback" not in res.output
        assert not list(work.glob(TMP_PREFIX + "*")), "temporary files left behind"
        assert path.read_bytes() == case.payload, "the input was modified"
        if res.exit_code == 2:
            assert res.stderr.startswith("error: ")
            assert case.outcome != "load" or _bad_rows_allowed(case, on_bad, res.stderr), res.stderr
            assert not (work / "catalogue.parquet").exists(), "partial output after an error"
            return
        assert case.outcome != "error", "input that must be refused was loaded"
        table = pq.read_table(work / "catalogue.parquet")
        with open(work / "rejects.csv", encoding="utf-8", newline="") as fh:
            reader = csv.reader(io.StringIO(fh.read()))
            rej_rows = list(reader)[1:]
        import json

        summary = json.loads(res.stdout)
        assert table.num_rows == summary["rows_accepted"]
        assert len(rej_rows) == summary["rows_rejected"]
        assert summary["rows_read"] == summary["rows_accepted"] + summary["rows_rejected"]
        if case.n_rows is not None:
            assert summary["rows_read"] == case.n_rows
        rows = sorted(table.column("input_row").to_pylist() + [int(r[0]) for r in rej_rows])
        assert rows == list(range(1, summary["rows_read"] + 1))
    finally:
        shutil.rmtree(folder, ignore_errors=True)
