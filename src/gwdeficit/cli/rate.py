"""``gwdeficit rate``: merger rate, mass-deficit rate and GW luminosity per volume, with errors."""

from __future__ import annotations

import math
import sys
from pathlib import Path
from typing import Annotated, Any

import typer

from gwdeficit.cli._common import (
    BatchRowsOpt,
    EngineOpt,
    ForceOpt,
    JsonOpt,
    SchedulerOpt,
    SeedOpt,
    WorkdirOpt,
    check_engine,
    err,
    handles_errors,
    print_json,
    split_list,
)

FileArg = Annotated[
    Path | None,
    typer.Argument(
        help="Remnants table (Parquet from 'gwdeficit remnant'), or a catalogue whose remnants "
        "are computed first; default: the working folder's remnants.parquet, else its "
        "catalogue.parquet.",
        show_default=False,
    ),
]
VolumeOpt = Annotated[
    list[str] | None,
    typer.Option(
        "--volume",
        help="Where to count (repeatable or comma-separated): mw (one Milky-Way-equivalent "
        "galaxy), gpc3, mpc3, stellar:MASS (Msun), sphere:RADIUS (comoving Mpc), cosmic or "
        "cosmic:ZMAX. Default: mw.",
        show_default=False,
    ),
]
RateOpt = Annotated[
    str | None,
    typer.Option(
        "--rate",
        help="Rate density of the whole table: '24', '24 +14 -9' (median, 90% bounds), "
        "'17.9..44' (90% range). Default: a published range per kind.",
        show_default=False,
    ),
]
RateSamplesOpt = Annotated[
    str | None,
    typer.Option(
        "--rate-samples",
        help="Posterior draws of the rate of the whole table, FILE[:COLUMN] (CSV/text, "
        "Parquet or .npy).",
        show_default=False,
    ),
]
RateKindOpt = Annotated[
    list[str] | None,
    typer.Option(
        "--rate-kind",
        help="Rate of one kind, KIND=SPEC (repeatable), SPEC as for --rate or "
        "samples:FILE[:COLUMN], e.g. --rate-kind 'BNS=320 +490 -240'. Kinds without a rate are "
        "left out.",
        show_default=False,
    ),
]
RateUnitOpt = Annotated[
    str, typer.Option("--rate-unit", help="Unit of the rate numbers (astropy syntax).")
]
EvolutionOpt = Annotated[
    str,
    typer.Option("--evolution", help="Redshift evolution: none, powerlaw or madau-dickinson."),
]
KappaOpt = Annotated[
    float | None,
    typer.Option(
        "--kappa", help="Index of the powerlaw evolution (1+z)^kappa.", show_default=False
    ),
]
RateZOpt = Annotated[
    float | None,
    typer.Option(
        "--rate-z",
        help="Redshift at which the rate is quoted (default 0; the built-in BBH default: 0.2).",
        show_default=False,
    ),
]
GalaxyDensityOpt = Annotated[
    float,
    typer.Option(
        "--galaxy-density",
        help="Milky-Way-equivalent galaxies per Mpc^3 (Kopparapu et al. 2008).",
    ),
]
StellarDensityOpt = Annotated[
    float,
    typer.Option(
        "--stellar-density",
        help="Local stellar-mass density in Msun per Mpc^3, for stellar:MASS "
        "(Fukugita & Peebles 2004).",
    ),
]
EscapeOpt = Annotated[
    list[str] | None,
    typer.Option(
        "--escape-speed",
        help="Host escape speed in km/s for the retained fraction (repeatable or comma-separated).",
        show_default=False,
    ),
]
SelectionOpt = Annotated[
    str,
    typer.Option(
        "--selection",
        help="Population reweighting: none, inspiral-volume (1/Mc^(15/6)) or column "
        "(1/vt_gpc3_yr).",
    ),
]
DrawsOpt = Annotated[int, typer.Option("--draws", help="Bootstrap draws.")]
KeepDrawsOpt = Annotated[
    bool, typer.Option("--keep-draws", help="Also write every draw to rate_draws.parquet.")
]


def _floats(items: list[str] | None, option: str) -> list[float]:
    from gwdeficit.schema import OptionError

    out = []
    for text in split_list(items):
        try:
            out.append(float(text))
        except ValueError:
            raise OptionError(f"{option} {text!r}: expected a number") from None
    return out


def _pct(x: float) -> str:
    return "-" if not math.isfinite(x) else f"{100 * x:.0f}"


