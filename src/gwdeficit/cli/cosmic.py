"""``gwdeficit cosmic``: background energy density and mass-density history over cosmic time."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated, Any

import typer

from gwdeficit.cli._common import (
    ForceOpt,
    JsonOpt,
    SeedOpt,
    WorkdirOpt,
    err,
    handles_errors,
    print_json,
)
from gwdeficit.cli.rate import KappaOpt, RateKindOpt, RateOpt, RateSamplesOpt, RateUnitOpt, RateZOpt

FileArg = Annotated[
    Path | None,
    typer.Argument(
        help="Remnants table (Parquet from 'gwdeficit remnant'), or a catalogue whose remnants "
        "are then computed first; default: the working folder's remnants.parquet, else its "
        "catalogue.parquet.",
        show_default=False,
    ),
]
EvolutionOpt = Annotated[
    str,
    typer.Option(
        "--evolution",
        help="Redshift evolution: none, powerlaw or madau-dickinson (the default here: a "
        "constant rate over cosmic history is rarely meant).",
    ),
]
ZmaxOpt = Annotated[
    float,
    typer.Option(
        "--zmax",
        help="Integrate mergers from today to zmax (default 8, the end of the Madau & "
        "Dickinson 2014 fit; beyond it that shape is extrapolated, with a warning).",
    ),
]
DrawsOpt = Annotated[int, typer.Option("--draws", help="Bootstrap draws.")]
SpectrumOpt = Annotated[
    bool,
    typer.Option("--spectrum/--no-spectrum", help="Compute the inspiral spectrum Omega_gw(f) too."),
]
FminOpt = Annotated[
    float, typer.Option("--f-min", help="Lowest observed frequency of the spectrum (Hz).")
]
SelectionOpt = Annotated[
    str,
    typer.Option("--selection", help="Population reweighting: none, inspiral-volume or column."),
]
FigureOpt = Annotated[
    bool,
    typer.Option("--figure/--no-figure", help="Write figures/cosmic_mass_loss.png."),
]


def _rate_models(rate_args: dict[str, Any], kinds: list[str]) -> Any:
    """The rate model(s) for :func:`gwdeficit.cosmic.cosmic_budget` from the rate options as
    parsed by the rate command (``cli._inputs.rate_arguments``): one model for the whole table,
    or one per kind (given, or the published defaults of the kinds present)."""
    from dataclasses import replace

    from gwdeficit.rates import DEFAULT_RATES, default_rate

    if "rate" in rate_args:
        return rate_args["rate"]
    if "rates_by_kind" in rate_args:
        return rate_args["rates_by_kind"]
    evo, z_ref = rate_args["evolution"], rate_args.get("default_rate_z")
    models = {k: default_rate(k, evo) for k in kinds if k in DEFAULT_RATES}
    if z_ref is not None:
        models = {
            k: m.with_evolution(replace(m.evolution, z_ref=float(z_ref))) for k, m in models.items()
        }
    return models


def _interval(entry: dict[str, Any], lo: str, hi: str) -> str:
    return f"{entry[lo]:.2g}..{entry[hi]:.2g}"


_SUMMARY_ROWS = (
    ("gw_energy_density", "rho_gw c^2 [erg/cm3]"),
    ("gw_energy_density_msun", "rho_gw c^2 [Msun c^2/Mpc3]"),
    ("omega_gw", "Omega_gw"),
    ("omega_gw_inspiral", "Omega_gw inspiral part"),
    ("erad_density", "radiated in GWs [Msun/Mpc3]"),
    ("ejected_density", "ejected [Msun/Mpc3]"),
    ("deficit_density", "total mass lost [Msun/Mpc3]"),
    ("merger_density", "mergers [1/Mpc3]"),
)


def _print_summary(summary: dict[str, Any], out: Path, figure: Path | None) -> None:
    from rich import box
    from rich.console import Console
    from rich.markup import escape
    from rich.table import Table

    console = Console()
    for kind, totals in summary["totals"].items():
        table = Table(
            title=f"{kind}: mergers at z = 0..{summary['zmax']:g} "
            f"(lookback {summary['lookback_gyr_at_zmax']:.2f} Gyr, "
            f"{summary['cosmology']['name']}); densities today",
            title_justify="left",
            box=box.SIMPLE_HEAD,
        )
        table.add_column("quantity", overflow="fold")
        for name in ("median", "68%", "90%"):
            table.add_column(name, justify="right", overflow="fold")
        for key, label in _SUMMARY_ROWS:
            if key in totals:
                e = totals[key]
                table.add_row(
                    escape(label),
                    f"{e['median']:.3g}",
                    _interval(e, "lo68", "hi68"),
                    _interval(e, "lo90", "hi90"),
                )
        console.print(table)
    typer.echo(
        f"{summary['draws']} draws, seed {summary['seed']}; research estimate. Wrote {out}"
        + (f" and {figure}" if figure else "")
    )


@handles_errors
def cosmic(
    file: FileArg = None,
    rate: RateOpt = None,
    rate_unit: RateUnitOpt = "Gpc-3 yr-1",
    rate_samples: RateSamplesOpt = None,
    rate_kind: RateKindOpt = None,
    evolution: EvolutionOpt = "madau-dickinson",
    kappa: KappaOpt = None,
    rate_z: RateZOpt = None,
    zmax: ZmaxOpt = 8.0,
    draws: DrawsOpt = 2000,
    seed: SeedOpt = 0,
    spectrum: SpectrumOpt = True,
    f_min: FminOpt = 1e-5,
    selection: SelectionOpt = "none",
    figure: FigureOpt = True,
    workdir: WorkdirOpt = None,
    force: ForceOpt = False,
    as_json: JsonOpt = False,
) -> None:
    """Gravitational-wave background energy density, Omega_gw and the mass-density history.

    Folds the remnants' mean radiated energy and ejected mass per merger (with the bootstrap)
    with the rate density and its redshift evolution over cosmic history, writes
    cosmic.parquet (tables against redshift, lookback time and frequency) and a figure of the
    cumulative mass loss against lookback time, and prints the totals.
    """
    from gwdeficit import workdir as wd
    from gwdeficit.cli._inputs import load_remnants, rate_arguments
    from gwdeficit.cosmic import cosmic_budget
    from gwdeficit.resample import event_kinds

    rate_args = rate_arguments(rate, rate_samples, rate_kind, rate_unit, evolution, kappa, rate_z)
    folder = wd.resolve_workdir(workdir)
    out = folder / wd.COSMIC_FILE
    fig_path = folder / wd.FIGURES_DIR / "cosmic_mass_loss.png"
    path, remnants = load_remnants(file, folder, seed, force, (out, fig_path if figure else None))
    kinds = sorted(set(event_kinds(remnants).astype(str)))  # each event in its majority kind
    models = _rate_models(rate_args, kinds)
    result = cosmic_budget(
        remnants,
        models,
        zmax=zmax,
        n_draws=draws,
        seed=seed,
        spectrum=spectrum,
        f_min_hz=f_min,
        selection=selection,
        inputs={str(path): wd.file_sha256(path)},
        source_name=str(path),
    )
    wd.write_parquet(result.table, out, result.meta, force=force, inputs=(path,))
    written_fig = None
    if figure:
        from gwdeficit.figures import save_figure
        from gwdeficit.figures_cosmic import cosmic_mass_loss_figure

        plotted = cosmic_mass_loss_figure(result.table)
        (written_fig,) = save_figure(plotted, fig_path.parent, formats=("png",), force=force)
    for w in result.warnings:
        err(f"warning: {w}")
    for n in result.notes:
        err(f"note: {n}")
    if as_json:
        print_json(
            {
                **result.summary,
                "output": str(out),
                "figure": None if written_fig is None else str(written_fig),
            }
        )
    else:
        _print_summary(result.summary, out, written_fig)
