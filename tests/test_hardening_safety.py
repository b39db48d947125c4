"""Safety audit of the package source: nothing that executes or unpickles data.

Scans the syntax tree of every module under ``src/gwdeficit`` (and ``benchmarks/``) for:
pickle-family imports (pickle, dill, cloudpickle, shelve, marshal, joblib) and pandas'
``read_pickle``/``to_pickle``; the builtins ``eval``, ``exec``, ``compile`` and ``__import__``;
``DataFrame.eval``/``query``/``pandas.eval`` on anything but a literal string; ``yaml.load`` without
a safe loader and the unsafe yaml loaders; ``shell=True``; ``allow_pickle=True``; ``os.system``,
``os.popen``, ``os.exec*``/``os.spawn*``; and ``tarfile``/``zipfile`` ``extractall`` (member
paths can escape the target folder). The scanner is itself tested on snippets, so the audit
fails when such a thing is added. (The list is common practice, no source; see e.g. the Python
documentation warnings on pickle and on shell=True, from memory.)
"""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
SCANNED = [ROOT / "src" / "gwdeficit", ROOT / "benchmarks"]

BANNED_MODULES = {
    "pickle",
    "_pickle",
    "cPickle",
    "dill",
    "cloudpickle",
    "shelve",
    "marshal",
    "joblib",
}
BANNED_BUILTINS = {"eval", "exec", "compile", "__import__"}
BANNED_ATTR_CALLS = {
    "read_pickle",
    "to_pickle",
    "system",  # os.system
    "popen",  # os.popen
    "unsafe_load",
    "unsafe_load_all",
    "full_load",
    "full_load_all",
    "extractall",
}
EVAL_LIKE_METHODS = {"eval", "query"}  # pandas.eval, DataFrame.eval, DataFrame.query
UNSAFE_YAML_LOADERS = {"Loader", "UnsafeLoader", "FullLoader", "CLoader", "CUnsafeLoader"}
SAFE_YAML_LOADERS = {"SafeLoader", "CSafeLoader", "BaseLoader", "CBaseLoader"}


def _name(node: ast.AST) -> str:
    if isinstance(node, ast.Name):
        return node.id
    if isinstance(node, ast.Attribute):
        return node.attr
    return ""


def _dotted(node: ast.AST) -> str:
    parts = []
    while isinstance(node, ast.Attribute):
        parts.append(node.attr)
        node = node.value
    if isinstance(node, ast.Name):
        parts.append(node.id)
    return ".".join(reversed(parts))


def audit_source(source: str, filename: str = "<snippet>") -> list[str]:
    """Return one finding per unsafe construct in ``source`` ("file:line: what")."""
    tree = ast.parse(source, filename=filename)
    found: list[str] = []

    def hit(node: ast.AST, what: str) -> None:
        found.append(f"{filename}:{getattr(node, 'lineno', 0)}: {what}")

    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            for alias in node.names:
                if alias.name.split(".")[0] in BANNED_MODULES:
                    hit(node, f"import {alias.name}")
        elif isinstance(node, ast.ImportFrom):
            mod = (node.module or "").split(".")[0]
            if mod in BANNED_MODULES:
                hit(node, f"from {node.module} import ...")
            for alias in node.names:
                if alias.name in {"read_pickle", "to_pickle"} | UNSAFE_YAML_LOADERS - {"Loader"}:
                    hit(node, f"from {node.module} import {alias.name}")
        elif isinstance(node, ast.Call):
            func = node.func
            fname = _name(func)
            dotted = _dotted(func)
            if isinstance(func, ast.Name) and fname in BANNED_BUILTINS:
                hit(node, f"call to builtin {fname}()")
            if isinstance(func, ast.Attribute):
                if fname in BANNED_ATTR_CALLS:
                    hit(node, f"call to .{fname}()")
                if dotted.startswith("os.") and (
                    fname.startswith("exec") or fname.startswith("spawn")
                ):
                    hit(node, f"call to {dotted}()")
                if fname in EVAL_LIKE_METHODS and not (
                    node.args
                    and isinstance(node.args[0], ast.Constant)
                    and isinstance(node.args[0].value, str)
                ):
                    hit(node, f".{fname}() on a non-literal expression")
                if fname in {"load", "load_all"} and dotted.split(".")[0] in {"yaml", "ruamel"}:
                    loader = next((k.value for k in node.keywords if k.arg == "Loader"), None)
                    if loader is None and len(node.args) > 1:
                        loader = node.args[1]
                    if loader is None or _name(loader) not in SAFE_YAML_LOADERS:
                        hit(node, f"{dotted}() without a safe loader")
            for kw in node.keywords:
                if (
                    kw.arg in {"shell", "allow_pickle"}
                    and isinstance(kw.value, ast.Constant)
                    and kw.value.value is True
                ):
                    hit(node, f"{kw.arg}=True")
                elif kw.arg in {"shell", "allow_pickle"} and not isinstance(kw.value, ast.Constant):
                    hit(node, f"{kw.arg}= set from a variable")
        elif isinstance(node, ast.Attribute) and node.attr in {"UnsafeLoader", "FullLoader"}:
            hit(node, f"reference to yaml {node.attr}")
    return found


