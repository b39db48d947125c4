"""Figures: the files are written, are PNGs of the intended size, and show the summary's numbers.

The input tables are built here with the documented columns of gwdeficit.schema (the tables are
arbitrary test inputs, not check values); every check reads the numbers back from the drawn
matplotlib artists and compares them with the table the figure claims to show.
"""

from __future__ import annotations

import struct

import matplotlib.image as mpimg
import numpy as np
import pandas as pd
import pytest
from matplotlib.colors import to_hex
from typer.testing import CliRunner

from gwdeficit import figures
from gwdeficit.cli import app
from gwdeficit.schema import InputFileError, OptionError, OutputExistsError, SchemaError
from gwdeficit.workdir import RATES_FILE, REMNANTS_FILE, write_parquet


def _remnants(n_events: int = 6, per_event: int = 50, seed: int = 3) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    n = n_events * per_event
    m1 = rng.uniform(8.0, 60.0, n)
    m2 = m1 * rng.uniform(0.2, 1.0, n)
    df = pd.DataFrame(
        {
            "event": np.repeat([f"T{i:02d}" for i in range(n_events)], per_event),
            "sample": np.tile(np.arange(per_event), n_events),
            "weight": 1.0,
            "m1_msun": m1,
            "m2_msun": m2,
            "erad_frac": rng.uniform(0.02, 0.09, n),
            "mf_msun": 0.95 * (m1 + m2),
            "chif": rng.uniform(0.3, 0.9, n),
            "mf_msun_std": rng.uniform(0.05, 0.5, n),
            "chif_std": rng.uniform(0.001, 0.02, n),
            "vkick_kms": rng.lognormal(5.0, 1.0, n),
            "remnant_status": "estimated",
        }
    )
    # Rows the figures must leave out, and say so: not estimated, and a NaN.
    df.loc[3, "remnant_status"] = "not_estimated:outside_calibration"
    df.loc[7, ["erad_frac", "mf_msun", "vkick_kms"]] = np.nan
    return df


def _rates() -> pd.DataFrame:
    rows = []
    specs = [("mw", "solMass / yr", 1e-7), ("gpc3", "solMass / (Gpc3 yr)", 1e3)]
    for volume, unit, scale in specs:
        for k, kind in enumerate(("all", "BBH", "BNS")):  # deliberately not in display order
            med = scale * (1.0 + k)
            rows.append(
                {
                    "volume": volume,
                    "kind": kind,
                    "quantity": "deficit_rate",
                    "unit": unit,
                    "median": med,
                    "lo68": 0.7 * med,
                    "hi68": 1.4 * med,
                    "lo90": 0.5 * med,
                    "hi90": 2.2 * med,
                    "share_catalogue": 0.5 - 0.1 * k,
                    "share_posterior": 0.1,
                    "share_rate": 0.3 + 0.1 * k,
                    "share_fits": 0.1,
                }
            )
            rows.append({**rows[-1], "quantity": "merger_rate", "unit": "1 / yr"})
    return pd.DataFrame(rows)


def _png_size(path) -> tuple[int, int]:
    head = path.read_bytes()[:24]
    assert head[:8] == b"\x89PNG\r\n\x1a\n"  # PNG signature (PNG spec, ISO/IEC 15948:2004)
    assert head[12:16] == b"IHDR"
    return struct.unpack(">II", head[16:24])


def test_palette_is_okabe_ito():
    # Okabe & Ito 2008, "Color Universal Design (CUD)", J*Fly; the eight-colour set minus black
    # (hex values from memory).
    reference = {"#e69f00", "#56b4e9", "#009e73", "#f0e442", "#0072b2", "#d55e00", "#cc79a7"}
    assert {c.lower() for c in figures.OKABE_ITO} == reference


