"""The exit-code contract of the command line: 0 ok, 2 user error, 1 internal error (a bug).

Checked through typer's CliRunner on a test-only app that uses the real root callback
(``--debug``) and the real :func:`gwdeficit.cli._common.handles_errors`, and through the real
``gwdeficit`` entry point in a subprocess. The contract itself is the project's (README, "Exit
codes"); 2 for usage errors is also click's own convention (click documentation, from memory).
"""

from __future__ import annotations

import subprocess
import sys

import pytest
import typer
from typer.testing import CliRunner

from gwdeficit import cli
from gwdeficit.cli import _common
from gwdeficit.schema import (
    BadRowsError,
    GwdeficitError,
    InputFileError,
    OptionError,
    OutputExistsError,
    SchemaError,
    UnitError,
)

runner = CliRunner()


def _make_app() -> typer.Typer:
    app = typer.Typer(add_completion=False, pretty_exceptions_enable=False)
    app.callback()(cli._root)

    @app.command("ok")
    @_common.handles_errors
    def ok() -> None:
        typer.echo("fine")

    @app.command("user")
    @_common.handles_errors
    def user(kind: str = "input") -> None:
        errors: dict[str, GwdeficitError] = {
            "input": InputFileError("data.csv: no such file"),
            "schema": SchemaError("data.csv: column 'm1_msun' is missing"),
            "unit": UnitError("data.csv: column 'm1': unit 'furlong' is not a mass"),
            "rows": BadRowsError("data.csv", "chi1", "spin magnitude above 1", [3, 7]),
            "option": OptionError("--seed: expected an integer"),
            "exists": OutputExistsError("catalogue.parquet exists; pass --force to overwrite it"),
        }
        raise errors[kind]

    @app.command("bug")
    @_common.handles_errors
    def bug() -> None:
        raise ZeroDivisionError("division by zero in a deep helper")

    @app.command("interrupt")
    @_common.handles_errors
    def interrupt() -> None:
        raise KeyboardInterrupt

    @app.command("exit3")
    @_common.handles_errors
    def exit3() -> None:
        raise typer.Exit(3)

    return app


@pytest.fixture
def app(monkeypatch):
    monkeypatch.delenv("GWDEFICIT_DEBUG", raising=False)
    monkeypatch.setattr(_common.STATE, "debug", False)
    return _make_app()


def test_success_exits_0(app):
    res = runner.invoke(app, ["ok"])
    assert res.exit_code == 0
    assert res.stdout.strip() == "fine"
    assert res.stderr == ""


@pytest.mark.parametrize("kind", ["input", "schema", "unit", "rows", "option", "exists"])
def test_user_errors_exit_2_with_message_and_no_traceback(app, kind):
    res = runner.invoke(app, ["user", "--kind", kind])
    assert res.exit_code == 2
    assert res.stderr.startswith("error: ")
    assert "Traceback" not in res.output
    assert "--debug" not in res.stderr  # a user error is not a bug: no debug hint


def test_bad_rows_message_names_file_column_rows(app):
    res = runner.invoke(app, ["user", "--kind", "rows"])
    assert "data.csv" in res.stderr and "chi1" in res.stderr and "rows 3, 7" in res.stderr


def test_internal_error_exits_1_short_message_with_debug_hint(app):
    res = runner.invoke(app, ["bug"])
    assert res.exit_code == 1
    assert "internal error: ZeroDivisionError: division by zero" in res.stderr
    assert "--debug" in res.stderr
    assert "Traceback" not in res.output
    assert len(res.stderr.strip().splitlines()) <= 3


def test_debug_shows_the_traceback(app):
    res = runner.invoke(app, ["--debug", "bug"])
    assert res.exit_code == 1
    assert "Traceback (most recent call last)" in res.stderr
    assert "ZeroDivisionError" in res.stderr


def test_debug_does_not_leak_into_the_next_invocation(app):
    # Several invocations in one process (tests, notebooks): --debug applies to its own run only.
    runner.invoke(app, ["--debug", "bug"])
    res = runner.invoke(app, ["bug"])
    assert res.exit_code == 1
    assert "Traceback" not in res.stderr


