"""Generate gwdeficit's bundled demo data: an INVENTED scenario, made up for the tour.

Nothing here is an observation. The "campaign" is a fictional observing run whose events,
posterior samples, population and neutron-star event are drawn from made-up distributions with a
fixed seed. The invented truth used to draw them is never a test check value.

Run from the repository root (numpy, pandas, pyarrow and astropy are gwdeficit dependencies):

    python data_demo/make_demo.py            # writes into src/gwdeficit/data_demo/
    python data_demo/make_demo.py --out DIR  # writes elsewhere (the tests use this)

Files written:

campaign.csv
    A fictional campaign's catalogue: a few dozen binary-black-hole events x a few hundred
    posterior samples, deliberately messy: detector-frame chirp mass and mass ratio, distances in
    Gpc, angles in degrees, blocks of events in no particular order, mixed number formats, and a
    few bad rows (a non-numeric cell, an empty mass ratio, a spin above 1, a negative distance).
population.parquet
    A weighted synthetic population: source-frame masses, effective spin, redshift, weight
    (importance weights of a made-up population model over a broad proposal; they sum to 1).
ns_event.csv
    One invented binary-neutron-star event with posterior samples: source-frame masses,
    aligned spin components, tidal deformabilities and luminosity distance in Mpc.
"""

from __future__ import annotations

import argparse
from pathlib import Path

import numpy as np
import pandas as pd

SEED = 20_240_611  # fixed: the shipped files are exactly what this script writes
N_EVENTS = 36
N_POPULATION = 30_000
N_NS_SAMPLES = 400
DEFAULT_OUT = Path(__file__).resolve().parents[1] / "src" / "gwdeficit" / "data_demo"

CAMPAIGN_HEADERS = [
    "event",
    "sample",
    "mchirp_det [Msun]",
    "q",
    "dL [Gpc]",
    "a1",
    "a2",
    "tilt1 [deg]",
    "tilt2 [deg]",
    "phi12 [deg]",
]


# ------------------------------------------------------------------------------------------
# Invented population model (plausible shapes, made-up numbers)
# ------------------------------------------------------------------------------------------


def _draw_primary(rng: np.random.Generator, n: int) -> np.ndarray:
    """Primary source mass: a power law m^-2.4 on [6, 75] Msun plus a 12% bump at 31 +- 4 Msun."""
    u = rng.uniform(size=n)
    lo, hi, alpha = 6.0, 75.0, -2.4
    a1 = alpha + 1.0
    pl = (lo**a1 + u * (hi**a1 - lo**a1)) ** (1.0 / a1)
    bump = np.clip(rng.normal(31.0, 4.0, size=n), lo, hi)
    return np.where(rng.uniform(size=n) < 0.12, bump, pl)


def _primary_density(m: np.ndarray) -> np.ndarray:
    """Normalised density of :func:`_draw_primary` (for the population's importance weights)."""
    lo, hi, alpha = 6.0, 75.0, -2.4
    a1 = alpha + 1.0
    inside = (m >= lo) & (m <= hi)
    pl = np.where(inside, m**alpha * a1 / (hi**a1 - lo**a1), 0.0)
    bump = np.exp(-0.5 * ((m - 31.0) / 4.0) ** 2) / (4.0 * np.sqrt(2.0 * np.pi))
    return 0.88 * pl + 0.12 * np.where(inside, bump, 0.0)


def _draw_ratio(rng: np.random.Generator, m1: np.ndarray, m2_min: float = 4.0) -> np.ndarray:
    """Mass ratio q = m2/m1 with density ~ q^1.3 on [m2_min/m1, 1]."""
    qmin = np.minimum(m2_min / m1, 0.9)
    b = 2.3
    u = rng.uniform(size=m1.shape)
    return (qmin**b + u * (1.0 - qmin**b)) ** (1.0 / b)


