"""The demo: bundled invented data (reproducible, as specified) and `gwdeficit demo` end to end.

These tests check the data files against their own generator and the issue's specification
(headers, bad rows, size); the invented values are never used as physics check values.
"""

from __future__ import annotations

import re
import shlex
import subprocess
import sys
from pathlib import Path

import pandas as pd
import pytest

from gwdeficit.demo import demo_data_dir

ROOT = Path(__file__).resolve().parents[1]
README = ROOT / "README.md"
CAMPAIGN_HEADERS = [
    "event",
    "sample",
    "mchirp_det [Msun]",
    "q",
    "dL [Gpc]",
    "a1",
    "a2",
    "tilt1 [deg]",
    "tilt2 [deg]",
    "phi12 [deg]",
]


def test_shipped_files_are_what_the_seeded_generator_writes(tmp_path):
    res = subprocess.run(
        [sys.executable, str(ROOT / "data_demo" / "make_demo.py"), "--out", str(tmp_path)],
        capture_output=True,
        text=True,
        timeout=120,
    )
    assert res.returncode == 0, res.stderr
    shipped = demo_data_dir()
    for name in ("campaign.csv", "ns_event.csv"):
        assert (tmp_path / name).read_bytes() == (shipped / name).read_bytes(), name
    pd.testing.assert_frame_equal(
        pd.read_parquet(tmp_path / "population.parquet"),
        pd.read_parquet(shipped / "population.parquet"),
    )


def test_demo_files_have_the_promised_columns_and_bad_rows():
    d = demo_data_dir()
    raw = pd.read_csv(d / "campaign.csv", dtype=str, keep_default_na=False)
    assert list(raw.columns) == CAMPAIGN_HEADERS
    assert 24 <= raw["event"].nunique() <= 60  # "a few dozen" events
    per_event = raw.groupby("event").size()
    assert per_event.min() >= 100 and per_event.max() <= 1000  # "a few hundred" samples
    num = raw.drop(columns="event").apply(pd.to_numeric, errors="coerce")
    bad = (
        num.isna().any(axis=1)
        | (num["a1"] > 1)
        | (num["a2"] > 1)
        | (num["dL [Gpc]"] <= 0)
        | (num["q"] > 1)
    )
    assert bad.sum() == 4  # one non-numeric cell, one empty cell, a spin > 1, a negative distance
    assert (num.loc[~bad, "q"] <= 1).all()
    pop = pd.read_parquet(d / "population.parquet")
    assert list(pop.columns) == [
        "m1_source [Msun]",
        "m2_source [Msun]",
        "chi_eff",
        "redshift",
        "weight",
    ]
    assert 10_000 <= len(pop) <= 100_000 and (pop["weight"] >= 0).all()
    ns = pd.read_csv(d / "ns_event.csv")
    assert list(ns.columns) == [
        "event",
        "m1 [Msun]",
        "m2 [Msun]",
        "chi1z",
        "chi2z",
        "lambda1",
        "lambda2",
        "dL [Mpc]",
    ]
    assert ns["event"].nunique() == 1 and (ns["m1 [Msun]"] >= ns["m2 [Msun]"]).all()
    total = sum(p.stat().st_size for p in d.iterdir() if p.is_file())
    assert total < 5 * 1024**2


def test_generator_and_readme_say_the_data_are_invented():
    for path in (ROOT / "data_demo" / "make_demo.py", ROOT / "data_demo" / "README.md"):
        assert "invented" in path.read_text().lower(), path


# ----------------------------------------------------------------------------------------------
# gwdeficit demo, end to end
# ----------------------------------------------------------------------------------------------


def test_demo_refuses_a_used_folder_without_force(tmp_path):
    from typer.testing import CliRunner

    from gwdeficit.cli import app

    used = tmp_path / "used"
    used.mkdir()
    (used / "notes.txt").write_text("mine")
    res = CliRunner().invoke(app, ["demo", "--workdir", str(used)])
    assert res.exit_code == 2
    assert "--force" in res.output
    assert sorted(p.name for p in used.iterdir()) == ["notes.txt"]


def _readme_blocks() -> list[tuple[str, str]]:
    """(language, body) of every fenced code block of the README after the first two.

    The first two are the fresh-machine commands, run by CI and checked by tests/test_readme.py.
    """
    text = README.read_text()
    return re.findall(r"```(\w*)\n(.*?)```", text, flags=re.S)[2:]


def _normalise(line: str) -> str:
    """A README command or output line with the demo data path made concrete."""
    data = f"{demo_data_dir()}/"
    line = re.sub(r"\S*/gwdeficit/data_demo/", lambda _m: data, line)
    return line.rstrip()


def _readme_commands() -> tuple[list[str], list[str]]:
    """Commands shown in the README: (in the tour's code blocks, in inline code)."""
    blocks = []
    for lang, body in _readme_blocks():
        if lang not in ("bash", "console"):
            continue
        for ln in body.splitlines():
            cmd = ln.strip()
            if lang == "console":  # in console blocks only the "$ " lines are commands
                if not cmd.startswith("$ "):
                    continue
                cmd = cmd[2:]
            if cmd.startswith("gwdeficit"):
                blocks.append(_normalise(cmd))
    inline = re.findall(r"`(gwdeficit [^`]*)`", README.read_text())
    return blocks, inline


