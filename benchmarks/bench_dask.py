"""Local (streamed) engine against the Dask engine on the same data, measured side by side.

Usage: ``.venv/bin/python benchmarks/bench_dask.py [ROWS] [WORKERS]`` (default 2e6 rows, 2)

Writes an invented canonical catalogue of ROWS weighted binaries (each its own event; see
bench_stream_rss.py) as Parquet files in a temporary folder, then runs the remnant stage and
the rate stage (2000 draws, rows mode) with the local engine and with the Dask engine on a
``distributed.LocalCluster`` (127.0.0.1, WORKERS processes, one thread each), checks that both
give the same remnants file and the same rate table, and prints the wall times and their ratio.
Cluster start-up is timed separately. On this 2-core machine Dask cannot be faster than the
local engine; the figure measures its overhead.
"""

from __future__ import annotations

import shutil
import sys
import tempfile
import time
import warnings
from pathlib import Path

import numpy as np
import pyarrow.parquet as pq

sys.path.insert(0, str(Path(__file__).parent))
from bench_stream_rss import write_catalogue


def main() -> None:
    n = int(float(sys.argv[1])) if len(sys.argv) > 1 else 2_000_000
    workers = int(sys.argv[2]) if len(sys.argv) > 2 else 2
    warnings.simplefilter("ignore")
    from gwdeficit.dask_engine import connect, dask_budget, dask_remnants
    from gwdeficit.stream import stream_budget, stream_remnants

    work = Path(tempfile.mkdtemp(prefix="gwdeficit-bench-dask-"))
    batch = 1 << 19
    kw = dict(volumes=["mw", "gpc3"], n_draws=2000, seed=1, escape_speeds_kms=[100.0])
    try:
        cat = write_catalogue(work / "catalogue", n, work)
        print(f"{n:.3g} rows, batches of {batch} rows, {workers} Dask workers; {work}")
        t = time.perf_counter()
        stream_remnants(cat, work / "local.parquet", seed=3, batch_rows=batch)
        t_rem_local = time.perf_counter() - t
        t = time.perf_counter()
        local = stream_budget(work / "local.parquet", batch_rows=batch, **kw)
        t_rate_local = time.perf_counter() - t
        t = time.perf_counter()
        with connect(None, n_workers=workers) as client:
            t_start = time.perf_counter() - t
            t = time.perf_counter()
            dask_remnants(cat, work / "dask.parquet", client=client, seed=3, batch_rows=batch)
            t_rem_dask = time.perf_counter() - t
            t = time.perf_counter()
            remote = dask_budget(work / "dask.parquet", client=client, batch_rows=batch, **kw)
            t_rate_dask = time.perf_counter() - t
        # same rows and values (the metadata differ: provenance names the engine and time)
        ta = pq.read_table(work / "local.parquet").to_pandas()
        tb = pq.read_table(work / "dask.parquet").to_pandas()
        differ = [c for c in ta.columns if not ta[c].equals(tb[c])]
        same_rem = not differ
        a, b = local.table["median"].to_numpy(), remote.table["median"].to_numpy()
        rel = float(np.max(np.abs(a - b) / np.maximum(np.abs(a), 1e-300)))
        print(f"  cluster start-up        {t_start:8.1f} s")
        print(
            f"  remnant  local {t_rem_local:8.1f} s   dask {t_rem_dask:8.1f} s   "
            f"dask/local {t_rem_dask / t_rem_local:5.2f}"
        )
        print(
            f"  rate     local {t_rate_local:8.1f} s   dask {t_rate_dask:8.1f} s   "
            f"dask/local {t_rate_dask / t_rate_local:5.2f}"
        )
        print(f"  same remnants table: {same_rem} {differ}; rate medians max rel. diff {rel:.1e}")
    finally:
        shutil.rmtree(work, ignore_errors=True)


if __name__ == "__main__":
    main()
