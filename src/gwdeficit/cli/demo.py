"""``gwdeficit demo``: run the whole chain on the bundled, invented demo data."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from gwdeficit.cli._common import ForceOpt, handles_errors

DemoWorkdirOpt = Annotated[
    Path | None,
    typer.Option(
        "--workdir",
        "--out",
        help="Fresh working folder for the demo's outputs (default: ./gwdeficit-demo).",
        show_default=False,
    ),
]


@handles_errors
def demo(workdir: DemoWorkdirOpt = None, force: ForceOpt = False) -> None:
    """Run ingest, remnant, rate, cosmic and plot on the bundled invented data; say where it went.

    Each stage is the real command, printed before it runs, so the output doubles as a tour.
    """
    from gwdeficit.demo import run_demo

    run_demo(workdir, force=force, echo=typer.echo)
