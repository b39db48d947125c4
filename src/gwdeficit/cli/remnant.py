"""``gwdeficit remnant``: the catalogue -> remnants.parquet (remnant mass, spin, E_rad, recoil)."""

from __future__ import annotations

import time
from pathlib import Path
from typing import Annotated, Any

import typer

from gwdeficit.cli import _common

PROGRESS_MIN_ROWS = 1_000_000  # show a progress bar from this many rows on


def format_summary(s: dict[str, Any]) -> str:
    """The remnant summary as readable text."""
    kinds = ", ".join(f"{k} {n}" for k, n in s["kinds"].items()) or "-"
    lines = [
        f"catalogue  {s['input']}",
        f"rows       {s['rows']} ({kinds}); estimated {s['estimated']}",
    ]
    for status, n in s["status"].items():
        if status != "estimated":
            lines.append(f"  {status:<40} {n}")
    q = s["deficit_quantiles"]
    if q:
        lines.append("mass deficit per merger (unweighted over estimated rows):")
        for key, label in (("p05", " 5%"), ("p50", "50%"), ("p95", "95%")):
            lines.append(f"  {label}  {q[key]['msun']:.4g} Msun c^2 = {q[key]['erg']:.4g} erg")
    lines.append(f"fits       {', '.join(s['fits'])}")
    lines.append(
        f"range      {s['outside_fit_range']} estimated row(s) outside a fit's calibrated range"
    )
    for name, n in s["outside_by_fit"].items():
        if n:
            lines.append(f"  {name:<40} {n}")
    if s["phi12_drawn"]:
        lines.append(f"drawn      phi12 for {s['phi12_drawn']} row(s) (missing), seed {s['seed']}")
    if s["estimated"]:
        lines.append(
            f"drawn      in-plane spin phase at merger for every BBH row, seed {s['seed']}"
        )
    lines.append(f"time       {s['seconds']:.2f} s")
    lines.append(f"wrote      {s['output']}")
    lines.append("Research estimates from published NR fits; see the calibrated ranges above.")
    return "\n".join(lines)


