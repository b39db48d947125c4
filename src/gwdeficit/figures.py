"""Figures from gwdeficit's tables: remnants, kicks, the mass-loss budget and its error budget.

Every figure function takes the table(s) as DataFrames with the canonical columns of
:mod:`gwdeficit.schema` and returns a :class:`PlottedFigure`: the matplotlib ``Figure`` plus a
DataFrame holding exactly the numbers that were drawn, so a caller (or a test) can check that a
figure shows what it claims. Figures are built on ``matplotlib.figure.Figure`` directly (no
pyplot state, Agg canvas on save), sized for a journal column (3.4 in wide), with an
Okabe-Ito colour-blind-safe palette (Okabe & Ito 2008, "Color Universal Design",
https://jfly.uni-koeln.de/color/), units on every axis, and no grid or boxes.

:func:`write_figures` reads ``remnants.parquet`` and ``rates.parquet`` from a working folder and
writes PNG (and optionally PDF) files into ``<workdir>/figures/``, each atomically.
"""

from __future__ import annotations

import contextlib
import os
from collections.abc import Iterator, Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING, Any

from gwdeficit.schema import ERROR_SOURCES, InputFileError, OptionError, SchemaError

if TYPE_CHECKING:
    import pandas as pd
    from matplotlib.figure import Figure

# Okabe & Ito (2008) palette, in their order (black omitted).
OKABE_ITO: tuple[str, ...] = (
    "#0072B2",  # blue
    "#E69F00",  # orange
    "#009E73",  # bluish green
    "#CC79A7",  # reddish purple
    "#56B4E9",  # sky blue
    "#D55E00",  # vermillion
    "#F0E442",  # yellow
)
GREY = "#555555"

COLUMN_WIDTH_IN = 3.4  # one journal column
DPI = 300  # PNG resolution: a 3.4 in wide figure is 1020 px wide

# Escape speeds to compare kicks with: (label, km/s).
DEFAULT_ESCAPE_SPEEDS: tuple[tuple[str, float], ...] = (
    # Globular clusters: central escape speeds up to ~50 km/s; Merritt, Milosavljevic, Favata,
    # Hughes & Holz 2004, ApJ 607, L9, fig. 2 (from memory).
    ("globular cluster", 50.0),
    # Milky Way escape speed at the solar radius, 544 (+64/-46) km/s; Smith et al. 2007,
    # MNRAS 379, 755 (from memory).
    ("Milky Way, solar radius", 544.0),
)

FIGURE_NAMES: tuple[str, ...] = (
    "radiated_fraction",
    "remnant_mass_spin",
    "kicks",
    "budget",
    "error_budget",
)

_STYLE: dict[str, Any] = {
    "font.size": 7.0,
    "axes.labelsize": 7.0,
    "axes.titlesize": 7.0,
    "xtick.labelsize": 6.5,
    "ytick.labelsize": 6.5,
    "legend.fontsize": 6.0,
    "legend.frameon": False,
    "axes.spines.top": False,
    "axes.spines.right": False,
    "axes.linewidth": 0.6,
    "xtick.major.width": 0.6,
    "ytick.major.width": 0.6,
    "lines.linewidth": 1.0,
    "axes.grid": False,
    "axes.prop_cycle": None,  # filled in lazily (needs cycler)
}

_KIND_ORDER = ("BBH", "NSBH", "BNS", "all")

_QUANTITY_LABELS = {
    "deficit_rate": "mass-loss rate",
    "erad_rate": "rate of mass radiated in GWs",
    "ejected_rate": "rate of mass ejected",
    "merger_rate": "merger rate",
    "gw_luminosity": "GW luminosity",
}


@dataclass(frozen=True)
class PlottedFigure:
    """A figure and the exact numbers drawn in it.

    name: file stem (``radiated_fraction`` ...); figure: the matplotlib Figure; data: one row per
    drawn item with the plotted values; notes: counts of rows used, skipped or thinned, and other
    numbers shown (for example the escaping fractions of the kick figure).
    """

    name: str
    figure: Figure
    data: pd.DataFrame
    notes: Mapping[str, Any] = field(default_factory=dict)