def _print_table(
    table: Any, volumes: list[Any], out: Path, draws_out: Path | None, n: int, seed: int
) -> None:
    from rich import box
    from rich.console import Console
    from rich.markup import escape
    from rich.table import Table

    from gwdeficit.budget import share_column
    from gwdeficit.schema import ERROR_SOURCES

    console = Console(width=None if sys.stdout.isatty() else 140)
    for vol in volumes:
        sub = table[table["volume"] == vol.spec]
        if sub.empty:
            continue
        t = Table(
            title=f"{vol.spec}: {vol.label}",
            title_justify="left",
            box=box.SIMPLE_HEAD,
        )
        for name in ("kind", "quantity", "unit"):
            t.add_column(name, no_wrap=True)
        for name in ("median", "68% interval", "90% interval"):
            t.add_column(name, justify="right", no_wrap=True)
        for s in ERROR_SOURCES:
            t.add_column(f"{s[:4]}%", justify="right", no_wrap=True)
        for r in sub.itertuples(index=False):
            d = r._asdict()
            t.add_row(
                d["kind"],
                escape(d["quantity"]),
                escape(d["unit"] or "-"),
                f"{d['median']:.3g}",
                f"{d['lo68']:.3g} - {d['hi68']:.3g}",
                f"{d['lo90']:.3g} - {d['hi90']:.3g}",
                *(_pct(d[share_column(s)]) for s in ERROR_SOURCES),
            )
        console.print(t)
    typer.echo(
        f"{n} draws, seed {seed}; the %-columns split the variance by error source "
        "(catalogue, posterior, rate, fits). Research estimate. Wrote "
        + str(out)
        + (f" and {draws_out}" if draws_out else "")
    )


def _jsonable(value: Any) -> Any:
    if isinstance(value, float) and not math.isfinite(value):
        return None
    if isinstance(value, dict):
        return {k: _jsonable(v) for k, v in value.items()}
    if isinstance(value, list | tuple):
        return [_jsonable(v) for v in value]
    return value


@handles_errors
def rate(
    file: FileArg = None,
    volume: VolumeOpt = None,
    rate: RateOpt = None,
    rate_unit: RateUnitOpt = "Gpc-3 yr-1",
    rate_samples: RateSamplesOpt = None,
    rate_kind: RateKindOpt = None,
    evolution: EvolutionOpt = "none",
    kappa: KappaOpt = None,
    rate_z: RateZOpt = None,
    galaxy_density: GalaxyDensityOpt = 0.0116,
    stellar_density: StellarDensityOpt = 3.7e8,
    escape_speed: EscapeOpt = None,
    selection: SelectionOpt = "none",
    draws: DrawsOpt = 2000,
    seed: SeedOpt = 0,
    keep_draws: KeepDrawsOpt = False,
    engine: EngineOpt = "local",
    scheduler: SchedulerOpt = None,
    batch_rows: BatchRowsOpt = 1 << 16,  # gwdeficit.stream.DEFAULT_BATCH_ROWS
    workdir: WorkdirOpt = None,
    force: ForceOpt = False,
    as_json: JsonOpt = False,
) -> None:
    """Merger rate, mass-deficit rate and GW luminosity per volume, with bootstrap errors.

    Folds the remnants' mass deficits with a merger-rate density into mass lost per Myr in each
    volume; every number is a median with 68% and 90% intervals from a hierarchical bootstrap
    (events, posterior samples, rate, fit choice) whose variance is split by source. Writes
    rates.parquet (and rate_draws.parquet with --keep-draws) to the working folder.
    """
    from gwdeficit import workdir as wd
    from gwdeficit.budget import compute_budget
    from gwdeficit.cli._inputs import load_remnants, rate_arguments
    from gwdeficit.volumes import parse_volumes

    vols = parse_volumes(split_list(volume) or ["mw"])
    speeds = _floats(escape_speed, "--escape-speed")
    rate_args = rate_arguments(rate, rate_samples, rate_kind, rate_unit, evolution, kappa, rate_z)
    folder = wd.resolve_workdir(workdir)
    out = folder / wd.RATES_FILE
    draws_out = folder / wd.DRAWS_FILE if keep_draws else None
    engine_name = check_engine(engine, scheduler)
    streamed = _streamed_input(
        file, folder, engine_name, scheduler, seed, batch_rows, force, as_json, (out, draws_out)
    )
    if streamed is None:
        path, remnants = load_remnants(file, folder, seed, force, (out, draws_out))
    else:  # larger than one batch, or on a cluster: out of core (gwdeficit.stream)
        path, remnants = streamed, None

    progress = None
    bar: Any = None
    if streamed is None and not as_json and sys.stderr.isatty():
        from rich.console import Console
        from rich.progress import Progress

        bar = Progress(console=Console(stderr=True), transient=True)
        task = bar.add_task("bootstrap", total=None)
        bar.start()

        def progress(done: int, total: int) -> None:
            bar.update(task, completed=done, total=total)

    try:
        budget = (
            compute_budget
            if streamed is None
            else _engine_budget(engine_name, scheduler, batch_rows, as_json)
        )
        result = budget(
            remnants,
            volumes=vols,
            escape_speeds_kms=speeds,
            selection=selection,
            n_draws=draws,
            seed=seed,
            galaxy_density_mpc3=galaxy_density,
            stellar_density_msun_mpc3=stellar_density,
            keep_draws=keep_draws,
            progress=progress,
            source=str(path),
            inputs={str(path): wd.file_sha256(path)},
            **rate_args,
        )
    finally:
        if bar is not None:
            bar.stop()
    wd.write_parquet(result.table, out, result.meta, force=force, inputs=(path,))
    if draws_out is not None and result.draws is not None:
        wd.write_parquet(result.draws, draws_out, result.meta, force=force, inputs=(path,))
    for n in result.notes:
        err(f"note: {n}")
    if as_json:
        from gwdeficit.schema import META_RATE_MODEL

        print_json(
            _jsonable(
                {
                    "rates": result.table.to_dict(orient="records"),
                    "rate_model": result.meta[META_RATE_MODEL],
                    "notes": list(result.notes),
                    "counts": result.counts,
                    "draws": draws,
                    "seed": seed,
                    "input": str(path),
                    "output": str(out),
                    "draws_output": None if draws_out is None else str(draws_out),
                }
            )
        )
    else:
        _print_table(result.table, vols, out, draws_out, draws, seed)


