"""Throughput of the neutron-star remnant physics (run by hand; numbers go to
docs/performance.md, section "Neutron-star remnants").

Times :func:`gwdeficit.fits.neutron_star.ns_remnant` on N mixed NSBH / BNS rows (invented
parameters from a seeded generator, tidal information from a fixed radius), with the project's
BBH fits for the non-disrupted NSBH limit, and prints rows per second and the ratio of the
neutron-star cost to the cost of the BBH fits alone on the same rows.

    .venv/bin/python benchmarks/bench_ns_remnant.py [N]
"""

from __future__ import annotations

import sys
import time
import warnings

import numpy as np

from gwdeficit.fits.neutron_star import ns_remnant
from gwdeficit.remnant import remnant_arrays


def main(n: int) -> None:
    rng = np.random.default_rng(20240601)
    m2 = rng.uniform(1.1, 2.0, n)
    m1 = np.where(rng.random(n) < 0.5, rng.uniform(2.5, 20.0, n), rng.uniform(1.1, 2.0, n))
    m1, m2 = np.maximum(m1, m2), np.minimum(m1, m2)
    kind = np.where(m1 > 2.5, "NSBH", "BNS")
    chi1, tilt1 = rng.uniform(0, 0.9, n), np.arccos(rng.uniform(-1, 1, n))
    chi2, tilt2 = rng.uniform(0, 0.05, n), np.arccos(rng.uniform(-1, 1, n))
    phi12 = rng.uniform(0, 2 * np.pi, n)

    def bbh(*a):
        return remnant_arrays(*a, seed=1)

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        t0 = time.perf_counter()
        out = ns_remnant(
            m1,
            m2,
            chi1,
            chi2,
            tilt1,
            tilt2,
            np.nan,
            np.nan,
            kind,
            phi12_rad=phi12,
            ns_radius_km=12.0,
            mtov_msun=2.2,
            bbh_remnant=bbh,
        )
        t_ns = time.perf_counter() - t0
        t0 = time.perf_counter()
        remnant_arrays(m1, m2, chi1, chi2, tilt1, tilt2, phi12, seed=1)
        t_bbh = time.perf_counter() - t0
    n_dis = int(np.count_nonzero(out["disrupted"]))
    print(f"rows: {n} ({np.count_nonzero(kind == 'NSBH')} NSBH, {n_dis} disrupted)")
    print(f"ns_remnant: {t_ns:.3f} s = {n / t_ns:,.0f} rows/s")
    print(f"BBH fits alone on the same rows: {t_bbh:.3f} s")
    print(f"ratio ns_remnant / BBH fits: {t_ns / t_bbh:.2f}")


if __name__ == "__main__":
    main(int(sys.argv[1]) if len(sys.argv) > 1 else 1_000_000)
