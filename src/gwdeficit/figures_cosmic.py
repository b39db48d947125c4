"""Figure of the cosmic budget: cumulative comoving mass density lost against lookback time.

Built like the figures of :mod:`gwdeficit.figures` (same style, palette, sizes and
:class:`~gwdeficit.figures.PlottedFigure` return value, so that it can be folded in there) from
the tidy table of :func:`gwdeficit.cosmic.budget_table` / ``cosmic.parquet``.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import TYPE_CHECKING

from gwdeficit.schema import SchemaError

if TYPE_CHECKING:
    import pandas as pd

    from gwdeficit.figures import PlottedFigure

FIGURE_NAME = "cosmic_mass_loss"

#: (quantity in the history section, legend label, line style)
_CURVES: tuple[tuple[str, str, str], ...] = (
    ("erad_density_before", "radiated in GWs", "-"),
    ("ejected_density_before", "ejected (NS mergers)", "--"),
)

_KIND_ORDER = ("all", "BBH", "NSBH", "BNS")

#: Redshifts marked on the top axis (those below the table's zmax).
_Z_TICKS = (0.0, 0.5, 1.0, 2.0, 3.0, 5.0, 10.0, 20.0)


def cosmic_mass_loss_figure(
    table: pd.DataFrame, kinds: Sequence[str] | None = None
) -> PlottedFigure:
    """Comoving mass density lost by all mergers up to each epoch, against lookback time.

    For each kind (default: every kind in the table, "all" first), the ``history`` rows
    ``erad_density_before`` (mass-energy radiated in gravitational waves by mergers between
    zmax and the epoch) and, where it is non-zero, ``ejected_density_before``: the median as a
    line, the 68% interval as a band (and the 90% interval for "all", or the only kind).
    Lookback time runs from zmax (left) to today (right); the top axis marks redshifts.
    Log-scaled densities in Msun Mpc^-3.
    """
    import numpy as np
    import pandas as pd

    from gwdeficit.figures import OKABE_ITO, PlottedFigure, _new_figure, _style

    need = ("section", "kind", "quantity", "z", "lookback_gyr", "median", "lo68", "hi68")
    missing = [c for c in (*need, "lo90", "hi90") if c not in table.columns]
    if missing:
        raise SchemaError(f"cosmic table: missing column(s) {', '.join(missing)}")
    hist = table[table["section"] == "history"]
    present = list(dict.fromkeys(hist["kind"].astype(str)))
    order = [k for k in _KIND_ORDER if k in present] + [k for k in present if k not in _KIND_ORDER]
    chosen = list(kinds) if kinds is not None else order
    drawn: list[pd.DataFrame] = []
    with _style():
        fig = _new_figure(2.6)
        ax = fig.add_subplot(1, 1, 1)
        # Kinds with non-zero ejecta; "all" repeats a single such kind, so it is then skipped.
        ejecting = [
            k
            for k in chosen
            if k != "all"
            and (
                hist.loc[
                    (hist["kind"] == k) & (hist["quantity"] == "ejected_density_before"), "median"
                ]
                > 0
            ).any()
        ]
        primary = "all" if "all" in chosen else (chosen[0] if chosen else None)
        for i, kind in enumerate(chosen):
            colour = OKABE_ITO[i % len(OKABE_ITO)]
            for quantity, label, style in _CURVES:
                if quantity.startswith("ejected") and kind == "all" and len(ejecting) < 2:
                    continue
                rows = hist[(hist["kind"] == kind) & (hist["quantity"] == quantity)]
                rows = rows.sort_values("lookback_gyr")
                keep = rows["median"].to_numpy(dtype=np.float64) > 0
                if not keep.any():
                    continue
                rows = rows[keep]
                t = rows["lookback_gyr"].to_numpy(dtype=np.float64)
                if kind == primary:  # 90% band for the headline curve only, to stay readable
                    ax.fill_between(t, rows["lo90"], rows["hi90"], color=colour, alpha=0.12, lw=0)
                ax.fill_between(t, rows["lo68"], rows["hi68"], color=colour, alpha=0.25, lw=0)
                ax.plot(t, rows["median"], color=colour, ls=style, label=f"{kind}: {label}")
                drawn.append(rows.assign(kind=kind, quantity=quantity))
        data = (
            pd.concat(drawn, ignore_index=True)
            if drawn
            else pd.DataFrame(columns=["kind", "quantity", "z", "lookback_gyr", "median"])
        )
        ax.set_yscale("log")
        if drawn:  # show three decades below the largest value, not the start-up at zmax
            top_value = max(float(d["hi90"].max()) for d in drawn)
            ax.set_ylim(bottom=max(min(float(d["lo90"].min()) for d in drawn), 1e-3 * top_value))
        ax.set_xlabel("lookback time [Gyr]")
        ax.set_ylabel(r"comoving mass density lost [$M_\odot\,\mathrm{Mpc}^{-3}$]")
        zt = hist[["z", "lookback_gyr"]].drop_duplicates().sort_values("z")
        if len(zt):
            tmax = float(zt["lookback_gyr"].max())
            ax.set_xlim(tmax, 0.0)
            top = ax.twiny()
            top.set_xlim(ax.get_xlim())
            ticks = [z for z in _Z_TICKS if z <= float(zt["z"].max())]
            top.set_xticks(np.interp(ticks, zt["z"], zt["lookback_gyr"]))
            top.set_xticklabels([f"{z:g}" for z in ticks])
            top.set_xlabel("redshift")
            top.spines["top"].set_visible(True)
        if drawn:
            ax.legend(loc="lower right", handlelength=1.8)
    notes = {"kinds": chosen, "curves": len(drawn)}
    return PlottedFigure(name=FIGURE_NAME, figure=fig, data=data, notes=notes)