def _chirp_mass(m1: np.ndarray, m2: np.ndarray) -> np.ndarray:
    return (m1 * m2) ** 0.6 / (m1 + m2) ** 0.2


def _distance_grid():
    """Planck18 redshift grid and luminosity distances (Gpc) for vectorised z <-> dL lookups."""
    from astropy.cosmology import Planck18

    z = np.linspace(0.0, 3.0, 3001)
    return z, Planck18.luminosity_distance(z).to_value("Gpc")


def _beta_around(rng, mean, concentration, size):
    """Beta draws on (0, 1) with the given mean (array, broadcast) and concentration."""
    mean = np.clip(mean, 0.02, 0.98)
    return rng.beta(mean * concentration, (1.0 - mean) * concentration, size=size)


# ------------------------------------------------------------------------------------------
# campaign.csv
# ------------------------------------------------------------------------------------------


def make_campaign(rng: np.random.Generator) -> pd.DataFrame:
    """Invented events with posterior samples; returns the clean table (bad rows added later)."""
    zgrid, dlgrid = _distance_grid()
    m1 = _draw_primary(rng, N_EVENTS)
    q = _draw_ratio(rng, m1)
    m2 = q * m1
    mc_src = _chirp_mass(m1, m2)
    # Heavier systems are seen further: an invented horizon z_max ~ 0.35 (Mc / 10 Msun)^(5/6).
    zmax = np.minimum(0.35 * (mc_src / 10.0) ** (5.0 / 6.0), 1.0)
    z = zmax * rng.uniform(size=N_EVENTS) ** (1.0 / 3.0)  # uniform in Euclidean volume
    z = np.maximum(z, 0.03)
    dl = np.interp(z, zgrid, dlgrid)
    mc_det = mc_src * (1.0 + z)  # detector-frame chirp mass of the truth
    a1_true = rng.beta(1.6, 4.0, N_EVENTS)
    a2_true = rng.beta(1.6, 4.0, N_EVENTS)
    aligned = rng.uniform(size=N_EVENTS) < 0.3
    cos1 = np.where(aligned, rng.uniform(0.7, 1.0, N_EVENTS), rng.uniform(-1, 1, N_EVENTS))
    cos2 = np.where(aligned, rng.uniform(0.7, 1.0, N_EVENTS), rng.uniform(-1, 1, N_EVENTS))

    blocks = []
    for i in rng.permutation(N_EVENTS):  # blocks of events in no particular order
        n = int(rng.integers(200, 401))
        # The "observed" centre is offset from the truth, as for a noisy measurement.
        mc_width = 0.004 + 0.012 * (mc_det[i] / 30.0)
        mc_centre = mc_det[i] * (1.0 + mc_width * rng.normal())
        mc_s = mc_centre * (1.0 + mc_width * rng.normal(size=n))
        q_s = _beta_around(rng, q[i] + 0.08 * rng.normal(), 18.0, n)
        q_s = np.clip(q_s, 0.06, 1.0)
        dl_centre = dl[i] * np.exp(0.2 * rng.normal())
        dl_s = dl_centre * np.exp(0.25 * rng.normal(size=n))
        a1_s = np.minimum(_beta_around(rng, a1_true[i], 5.0, n), 0.99)
        a2_s = np.minimum(_beta_around(rng, a2_true[i], 4.0, n), 0.99)
        c1 = 2.0 * _beta_around(rng, 0.5 * (cos1[i] + 1.0), 3.0, n) - 1.0
        c2 = 2.0 * _beta_around(rng, 0.5 * (cos2[i] + 1.0), 2.0, n) - 1.0
        # A black-hole campaign: drop the few samples whose source-frame m2 would be < 3.5 Msun.
        mc_src_s = mc_s / (1.0 + np.interp(dl_s, dlgrid, zgrid))
        m2_src_s = q_s * mc_src_s * (1.0 + q_s) ** 0.2 / q_s**0.6
        keep = m2_src_s >= 3.5
        blocks.append(
            pd.DataFrame(
                {
                    "event": f"DEMO-B{i + 1:02d}",
                    "sample": np.arange(int(keep.sum())),
                    "mchirp_det [Msun]": mc_s[keep],
                    "q": q_s[keep],
                    "dL [Gpc]": dl_s[keep],
                    "a1": a1_s[keep],
                    "a2": a2_s[keep],
                    "tilt1 [deg]": np.degrees(np.arccos(c1[keep])),
                    "tilt2 [deg]": np.degrees(np.arccos(c2[keep])),
                    "phi12 [deg]": rng.uniform(0.0, 360.0, n)[keep],
                }
            )
        )
    return pd.concat(blocks, ignore_index=True)[CAMPAIGN_HEADERS]