def test_demo_runs_every_stage_and_every_readme_command(tmp_path, monkeypatch):
    import numpy as np
    from typer.testing import CliRunner

    from gwdeficit import demo
    from gwdeficit.cli import app
    from gwdeficit.fits.registry import FitRangeWarning
    from gwdeficit.remnant import compute_remnants
    from gwdeficit.schema import DISCLAIMER, META_DISCLAIMER, META_PROVENANCE
    from gwdeficit.workdir import read_parquet

    monkeypatch.chdir(tmp_path)
    runner = CliRunner()
    res = runner.invoke(app, ["demo"])  # the README's "run the main job" command, as shown
    assert res.exit_code == 0, res.output
    out = res.output
    wd = Path(demo.DEFAULT_DEMO_WORKDIR)
    # Each stage is printed as the command a user would type, then run.
    steps = [s.command_line() for s in demo.demo_steps(wd)]
    for line in steps:
        assert f"$ {line}" in out
    assert f"Everything went into {wd}" in out

    # Counts add up: rows read = accepted + rejected, with a reason for each rejected row.
    raw = pd.read_csv(demo_data_dir() / "campaign.csv", dtype=str, keep_default_na=False)
    cat = read_parquet(wd / "catalogue.parquet")
    rejects = pd.read_csv(wd / "rejects.csv", dtype=str, keep_default_na=False)
    assert len(cat) + len(rejects) == len(raw)
    assert len(rejects) == 4 and (rejects["reason"].str.len() > 0).all()
    assert f"read {len(raw)} = accepted {len(cat)} + rejected 4" in out

    # The remnants on disk are the remnant stage's API result on that catalogue, not canned.
    rem = read_parquet(wd / "remnants.parquet")
    with pytest.warns(FitRangeWarning):  # the demo has rows outside some calibrated ranges
        again = compute_remnants(cat, seed=demo.DEMO_SEED)
    for col in ("mf_msun", "chif", "erad_msun", "vkick_kms", "mf_msun_std"):
        np.testing.assert_allclose(rem[col], again[col], rtol=1e-12, equal_nan=True)

    rates = read_parquet(wd / "rates.parquet")
    assert set(rates["volume"]) == set(demo.DEMO_VOLUMES)
    assert {"merger_rate", "deficit_rate"} <= set(rates["quantity"])
    for df in (cat, rem, rates):
        assert df.attrs[META_DISCLAIMER] == DISCLAIMER
    stages = [r["stage"] for r in rates.attrs[META_PROVENANCE]]
    assert stages[:3] == ["ingest", "remnant", "rate"]
    assert (wd / "cosmic.parquet").is_file()
    names = {p.name for p in (wd / "figures").iterdir()}
    assert {f"{n}.png" for n in figures_names()} <= names
    assert "cosmic_mass_loss.png" in names

    # The README's pasted tour is this run's real output: every line of it (but the marked
    # elisions and the timing line) appears in the output, in order.
    (tour,) = [body for lang, body in _readme_blocks() if lang == "console"]
    got = [" ".join(ln.split()) for ln in out.splitlines()]
    pos = 0
    for line in tour.splitlines()[1:]:  # the first line is the command itself
        want = " ".join(_normalise(line).split())
        if not want or want.startswith("[...") or want.startswith("time "):
            continue
        assert want in got[pos:], f"README tour line not in the demo's output: {line!r}"
        pos = got.index(want, pos) + 1

    # Every command the README shows is exercised: the stage commands are the demo's steps
    # (run above); the others are run here, in the README's order.
    block_cmds, inline_cmds = _readme_commands()
    for line in block_cmds:
        assert line == "gwdeficit demo" or line in steps, f"README command not exercised: {line}"
    for line in inline_cmds:
        if line == "gwdeficit demo":
            continue
        res = runner.invoke(app, shlex.split(line)[1:])
        assert res.exit_code == 0, f"{line}: {res.output}"
    # 'gwdeficit plot ... --pdf --force' wrote a PDF beside every PNG of the plot stage.
    for name in figures_names():
        assert (wd / "figures" / f"{name}.pdf").read_bytes()[:5] == b"%PDF-"


def figures_names() -> tuple[str, ...]:
    from gwdeficit.figures import FIGURE_NAMES

    return FIGURE_NAMES


def test_readme_lists_every_canonical_column_with_its_unit():
    from gwdeficit.schema import CATALOGUE_COLUMNS, REMNANT_COLUMNS

    rows = [ln for ln in README.read_text().splitlines() if ln.startswith("| `")]
    for col in (*CATALOGUE_COLUMNS, *REMNANT_COLUMNS):
        unit = {"-": "-", "": "1"}.get(col.unit, col.unit)
        hits = [r for r in rows if f"`{col.name}`" in r.split("|")[1]]
        assert hits, f"README has no table row for column {col.name}"
        assert any(r.split("|")[2].strip() == unit for r in hits), (col.name, unit, hits)
