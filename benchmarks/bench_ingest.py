"""Benchmark: ingest of a large Parquet table against pyarrow's own read + write of that file.

Builds a synthetic table in a temporary folder (seeded; a weighted population with source-frame
masses, effective spin, redshift and weight, or with ``--table posterior`` detector-frame chirp
mass, mass ratio, distance and full spins), then times, each in its own fresh process so that
peak memory is measured separately:

1. baseline: ``pyarrow.parquet.read_table`` + ``write_table`` (zstd) of the input;
2. ``gwdeficit.load_catalogue`` + ``workdir.write_parquet`` (the in-memory API path);
3. ``gwdeficit.io.ingest`` (the command's path: batches streamed to the output).

Prints wall times, the ratios to the baseline and the peak resident memory of each process.
Target (issue 2): ratio <= 3, memory bounded. Run by hand; record numbers in
docs/performance.md.

    .venv/bin/python benchmarks/bench_ingest.py [--rows 10000000] [--table population]
"""

from __future__ import annotations

import argparse
import json
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

CHILD = r"""
import json, resource, sys, time
import pyarrow.parquet as pq
from gwdeficit.io import ingest, load_catalogue
from gwdeficit.workdir import write_parquet
mode, src, out = sys.argv[1], sys.argv[2], sys.argv[3]
t0 = time.perf_counter()  # imports are excluded: they cost the same at any size
if mode == "baseline":
    pq.write_table(pq.read_table(src), out, compression="zstd")
elif mode == "load_catalogue":
    df = load_catalogue(src)
    write_parquet(df, out, dict(df.attrs))
elif mode == "ingest":
    ingest(src, out)
wall = time.perf_counter() - t0
rss_mb = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
print(json.dumps({"mode": mode, "seconds": wall, "peak_rss_mb": rss_mb}))
"""


def build(path: Path, rows: int, table: str, seed: int = 12345) -> None:
    """Write a seeded synthetic input table of ``rows`` rows in row groups of 1e6."""
    import numpy as np
    import pyarrow as pa
    import pyarrow.parquet as pq

    rng = np.random.default_rng(seed)
    writer = None
    chunk = 1_000_000
    for start in range(0, rows, chunk):
        n = min(chunk, rows - start)
        if table == "population":
            m1 = rng.uniform(5.0, 80.0, n)
            cols = {
                "m1_source [Msun]": m1,
                "m2_source [Msun]": m1 * rng.uniform(0.1, 1.0, n),
                "chi_eff": rng.uniform(-0.5, 0.5, n),
                "redshift": rng.uniform(0.0, 3.0, n),
                "weight": rng.uniform(0.0, 1.0, n),
            }
        else:
            cols = {
                "event": np.char.add("EV", ((start + np.arange(n)) // 5000 % 1000).astype(str)),
                "mchirp_det [Msun]": rng.uniform(5.0, 60.0, n),
                "q": rng.uniform(0.1, 1.0, n),
                "dL [Gpc]": rng.uniform(0.05, 8.0, n),
                "a1": rng.uniform(0, 0.99, n),
                "a2": rng.uniform(0, 0.99, n),
                "tilt1 [deg]": rng.uniform(0, 180, n),
                "tilt2 [deg]": rng.uniform(0, 180, n),
                "phi12 [deg]": rng.uniform(0, 360, n),
            }
        t = pa.table(cols)
        if writer is None:
            writer = pq.ParquetWriter(path, t.schema, compression="zstd")
        writer.write_table(t)
    writer.close()


def run_child(mode: str, src: Path, out: Path) -> dict:
    res = subprocess.run(
        [sys.executable, "-c", CHILD, mode, str(src), str(out)],
        capture_output=True,
        text=True,
        check=False,
    )
    if res.returncode != 0:
        raise SystemExit(f"{mode} failed:\n{res.stderr}")
    return json.loads(res.stdout.strip().splitlines()[-1])


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--rows", type=int, default=10_000_000)
    ap.add_argument("--table", choices=("population", "posterior"), default="population")
    args = ap.parse_args()
    with tempfile.TemporaryDirectory(prefix="gwdeficit-bench-") as d:
        folder = Path(d)
        src = folder / "input.parquet"
        t0 = time.perf_counter()
        build(src, args.rows, args.table)
        print(
            f"built {args.rows:.3g}-row {args.table} table "
            f"({src.stat().st_size / 1e6:.0f} MB) in {time.perf_counter() - t0:.1f} s"
        )
        results = {
            "baseline": run_child("baseline", src, folder / "baseline.parquet"),
            "load_catalogue": run_child("load_catalogue", src, folder / "api.parquet"),
            "ingest": run_child("ingest", src, folder / "work"),
        }
    base = results["baseline"]["seconds"]
    print(f"{'path':<16} {'seconds':>9} {'ratio':>7} {'peak RSS [MB]':>14}")
    for name, r in results.items():
        print(f"{name:<16} {r['seconds']:9.2f} {r['seconds'] / base:7.2f} {r['peak_rss_mb']:14.0f}")
    own = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    print(f"(this driver process peaked at {own:.0f} MB while building the input)")


if __name__ == "__main__":
    main()