def campaign_text(df: pd.DataFrame, rng: np.random.Generator) -> tuple[str, list[tuple[int, str]]]:
    """Render the campaign as messy CSV text; return it and the (data row, defect) list.

    Mixed formats: chirp masses with 4 decimals, mass ratios with 3, distances partly in
    scientific notation, angles to 0.1 degree and some as whole numbers.
    """
    n = len(df)
    cells = {
        "event": df["event"].to_numpy(dtype=object),
        "sample": df["sample"].astype(str).to_numpy(dtype=object),
        "mchirp_det [Msun]": np.char.mod("%.4f", df["mchirp_det [Msun]"].to_numpy()),
        "q": np.char.mod("%.3f", df["q"].to_numpy()),
        "a1": np.char.mod("%.3f", df["a1"].to_numpy()),
        "a2": np.char.mod("%.3f", df["a2"].to_numpy()),
    }
    dl = df["dL [Gpc]"].to_numpy()
    sci = rng.uniform(size=n) < 0.15
    cells["dL [Gpc]"] = np.where(sci, np.char.mod("%.3e", dl), np.char.mod("%.4f", dl))
    for col in ("tilt1 [deg]", "tilt2 [deg]", "phi12 [deg]"):
        v = df[col].to_numpy()
        whole = rng.uniform(size=n) < 0.1
        cells[col] = np.where(whole, np.char.mod("%.0f", v), np.char.mod("%.1f", v))
    cells = {k: np.asarray(v, dtype=object) for k, v in cells.items()}

    # The bad rows: distinct rows, spread through the file (1-based data-row numbers).
    rows = np.sort(rng.choice(np.arange(50, n - 50), size=4, replace=False))
    defects = [
        ("mchirp_det [Msun]", "n.a.", "non-numeric chirp mass"),
        ("q", "", "empty mass ratio"),
        ("a1", "1.070", "spin magnitude above 1"),
        ("dL [Gpc]", "-0.7312", "negative distance"),
    ]
    report = []
    for row, (col, value, what) in zip(rows, defects, strict=True):
        cells[col][row] = value
        report.append((int(row) + 1, f"{col}: {what}"))

    lines = [",".join(CAMPAIGN_HEADERS)]
    table = np.column_stack([cells[c] for c in CAMPAIGN_HEADERS])
    lines.extend(",".join(r) for r in table)
    return "\n".join(lines) + "\n", report


# ------------------------------------------------------------------------------------------
# population.parquet
# ------------------------------------------------------------------------------------------