def test_radiated_fraction_draws_the_estimated_rows():
    rem = _remnants()
    pf = figures.radiated_fraction_figure(rem)
    ok = (rem["remnant_status"] == "estimated") & rem["erad_frac"].notna()
    ax_m, ax_q = pf.figure.axes
    xy_m = ax_m.collections[0].get_offsets()
    xy_q = ax_q.collections[0].get_offsets()
    np.testing.assert_allclose(xy_m[:, 0], (rem.m1_msun + rem.m2_msun)[ok])
    np.testing.assert_allclose(xy_m[:, 1], rem.erad_frac[ok])
    np.testing.assert_allclose(xy_q[:, 0], (rem.m2_msun / rem.m1_msun)[ok])
    np.testing.assert_allclose(xy_q[:, 1], rem.erad_frac[ok])
    np.testing.assert_allclose(pf.data["erad_frac"], rem.erad_frac[ok])
    assert pf.notes["plotted"] + pf.notes["not_estimated_or_nan"] == len(rem)
    assert "M$_\\odot$" in ax_m.get_xlabel()
    assert to_hex(ax_m.collections[0].get_facecolor()[0], keep_alpha=False) in [
        c.lower() for c in figures.OKABE_ITO
    ]


def test_radiated_fraction_thinning_is_counted():
    rem = _remnants()
    pf = figures.radiated_fraction_figure(rem, max_points=40)
    n = pf.notes
    assert n["plotted"] == len(pf.data) == 40
    assert n["plotted"] + n["thinned_out"] + n["not_estimated_or_nan"] == len(rem)
    drawn = pf.figure.axes[0].collections[0].get_offsets()
    np.testing.assert_allclose(drawn[:, 1], rem.loc[pf.data.index, "erad_frac"])


def test_mass_spin_points_are_event_medians_and_bars_the_fit_spread():
    rem = _remnants()
    pf = figures.remnant_mass_spin_figure(rem)
    ok = (rem["remnant_status"] == "estimated") & rem["mf_msun"].notna()
    expect = rem[ok].groupby("event")[["mf_msun", "chif", "mf_msun_std", "chif_std"]].median()
    (container,) = pf.figure.axes[0].containers
    line, _caps, (xbars, ybars) = container.lines
    order = pf.data.index
    np.testing.assert_allclose(line.get_xdata(), expect.loc[order, "chif"])
    np.testing.assert_allclose(line.get_ydata(), expect.loc[order, "mf_msun"])
    xw = np.array([s[1, 0] - s[0, 0] for s in xbars.get_segments()])
    yw = np.array([s[1, 1] - s[0, 1] for s in ybars.get_segments()])
    np.testing.assert_allclose(xw, 2 * expect.loc[order, "chif_std"])
    np.testing.assert_allclose(yw, 2 * expect.loc[order, "mf_msun_std"])
    assert pf.notes["rows_used"] + pf.notes["not_estimated_or_nan"] == len(rem)
    assert pf.notes["events"] == rem["event"].nunique()


def test_kick_fractions_count_each_event_once():
    # Event A: 10 rows, all kicks above 544 km/s; event B: 990 rows, all below 50 km/s.
    rem = pd.DataFrame(
        {
            "event": ["A"] * 10 + ["B"] * 990,
            "weight": 1.0,
            "vkick_kms": np.r_[np.full(10, 900.0), np.full(990, 20.0)],
        }
    )
    pf = figures.kick_figure(rem)
    esc = pf.notes["escaping_fraction"]
    assert esc["globular cluster"] == pytest.approx(0.5)
    assert esc["Milky Way, solar radius"] == pytest.approx(0.5)
    (stairs,) = pf.figure.axes[0].patches
    values, edges, _ = stairs.get_data()
    assert values.sum() == pytest.approx(1.0)
    np.testing.assert_allclose(values, pf.data["fraction"])
    np.testing.assert_allclose(edges[:-1], pf.data["bin_lo_kms"])
    drawn_lines = sorted(ln.get_xdata()[0] for ln in pf.figure.axes[0].lines)
    assert drawn_lines == [50.0, 544.0]


def test_kick_fraction_uses_row_weights_within_an_event():
    rem = pd.DataFrame({"event": ["A", "A"], "weight": [3.0, 1.0], "vkick_kms": [100.0, 10.0]})
    pf = figures.kick_figure(rem, escape_speeds=(("x", 50.0),))
    assert pf.notes["escaping_fraction"]["x"] == pytest.approx(0.75)


