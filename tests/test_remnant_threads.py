"""The black-hole fits on several threads: same values, counts, errors and progress as on one.

Blocks of rows are independent (each thread has its own scratch), so any number of threads
must give bit-identical columns (common practice for parallel loops over independent rows,
no source).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from typer.testing import CliRunner

from gwdeficit import schema
from gwdeficit import workdir as wd
from gwdeficit.cli import app
from gwdeficit.fits.registry import FitRangeWarning
from gwdeficit.remnant import (
    BLOCK_ROWS,
    RemnantInputError,
    compute_remnants,
    default_threads,
    remnant_arrays,
)

N = 3 * BLOCK_ROWS + 1234  # four blocks, the last one short


def _binaries(n: int = N, seed: int = 8) -> dict[str, np.ndarray]:
    rng = np.random.default_rng(seed)
    m1 = rng.uniform(5.0, 80.0, n)
    return {
        "m1_msun": m1,
        "m2_msun": m1 * rng.uniform(0.05, 1.0, n),  # some below every fit's q range
        "chi1": rng.uniform(0.0, 1.0, n),  # some above the spin ranges
        "chi2": rng.uniform(0.0, 1.0, n),
        "tilt1_rad": np.arccos(rng.uniform(-1, 1, n)),
        "tilt2_rad": np.arccos(rng.uniform(-1, 1, n)),
        "phi12_rad": np.where(rng.random(n) < 0.3, np.nan, rng.uniform(0, 2 * np.pi, n)),
    }


def _run(threads: int, **kw):
    with pytest.warns(FitRangeWarning):
        return remnant_arrays(*_binaries().values(), seed=3, threads=threads, **kw)


@pytest.mark.parametrize("threads", [2, 3, 7])
def test_any_number_of_threads_gives_identical_columns_and_counts(threads):
    one, many = _run(1), _run(threads)
    assert list(one) == list(many)
    for name in one:
        np.testing.assert_array_equal(one[name], many[name], err_msg=name)  # exact, NaN equal
    assert one.n_outside_range == many.n_outside_range
    assert sum(one.n_outside_range.values()) > 0
    assert one.n_phi12_drawn == many.n_phi12_drawn > 0


def test_a_bad_row_in_a_later_block_is_named_with_threads():
    b = _binaries()
    bad = 2 * BLOCK_ROWS + 17  # third block
    b["chi2"][bad] = 1.25
    with pytest.raises(RemnantInputError) as exc:
        remnant_arrays(*b.values(), threads=2)
    assert exc.value.column == "chi2"
    assert exc.value.rows == [bad + 1]  # 1-based flat position


def test_progress_reaches_every_row_in_order_with_threads():
    b = _binaries()
    df = pd.DataFrame(b).assign(
        kind="BBH", event="E", sample=0, weight=1.0, z=0.1, dl_mpc=470.0, spin_assumption="full"
    )
    seen: list[int] = []
    with pytest.warns(FitRangeWarning):
        out2 = compute_remnants(df, threads=2, progress=lambda done, total: seen.append(done))
    assert seen == sorted(seen) and seen[-1] == N
    with pytest.warns(FitRangeWarning):
        out1 = compute_remnants(df, threads=1)
    pd.testing.assert_frame_equal(out1, out2)


def test_default_threads_from_argument_environment_and_cpus(monkeypatch):
    monkeypatch.delenv("GWDEFICIT_THREADS", raising=False)
    assert default_threads() >= 1
    assert default_threads(3) == 3
    monkeypatch.setenv("GWDEFICIT_THREADS", "2")
    assert default_threads() == 2
    assert default_threads(1) == 1  # the argument wins
    for bad in ("two", "0", "-1"):
        monkeypatch.setenv("GWDEFICIT_THREADS", bad)
        with pytest.raises(schema.OptionError, match=f"GWDEFICIT_THREADS='{bad}'"):
            default_threads()
    with pytest.raises(schema.OptionError, match="at least 1"):
        default_threads(0)


def test_cli_threads_option(workdir, monkeypatch):
    monkeypatch.delenv("GWDEFICIT_THREADS", raising=False)
    runner = CliRunner()
    b = _binaries(5000)
    df = pd.DataFrame(b).assign(
        event=[f"E{i // 50}" for i in range(5000)],
        sample=np.arange(5000) % 50,
        weight=1.0,
        z=0.1,
        dl_mpc=470.0,
        kind="BBH",
        spin_assumption="full",
        input_row=np.arange(1, 5001),
    )
    meta = {schema.META_PROVENANCE: [{"stage": "ingest"}], schema.META_COSMOLOGY: {}}
    wd.write_parquet(df, workdir / "catalogue.parquet", meta)
    res = runner.invoke(app, ["remnant", "--threads", "0"])
    assert res.exit_code == 2 and "at least 1" in res.output
    assert not (workdir / "remnants.parquet").exists()
    assert runner.invoke(app, ["remnant", "--threads", "1"]).exit_code == 0
    one = pd.read_parquet(workdir / "remnants.parquet")
    assert runner.invoke(app, ["remnant", "--threads", "2", "--force"]).exit_code == 0
    pd.testing.assert_frame_equal(one, pd.read_parquet(workdir / "remnants.parquet"))
    monkeypatch.setenv("GWDEFICIT_THREADS", "many")
    res = runner.invoke(app, ["remnant", "--force"])
    assert res.exit_code == 2 and "GWDEFICIT_THREADS" in res.output
    monkeypatch.delenv("GWDEFICIT_THREADS")
    res = runner.invoke(app, ["remnant", "--force", "--engine", "dask", "--threads", "2"])
    assert res.exit_code == 2 and "--threads" in res.output and "Dask" in res.output