def _package_files() -> list[Path]:
    return sorted(p for d in SCANNED if d.is_dir() for p in d.rglob("*.py"))


def test_package_source_has_no_unsafe_constructs():
    files = _package_files()
    assert any(p.name == "workdir.py" for p in files)  # the scan really covers the package
    findings = []
    for p in files:
        findings += audit_source(p.read_text(encoding="utf-8"), str(p.relative_to(ROOT)))
    assert findings == [], "unsafe constructs in the package:\n" + "\n".join(findings)


def test_no_pickle_based_file_formats_in_source():
    # Text-level backstop for calls the tree scan cannot see (getattr tricks, strings).
    for p in _package_files():
        text = p.read_text(encoding="utf-8")
        for needle in ("read_pickle(", "to_pickle(", "pickle.load", "allow_pickle=True"):
            assert needle not in text, f"{p}: {needle}"


UNSAFE_SNIPPETS = [
    "import pickle",
    "import cloudpickle as cp",
    "from joblib import load",
    "from pickle import loads",
    "import pandas as pd\ndf = pd.read_pickle(path)",
    "df.to_pickle('x.pkl')",
    "eval(user_text)",
    "exec(code)",
    "compile(src, 'f', 'exec')",
    "__import__(name)",
    "df.query(user_filter)",
    "df.eval(expr)",
    "pd.eval(expr)",
    "import yaml\nyaml.load(fh)",
    "import yaml\nyaml.load(fh, Loader=yaml.Loader)",
    "import yaml\nyaml.load(fh, yaml.FullLoader)",
    "import yaml\nyaml.unsafe_load(fh)",
    "import yaml\nyaml.full_load(fh)",
    "import subprocess\nsubprocess.run(cmd, shell=True)",
    "import subprocess\nsubprocess.Popen(cmd, shell=flag)",
    "import numpy as np\nnp.load('a.npy', allow_pickle=True)",
    "import os\nos.system('ls')",
    "import os\nos.popen('ls')",
    "import os\nos.execvp('ls', ['ls'])",
    "import os\nos.spawnl(os.P_WAIT, 'ls')",
    "import tarfile\ntarfile.open(p).extractall(dest)",
]

SAFE_SNIPPETS = [
    "import json\njson.loads(text)",
    "import ast\nast.literal_eval(text)",
    "import yaml\nyaml.safe_load(fh)",
    "import yaml\nyaml.load(fh, Loader=yaml.SafeLoader)",
    "import subprocess\nsubprocess.run(['git', 'status'], check=True)",
    "import numpy as np\nnp.load('a.npy')",
    "df.query('z < 1')",
    "import importlib\nimportlib.import_module('gwdeficit.io')",
    "import tomllib\ntomllib.loads(text)",
    "model.evaluate(x)",
]