def test_kick_fraction_weighs_single_row_binaries_by_their_weight():
    # Population binaries (one row each) count by weight, as in the rate stage's bootstrap
    # (gwdeficit.resample); an event with posterior samples counts once.
    rem = pd.DataFrame(
        {
            "event": ["p1", "p2", "E", "E"],
            "weight": [3.0, 1.0, 1.0, 1.0],
            "vkick_kms": [100.0, 10.0, 100.0, 10.0],
        }
    )
    pf = figures.kick_figure(rem, escape_speeds=(("x", 50.0),))
    assert pf.notes["escaping_fraction"]["x"] == pytest.approx((3.0 + 0.5) / 5.0)


def test_budget_bars_equal_the_summary():
    rates = _rates()
    pf = figures.budget_figure(rates)
    want = rates[rates.quantity == "deficit_rate"]
    assert len(pf.data) == len(want)
    assert len(pf.figure.axes) == 2  # one panel per volume
    for ax, volume in zip(pf.figure.axes, ("mw", "gpc3"), strict=True):
        rows = pf.data[pf.data.volume == volume]
        assert list(rows.kind) == ["BBH", "BNS", "all"]  # display order, not table order
        ref = want[want.volume == volume].set_index("kind").loc[list(rows.kind)]
        # Linear panels are drawn in units of 10^k (k in the label and in the notes).
        k = pf.notes["axis_power_of_ten"][f"{volume} [{ref['unit'].iloc[0]}]"]
        assert k == {"mw": -9, "gpc3": 3}[volume]
        assert f"$10^{{{k}}}$" in ax.get_xlabel() and "yr" in ax.get_xlabel()
        bars90, bars68 = ax.containers
        seg90 = np.array([s[:, 0] for s in bars90.lines[2][0].get_segments()]) * 10.0**k
        seg68 = np.array([s[:, 0] for s in bars68.lines[2][0].get_segments()]) * 10.0**k
        np.testing.assert_allclose(seg90, ref[["lo90", "hi90"]].to_numpy())
        np.testing.assert_allclose(seg68, ref[["lo68", "hi68"]].to_numpy())
        np.testing.assert_allclose(ax.lines[0].get_xdata() * 10.0**k, ref["median"])
        assert [t.get_text() for t in ax.get_yticklabels()] == list(rows.kind)


def test_budget_panel_spanning_decades_is_logarithmic_and_unscaled():
    rates = _rates()
    sel = (rates.volume == "mw") & (rates.kind == "BNS")
    rates.loc[sel, ["lo90", "hi90"]] = [1e-9, 1e-4]
    pf = figures.budget_figure(rates)
    ax = pf.figure.axes[0]
    assert ax.get_xscale() == "log"
    assert pf.notes["axis_power_of_ten"]["mw [solMass / yr]"] == 0
    seg90 = np.array([s[:, 0] for s in ax.containers[0].lines[2][0].get_segments()])
    np.testing.assert_allclose(seg90[1], [1e-9, 1e-4])


def test_error_budget_bars_equal_the_shares():
    rates = _rates()
    pf = figures.error_budget_figure(rates)
    want = rates[rates.quantity == "deficit_rate"]
    ax = pf.figure.axes[0]
    assert len(ax.containers) == 4
    left = np.zeros(len(pf.data))
    for container, source in zip(
        ax.containers, ("catalogue", "posterior", "rate", "fits"), strict=True
    ):
        widths = np.array([p.get_width() for p in container.patches])
        lefts = np.array([p.get_x() for p in container.patches])
        np.testing.assert_allclose(widths, pf.data[f"share_{source}"])
        np.testing.assert_allclose(lefts, left)
        left += widths
    merged = pf.data.merge(want, on=["volume", "kind"], suffixes=("", "_table"))
    for source in ("catalogue", "posterior", "rate", "fits"):
        np.testing.assert_allclose(merged[f"share_{source}"], merged[f"share_{source}_table"])