def _streamed_input(
    file: Path | None,
    folder: Path,
    engine: str,
    scheduler: str | None,
    seed: int,
    batch_rows: int,
    force: bool,
    as_json: bool,
    outputs: tuple[Path | None, ...],
) -> Path | None:
    """The remnants file for the out-of-core rate stage, or None for the in-memory path.

    Out of core with --engine dask, or when the input has more rows than --batch-rows. The
    input is resolved as in :func:`gwdeficit.cli._inputs.load_remnants`; a catalogue gets its
    remnants computed first, batch by batch, into <workdir>/remnants.parquet.
    """
    import warnings

    from gwdeficit import workdir as wd
    from gwdeficit.schema import SchemaError
    from gwdeficit.stream import parquet_shape, remnant_stage

    if file is not None:
        path = Path(file)
    elif (folder / wd.REMNANTS_FILE).exists():
        path = folder / wd.REMNANTS_FILE
    else:
        path = folder / wd.CATALOGUE_FILE
    if not path.exists():
        return None  # the in-memory loader names the missing file
    rows, names = parquet_shape(path)
    if engine == "local" and rows <= batch_rows:
        return None
    for o in outputs:
        if o is not None:
            wd.check_writable(o, force, inputs=(path,))
    if "kind" not in names:
        raise SchemaError(f"{path}: no 'kind' column; not a catalogue or remnants table")
    if "deficit_msun" in names:
        return path
    rem_out = folder / wd.REMNANTS_FILE
    wd.check_writable(rem_out, force, inputs=(path,))
    err(f"{path} is a catalogue: computing its remnants first ({rem_out})")
    from gwdeficit.fits.registry import FitRangeWarning

    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", FitRangeWarning)
        remnant_stage(
            path,
            rem_out,
            engine=engine,
            scheduler=scheduler,
            seed=seed,
            batch_rows=batch_rows,
            force=force,
            show_progress=not as_json and sys.stderr.isatty(),
        )
    for w in caught:
        if issubclass(w.category, FitRangeWarning):
            err(f"warning: {w.message}")
    return rem_out


def _engine_budget(engine: str, scheduler: str | None, batch_rows: int, as_json: bool) -> Any:
    """compute_budget's stand-in for the out-of-core engines (same keyword arguments)."""
    from gwdeficit.stream import budget_stage

    def run(remnants: Any, **kw: Any) -> Any:
        return budget_stage(
            kw["source"],
            engine=engine,
            scheduler=scheduler,
            batch_rows=batch_rows,
            show_progress=not as_json and sys.stderr.isatty(),
            **kw,
        )

    return run
