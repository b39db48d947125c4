"""Outputs: every write goes through workdir.atomic_path, never over an input, and a real
command interrupted mid-run leaves the previous output intact.

1. A source audit (syntax tree): each call that writes a file (``savefig``, Parquet writers,
   ``to_csv``, ``open(..., "w")``, ``Path.write_text``, astropy ``write``/``writeto``, numpy
   ``save*``) must write to a temporary path bound by ``with atomic_path(...) as tmp`` (or to a
   file handle opened on one). The audit is itself tested on snippets.
2. The real commands refuse to write an output over the file they read (also through a
   symlink), leave that file byte-identical, and exit with code 2.
3. ``gwdeficit ingest`` on a large input, sent SIGINT mid-run: exit 130, the previous
   catalogue byte-identical, no temporary files. (Exit status 128 + signal number for a run
   ended by a signal: POSIX shell convention, from memory.)
"""

from __future__ import annotations

import ast
import hashlib
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from typer.testing import CliRunner

from gwdeficit.cli import app
from gwdeficit.workdir import TMP_PREFIX

ROOT = Path(__file__).resolve().parents[1]
PACKAGE = ROOT / "src" / "gwdeficit"

# -- 1. source audit ----------------------------------------------------------------------------

_PATH_FIRST = {"savefig", "ParquetWriter", "write_feather", "writeto", "savetxt", "save", "savez"}
_METHOD_ON_PATH = {"write_text", "write_bytes"}
_FRAME_WRITERS = {"to_csv", "to_parquet", "to_feather", "to_json", "to_excel", "to_hdf"}


def _write_target(call: ast.Call) -> ast.AST | bool | None:
    """The expression a call writes to; None if the call does not write a file; True if it
    writes through an already-open writer object (nothing to check)."""
    f = call.func
    name = f.id if isinstance(f, ast.Name) else f.attr if isinstance(f, ast.Attribute) else ""
    if name == "open" and isinstance(f, ast.Name):
        mode = (
            call.args[1]
            if len(call.args) > 1
            else next((k.value for k in call.keywords if k.arg == "mode"), None)
        )
        if isinstance(mode, ast.Constant) and any(c in str(mode.value) for c in "wax+"):
            return call.args[0] if call.args else True
        return None
    if name in _PATH_FIRST:
        if name == "save" and not (isinstance(f, ast.Attribute) and _root(f) in ("np", "numpy")):
            return None
        return call.args[0] if call.args else True
    if name == "write_table":  # pq.write_table(table, where) vs writer.write_table(table)
        return call.args[1] if len(call.args) > 1 else True
    if name in _METHOD_ON_PATH and isinstance(f, ast.Attribute):
        return f.value
    if name in _FRAME_WRITERS:
        return call.args[0] if call.args else None  # to_csv() with no path returns text
    if name == "write" and isinstance(f, ast.Attribute) and call.args:
        first = call.args[0]
        # astropy Table.write(path, format=...) vs fh.write(text)
        if any(k.arg == "format" for k in call.keywords):
            return first
    return None


def _root(node: ast.AST) -> str:
    while isinstance(node, ast.Attribute):
        node = node.value
    return node.id if isinstance(node, ast.Name) else ""


def audit_writes(source: str, filename: str = "<snippet>") -> list[str]:
    """Writes in ``source`` whose target is not a temporary from ``atomic_path``."""
    tree = ast.parse(source, filename=filename)
    findings: list[str] = []
    for func in [
        n for n in ast.walk(tree) if isinstance(n, ast.FunctionDef | ast.AsyncFunctionDef)
    ]:
        if func.name == "atomic_path":  # the mechanism itself (it fsyncs its temporary)
            continue
        safe: set[str] = set()
        for node in ast.walk(func):
            if isinstance(node, ast.With | ast.AsyncWith):
                for item in node.items:
                    call = item.context_expr
                    if not isinstance(call, ast.Call) or not isinstance(
                        item.optional_vars, ast.Name
                    ):
                        continue
                    cname = (
                        call.func.attr
                        if isinstance(call.func, ast.Attribute)
                        else getattr(call.func, "id", "")
                    )
                    if cname == "atomic_path":
                        safe.add(item.optional_vars.id)
        changed = True
        while changed:  # file handles opened on a safe temporary are safe too
            changed = False
            for node in ast.walk(func):
                if isinstance(node, ast.With | ast.AsyncWith):
                    for item in node.items:
                        call = item.context_expr
                        if (
                            isinstance(call, ast.Call)
                            and isinstance(item.optional_vars, ast.Name)
                            and call.args
                            and isinstance(call.args[0], ast.Name)
                            and call.args[0].id in safe
                            and item.optional_vars.id not in safe
                        ):
                            safe.add(item.optional_vars.id)
                            changed = True
        for node in ast.walk(func):
            if not isinstance(node, ast.Call):
                continue
            target = _write_target(node)
            if target is None or target is True:
                continue
            if isinstance(target, ast.Name) and target.id in safe:
                continue
            findings.append(f"{filename}:{node.lineno}: write to {ast.unparse(target)!r}")
    return findings


def test_every_write_in_the_package_is_atomic():
    files = sorted(PACKAGE.rglob("*.py"))
    findings = []
    for p in files:
        findings += audit_writes(p.read_text(encoding="utf-8"), str(p.relative_to(ROOT)))
    assert findings == [], "writes that bypass workdir.atomic_path:\n" + "\n".join(findings)