@dataclass(frozen=True)
class FiguresReport:
    """What :func:`write_figures` did: files written, figures skipped (with the reason)."""

    written: tuple[Path, ...]
    skipped: tuple[str, ...]
    figures: tuple[PlottedFigure, ...]


# --------------------------------------------------------------------------------------------
# helpers
# --------------------------------------------------------------------------------------------


@contextlib.contextmanager
def _style() -> Iterator[None]:
    import matplotlib as mpl
    from cycler import cycler

    style = dict(_STYLE)
    style["axes.prop_cycle"] = cycler(color=list(OKABE_ITO))
    with mpl.rc_context(style):
        yield


def _new_figure(height_in: float, width_in: float = COLUMN_WIDTH_IN) -> Figure:
    from matplotlib.figure import Figure

    return Figure(figsize=(width_in, height_in), dpi=100, layout="constrained")


def _require(df: pd.DataFrame, columns: Sequence[str], what: str) -> None:
    missing = [c for c in columns if c not in df.columns]
    if missing:
        raise SchemaError(
            f"{what}: missing column(s) {', '.join(missing)}; "
            f"present: {', '.join(map(str, df.columns))}"
        )


def _thin(n: int, max_points: int) -> Any:
    """Deterministic, evenly spaced row positions (all rows when n <= max_points)."""
    import numpy as np

    if max_points < 1:
        raise OptionError(f"max_points must be >= 1, got {max_points}")
    if n <= max_points:
        return np.arange(n)
    return np.unique(np.linspace(0, n - 1, max_points).round().astype(np.int64))


def _finite_rows(df: pd.DataFrame, columns: Sequence[str]) -> Any:
    import numpy as np

    mask = np.ones(len(df), dtype=bool)
    for c in columns:
        mask &= np.isfinite(df[c].to_numpy(dtype=np.float64))
    if "remnant_status" in df.columns:
        mask &= df["remnant_status"].astype(str).to_numpy() == "estimated"
    return mask


def unit_label(unit: str) -> str:
    """An astropy unit string as inline LaTeX for axis labels (the raw string if unparsable)."""
    if not unit:
        return ""
    try:
        import astropy.units as u

        return u.Unit(unit).to_string("latex_inline")
    except Exception:  # unit strings come from files; fall back to printing them as they are
        return unit


def _volume_label(volume: str) -> str:
    """The rate stage's description of a volume spec (:attr:`gwdeficit.volumes.Volume.label`)."""
    from gwdeficit.schema import GwdeficitError
    from gwdeficit.volumes import parse_volume

    try:
        label = parse_volume(str(volume)).label
    except GwdeficitError:
        return str(volume)
    return label.replace("^3", "$^3$")


def _kind_rank(kind: str) -> int:
    return _KIND_ORDER.index(kind) if kind in _KIND_ORDER else len(_KIND_ORDER)


def _event_fractions(df: pd.DataFrame) -> Any:
    """Per-row plotting weights, summing to 1, with the rate stage's population weighting.

    As in :mod:`gwdeficit.resample`: an event's weight W_e is 1 when it has several rows
    (posterior samples: each event counts once) and the row's ``weight`` when it has a single
    row (population binaries, point values); within an event rows count by their ``weight``.
    Without an ``event`` column every row is its own event; without ``weight`` all weigh 1.
    """
    import numpy as np

    w = (
        df["weight"].to_numpy(dtype=np.float64)
        if "weight" in df.columns
        else np.ones(len(df), dtype=np.float64)
    )
    if "event" in df.columns:
        codes, uniques = _factorize(df["event"])
    else:
        codes, uniques = np.arange(len(df)), np.arange(len(df))
    totals = np.bincount(codes, weights=w, minlength=len(uniques))
    counts = np.bincount(codes, minlength=len(uniques))
    event_weight = np.where(counts > 1, 1.0, totals)
    with np.errstate(invalid="ignore", divide="ignore"):
        frac = np.where(totals[codes] > 0, w / totals[codes], 0.0) * event_weight[codes]
    total = frac.sum()
    return frac / total if total > 0 else frac


def _factorize(values: pd.Series) -> tuple[Any, Any]:
    import pandas as pd

    codes, uniques = pd.factorize(values, sort=False)
    return codes, uniques


# --------------------------------------------------------------------------------------------
# remnant figures
# --------------------------------------------------------------------------------------------


