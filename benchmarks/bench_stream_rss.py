"""Peak memory of the out-of-core stages on a large weighted synthetic table.

Usage (from the repository root):

    .venv/bin/python benchmarks/bench_stream_rss.py chain 10000000     # ingest -> remnant -> rate
    .venv/bin/python benchmarks/bench_stream_rss.py stages 100000000   # remnant -> rate

``chain N`` writes an invented input table of N binaries (no event column: each row its own
event, like a population-synthesis output) as several Parquet files in a temporary folder,
then runs ``gwdeficit ingest``, ``gwdeficit remnant`` and ``gwdeficit rate`` on it, each in its
own process. ``stages N`` writes the canonical catalogue directly (same schema and metadata as
ingest gives, taken from ingesting a small sample; generating it is much faster than ingesting
it) and runs ``remnant`` and ``rate``. Every stage reads and writes batch by batch; the peak
resident memory of each process (``os.wait4``) is printed beside the 2 GiB target, with the
rows per second. The data are random numbers from a seeded generator, not a physical
population; the folder is removed at the end (``--keep`` keeps it).
"""

from __future__ import annotations

import argparse
import os
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
import pyarrow as pa
import pyarrow.compute as pc
import pyarrow.parquet as pq

TARGET_BYTES = 2 * 1024**3
GEN_BATCH = 1 << 21
ROWS_PER_FILE = 1 << 24


def binaries(rng: np.random.Generator, n: int) -> dict[str, np.ndarray]:
    """n random binaries: masses 5-80 Msun (a quarter NS companions), random spins, z < 1."""
    m1 = rng.uniform(5.0, 80.0, n)
    m2 = m1 * rng.uniform(0.1, 1.0, n)
    m2[rng.random(n) < 0.25] = 1.4
    return {
        "m1": m1,
        "m2": np.minimum(m1, m2),
        "a1": rng.uniform(0.0, 0.99, n),
        "a2": rng.uniform(0.0, 0.99, n),
        "tilt1": np.arccos(rng.uniform(-1.0, 1.0, n)),
        "tilt2": np.arccos(rng.uniform(-1.0, 1.0, n)),
        "z": rng.uniform(0.01, 1.0, n),
        "weight": rng.exponential(1.0, n),
    }


def write_input(folder: Path, n: int, seed: int = 1) -> Path:
    """An invented input table of n rows (user-style column names) as Parquet files."""
    folder.mkdir(parents=True, exist_ok=True)
    rng = np.random.default_rng(seed)
    writer, file_no, in_file = None, 0, 0
    for start in range(0, n, GEN_BATCH):
        k = min(GEN_BATCH, n - start)
        cols = binaries(rng, k)
        table = pa.table(
            {
                "m1_msun": cols["m1"],
                "m2_msun": cols["m2"],
                "chi1": cols["a1"],
                "chi2": cols["a2"],
                "tilt1_rad": cols["tilt1"],
                "tilt2_rad": cols["tilt2"],
                "z": cols["z"],
                "weight": cols["weight"],
            }
        )
        if writer is None or in_file >= ROWS_PER_FILE:
            if writer is not None:
                writer.close()
            writer = pq.ParquetWriter(folder / f"part-{file_no:03d}.parquet", table.schema)
            file_no, in_file = file_no + 1, 0
        writer.write_table(table, row_group_size=1 << 18)
        in_file += k
    if writer is not None:
        writer.close()
    return folder


