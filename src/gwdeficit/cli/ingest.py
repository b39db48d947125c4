"""``gwdeficit ingest``: a user's binary-parameter table -> the canonical catalogue."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated, Any

import typer

from gwdeficit.cli import _common

_FORMATS = "auto, csv, tsv, whitespace, parquet, feather, fits, ecsv"


def format_summary(summary: dict[str, Any]) -> str:
    """The ingest summary as readable text."""
    s = summary
    lines = [
        f"input      {s['input']} ({s['format']})",
        f"rows       read {s['rows_read']} = accepted {s['rows_accepted']} "
        f"+ rejected {s['rows_rejected']}",
    ]
    for reason, n in s["rejects_by_reason"].items():
        lines.append(f"  rejected {n:>8}  {reason}")
    spe = s["samples_per_event"]
    lines.append(
        f"events     {s['events']}; samples per event min {spe['min']}, "
        f"median {spe['median']:g}, max {spe['max']}"
    )
    kinds = ", ".join(f"{k} {n}" for k, n in s["kinds"].items()) or "-"
    lines.append(f"kinds      {kinds}")
    spins = ", ".join(f"{k} {n}" for k, n in s["spin_assumption"].items()) or "-"
    lines.append(f"spins      {spins}")
    if s["spin_assumption"].get("none"):
        lines.append("  WARNING: no spin columns were found; every spin is set to zero")
    for name, label in (
        ("m1_msun", "m1 [Msun]"),
        ("m2_msun", "m2 [Msun]"),
        ("z", "z"),
        ("dl_mpc", "dL [Mpc]"),
    ):
        if name in s["ranges"]:
            lo, hi = s["ranges"][name]
            lines.append(f"{label:<10} {lo:.6g} .. {hi:.6g}")
    lines.append(f"cosmology  {s['cosmology']}")
    lines.append("conversions and assumptions:")
    lines.extend(f"  - {c}" for c in s["conversions"])
    if "catalogue" in s:
        lines.append(f"catalogue  {s['catalogue']}")
    if "rejects" in s:
        lines.append(f"rejects    {s['rejects']} ({s['rows_rejected']} rows)")
    lines.append("Research estimate inputs: check the conversions above before using the numbers.")
    return "\n".join(lines)


@_common.handles_errors
def ingest(
    file: Annotated[
        Path,
        typer.Argument(
            help="Input table: CSV, TSV, whitespace text (optionally "
            "gzip-compressed), Parquet file or folder, "
            "Feather/Arrow, FITS or ECSV."
        ),
    ],
    workdir: _common.WorkdirOpt = None,
    column: Annotated[
        list[str] | None,
        typer.Option(
            "--column",
            help="Map a quantity to an input column: canonical=theirs, "
            "e.g. m1_msun=M1 or mchirp=Mc (repeatable).",
        ),
    ] = None,
    unit: Annotated[
        list[str] | None,
        typer.Option(
            "--unit",
            help="Unit of an input column: column=unit, e.g. Mc=kg "
            "(repeatable; astropy unit syntax).",
        ),
    ] = None,
    cosmology: Annotated[
        str, typer.Option("--cosmology", help="astropy cosmology realization for z <-> dL.")
    ] = "Planck18",
    mass_frame: Annotated[
        str,
        typer.Option(
            "--mass-frame",
            help="Frame of masses whose name has no frame marker: source or detector.",
        ),
    ] = "source",
    ns_max_mass: Annotated[
        float,
        typer.Option(
            "--ns-max-mass",
            help="Neutron-star maximum mass in Msun, to tell BBH / "
            "NSBH / BNS apart when there is no kind column.",
        ),
    ] = 3.0,
    on_bad: Annotated[
        str,
        typer.Option(
            "--on-bad",
            help="error: stop at the first bad row; skip: write bad rows "
            "to rejects.csv with a reason.",
        ),
    ] = "error",
    fmt: Annotated[str, typer.Option("--format", help=f"Input format ({_FORMATS}).")] = "auto",
    event: Annotated[
        str | None,
        typer.Option(
            "--event",
            help="Event label for every row of a table without an event "
            "column (one event's posterior samples).",
        ),
    ] = None,
    batch_rows: Annotated[
        int, typer.Option("--batch-rows", help="Rows read per batch (bounds memory).")
    ] = 1 << 18,  # gwdeficit.io.formats.DEFAULT_BATCH_ROWS (not imported: keeps --help fast)
    engine: _common.EngineOpt = "local",
    scheduler: _common.SchedulerOpt = None,
    force: _common.ForceOpt = False,
    as_json: _common.JsonOpt = False,
) -> None:
    """Validate a binary-parameter table and write the canonical catalogue.

    Writes catalogue.parquet and rejects.csv into the working folder and prints a summary:
    rows read / accepted / rejected by reason, events, ranges, conversions and assumptions.
    """
    from gwdeficit.io import IngestOptions
    from gwdeficit.stream import row_progress, stream_ingest

    if _common.check_engine(engine, scheduler) == "dask":
        _common.err(
            "note: ingest reads its input in order on this machine, batch by batch (row "
            "numbering and reject accounting are sequential); --engine dask applies to the "
            "remnant and rate stages"
        )
    options = IngestOptions(
        columns=_common.parse_pairs(column, "--column"),
        units=_common.parse_pairs(unit, "--unit"),
        cosmology=cosmology,
        mass_frame=mass_frame.strip().lower(),
        ns_max_mass=ns_max_mass,
        on_bad=on_bad.strip().lower(),
        fmt=None if fmt.strip().lower() == "auto" else fmt,
        event=event,
        batch_rows=batch_rows,
    )
    with row_progress("ingest", None, _common.show_progress(as_json)) as advance:
        summary = stream_ingest(file, workdir, force=force, options=options, progress=advance)
    if as_json:
        _common.print_json(summary)
    else:
        typer.echo(format_summary(summary))