def radiated_fraction_figure(remnants: pd.DataFrame, max_points: int = 6000) -> PlottedFigure:
    """Radiated fraction E_rad / (M c^2) against total mass (top) and mass ratio (bottom).

    Uses the estimated rows with finite ``erad_frac``, ``m1_msun`` and ``m2_msun``; total mass
    M = m1 + m2 (source frame, Msun) and q = m2 / m1. Beyond ``max_points`` rows an evenly spaced
    subset is drawn (deterministic; counted in ``notes``).
    """
    import numpy as np
    import pandas as pd

    _require(remnants, ("m1_msun", "m2_msun", "erad_frac"), "remnant table")
    ok = _finite_rows(remnants, ("m1_msun", "m2_msun", "erad_frac"))
    sub = remnants.loc[ok]
    keep = _thin(len(sub), max_points)
    sub = sub.iloc[keep]
    m1 = sub["m1_msun"].to_numpy(dtype=np.float64)
    m2 = sub["m2_msun"].to_numpy(dtype=np.float64)
    data = pd.DataFrame(
        {
            "total_mass_msun": m1 + m2,
            "mass_ratio": m2 / m1,
            "erad_frac": sub["erad_frac"].to_numpy(dtype=np.float64),
        },
        index=sub.index,
    )
    with _style():
        fig = _new_figure(4.2)
        ax_m, ax_q = fig.subplots(2, 1)
        kw = {"s": 2.0, "alpha": 0.35, "linewidths": 0, "color": OKABE_ITO[0], "rasterized": True}
        ax_m.scatter(data["total_mass_msun"], data["erad_frac"], **kw)
        ax_q.scatter(data["mass_ratio"], data["erad_frac"], **kw)
        ax_m.set_xlabel(r"total mass $m_1+m_2$ (source frame) [M$_\odot$]")
        ax_q.set_xlabel(r"mass ratio $q=m_2/m_1$")
        for ax in (ax_m, ax_q):
            ax.set_ylabel(r"radiated fraction $E_\mathrm{rad}/(Mc^2)$")
        ax_q.set_xlim(0.0, 1.02)
    notes = {
        "rows": len(remnants),
        "plotted": len(data),
        "not_estimated_or_nan": int(len(remnants) - ok.sum()),
        "thinned_out": int(ok.sum() - len(data)),
    }
    return PlottedFigure("radiated_fraction", fig, data, notes)


def remnant_mass_spin_figure(remnants: pd.DataFrame, max_events: int = 400) -> PlottedFigure:
    """Remnant mass against remnant spin per event, with the spread between the NR fits.

    Each point is an event: the median over its estimated rows of ``mf_msun`` and ``chif``; the
    bars are the median over those rows of ``mf_msun_std`` and ``chif_std``, the standard
    deviation between the numerical-relativity fits (the fit spread, not the posterior width).
    Without an ``event`` column each row is its own event. Beyond ``max_events`` events an evenly
    spaced subset is drawn.
    """
    import numpy as np

    cols = ("mf_msun", "chif", "mf_msun_std", "chif_std")
    _require(remnants, cols, "remnant table")
    ok = _finite_rows(remnants, cols)
    sub = remnants.loc[ok, [*cols, *(["event"] if "event" in remnants.columns else [])]]
    if "event" in sub.columns:
        grouped = sub.groupby("event", sort=False)
        data = grouped[list(cols)].median()
        data["rows"] = grouped.size()
    else:
        data = sub[list(cols)].copy()
        data["rows"] = 1
    n_events = len(data)
    data = data.iloc[_thin(len(data), max_events)]
    with _style():
        fig = _new_figure(2.8)
        ax = fig.subplots()
        ax.errorbar(
            data["chif"].to_numpy(dtype=np.float64),
            data["mf_msun"].to_numpy(dtype=np.float64),
            xerr=data["chif_std"].to_numpy(dtype=np.float64),
            yerr=data["mf_msun_std"].to_numpy(dtype=np.float64),
            fmt="o",
            ms=2.5,
            color=OKABE_ITO[0],
            ecolor=OKABE_ITO[1],
            elinewidth=0.8,
            capsize=0,
            label="event median; bars: NR-fit spread (1 s.d.)",
        )
        ax.set_xlabel(r"remnant spin $\chi_\mathrm{f}$")
        ax.set_ylabel(r"remnant mass $M_\mathrm{f}$ [M$_\odot$]")
        ax.legend(loc="best", handlelength=1.0)
    notes = {
        "rows": len(remnants),
        "rows_used": int(ok.sum()),
        "not_estimated_or_nan": int(len(remnants) - ok.sum()),
        "events": n_events,
        "events_plotted": len(data),
    }
    return PlottedFigure("remnant_mass_spin", fig, data, notes)