def test_debug_from_environment(app, monkeypatch):
    monkeypatch.setenv("GWDEFICIT_DEBUG", "1")
    res = runner.invoke(app, ["bug"])
    assert res.exit_code == 1
    assert "Traceback (most recent call last)" in res.stderr


def test_user_error_stays_2_under_debug(app):
    res = runner.invoke(app, ["--debug", "user", "--kind", "schema"])
    assert res.exit_code == 2
    assert "Traceback" not in res.output


def test_keyboard_interrupt_exits_130(app):
    # 128 + SIGINT(2): the shell convention for a run ended by Ctrl-C (POSIX shells, from memory).
    res = runner.invoke(app, ["interrupt"])
    assert res.exit_code == 130
    assert "interrupted" in res.stderr


def test_explicit_exit_passes_through(app):
    assert runner.invoke(app, ["exit3"]).exit_code == 3


def test_bad_option_is_a_user_error(app):
    res = runner.invoke(app, ["user", "--no-such-option"])
    assert res.exit_code == 2
    assert runner.invoke(app, ["no-such-command"]).exit_code == 2


def _gwdeficit(*args: str) -> subprocess.CompletedProcess:
    return subprocess.run(
        [sys.executable, "-c", "from gwdeficit.cli import main; main()", *args],
        capture_output=True,
        text=True,
        timeout=120,
    )


def test_real_entry_point_exit_codes():
    assert _gwdeficit("--help").returncode == 0
    ver = _gwdeficit("--version")
    assert ver.returncode == 0 and ver.stdout.startswith("gwdeficit ")
    bad = _gwdeficit("--no-such-option")
    assert bad.returncode == 2
    assert "Traceback" not in bad.stderr
    assert _gwdeficit("no-such-command").returncode == 2


# -- real commands on hand-made (hostile) catalogues: exit 0 or 2, never 1 -----------------------


@pytest.fixture(scope="module")
def catalogue(tmp_path_factory):
    folder = tmp_path_factory.mktemp("cat")
    src = folder / "in.csv"
    src.write_text(
        "event,m1,m2,chi1,chi2,tilt1,tilt2,z\nA,30,20,0.1,0.2,0.3,0.4,0.1\n"
        "A,31,19,0.1,0.2,0.3,0.4,0.1\nB,10,5,0.5,0.5,1,1,0.5\n"
    )
    res = CliRunner().invoke(cli.app, ["ingest", str(src), "--workdir", str(folder / "w")])
    assert res.exit_code == 0, res.output
    return folder / "w" / "catalogue.parquet"


def _hostile_catalogue(path, tmp_path, change: str):
    import pyarrow as pa
    import pyarrow.parquet as pq

    t = pq.read_table(path)
    i = t.schema.get_field_index("m1_msun")
    n = t.num_rows
    column = {
        "text": pa.array(["a"] * n),
        "bool": pa.array([True] * n),
        "list": pa.array([[1.0]] * n),
        "null": pa.nulls(n, pa.float64()),
        "negative": pa.array([-1.0] * n),
        "inf": pa.array([float("inf")] * n),
    }.get(change)
    if change == "missing":
        t = t.remove_column(i)
    elif change == "kind":
        t = t.set_column(t.schema.get_field_index("kind"), "kind", pa.array(["XYZ"] * n))
    elif change == "empty":
        t = t.slice(0, 0)
    else:
        t = t.set_column(i, "m1_msun", column)
    out = tmp_path / f"{change}.parquet"
    pq.write_table(t, out)
    return out


@pytest.mark.parametrize("command", ["remnant", "rate"])
@pytest.mark.parametrize(
    "change", ["text", "bool", "list", "null", "negative", "inf", "missing", "kind", "empty"]
)
def test_hand_made_catalogues_give_exit_0_or_2(catalogue, tmp_path, command, change, monkeypatch):
    monkeypatch.setattr(_common.STATE, "debug", False)
    path = _hostile_catalogue(catalogue, tmp_path, change)
    extra = ["--draws", "20"] if command == "rate" else []
    res = runner.invoke(cli.app, [command, str(path), "--workdir", str(tmp_path / "w"), *extra])
    assert res.exit_code in (0, 2), res.output
    assert "internal error" not in res.output
    if res.exit_code == 2:
        assert res.stderr.startswith("error: ") or "\nerror: " in res.stderr