@pytest.mark.parametrize("snippet", UNSAFE_SNIPPETS)
def test_scanner_flags_unsafe_snippet(snippet):
    assert audit_source(snippet), f"scanner missed: {snippet!r}"


@pytest.mark.parametrize("snippet", SAFE_SNIPPETS)
def test_scanner_accepts_safe_snippet(snippet):
    assert audit_source(snippet) == []


# -- paths inside files are data ----------------------------------------------------------------

_OPENED: list[str] = []
_RECORDING = [False]


def _audit(event: str, args: tuple) -> None:
    if _RECORDING[0] and event in ("open", "os.listdir", "os.scandir", "subprocess.Popen"):
        _OPENED.append(f"{event}:{args[0]!s}")


def test_paths_in_metadata_are_never_opened_or_executed(tmp_path, monkeypatch):
    """Provenance paths and names in a table's metadata are carried forward, not followed.

    A remnants table is given metadata naming a file outside the working folder and a
    shell-command string; ``rate`` and ``plot`` must run without opening either (Python audit
    hooks, PEP 578, see every open() and subprocess start) and without running the command.
    """
    import json
    import sys

    import numpy as np
    import pandas as pd
    import pyarrow.parquet as pq
    from typer.testing import CliRunner

    from gwdeficit.cli import app

    runner = CliRunner()
    work = tmp_path / "work"
    rng = np.random.default_rng(3)
    m1 = rng.uniform(5, 50, 30)
    src = tmp_path / "in.csv"
    pd.DataFrame(
        {"event": np.repeat(["A", "B", "C"], 10), "m1": m1, "m2": 0.7 * m1, "z": 0.2}
    ).to_csv(src, index=False)
    for args in (["ingest", str(src)], ["remnant"]):
        assert runner.invoke(app, [*args, "--workdir", str(work)]).exit_code == 0

    outside = tmp_path / "outside" / "secret.parquet"  # does not exist: reading it would fail
    marker = tmp_path / "pwned"
    command = f"$(touch {marker}); touch {marker}"
    rem = work / "remnants.parquet"
    table = pq.read_table(rem)
    meta = dict(table.schema.metadata)
    prov = json.loads(meta[b"gwdeficit.provenance"])
    prov[-1]["inputs"] = {str(outside): "0" * 64, command: "0" * 64, "../../etc/passwd": "0"}
    prov[-1]["command"] = ["sh", "-c", command]
    meta[b"gwdeficit.provenance"] = json.dumps(prov).encode()
    pq.write_table(table.replace_schema_metadata(meta), rem)

    if _audit not in getattr(sys, "_gwdeficit_hooks", []):
        sys.addaudithook(_audit)
        sys._gwdeficit_hooks = [*getattr(sys, "_gwdeficit_hooks", []), _audit]
    _OPENED.clear()
    _RECORDING[0] = True
    try:
        r1 = runner.invoke(app, ["rate", "--workdir", str(work), "--draws", "50"])
        r2 = runner.invoke(app, ["plot", "--workdir", str(work)])
    finally:
        _RECORDING[0] = False
    assert r1.exit_code == 0, r1.output
    assert r2.exit_code == 0, r2.output
    assert not marker.exists(), "a command from the metadata was executed"
    assert any(str(work) in p for p in _OPENED), "the audit hook saw no file at all"
    touched = [p for p in _OPENED if "outside" in p or "passwd" in p or "pwned" in p]
    assert touched == [], touched
    assert not any(p.startswith("subprocess.Popen") for p in _OPENED)
    # carried forward as data
    carried = json.loads(pq.read_schema(work / "rates.parquet").metadata[b"gwdeficit.provenance"])
    assert command in carried[1]["inputs"]
