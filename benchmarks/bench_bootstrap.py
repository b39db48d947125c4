"""Speed and memory of the hierarchical bootstrap (run by hand; numbers go to
docs/performance.md, section "Rates and bootstrap").

Builds an invented remnants table of N_EVENTS events x N_SAMPLES posterior samples (seeded
generator; two default final-mass fits and two recoil fits, as per-fit columns), then times

1. ``prepare_population`` (sort, index, per-fit value arrays),
2. B hierarchical draws with every population source on (events resampled, one sample per
   event by weight, a fit choice per draw): the figure with the 10 s target,
3. the whole ``compute_budget`` (the full run plus one run per source for the error budget, one
   volume, two escape speeds),

and prints each time, the ratio of (2) to the 10 s target, and the peak resident memory.

    .venv/bin/python benchmarks/bench_bootstrap.py [N_EVENTS] [N_SAMPLES] [B] [--weighted]

``--weighted`` gives the samples unequal weights, so that the per-event cumulative-weight
search replaces the equal-weight shortcut.
"""

from __future__ import annotations

import resource
import sys
import time

import numpy as np
import pandas as pd

from gwdeficit.budget import compute_budget
from gwdeficit.resample import (
    POPULATION_SOURCES,
    Stat,
    prepare_population,
    retained_name,
    run_bootstrap,
)
from gwdeficit.schema import META_FITS

TARGET_S = 10.0


def invented_remnants(
    n_events: int, n_samples: int, seed: int = 20240601, weighted: bool = False
) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    n = n_events * n_samples
    labels = np.array([f"EV{e:06d}" for e in range(n_events)], dtype=object)
    erad = rng.lognormal(np.log(2.5), 0.5, n)
    vk = rng.rayleigh(250.0, n)
    df = pd.DataFrame(
        {
            "event": labels[np.repeat(np.arange(n_events), n_samples)],
            "sample": np.tile(np.arange(n_samples), n_events),
            "weight": rng.uniform(0.1, 1.0, n) if weighted else 1.0,
            "kind": "BBH",
            "remnant_status": "estimated",
            "erad_msun": erad,
            "ejected_msun": 0.0,
            "deficit_msun": erad,
            "vkick_kms": vk,
            "erad_msun__fa": erad * 1.02,
            "erad_msun__fb": erad * 0.98,
            "vkick_kms__ka": vk * 1.1,
            "vkick_kms__kb": vk * 0.9,
        }
    )
    df.attrs[META_FITS] = [
        {"name": "fa", "quantity": "final_mass", "in_default": True},
        {"name": "fb", "quantity": "final_mass", "in_default": True},
        {"name": "ka", "quantity": "recoil", "in_default": True},
        {"name": "kb", "quantity": "recoil", "in_default": True},
    ]
    return df


def main(n_events: int, n_samples: int, n_draws: int, weighted: bool = False) -> None:
    t0 = time.perf_counter()
    df = invented_remnants(n_events, n_samples, weighted=weighted)
    t_build = time.perf_counter() - t0
    speeds = (50.0, 500.0)
    stats = [
        Stat("mean_deficit", "deficit_msun"),
        Stat("mean_erad", "erad_msun"),
        Stat("mean_ejected", "ejected_msun"),
        *(Stat(retained_name(v), "vkick_kms", v) for v in speeds),
    ]
    cols = ["deficit_msun", "erad_msun", "ejected_msun", "vkick_kms"]

    t0 = time.perf_counter()
    pop = prepare_population(df, cols)
    t_prep = time.perf_counter() - t0

    t0 = time.perf_counter()
    (res,) = run_bootstrap(pop, stats, [POPULATION_SOURCES], n_draws, np.random.default_rng(1))
    t_boot = time.perf_counter() - t0

    t0 = time.perf_counter()
    compute_budget(
        df, volumes=["mw"], rate="24 +14 -9", escape_speeds_kms=speeds, n_draws=n_draws, seed=1
    )
    t_budget = time.perf_counter() - t0
    peak_gb = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024**2

    print(
        f"table: {n_events} events x {n_samples} samples = {len(df)} rows, B = {n_draws}, "
        + ("unequal sample weights (guide-table search)" if weighted else "equal sample weights")
    )
    print(f"build invented table      {t_build:7.2f} s")
    print(f"prepare_population        {t_prep:7.2f} s")
    print(
        f"bootstrap, all sources on {t_boot:7.2f} s   ratio to the {TARGET_S:g} s target: "
        f"{t_boot / TARGET_S:.2f}"
    )
    print(f"compute_budget (5 runs)   {t_budget:7.2f} s")
    print(f"peak resident memory      {peak_gb:7.2f} GB")
    d = res["mean_deficit"]
    print(
        f"check: mean deficit {np.median(d):.4f} Msun, 90% {np.quantile(d, 0.05):.4f}.."
        f"{np.quantile(d, 0.95):.4f}"
    )


if __name__ == "__main__":
    flags = [a for a in sys.argv[1:] if a.startswith("--")]
    args = [int(float(a)) for a in sys.argv[1:] if not a.startswith("--")]
    main(*(args + [10_000, 1_000, 2_000][len(args) :]), weighted="--weighted" in flags)