def kick_figure(
    remnants: pd.DataFrame,
    escape_speeds: Sequence[tuple[str, float]] = DEFAULT_ESCAPE_SPEEDS,
    bins: int = 40,
) -> PlottedFigure:
    """Distribution of recoil speeds (``vkick_kms``) with chosen escape speeds marked.

    Histogram in logarithmic speed bins, weighted like the rate stage's population means (each
    event with posterior samples counts once, single-row binaries by their ``weight``; see
    :func:`_event_fractions`), so the bar heights are fractions of mergers. For every
    escape speed the fraction of events whose remnant would escape (kick above the speed) is
    drawn beside its line and returned in ``notes["escaping_fraction"]``.
    """
    import numpy as np
    import pandas as pd

    _require(remnants, ("vkick_kms",), "remnant table")
    if bins < 1:
        raise OptionError(f"bins must be >= 1, got {bins}")
    ok = _finite_rows(remnants, ("vkick_kms",))
    sub = remnants.loc[ok]
    v = sub["vkick_kms"].to_numpy(dtype=np.float64)
    frac = _event_fractions(sub)
    positive = v > 0
    lo = max(np.min(v[positive]) if positive.any() else 1.0, 1.0)
    hi = max(np.max(v) if len(v) else 10.0, lo * 10.0)
    for _, speed in escape_speeds:
        if not (np.isfinite(speed) and speed > 0):
            raise OptionError(f"escape speed {speed!r} km/s must be a positive number")
        lo, hi = min(lo, speed / 2.0), max(hi, speed * 2.0)
    edges = np.geomspace(lo, hi, bins + 1)
    # Kicks below the lowest edge (including zero) go into the first bin so fractions add to 1.
    heights, _ = np.histogram(np.clip(v, edges[0], edges[-1]), bins=edges, weights=frac)
    data = pd.DataFrame({"bin_lo_kms": edges[:-1], "bin_hi_kms": edges[1:], "fraction": heights})
    escaping = {
        label: float(frac[v > speed].sum() / frac.sum()) if frac.sum() > 0 else float("nan")
        for label, speed in escape_speeds
    }
    with _style():
        fig = _new_figure(2.5)
        ax = fig.subplots()
        ax.stairs(heights, edges, color=OKABE_ITO[0], linewidth=1.0, fill=False)
        ax.set_xscale("log")
        ymax = float(heights.max()) if len(heights) and heights.max() > 0 else 1.0
        for i, (label, speed) in enumerate(escape_speeds):
            color = OKABE_ITO[(i + 1) % len(OKABE_ITO)]
            ax.axvline(speed, color=color, linestyle="--", linewidth=0.8)
            ax.text(
                speed * 1.06,
                0.99 - 0.13 * i,
                f"{label}\n{speed:g} km/s: {100 * escaping[label]:.0f}% escape",
                color=color,
                fontsize=5.5,
                va="top",
                transform=ax.get_xaxis_transform(),
            )
        ax.set_xlabel(r"recoil speed $v_\mathrm{kick}$ [km s$^{-1}$]")
        ax.set_ylabel("fraction of mergers per bin")
        ax.set_ylim(0.0, ymax * (1.15 + 0.2 * len(escape_speeds)))
    notes = {
        "rows": len(remnants),
        "rows_used": int(ok.sum()),
        "not_estimated_or_nan": int(len(remnants) - ok.sum()),
        "escape_speeds_kms": {label: float(s) for label, s in escape_speeds},
        "escaping_fraction": escaping,
    }
    return PlottedFigure("kicks", fig, data, notes)


# --------------------------------------------------------------------------------------------
# rate-summary figures
# --------------------------------------------------------------------------------------------

