"""``gwdeficit plot``: write the figures of a working folder (PNG, and PDF on request)."""

from __future__ import annotations

from typing import Annotated

import typer

from gwdeficit.cli._common import ForceOpt, WorkdirOpt, handles_errors

PdfOpt = Annotated[bool, typer.Option("--pdf", help="Also write a PDF of every figure.")]
VescOpt = Annotated[
    str | None,
    typer.Option(
        "--vesc",
        help=(
            "Escape speeds in km/s marked on the kick figure, comma-separated, optionally "
            "labelled: 'cluster=50,galaxy=544' (default: globular cluster 50, Milky Way 544)."
        ),
    ),
]
QuantityOpt = Annotated[
    str,
    typer.Option("--quantity", help="Rate-summary quantity drawn in the budget figures."),
]


@handles_errors
def plot(
    workdir: WorkdirOpt = None,
    pdf: PdfOpt = False,
    force: ForceOpt = False,
    vesc: VescOpt = None,
    quantity: QuantityOpt = "deficit_rate",
) -> None:
    """Draw the remnant, kick, budget and error-budget figures into <workdir>/figures/."""
    from gwdeficit.figures import parse_escape_speeds, write_figures

    report = write_figures(
        workdir, pdf=pdf, force=force, escape_speeds=parse_escape_speeds(vesc), quantity=quantity
    )
    for path in report.written:
        typer.echo(f"wrote {path}")
    for note in report.skipped:
        typer.echo(f"skipped {note}")
