"""Dedicated run: many writers killed at random moments; the output is always whole.

Each round starts a child that overwrites an existing Parquet output through
:func:`gwdeficit.workdir.write_parquet` and sends it SIGINT, SIGTERM or SIGKILL after a random
delay drawn from a seeded generator. Whatever the moment, the output afterwards is either the
previous file byte for byte or the complete new file, never a mixture; the next write in the
folder leaves no temporary files. Rounds: ``$GWDEFICIT_FUZZ_KILLS`` (default 60).
"""

from __future__ import annotations

import hashlib
import os
import signal
import subprocess
import sys
import textwrap
import time

import numpy as np
import pandas as pd
import pyarrow.parquet as pq
import pytest

from gwdeficit.workdir import TMP_PREFIX, write_parquet, write_text

N_ROWS = 1_000_000
_CHILD = f"""
import sys
import numpy as np, pandas as pd
from gwdeficit.workdir import write_parquet
rng = np.random.default_rng(11)
df = pd.DataFrame({{f"c{{i}}": rng.random({N_ROWS}) for i in range(4)}})
print("ready", flush=True)
write_parquet(df, sys.argv[1], {{"gwdeficit.test": "new"}}, force=True)
print("done", flush=True)
"""

SIGNALS = (signal.SIGINT, signal.SIGTERM, signal.SIGKILL)


@pytest.mark.fuzz
@pytest.mark.skipif(os.name != "posix", reason="POSIX signals")
def test_random_kills_never_leave_a_partial_output(tmp_path):
    rounds = int(os.environ.get("GWDEFICIT_FUZZ_KILLS", "60"))
    rng = np.random.default_rng(20240917)
    out = tmp_path / "remnants.parquet"
    write_parquet(pd.DataFrame({"a": [1.0]}), out, {"gwdeficit.test": "old"})
    old = hashlib.sha256(out.read_bytes()).hexdigest()

    # Time one uninterrupted write so the random delays span the whole write.
    t0 = time.monotonic()
    proc = subprocess.Popen(
        [sys.executable, "-c", textwrap.dedent(_CHILD), str(tmp_path / "probe.parquet")],
        stdout=subprocess.PIPE,
        text=True,
    )
    assert proc.stdout.readline().strip() == "ready"
    t0 = time.monotonic()
    proc.communicate(timeout=120)
    write_seconds = time.monotonic() - t0
    (tmp_path / "probe.parquet").unlink()

    outcomes = {"old": 0, "new": 0}
    for i in range(rounds):
        sig = SIGNALS[i % len(SIGNALS)]
        proc = subprocess.Popen(
            [sys.executable, "-c", textwrap.dedent(_CHILD), str(out)],
            stdout=subprocess.PIPE,
            stderr=subprocess.DEVNULL,
            text=True,
        )
        assert proc.stdout.readline().strip() == "ready"
        time.sleep(rng.uniform(0.0, write_seconds))
        proc.send_signal(sig)
        proc.communicate(timeout=120)

        if hashlib.sha256(out.read_bytes()).hexdigest() == old:
            outcomes["old"] += 1
        else:  # the kill came after the rename: the new file must be complete
            table = pq.read_table(out)
            assert table.num_rows == N_ROWS, f"round {i}: partial output"
            assert table.schema.metadata[b"gwdeficit.test"] == b'"new"'
            outcomes["new"] += 1
            write_parquet(pd.DataFrame({"a": [1.0]}), out, {"gwdeficit.test": "old"}, force=True)
            old = hashlib.sha256(out.read_bytes()).hexdigest()
        write_text("next\n", tmp_path / "next.txt", force=True)
        assert not list(tmp_path.glob(TMP_PREFIX + "*")), f"round {i}: stray temporary"

    print(f"\n{rounds} kills, write {write_seconds:.2f} s, outcomes {outcomes}")
    assert outcomes["old"] > 0  # most kills must land mid-write, or the test proves nothing