_SUMMARY_NUMBERS = ("median", "lo68", "hi68", "lo90", "hi90")


def _summary_rows(rates: pd.DataFrame, quantity: str) -> pd.DataFrame:
    import numpy as np

    _require(rates, ("volume", "kind", "quantity", "unit", *_SUMMARY_NUMBERS), "rate summary")
    rows = rates.loc[rates["quantity"].astype(str) == quantity]
    if rows.empty:
        have = ", ".join(sorted(map(str, rates["quantity"].unique())))
        raise OptionError(f"rate summary has no quantity {quantity!r}; it has: {have}")
    rows = rows.loc[np.isfinite(rows["median"].to_numpy(dtype=np.float64))]
    order = {v: i for i, v in enumerate(dict.fromkeys(rows["volume"].astype(str)))}
    key = rows["volume"].astype(str).map(order) * 100 + rows["kind"].astype(str).map(_kind_rank)
    return rows.iloc[np.argsort(key.to_numpy(), kind="stable")]


def budget_figure(rates: pd.DataFrame, quantity: str = "deficit_rate") -> PlottedFigure:
    """The mass-loss budget per volume: median with 68% (thick) and 90% (thin) intervals.

    One panel per volume (and unit) of the rate summary, one line per kind (BBH, NSBH, BNS,
    all). The panel's axis is logarithmic when its 90% intervals span more than two decades;
    otherwise large or small numbers are drawn in units of a power of ten (a multiple of 3)
    written into the axis label and returned in ``notes["axis_power_of_ten"]``.
    """
    import numpy as np

    rows = _summary_rows(rates, quantity)
    data = rows[["volume", "kind", "quantity", "unit", *_SUMMARY_NUMBERS]].reset_index(drop=True)
    panels = list(
        dict.fromkeys(zip(data["volume"].astype(str), data["unit"].astype(str), strict=True))
    )
    n_lines = len(data)
    exponents: dict[str, int] = {}
    with _style():
        fig = _new_figure(0.55 + 0.62 * len(panels) + 0.16 * n_lines)
        axes = fig.subplots(len(panels), 1, squeeze=False)[:, 0]
        for ax, (volume, unit) in zip(axes, panels, strict=True):
            p = data.loc[(data["volume"].astype(str) == volume) & (data["unit"] == unit)]
            y = np.arange(len(p))[::-1].astype(np.float64)
            lo90 = p["lo90"].to_numpy(dtype=np.float64)
            hi90 = p["hi90"].to_numpy(dtype=np.float64)
            log_axis = bool(np.all(lo90 > 0) and np.max(hi90) / np.min(lo90) > 100.0)
            # Linear axes show numbers near 1: the panel's power of ten goes into the unit.
            exponent = 0 if log_axis else _panel_exponent(hi90)
            scale = 10.0**-exponent
            exponents[f"{volume} [{unit}]"] = exponent
            med = p["median"].to_numpy(dtype=np.float64) * scale
            for lo, hi, width, label in (
                ("lo90", "hi90", 0.8, "90%"),
                ("lo68", "hi68", 2.4, "68%"),
            ):
                err = np.vstack(
                    [
                        med - p[lo].to_numpy(dtype=np.float64) * scale,
                        p[hi].to_numpy(dtype=np.float64) * scale - med,
                    ]
                )
                ax.errorbar(
                    med,
                    y,
                    xerr=err,
                    fmt="none",
                    ecolor=GREY if label == "90%" else OKABE_ITO[0],
                    elinewidth=width,
                    capsize=0,
                    label=label,
                )
            ax.plot(med, y, "o", ms=3.0, color=OKABE_ITO[5], label="median", zorder=3)
            ax.set_yticks(y, p["kind"].astype(str).tolist())
            ax.set_ylim(-0.6, len(p) - 0.4)
            if log_axis:
                ax.set_xscale("log")
            ax.set_title(_volume_label(volume), loc="left")
            qlabel = _QUANTITY_LABELS.get(quantity, quantity.replace("_", " "))
            power = f"$10^{{{exponent}}}$ " if exponent else ""
            ax.set_xlabel(f"{qlabel} [{power}{unit_label(unit)}]")
        handles, labels = axes[0].get_legend_handles_labels()
        fig.legend(handles, labels, loc="outside upper center", ncols=3)
    notes = {
        "quantity": quantity,
        "panels": [f"{v} [{u}]" for v, u in panels],
        "axis_power_of_ten": exponents,
    }
    return PlottedFigure("budget", fig, data, notes)


