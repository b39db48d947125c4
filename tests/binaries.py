"""Random binary tables shared by the out-of-core and Dask engine tests (test inputs only)."""

from __future__ import annotations

import numpy as np
import pandas as pd


def random_binaries(
    n: int, n_events: int, seed: int, ns_every: int = 3, label_digits: int = 4
) -> pd.DataFrame:
    """Random binaries over a wide parameter range; every ``ns_every``-th row has m2 = 1.4 Msun
    (NSBH-like). With ``n_events`` > 0, rows get random event labels ``EV0001``..."""
    rng = np.random.default_rng(seed)
    m1 = rng.uniform(5.0, 80.0, n)
    df = pd.DataFrame(
        {
            "m1_msun": m1,
            "m2_msun": m1 * rng.uniform(0.1, 1.0, n),
            "chi1": rng.uniform(0.0, 0.99, n),
            "chi2": rng.uniform(0.0, 0.99, n),
            "tilt1_rad": np.arccos(rng.uniform(-1.0, 1.0, n)),
            "tilt2_rad": np.arccos(rng.uniform(-1.0, 1.0, n)),
            "z": rng.uniform(0.01, 1.0, n),
            "weight": rng.uniform(0.5, 2.0, n),
        }
    )
    df.loc[df.index % ns_every == 0, "m2_msun"] = 1.4
    if n_events:
        df["event"] = [f"EV{k:0{label_digits}d}" for k in rng.integers(0, n_events, n)]
    return df