def test_typed_errors_for_bad_tables():
    with pytest.raises(SchemaError, match="erad_frac"):
        figures.radiated_fraction_figure(_remnants().drop(columns="erad_frac"))
    with pytest.raises(OptionError, match="gw_energy"):
        figures.budget_figure(_rates(), quantity="gw_energy")
    with pytest.raises(OptionError):
        figures.parse_escape_speeds("cluster=fast")
    with pytest.raises(OptionError):
        figures.parse_escape_speeds("-5")
    assert figures.parse_escape_speeds("cluster=30, 600") == (
        ("cluster", 30.0),
        ("600 km/s", 600.0),
    )


def _fill_workdir(wd) -> None:
    write_parquet(_remnants(), wd / REMNANTS_FILE, {})
    write_parquet(_rates(), wd / RATES_FILE, {})


def test_write_figures_writes_png_of_the_intended_size(workdir):
    _fill_workdir(workdir)
    report = figures.write_figures(workdir)
    names = {p.name for p in report.written}
    assert names == {f"{n}.png" for n in figures.FIGURE_NAMES}
    assert report.skipped == ()
    for pf in report.figures:
        png = workdir / "figures" / f"{pf.name}.png"
        w_in, h_in = pf.figure.get_size_inches()
        assert w_in == pytest.approx(figures.COLUMN_WIDTH_IN)
        assert _png_size(png) == (round(w_in * figures.DPI), round(h_in * figures.DPI))
        assert mpimg.imread(png).shape[:2] == (round(h_in * figures.DPI), round(w_in * figures.DPI))
    assert not list((workdir / "figures").glob(".gwdeficit-tmp-*"))

    from PIL import Image  # a matplotlib dependency

    with Image.open(workdir / "figures" / "budget.png") as im:
        assert "research estimate" in im.info["Description"].lower()

    # No overwrite without --force, checked before anything is written.
    before = (workdir / "figures" / "kicks.png").stat().st_mtime_ns
    with pytest.raises(OutputExistsError):
        figures.write_figures(workdir)
    assert (workdir / "figures" / "kicks.png").stat().st_mtime_ns == before


def test_save_figure_writes_pdf_on_request(tmp_path):
    pf = figures.error_budget_figure(_rates())
    paths = figures.save_figure(pf, tmp_path, formats=("png", "pdf"))
    assert [p.name for p in paths] == ["error_budget.png", "error_budget.pdf"]
    assert paths[1].read_bytes()[:5] == b"%PDF-"
    with pytest.raises(OptionError):
        figures.save_figure(pf, tmp_path, formats=("svg",))
    with pytest.raises(OutputExistsError):
        figures.save_figure(pf, tmp_path, formats=("pdf",))


def test_write_figures_reports_a_missing_table(workdir):
    with pytest.raises(InputFileError, match=r"remnants\.parquet"):
        figures.write_figures(workdir)
    write_parquet(_rates(), workdir / RATES_FILE, {})
    report = figures.write_figures(workdir)
    assert {p.name for p in report.written} == {"budget.png", "error_budget.png"}
    assert any("remnants.parquet" in s for s in report.skipped)


def test_plot_command(workdir):
    runner = CliRunner()
    res = runner.invoke(app, ["plot", "--workdir", str(workdir)])
    assert res.exit_code == 2, res.output
    write_parquet(_remnants(), workdir / REMNANTS_FILE, {})
    res = runner.invoke(app, ["plot", "--workdir", str(workdir), "--vesc", "cluster=40"])
    assert res.exit_code == 0, res.output
    assert "kicks.png" in res.output and "skipped budget" in res.output
    assert (workdir / "figures" / "kicks.png").is_file()
    res = runner.invoke(app, ["plot", "--workdir", str(workdir)])
    assert res.exit_code == 2 and "--force" in res.output
    res = runner.invoke(app, ["plot", "--workdir", str(workdir), "--force", "--vesc", "x=abc"])
    assert res.exit_code == 2