def _panel_exponent(values: Any) -> int:
    """Power of ten (a multiple of 3) that brings a panel's largest number into [0.1, 1000)."""
    import numpy as np

    top = float(np.nanmax(np.abs(values))) if len(values) else 0.0
    if not (np.isfinite(top) and top > 0) or 0.1 <= top < 1000.0:
        return 0
    return int(3 * np.floor(np.log10(top) / 3))


def share_columns(rates: pd.DataFrame) -> list[str]:
    """The ``share_<source>`` columns of a rate summary: schema sources first, then any others."""
    known = [f"share_{s}" for s in ERROR_SOURCES if f"share_{s}" in rates.columns]
    extra = [c for c in rates.columns if str(c).startswith("share_") and c not in known]
    return known + extra


def error_budget_figure(rates: pd.DataFrame, quantity: str = "deficit_rate") -> PlottedFigure:
    """Split of the error budget by source, one stacked bar per volume and kind.

    Draws the ``share_<source>`` columns of the rate summary (catalogue size, posterior samples,
    rate density, fit spread) as they are stored: in :mod:`gwdeficit.budget` a share is the
    variance with only that source switched on over the variance with all on. The bars' total is
    whatever the shares add up to (about one for independent, small effects; a dotted line marks
    one); the summary's normalisation is not changed.
    """
    import numpy as np

    rows = _summary_rows(rates, quantity)
    shares = share_columns(rows)
    if not shares:
        raise SchemaError("rate summary: no share_<source> columns to draw an error budget from")
    data = rows[["volume", "kind", *shares]].reset_index(drop=True)
    labels = [f"{_short_volume(v)}  {k}" for v, k in zip(data["volume"], data["kind"], strict=True)]
    y = np.arange(len(data))[::-1].astype(np.float64)
    with _style():
        fig = _new_figure(0.9 + 0.2 * len(data))
        ax = fig.subplots()
        left = np.zeros(len(data))
        for i, col in enumerate(shares):
            width = np.nan_to_num(data[col].to_numpy(dtype=np.float64), nan=0.0)
            ax.barh(
                y,
                width,
                left=left,
                height=0.7,
                color=OKABE_ITO[i % len(OKABE_ITO)],
                label=col.removeprefix("share_"),
                linewidth=0,
            )
            left = left + width
        ax.set_yticks(y, labels)
        ax.axvline(1.0, color=GREY, linewidth=0.5, linestyle=":")
        ax.set_xlabel("share of the variance, by error source")
        ax.set_xlim(0.0, max(1.0, float(left.max()) if len(left) else 1.0))
        fig.legend(loc="outside upper center", ncols=min(len(shares), 4))
    notes = {"quantity": quantity, "sources": [c.removeprefix("share_") for c in shares]}
    return PlottedFigure("error_budget", fig, data, notes)


def _short_volume(volume: str) -> str:
    v = str(volume)
    return {"mw": "MW galaxy", "gpc3": "Gpc$^3$"}.get(v, v)


# --------------------------------------------------------------------------------------------
# writing
# --------------------------------------------------------------------------------------------


def make_figures(
    remnants: pd.DataFrame | None = None,
    rates: pd.DataFrame | None = None,
    escape_speeds: Sequence[tuple[str, float]] = DEFAULT_ESCAPE_SPEEDS,
    quantity: str = "deficit_rate",
) -> list[PlottedFigure]:
    """All figures that the given tables allow (remnant figures, then rate-summary figures)."""
    out: list[PlottedFigure] = []
    if remnants is not None:
        out.append(radiated_fraction_figure(remnants))
        out.append(remnant_mass_spin_figure(remnants))
        out.append(kick_figure(remnants, escape_speeds=escape_speeds))
    if rates is not None:
        out.append(budget_figure(rates, quantity=quantity))
        if share_columns(rates):
            out.append(error_budget_figure(rates, quantity=quantity))
    return out