@pytest.mark.parametrize(
    "snippet",
    [
        "def f(df, out):\n    df.to_csv(out)",
        "def f(fig, out):\n    fig.savefig(out)",
        "def f(t, out):\n    import pyarrow.parquet as pq\n    pq.write_table(t, out)",
        "def f(out):\n    with open(out, 'w') as fh:\n        fh.write('x')",
        "def f(out):\n    out.write_text('x')",
        "def f(t, out):\n    t.write(out, format='fits')",
        "def f(a, out):\n    import numpy as np\n    np.save(out, a)",
        "def f(df, out):\n    with atomic_path(out) as tmp:\n        df.to_csv(out)",
    ],
)
def test_write_audit_flags_direct_writes(snippet):
    assert audit_writes(snippet)


@pytest.mark.parametrize(
    "snippet",
    [
        "def f(df, out):\n    with atomic_path(out) as tmp:\n        df.to_csv(tmp)",
        "def f(out):\n    with wd.atomic_path(out) as tmp, open(tmp, 'w') as fh:\n"
        "        fh.write('x')",
        "def f(t, out):\n    with atomic_path(out) as tmp:\n        w = pq.ParquetWriter(tmp, s)\n"
        "        w.write_table(t)",
        "def f(p):\n    with open(p) as fh:\n        return fh.read()",
        "def f(df):\n    return df.to_csv(index=False)",
    ],
)
def test_write_audit_accepts_atomic_writes(snippet):
    assert audit_writes(snippet) == []


# -- 2. never over the input, through the real commands ------------------------------------------

runner = CliRunner()


def _sha(p: Path) -> str:
    return hashlib.sha256(p.read_bytes()).hexdigest()


@pytest.fixture(scope="module")
def chain(tmp_path_factory):
    """A working folder with catalogue.parquet and remnants.parquet from a small input."""
    folder = tmp_path_factory.mktemp("chain")
    rng = np.random.default_rng(5)
    n = 40
    m1 = rng.uniform(5, 60, n)
    src = folder / "input.csv"
    pd.DataFrame(
        {
            "event": np.repeat(["E1", "E2", "E3", "E4"], 10),
            "m1": m1,
            "m2": m1 * rng.uniform(0.2, 1.0, n),
            "chi1": rng.uniform(0, 0.9, n),
            "chi2": rng.uniform(0, 0.9, n),
            "tilt1": rng.uniform(0, np.pi, n),
            "tilt2": rng.uniform(0, np.pi, n),
            "z": rng.uniform(0.05, 1.0, n),
        }
    ).to_csv(src, index=False)
    work = folder / "work"
    for args in (["ingest", str(src)], ["remnant"]):
        res = runner.invoke(app, [*args, "--workdir", str(work)])
        assert res.exit_code == 0, res.output
    return work


@pytest.mark.parametrize(
    ("command", "target"),
    [
        ("ingest", "catalogue.parquet"),
        ("remnant", "remnants.parquet"),
        ("rate", "rates.parquet"),
        ("cosmic", "cosmic.parquet"),
    ],
)
@pytest.mark.parametrize("via_symlink", [False, True], ids=["direct", "symlink"])
def test_commands_never_write_over_their_input(chain, tmp_path, command, target, via_symlink):
    work = tmp_path / "work"
    work.mkdir()
    for name in ("catalogue.parquet", "remnants.parquet"):
        (work / name).write_bytes((chain / name).read_bytes())
    victim = work / target
    if not victim.exists():  # rate/cosmic outputs: put a readable remnants table there
        victim.write_bytes((chain / "remnants.parquet").read_bytes())
    before = _sha(victim)
    given = victim
    if via_symlink:
        given = tmp_path / f"link-{target}"
        given.symlink_to(victim)
    extra = ["--draws", "20"] if command in ("rate", "cosmic") else []
    if command == "cosmic":
        extra += ["--no-figure"]
    res = runner.invoke(app, [command, str(given), "--workdir", str(work), "--force", *extra])
    assert res.exit_code == 2, res.output
    assert "input" in res.stderr
    assert _sha(victim) == before
    assert not list(work.glob(TMP_PREFIX + "*"))


# -- 3. a real command interrupted --------------------------------------------------------------


@pytest.mark.skipif(os.name != "posix", reason="POSIX signals")
def test_ingest_interrupted_keeps_previous_catalogue(chain, tmp_path):
    import pyarrow as pa
    import pyarrow.parquet as pq

    rng = np.random.default_rng(9)
    n = 1_000_000
    m1 = rng.uniform(5, 60, n)
    big = tmp_path / "big.parquet"
    pq.write_table(
        pa.table({"m1": m1, "m2": m1 * rng.uniform(0.2, 1, n), "z": rng.uniform(0.01, 2, n)}),
        big,
    )
    work = tmp_path / "work"
    work.mkdir()
    previous = work / "catalogue.parquet"
    previous.write_bytes((chain / "catalogue.parquet").read_bytes())
    before = _sha(previous)
    proc = subprocess.Popen(
        [
            sys.executable,
            "-c",
            "from gwdeficit.cli import main; main()",
            "ingest",
            str(big),
            "--workdir",
            str(work),
            "--force",
            "--batch-rows",
            "20000",
        ],
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
        text=True,
    )
    deadline = time.monotonic() + 120
    while not list(work.glob(TMP_PREFIX + "*")):
        assert proc.poll() is None, (
            f"ingest ended before it could be interrupted: {proc.communicate()}"
        )
        assert time.monotonic() < deadline, "no temporary output appeared"
        time.sleep(0.005)
    time.sleep(0.1)  # well inside the write of a million-row input (50 batches)
    proc.send_signal(signal.SIGINT)
    _, stderr = proc.communicate(timeout=120)
    assert proc.returncode == 130, stderr
    assert "interrupted" in stderr
    assert "Traceback" not in stderr
    assert _sha(previous) == before
    assert not list(work.glob(TMP_PREFIX + "*"))
