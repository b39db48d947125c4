"""Atomic outputs under interruption: a writer killed mid-write never damages the old output.

A child process writes a large Parquet file over an existing output (``force=True``) and is sent
SIGINT or SIGKILL while the temporary file is being written. The previous output must stay
byte-identical; after SIGINT the child removes its own temporary file, after SIGKILL the next
write in the same folder removes it. (Atomic replace by rename within one folder: POSIX
``rename(2)``, common practice, no source.)
"""

from __future__ import annotations

import hashlib
import os
import signal
import subprocess
import sys
import textwrap
import time
from pathlib import Path

import pandas as pd
import pyarrow.parquet as pq
import pytest

from gwdeficit.workdir import TMP_PREFIX, write_parquet, write_text

pytestmark = pytest.mark.skipif(os.name != "posix", reason="POSIX signals")

# Child 1: the real writer, workdir.write_parquet, on a table large enough (~75 MB) that the
# write takes a second or more on this machine, so the kill lands while the temporary grows.
_CHILD_WRITE_PARQUET = """
import sys
import numpy as np, pandas as pd
from gwdeficit.workdir import write_parquet
rng = np.random.default_rng(20240601)
n = 1_200_000
df = pd.DataFrame({f"c{i}": rng.random(n) for i in range(8)})
print("ready", flush=True)
write_parquet(df, sys.argv[1], {"gwdeficit.test": "big"}, force=True)
print("done", flush=True)
"""

# Child 2: workdir.atomic_path with a Parquet writer that reports every row group, so the kill
# lands after a known number of row groups (deterministic, not timing-dependent).
_CHILD_ROW_GROUPS = """
import sys, time
import numpy as np, pyarrow as pa, pyarrow.parquet as pq
from gwdeficit.workdir import atomic_path
rng = np.random.default_rng(7)
with atomic_path(sys.argv[1], force=True) as tmp:
    batch = pa.table({"x": rng.random(200_000), "y": rng.random(200_000)})
    with pq.ParquetWriter(tmp, batch.schema) as w:
        for i in range(10_000):
            w.write_table(batch)
            print("group", i, flush=True)
            time.sleep(0.02)
print("done", flush=True)
"""


def _sha(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def _temporaries(folder: Path) -> list[Path]:
    return sorted(folder.glob(TMP_PREFIX + "*"))


def _start(script: str, out: Path) -> subprocess.Popen:
    return subprocess.Popen(
        [sys.executable, "-c", textwrap.dedent(script), str(out)],
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
        text=True,
    )


def _wait_for_growing_temporary(proc: subprocess.Popen, folder: Path, timeout: float = 60.0):
    """Wait until a temporary file exists beside the output and holds some bytes."""
    deadline = time.monotonic() + timeout
    while time.monotonic() < deadline:
        if proc.poll() is not None:
            pytest.fail(f"writer finished before it could be killed: {proc.communicate()}")
        tmps = _temporaries(folder)
        if tmps:
            try:
                if tmps[0].stat().st_size > 0:
                    return tmps[0]
            except FileNotFoundError:
                pass
        time.sleep(0.002)
    proc.kill()
    pytest.fail("no temporary file appeared")


def _previous_output(folder: Path) -> tuple[Path, str]:
    out = folder / "catalogue.parquet"
    write_parquet(pd.DataFrame({"a": [1.0, 2.0, 3.0]}), out, {"gwdeficit.test": "old"})
    return out, _sha(out)


def _finish(proc: subprocess.Popen) -> tuple[int, str, str]:
    stdout, stderr = proc.communicate(timeout=60)
    return proc.returncode, stdout, stderr


@pytest.mark.parametrize("sig", [signal.SIGINT, signal.SIGKILL], ids=["SIGINT", "SIGKILL"])
def test_write_parquet_killed_mid_write_keeps_previous_output(tmp_path, sig):
    out, old_sha = _previous_output(tmp_path)
    proc = _start(_CHILD_WRITE_PARQUET, out)
    assert proc.stdout.readline().strip() == "ready"
    tmp = _wait_for_growing_temporary(proc, tmp_path)
    proc.send_signal(sig)
    code, stdout, stderr = _finish(proc)

    assert "done" not in stdout, "the kill landed after the write had finished"
    assert code != 0
    assert _sha(out) == old_sha, "previous output changed"
    assert pq.read_table(out).column("a").to_pylist() == [1.0, 2.0, 3.0]
    if sig == signal.SIGINT:
        # KeyboardInterrupt unwinds through atomic_path, which removes its temporary at once.
        assert "KeyboardInterrupt" in stderr
        assert _temporaries(tmp_path) == []
    else:
        # SIGKILL allows no clean-up: the temporary stays until the next write in this folder.
        assert tmp.exists()
        write_text("next run\n", tmp_path / "rejects.csv")
        assert _temporaries(tmp_path) == []
        assert _sha(out) == old_sha


@pytest.mark.parametrize("sig", [signal.SIGINT, signal.SIGKILL], ids=["SIGINT", "SIGKILL"])
def test_atomic_path_killed_after_some_row_groups(tmp_path, sig):
    out, old_sha = _previous_output(tmp_path)
    proc = _start(_CHILD_ROW_GROUPS, out)
    for _ in range(3):  # three row groups are on disk in the temporary
        assert proc.stdout.readline().startswith("group")
    assert len(_temporaries(tmp_path)) == 1
    proc.send_signal(sig)
    code, stdout, _ = _finish(proc)

    assert "done" not in stdout
    assert code != 0
    assert _sha(out) == old_sha
    if sig == signal.SIGKILL:
        assert len(_temporaries(tmp_path)) == 1
    # The next run (here: the same output written again) succeeds and leaves no temporaries.
    write_parquet(pd.DataFrame({"a": [9.0]}), out, {}, force=True)
    assert _temporaries(tmp_path) == []
    assert pq.read_table(out).column("a").to_pylist() == [9.0]


def test_write_text_is_atomic_on_error(tmp_path):
    out = tmp_path / "rejects.csv"
    out.write_text("old\n")

    with pytest.raises(TypeError):
        write_text(12345, out, force=True)  # type: ignore[arg-type]  # not a str
    assert out.read_text() == "old\n"
    assert _temporaries(tmp_path) == []
