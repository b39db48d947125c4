"""Shared pieces of the command line: error handling, option types, printing."""

from __future__ import annotations

import functools
import json
import os
import sys
import traceback
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Annotated, Any, TypeVar

import typer

from gwdeficit.schema import GwdeficitError, OptionError


@dataclass
class _State:
    debug: bool = bool(os.environ.get("GWDEFICIT_DEBUG"))


STATE = _State()

F = TypeVar("F", bound=Callable[..., Any])

WorkdirOpt = Annotated[
    Path | None,
    typer.Option(
        "--workdir",
        "--out",
        help="Working folder for outputs (default: $GWDEFICIT_WORKDIR or ./gwdeficit-work).",
    ),
]
ForceOpt = Annotated[bool, typer.Option("--force", help="Overwrite existing outputs.")]
JsonOpt = Annotated[bool, typer.Option("--json", help="Print the summary as JSON.")]
SeedOpt = Annotated[int, typer.Option("--seed", help="Seed of the run's random numbers.")]
EngineOpt = Annotated[
    str,
    typer.Option(
        "--engine",
        help="local: this machine, streaming inputs larger than one batch; dask: a Dask "
        "cluster (needs the 'dask' extra).",
    ),
]
SchedulerOpt = Annotated[
    str | None,
    typer.Option(
        "--scheduler",
        help="With --engine dask: address of a running Dask scheduler (e.g. "
        "tcp://127.0.0.1:8786); default: a local cluster on 127.0.0.1.",
        show_default=False,
    ),
]
BatchRowsOpt = Annotated[
    int,
    typer.Option(
        "--batch-rows",
        help="Rows per batch or partition (bounds memory); larger inputs are processed "
        "batch by batch.",
    ),
]


def check_engine(engine: str, scheduler: str | None) -> str:
    """Validate --engine / --scheduler; return the engine name in lower case."""
    name = engine.strip().lower()
    if name not in ("local", "dask"):
        raise OptionError(f"--engine {engine!r} is not known; valid: local, dask")
    if scheduler is not None and name != "dask":
        raise OptionError("--scheduler applies to --engine dask only")
    return name


def show_progress(as_json: bool) -> bool:
    """Progress bars go to standard error, only when it is a terminal and not with --json."""
    return not as_json and sys.stderr.isatty()


def err(message: str) -> None:
    """Print a message on standard error."""
    typer.echo(message, err=True)


def handles_errors(fn: F) -> F:
    """Turn user errors into a message and exit 2, internal errors into a short note and exit 1."""

    @functools.wraps(fn)
    def wrapper(*args: Any, **kwargs: Any) -> Any:
        try:
            return fn(*args, **kwargs)
        except (typer.Exit, typer.Abort, SystemExit):
            raise
        except GwdeficitError as exc:
            err(f"error: {exc}")
            raise typer.Exit(exc.exit_code) from None
        except KeyboardInterrupt:
            err("interrupted; no partial output was written")
            raise typer.Exit(130) from None
        except Exception as exc:
            if STATE.debug:
                traceback.print_exc(file=sys.stderr)
            else:
                err(
                    f"internal error: {type(exc).__name__}: {exc}\n"
                    "This is a bug in gwdeficit. Rerun with --debug (gwdeficit --debug ...) "
                    "for the traceback."
                )
            raise typer.Exit(1) from None

    return wrapper  # type: ignore[return-value]


def parse_pairs(items: Sequence[str] | None, option: str) -> dict[str, str]:
    """Parse repeatable ``key=value`` options (``--column m1_msun=mass1``) into a dict."""
    out: dict[str, str] = {}
    for item in items or ():
        key, sep, value = item.partition("=")
        key, value = key.strip(), value.strip()
        if not sep or not key or not value:
            raise OptionError(f"{option} {item!r}: expected the form KEY=VALUE")
        if key in out and out[key] != value:
            raise OptionError(f"{option}: {key!r} given twice ({out[key]!r} and {value!r})")
        out[key] = value
    return out


def split_list(items: Sequence[str] | None) -> list[str]:
    """Flatten repeatable and comma-separated option values: ``-v a,b -v c`` -> [a, b, c]."""
    return [p.strip() for item in items or () for p in item.split(",") if p.strip()]


def print_json(obj: Any) -> None:
    """Print an object as indented JSON on standard output."""
    typer.echo(json.dumps(obj, indent=2, sort_keys=False, default=str))
