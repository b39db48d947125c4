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


def mixed_binaries(
    n: int, seed: int, bbh_head: int = 0, bbh_tail: int = 0, tidal: bool = True
) -> pd.DataFrame:
    """Random BBH, NSBH and BNS rows (about a third each) for the ingest stage.

    Kinds follow from the masses (a body above 3 Msun is a black hole): BBH 3.5-60 Msun bodies,
    NSBH a 3.5-12 Msun black hole with a 1.1-2.0 Msun neutron star, BNS two 1.1-2.0 Msun stars;
    neutron-star spins below 0.05. With ``tidal``, columns ``lambda1``/``lambda2`` hold tidal
    deformabilities in [50, 1500] for neutron stars and 0 for black holes (ingest takes no
    missing values in a given column); without, there is no tidal column at all. The first
    ``bbh_head`` and the last ``bbh_tail`` rows are all BBH, so that leading and trailing
    batches hold no neutron star. phi12 is not given (drawn where it matters).
    """
    rng = np.random.default_rng(seed)
    pick = rng.integers(0, 3, n)  # 0 BBH, 1 NSBH, 2 BNS
    pick[:bbh_head] = 0
    pick[n - bbh_tail :] = 0
    bh1 = rng.uniform(5.0, 60.0, n)
    ns1 = rng.uniform(1.1, 2.0, n)
    m1 = np.select([pick == 0, pick == 1], [bh1, rng.uniform(3.5, 12.0, n)], ns1)
    m2 = np.where(pick == 0, 3.5 + (bh1 - 3.5) * rng.uniform(0.2, 1.0, n), rng.uniform(1.1, 2.0, n))
    lam1 = np.where(pick == 2, rng.uniform(50.0, 1500.0, n), 0.0)
    lam2 = np.where(pick >= 1, rng.uniform(50.0, 1500.0, n), 0.0)
    df = pd.DataFrame(
        {
            "m1_msun": m1,
            "m2_msun": m2,
            "chi1": np.where(pick == 2, rng.uniform(0.0, 0.05, n), rng.uniform(0.0, 0.95, n)),
            "chi2": np.where(pick >= 1, rng.uniform(0.0, 0.05, n), rng.uniform(0.0, 0.95, n)),
            "tilt1_rad": np.arccos(rng.uniform(-1.0, 1.0, n)),
            "tilt2_rad": np.arccos(rng.uniform(-1.0, 1.0, n)),
            "z": rng.uniform(0.01, 0.5, n),
            "weight": rng.uniform(0.5, 2.0, n),
        }
    )
    if tidal:
        df["lambda1"] = lam1
        df["lambda2"] = lam2
    return df