def write_catalogue(folder: Path, n: int, work: Path, seed: int = 1) -> Path:
    """A canonical catalogue of n rows, schema and metadata from ingesting a small sample."""
    sample = write_input(work / "sample-input", 2000, seed=99)
    run(["ingest", str(sample), "--workdir", str(work / "sample")], "sample ingest", quiet=True)
    ref = pq.read_table(work / "sample" / "catalogue.parquet")
    schema, meta = ref.schema, ref.schema.metadata
    z_grid = np.linspace(0.0, 1.05, 2001)
    order = np.argsort(ref["z"].to_numpy())
    dl_grid = np.interp(z_grid, ref["z"].to_numpy()[order], ref["dl_mpc"].to_numpy()[order])
    folder.mkdir(parents=True, exist_ok=True)
    rng = np.random.default_rng(seed)
    writer, file_no, in_file = None, 0, 0
    for start in range(0, n, GEN_BATCH):
        k = min(GEN_BATCH, n - start)
        c = binaries(rng, k)
        rows = np.arange(start + 1, start + k + 1, dtype=np.int64)
        kind = np.where(c["m2"] > 3.0, "BBH", "NSBH")
        data = {
            "event": pc.binary_join_element_wise("row", pa.array(rows).cast(pa.string()), ""),
            "sample": np.zeros(k, dtype=np.int64),
            "weight": c["weight"],
            "m1_msun": c["m1"],
            "m2_msun": c["m2"],
            "chi1": c["a1"],
            "chi2": c["a2"],
            "tilt1_rad": c["tilt1"],
            "tilt2_rad": c["tilt2"],
            "phi12_rad": np.full(k, np.nan),
            "z": c["z"],
            "dl_mpc": np.interp(c["z"], z_grid, dl_grid),
            "kind": kind,
            "spin_assumption": np.full(k, "full", dtype=object),
            "input_row": rows,
        }
        table = pa.table({f.name: data[f.name] for f in schema}).cast(schema)
        if writer is None or in_file >= ROWS_PER_FILE:
            if writer is not None:
                writer.close()
            path = folder / f"part-{file_no:03d}.parquet"
            writer = pq.ParquetWriter(path, schema.with_metadata(meta), compression="zstd")
            file_no, in_file = file_no + 1, 0
        writer.write_table(table, row_group_size=1 << 18)
        in_file += k
    if writer is not None:
        writer.close()
    return folder


def run(args: list[str], label: str, quiet: bool = False) -> tuple[float, int]:
    """Run ``gwdeficit ARGS`` in its own process; return (seconds, peak RSS in bytes)."""
    exe = Path(sys.executable).with_name("gwdeficit")
    t0 = time.perf_counter()
    proc = subprocess.Popen(
        [str(exe), *args], stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True
    )
    _, status, usage = os.wait4(proc.pid, 0)
    seconds = time.perf_counter() - t0
    err = proc.stderr.read() if proc.stderr else ""
    if os.waitstatus_to_exitcode(status) != 0:
        raise SystemExit(f"{label} failed ({status}):\n{err}")
    rss = usage.ru_maxrss * 1024  # Linux: kilobytes
    cpu = usage.ru_utime + usage.ru_stime
    if not quiet:
        print(
            f"  {label:<28} {seconds:8.1f} s wall {cpu:8.1f} s CPU   "
            f"peak RSS {rss / 1024**2:8.0f} MiB"
        )
    return seconds, rss


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("what", choices=["chain", "stages"])
    parser.add_argument("rows", type=float)
    parser.add_argument("--draws", type=int, default=2000)
    parser.add_argument("--batch-rows", type=int, default=1 << 16)
    parser.add_argument("--tmp", default=None, help="parent folder of the temporary data")
    parser.add_argument("--keep", action="store_true")
    a = parser.parse_args()
    n = int(a.rows)
    work = Path(tempfile.mkdtemp(prefix="gwdeficit-bench-", dir=a.tmp))
    batch = ["--batch-rows", str(a.batch_rows)]
    print(f"{a.what}: {n:.3g} rows, batches of {a.batch_rows} rows, {a.draws} draws; {work}")
    try:
        t0 = time.perf_counter()
        if a.what == "chain":
            src = write_input(work / "input", n)
            print(f"  {'write input':<28} {time.perf_counter() - t0:8.1f} s")
            stages = [(["ingest", str(src), "--workdir", str(work), *batch], "ingest")]
        else:
            write_catalogue(work / "catalogue", n, work)
            print(f"  {'write catalogue':<28} {time.perf_counter() - t0:8.1f} s")
            stages = []
        cat = work / ("catalogue" if a.what == "stages" else "catalogue.parquet")
        stages += [
            (["remnant", str(cat), "--workdir", str(work), *batch], "remnant"),
            (
                [
                    *("rate", "--workdir", str(work), "--draws", str(a.draws)),
                    *("--volume", "mw,gpc3", "--escape-speed", "100", *batch),
                ],
                "rate",
            ),
        ]
        peak = 0
        for args, label in stages:
            seconds, rss = run(args, label)
            peak = max(peak, rss)
            print(f"  {'':<28} {n / seconds:10.3g} rows/s")
        print(
            f"peak RSS over the stages: {peak / 1024**2:.0f} MiB = {peak / TARGET_BYTES:.2f} x "
            f"the 2 GiB target at {n:.3g} rows"
        )
    finally:
        if not a.keep:
            shutil.rmtree(work, ignore_errors=True)


if __name__ == "__main__":
    main()