def save_figure(
    plotted: PlottedFigure,
    folder: str | os.PathLike[str],
    formats: Sequence[str] = ("png",),
    force: bool = False,
) -> list[Path]:
    """Write ``<folder>/<name>.<fmt>`` for each format atomically (PNG at :data:`DPI`)."""
    from gwdeficit.workdir import atomic_path

    paths = []
    for fmt in formats:
        if fmt not in ("png", "pdf"):
            raise OptionError(f"figure format {fmt!r} is not supported; use png or pdf")
        out = Path(folder) / f"{plotted.name}.{fmt}"
        with atomic_path(out, force=force) as tmp, _style():
            plotted.figure.savefig(tmp, format=fmt, dpi=DPI, metadata=_file_metadata(fmt))
        paths.append(out)
    return paths


def _file_metadata(fmt: str) -> dict[str, str]:
    from gwdeficit import __version__
    from gwdeficit.schema import DISCLAIMER

    meta = {"Creator": f"gwdeficit {__version__}"}
    if fmt == "png":
        meta["Description"] = DISCLAIMER
    else:
        meta["Subject"] = DISCLAIMER
    return meta


def parse_escape_speeds(text: str | None) -> tuple[tuple[str, float], ...]:
    """Parse ``"50,544"`` or ``"cluster=50,galaxy=544"`` (km/s) into (label, speed) pairs."""
    if text is None or not text.strip():
        return DEFAULT_ESCAPE_SPEEDS
    out = []
    for item in (p.strip() for p in text.split(",")):
        if not item:
            continue
        label, sep, value = item.rpartition("=")
        try:
            speed = float(value)
        except ValueError:
            raise OptionError(f"escape speed {item!r}: expected a number in km/s") from None
        if not (speed > 0 and speed != float("inf")):
            raise OptionError(f"escape speed {item!r}: must be a positive number of km/s")
        out.append((label.strip() if sep and label.strip() else f"{speed:g} km/s", speed))
    return tuple(out)


def write_figures(
    workdir: str | os.PathLike[str] | None = None,
    pdf: bool = False,
    force: bool = False,
    escape_speeds: Sequence[tuple[str, float]] = DEFAULT_ESCAPE_SPEEDS,
    quantity: str = "deficit_rate",
) -> FiguresReport:
    """Read the working folder's remnant and rate tables and write every figure they allow.

    Figures go to ``<workdir>/figures/<name>.png`` (and ``.pdf`` with ``pdf=True``). A missing
    table skips its figures (reported in ``skipped``); with neither table an
    :class:`~gwdeficit.schema.InputFileError` is raised. Existing figure files are only replaced
    with ``force``; that is checked for every file before any is written.
    """
    from gwdeficit.workdir import (
        FIGURES_DIR,
        RATES_FILE,
        REMNANTS_FILE,
        check_writable,
        read_parquet,
        resolve_workdir,
    )

    wd = resolve_workdir(workdir, create=False)
    rem_path, rate_path = wd / REMNANTS_FILE, wd / RATES_FILE
    skipped = []
    remnants = rates = None
    if rem_path.exists():
        remnants = read_parquet(rem_path)
    else:
        skipped.append(f"radiated_fraction, remnant_mass_spin, kicks: {rem_path} not found")
    if rate_path.exists():
        rates = read_parquet(rate_path)
    else:
        skipped.append(f"budget, error_budget: {rate_path} not found")
    if remnants is None and rates is None:
        raise InputFileError(
            f"{wd}: neither {REMNANTS_FILE} nor {RATES_FILE} found; run the remnant and rate "
            "stages first (or gwdeficit demo)"
        )
    try:
        figures = make_figures(remnants, rates, escape_speeds=escape_speeds, quantity=quantity)
    except SchemaError as exc:
        raise SchemaError(f"{wd}: {exc}") from None
    if rates is not None and not share_columns(rates):
        skipped.append(f"error_budget: {rate_path} has no share_<source> columns")
    formats = ("png", "pdf") if pdf else ("png",)
    folder = wd / FIGURES_DIR
    for f in figures:
        for fmt in formats:
            check_writable(folder / f"{f.name}.{fmt}", force)
    written: list[Path] = []
    for f in figures:
        written.extend(save_figure(f, folder, formats, force=force))
    return FiguresReport(tuple(written), tuple(skipped), tuple(figures))
