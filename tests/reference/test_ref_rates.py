"""Rates, volumes and luminosities against outside references: published rate densities and
galaxy densities, the Madau & Dickinson 2014 star-formation history, astropy's cosmology and
constants as reference libraries."""

from __future__ import annotations

import astropy.constants as const
import astropy.units as u
import numpy as np
import pandas as pd
import pytest
from astropy.cosmology import Planck18
from scipy.integrate import quad
from scipy.optimize import minimize_scalar

from gwdeficit.budget import compute_budget
from gwdeficit.rates import RateEvolution, madau_dickinson_sfr, parse_rate
from gwdeficit.volumes import parse_volume


def _population(deficit_msun: float = 3.0, n: int = 5) -> pd.DataFrame:
    """Events with one identical deficit each: the budget then only carries the rate."""
    return pd.DataFrame(
        {
            "event": [f"E{i}" for i in range(n)],
            "sample": 0,
            "weight": 1.0,
            "kind": "BBH",
            "remnant_status": "estimated",
            "deficit_msun": deficit_msun,
            "erad_msun": deficit_msun,
            "ejected_msun": 0.0,
            "vkick_kms": 100.0,
        }
    )


def _row(table: pd.DataFrame, volume: str, quantity: str, unit: str | None = None) -> pd.Series:
    sel = (table["volume"] == volume) & (table["quantity"] == quantity)
    if unit is not None:
        sel &= table["unit"] == unit
    (i,) = np.flatnonzero(sel.to_numpy())
    return table.iloc[i]


def test_rate_24_gives_about_two_mergers_per_mweg_per_myr():
    # R = 24 Gpc^-3 yr^-1 over the MWEG density 0.0116 Mpc^-3 (Kopparapu et al. 2008, ApJ 675,
    # 1459): about 2.1 mergers per galaxy per Myr. "About two stellar BBH mergers per
    # Milky-Way-like galaxy per Myr" is common practice, no source.
    per_myr = 24 * parse_volume("mw").effective_gpc3(RateEvolution()) * 1e6
    assert per_myr == pytest.approx(2.07, abs=0.01)
    table = compute_budget(_population(), volumes=["mw"], rate="24", n_draws=50).table
    row = _row(table, "mw", "merger_rate")
    assert row["median"] == pytest.approx(2.069, abs=1e-3) and row["unit"] == "1 / Myr"
    assert row["lo90"] == row["hi90"] == row["median"]


def test_gwtc3_bbh_rate_range_per_mweg():
    # BBH rate 17.9 to 44 Gpc^-3 yr^-1 at z = 0.2 (Abbott et al. 2023, Phys. Rev. X 13, 011048;
    # from memory) gives 1.5 to 3.8 mergers per galaxy per Myr (Kopparapu et al. 2008 density).
    evo = RateEvolution("none", 0.0, 0.2)
    model = parse_rate("17.9..44", evolution=evo)
    eff = parse_volume("mw").effective_gpc3(evo) * 1e6
    lo, hi = model.quantile([0.05, 0.95]) * eff
    assert round(lo, 1) == 1.5 and round(hi, 1) == 3.8
    table = compute_budget(
        _population(), volumes=["mw"], rate=model, n_draws=4000, seed=3, sources=("rate",)
    ).table
    row = _row(table, "mw", "merger_rate")
    # sample 5% / 95% quantiles of 4000 draws scatter by about 2%
    assert row["lo90"] == pytest.approx(1.54, rel=0.04)
    assert row["hi90"] == pytest.approx(3.79, rel=0.04)


def test_cosmic_to_z1_is_the_rate_times_the_observer_frame_volume():
    # cosmic:1 with a constant rate = R * integral_0^1 dV_c/dz / (1+z) dz; reference: scipy quad
    # over astropy's differential comoving volume (astropy as reference library).
    ref = quad(
        lambda z: (
            4 * np.pi * Planck18.differential_comoving_volume(z).to_value("Gpc3/sr") / (1 + z)
        ),
        0,
        1,
        epsabs=0,
        epsrel=1e-11,
    )[0]
    R = 24.0
    table = compute_budget(
        _population(), volumes=["cosmic:1"], rate=str(R), n_draws=20, cosmology=Planck18
    ).table
    got = _row(table, "cosmic:1", "merger_rate")["median"]
    assert got == pytest.approx(R * ref * 1e6, rel=1e-4)


def test_madau_dickinson_peak():
    # Madau & Dickinson 2014, ARA&A 52, 415, eq. 15: the star-formation history peaks near
    # z = 1.86 (from memory).
    res = minimize_scalar(lambda z: -madau_dickinson_sfr(z), bounds=(0.5, 4.0), method="bounded")
    assert res.x == pytest.approx(1.86, abs=0.02)
    # and its local value is 0.015 Msun yr^-1 Mpc^-3 / (1 + (1/2.9)^5.6) (same equation)
    assert madau_dickinson_sfr(0.0) == pytest.approx(0.015 / (1 + (1 / 2.9) ** 5.6))


def test_one_msun_c2_per_myr_in_erg_per_s_and_lsun():
    # 1 Msun c^2 per Myr is about 5.7e40 erg/s (astropy constants); the Lsun row uses the IAU
    # 2015 nominal solar luminosity 3.828e33 erg/s (IAU 2015 Resolution B3).
    ref = (const.M_sun * const.c**2 / u.Myr).to_value(u.erg / u.s)
    assert ref == pytest.approx(5.7e40, rel=0.01)
    # a population losing 1 Msun per merger at one merger per Myr per Gpc^3
    table = compute_budget(
        _population(deficit_msun=1.0), volumes=["gpc3"], rate="1e-6", n_draws=20
    ).table
    assert _row(table, "gpc3", "merger_rate")["median"] == pytest.approx(1.0)
    erg = _row(table, "gpc3", "gw_luminosity", "erg / s")["median"]
    lsun = _row(table, "gpc3", "gw_luminosity", "solLum")["median"]
    assert erg == pytest.approx(ref, rel=1e-9)
    assert lsun == pytest.approx(ref / 3.828e33, rel=1e-9)
