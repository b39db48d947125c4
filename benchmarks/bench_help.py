"""Cold start of ``gwdeficit --help`` against a bare Python start, measured side by side.

Usage: ``.venv/bin/python benchmarks/bench_help.py [REPEATS]``

Runs, interleaved, ``python -c pass``, ``python -c "import typer"`` and ``gwdeficit --help``
REPEATS times each (new processes; the first run of each is discarded as the file-cache
warm-up), and prints the minimum and median wall times, the ratio of ``--help`` to a bare
start, and whether any heavy library (numpy, pandas, pyarrow, astropy, matplotlib, rich,
dask) was imported to print the help. Target: ``--help`` under 0.4 s. On a shared machine the
minimum is the figure least disturbed by other work.
"""

from __future__ import annotations

import statistics
import subprocess
import sys
import time
from pathlib import Path

HEAVY = ("numpy", "pandas", "pyarrow", "astropy", "matplotlib", "rich", "dask", "scipy")
TARGET_S = 0.4


def timed(cmd: list[str]) -> float:
    t0 = time.perf_counter()
    subprocess.run(cmd, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, check=True)
    return time.perf_counter() - t0


def main() -> None:
    repeats = int(sys.argv[1]) if len(sys.argv) > 1 else 15
    py = sys.executable
    exe = str(Path(py).with_name("gwdeficit"))
    cmds = {
        "python -c pass": [py, "-c", "pass"],
        "python -c 'import typer'": [py, "-c", "import typer"],
        "gwdeficit --help": [exe, "--help"],
    }
    times: dict[str, list[float]] = {k: [] for k in cmds}
    for cmd in cmds.values():
        timed(cmd)  # warm-up
    for _ in range(repeats):
        for k, cmd in cmds.items():
            times[k].append(timed(cmd))
    for k, ts in times.items():
        print(f"{k:<28} min {min(ts):6.3f} s   median {statistics.median(ts):6.3f} s")
    base, helpt = min(times["python -c pass"]), min(times["gwdeficit --help"])
    print(f"--help / bare start (minima): {helpt / base:.1f} x; target {TARGET_S} s: ", end="")
    print("met" if helpt < TARGET_S else "MISSED")
    probe = (
        "import sys; from typer.testing import CliRunner; from gwdeficit.cli import app; "
        "CliRunner().invoke(app, ['--help']); "
        f"print(sorted({{m.split('.')[0] for m in sys.modules}} & set({HEAVY!r})))"
    )
    loaded = subprocess.run([py, "-c", probe], capture_output=True, text=True, check=True)
    print(f"heavy libraries imported for --help: {loaded.stdout.strip()}")


if __name__ == "__main__":
    main()
