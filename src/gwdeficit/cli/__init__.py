"""The ``gwdeficit`` command line: parsing and printing only; every computation lives in the API.

Each command is a function in its own module of this package, registered on :data:`app` below.
Heavy libraries (numpy, pandas, astropy, pyarrow) are imported inside the command bodies, so that
``gwdeficit --help`` and ``gwdeficit --version`` start fast.
"""

from __future__ import annotations

import os

import typer

from gwdeficit import __version__
from gwdeficit.cli import _common

app = typer.Typer(
    name="gwdeficit",
    help=(
        "Mass turned into gravitational waves by compact-binary mergers: per merger, per volume "
        "and time, and over cosmic history. Research estimates from published fits."
    ),
    no_args_is_help=True,
    add_completion=False,
    pretty_exceptions_enable=False,
    rich_markup_mode=None,
)


def _version(value: bool) -> None:
    if value:
        typer.echo(f"gwdeficit {__version__}")
        raise typer.Exit(0)


@app.callback()
def _root(
    version: bool = typer.Option(
        False, "--version", callback=_version, is_eager=True, help="Print the version and exit."
    ),
    debug: bool = typer.Option(
        False, "--debug", help="Show the full traceback of an internal error."
    ),
) -> None:
    """Mass-deficit budgets of compact-binary mergers (exit codes: 0 ok, 2 user error, 1 bug)."""
    # Per invocation (several runs can share one process): the flag, else $GWDEFICIT_DEBUG.
    _common.STATE.debug = debug or bool(os.environ.get("GWDEFICIT_DEBUG"))


# Command registration: one module per command. ---------------------------------------------
# (each command module adds two lines here: import it, then app.command("name")(module.fn))
from gwdeficit.cli import plot as _plot  # noqa: E402

app.command("plot")(_plot.plot)
from gwdeficit.cli import demo as _demo  # noqa: E402

app.command("demo")(_demo.demo)
from gwdeficit.cli import cosmic as _cosmic  # noqa: E402

app.command("cosmic")(_cosmic.cosmic)
from gwdeficit.cli import ingest as _ingest  # noqa: E402

app.command("ingest")(_ingest.ingest)
from gwdeficit.cli import remnant as _remnant  # noqa: E402

app.command("remnant")(_remnant.remnant)
from gwdeficit.cli import fits as _fits  # noqa: E402

app.command("fits")(_fits.fits)
from gwdeficit.cli import rate as _rate  # noqa: E402

app.command("rate")(_rate.rate)


def main() -> None:
    """Console-script entry point."""
    app()