def make_population(rng: np.random.Generator) -> pd.DataFrame:
    """Importance-weighted synthetic binaries: a broad proposal reweighted to the invented model.

    Proposal: m1 log-uniform on [5, 100] Msun, q uniform on [0.1, 1], chi_eff uniform on
    [-0.6, 0.6], z uniform on [0, 2]. Target: the invented mass model above, q^1.3, chi_eff
    normal(0.05, 0.11), and a merger density following comoving volume times (1+z)^1.7 / (1+z).
    Weights are target / proposal, normalised to sum to 1.
    """
    from astropy.cosmology import Planck18

    n = N_POPULATION
    m1 = np.exp(rng.uniform(np.log(5.0), np.log(100.0), n))
    q = rng.uniform(0.1, 1.0, n)
    m2 = q * m1
    chi_eff = rng.uniform(-0.6, 0.6, n)
    z = rng.uniform(0.0, 2.0, n)
    p_m1 = 1.0 / (m1 * np.log(100.0 / 5.0))
    target = (
        _primary_density(m1)
        / p_m1
        * np.where(m2 >= 3.0, q**1.3, 0.0)
        * np.exp(-0.5 * ((chi_eff - 0.05) / 0.11) ** 2)
        * Planck18.differential_comoving_volume(z).value
        * (1.0 + z) ** 0.7
    )
    weight = target / target.sum()
    return pd.DataFrame(
        {
            "m1_source [Msun]": m1,
            "m2_source [Msun]": m2,
            "chi_eff": chi_eff,
            "redshift": z,
            "weight": weight,
        }
    )


# ------------------------------------------------------------------------------------------
# ns_event.csv
# ------------------------------------------------------------------------------------------


def make_ns_event(rng: np.random.Generator) -> pd.DataFrame:
    """One invented binary neutron star: source-frame masses, aligned spins, tides, distance."""
    n = N_NS_SAMPLES
    mc = 1.231 + 0.0015 * rng.normal(size=n)  # source-frame chirp mass, Msun (invented)
    q = np.clip(rng.beta(14.0, 3.0, n), 0.55, 1.0)
    # m1 from chirp mass and q: Mc = m1 q^(3/5) / (1+q)^(1/5)
    m1 = mc * (1.0 + q) ** 0.2 / q**0.6
    m2 = q * m1
    # Invented tidal relation Lambda ~ 380 (m / 1.35 Msun)^-6 with 25% log scatter.
    lam1 = 380.0 * (m1 / 1.35) ** -6 * np.exp(0.25 * rng.normal(size=n))
    lam2 = 380.0 * (m2 / 1.35) ** -6 * np.exp(0.25 * rng.normal(size=n))
    return pd.DataFrame(
        {
            "event": "DEMO-N01",
            "m1 [Msun]": np.round(m1, 5),
            "m2 [Msun]": np.round(m2, 5),
            "chi1z": np.round(rng.uniform(-0.04, 0.04, n), 4),
            "chi2z": np.round(rng.uniform(-0.04, 0.04, n), 4),
            "lambda1": np.round(lam1, 1),
            "lambda2": np.round(lam2, 1),
            "dL [Mpc]": np.round(118.0 * np.exp(0.12 * rng.normal(size=n)), 2),
        }
    )


# ------------------------------------------------------------------------------------------


def write_all(out: Path, seed: int = SEED) -> dict[str, object]:
    """Write the three demo files into ``out``; return a short description of what was made."""
    out.mkdir(parents=True, exist_ok=True)
    rng = np.random.default_rng(seed)
    campaign = make_campaign(rng)
    text, defects = campaign_text(campaign, rng)
    (out / "campaign.csv").write_text(text, encoding="utf-8")
    make_population(rng).to_parquet(out / "population.parquet", index=False, compression="zstd")
    make_ns_event(rng).to_csv(out / "ns_event.csv", index=False)
    return {
        "campaign_rows": len(campaign),
        "campaign_events": campaign["event"].nunique(),
        "bad_rows": defects,
        "population_rows": N_POPULATION,
        "ns_samples": N_NS_SAMPLES,
    }


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n", 1)[0])
    parser.add_argument("--out", type=Path, default=DEFAULT_OUT, help="output folder")
    parser.add_argument("--seed", type=int, default=SEED, help="random seed (default: fixed)")
    args = parser.parse_args()
    info = write_all(args.out, args.seed)
    print(f"wrote invented demo data into {args.out}")
    for key, value in info.items():
        print(f"  {key}: {value}")


if __name__ == "__main__":
    main()