@_common.handles_errors
def remnant(
    catalogue: Annotated[
        Path | None,
        typer.Argument(
            help="Canonical catalogue (Parquet from 'gwdeficit ingest'); default: the "
            "working folder's catalogue.parquet."
        ),
    ] = None,
    workdir: _common.WorkdirOpt = None,
    seed: _common.SeedOpt = 0,
    engine: _common.EngineOpt = "local",
    scheduler: _common.SchedulerOpt = None,
    batch_rows: _common.BatchRowsOpt = 1 << 16,  # gwdeficit.stream.DEFAULT_BATCH_ROWS
    ns_radius: Annotated[
        float | None,
        typer.Option(
            "--ns-radius",
            help="Neutron-star radius in km, used where a row has no tidal deformability "
            "(without it such neutron-star rows are not estimated).",
        ),
    ] = None,
    eos_relation: Annotated[
        str | None,
        typer.Option(
            "--eos-relation",
            help="Compactness - tidal deformability relation: yagi-yunes-2017 (default) or "
            "maselli-2013.",
        ),
    ] = None,
    baryonic_relation: Annotated[
        str | None,
        typer.Option(
            "--baryonic-relation",
            help="Neutron-star baryonic mass: lattimer-prakash-2001 (default) or "
            "timmes-woosley-weaver-1996.",
        ),
    ] = None,
    mtov: Annotated[
        float | None,
        typer.Option(
            "--mtov",
            help="Maximum mass of a non-rotating neutron star (Msun), for the BNS remnant kind.",
        ),
    ] = None,
    r16: Annotated[
        float | None,
        typer.Option(
            "--r16",
            help="Radius (km) of a 1.6 Msun neutron star for the BNS prompt-collapse threshold "
            "(default: --ns-radius).",
        ),
    ] = None,
    threads: Annotated[
        int | None,
        typer.Option(
            "--threads",
            help="Threads for the black-hole fits (default: the GWDEFICIT_THREADS environment "
            "variable, else every usable CPU; results do not depend on it). Local engine only.",
        ),
    ] = None,
    force: _common.ForceOpt = False,
    as_json: _common.JsonOpt = False,
) -> None:
    """Estimate each merger's remnant mass, spin, radiated energy and recoil from NR fits.

    Writes remnants.parquet into the working folder (every catalogue column, the default
    estimate with its fit spread, and one column per fit) and prints a summary. Neutron-star
    binaries go through the neutron-star fits; rows without the tidal information they need
    are marked not estimated, with the reason.
    """
    import warnings

    from gwdeficit import workdir as wd
    from gwdeficit.fits.registry import FitRangeWarning
    from gwdeficit.remnant import compute_remnants, default_threads, summarize_remnants
    from gwdeficit.schema import InputFileError, OptionError

    t0 = time.perf_counter()
    folder = wd.resolve_workdir(workdir)
    path = Path(catalogue) if catalogue is not None else folder / wd.CATALOGUE_FILE
    if catalogue is None and not path.exists():
        raise InputFileError(f"{path}: no such file (run 'gwdeficit ingest' first, or give it)")
    out = folder / wd.REMNANTS_FILE
    wd.check_writable(out, force, inputs=(path,))
    engine_name = _common.check_engine(engine, scheduler)
    if threads is not None and engine_name == "dask":
        raise OptionError(
            "--threads sets the local engine's threads; on Dask each task runs one fits "
            "thread and the cluster's workers set the parallelism"
        )
    n_threads = default_threads(threads)  # checks --threads and GWDEFICIT_THREADS up front
    from gwdeficit.stream import parquet_rows

    ns_options = {
        "ns_radius_km": ns_radius,
        "eos_relation": eos_relation,
        "baryonic_relation": baryonic_relation,
        "mtov_msun": mtov,
        "r16_km": r16,
    }
    ns_options = {k: v for k, v in ns_options.items() if v is not None}
    if engine_name == "dask" or parquet_rows(path) > batch_rows:
        # Larger than one batch (or on a cluster): streamed, same results (gwdeficit.stream).
        _streamed(
            path, out, engine_name, scheduler, seed, batch_rows, force, as_json, t0, ns_options,
            n_threads,
        )  # fmt: skip
        return
    df = wd.read_parquet(path)
    digest = wd.file_sha256(path)

    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", FitRangeWarning)
        if len(df) >= PROGRESS_MIN_ROWS and not as_json:
            from rich.progress import Progress

            with Progress(transient=True) as bar:
                task = bar.add_task("remnants", total=len(df))
                result = compute_remnants(
                    df,
                    seed=seed,
                    source=str(path),
                    inputs={str(path): digest},
                    progress=lambda done, total: bar.update(task, completed=done),
                    ns_options=ns_options,
                    threads=n_threads,
                )
        else:
            result = compute_remnants(
                df,
                seed=seed,
                source=str(path),
                inputs={str(path): digest},
                ns_options=ns_options,
                threads=n_threads,
            )
    del df
    wd.write_parquet(result, out, result.attrs, force=force, inputs=(path,))

    summary = summarize_remnants(result)
    draws = result.attrs.get("gwdeficit.remnant_draws", {})
    summary.update(
        input=str(path),
        output=str(out),
        seed=seed,
        phi12_drawn=draws.get("phi12", {}).get("rows", 0),
        seconds=time.perf_counter() - t0,
    )
    for w in caught:
        if issubclass(w.category, FitRangeWarning):
            _common.err(f"warning: {w.message}")
    _print_summary(summary, result.attrs.get("gwdeficit.neutron_star"), as_json)


def _print_summary(summary: dict[str, Any], ns_meta: dict[str, Any] | None, as_json: bool) -> None:
    """The neutron-star note (standard error, and in the JSON summary), then the summary."""
    if ns_meta:
        summary["neutron_star"] = ns_meta
        _common.err(f"note: {ns_meta['note']}")
    if as_json:
        _common.print_json(summary)
    else:
        typer.echo(format_summary(summary))


def _streamed(
    path: Path,
    out: Path,
    engine: str,
    scheduler: str | None,
    seed: int,
    batch_rows: int,
    force: bool,
    as_json: bool,
    t0: float,
    ns_options: dict[str, Any],
    threads: int,
) -> None:
    """The remnant stage batch by batch (local or Dask engine), then the same summary."""
    import warnings

    from gwdeficit.fits.registry import FitRangeWarning
    from gwdeficit.stream import remnant_stage

    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", FitRangeWarning)
        summary = remnant_stage(
            path,
            out,
            engine=engine,
            scheduler=scheduler,
            seed=seed,
            batch_rows=batch_rows,
            force=force,
            show_progress=_common.show_progress(as_json),
            ns_options=ns_options,
            threads=threads,
        )
    ns_meta = summary.pop("neutron_star", None)
    summary.update(input=str(path), output=str(out), seed=seed, seconds=time.perf_counter() - t0)
    for w in caught:
        if issubclass(w.category, FitRangeWarning):
            _common.err(f"warning: {w.message}")
    _print_summary(summary, ns_meta, as_json)
