"""Redshift <-> luminosity distance and mass algebra against outside references.

References: astropy.cosmology (reference library: ``luminosity_distance`` and ``z_at_value``),
published GW150914 values (Abbott et al. 2016, PRL 116, 061102; from memory), and the low-z
Hubble law d_L = c z / H0 (handbook relation, e.g. Hogg 1999, arXiv:astro-ph/9905116, sec. 5).
"""

from __future__ import annotations

import astropy.cosmology as ac
import astropy.units as u
import numpy as np
import pytest
from astropy.constants import c as c_light

from gwdeficit import convert

COSMOLOGIES = ["Planck18", "Planck15", "WMAP9"]


@pytest.mark.parametrize("name", COSMOLOGIES)
def test_distance_matches_astropy_luminosity_distance(name):
    # astropy.cosmology luminosity_distance (reference library), 0 < z < 10, to 1e-6 relative.
    cosmo = getattr(ac, name)
    rng = np.random.default_rng(20160914)
    z = np.concatenate([np.geomspace(1e-5, 10.0, 60), rng.uniform(0.0, 10.0, 60)])
    ref = cosmo.luminosity_distance(z).to_value(u.Mpc)
    got = convert.luminosity_distance(z, name)
    np.testing.assert_allclose(got, ref, rtol=1e-6, atol=0)


@pytest.mark.parametrize("name", COSMOLOGIES)
def test_redshift_matches_astropy_z_at_value(name):
    # astropy.cosmology z_at_value (reference library, a per-value root find), 0 < z < 10, 1e-6.
    cosmo = getattr(ac, name)
    z_true = np.concatenate([np.geomspace(1e-4, 9.9, 20), [0.09, 1.0, 3.0]])
    dl = cosmo.luminosity_distance(z_true)
    z_ref = np.asarray(
        ac.z_at_value(cosmo.luminosity_distance, dl, zmin=1e-6, zmax=12.0, ztol=1e-10)
    )
    got = convert.redshift_from_distance(dl.to_value(u.Mpc), name)
    np.testing.assert_allclose(got, z_ref, rtol=0, atol=1e-6)


def test_round_trip_is_vectorised_over_many_values():
    # Self-consistency of the two interpolants over 1e5 values spanning 0 < z < 10.
    z = np.random.default_rng(1).uniform(0.0, 10.0, 100_000)
    back = convert.redshift_from_distance(convert.luminosity_distance(z))
    np.testing.assert_allclose(back, z, rtol=0, atol=1e-6)


def test_low_redshift_hubble_law():
    # d_L -> c z / H0 as z -> 0 (Hubble law; Hogg 1999, arXiv:astro-ph/9905116, sec. 5).
    # At z = 1e-4 the next order is ~(1 - q0) z / 2 < 1e-4 relative.
    cosmo = ac.Planck18
    z = 1e-4
    hubble = (c_light * z / cosmo.H0).to_value(u.Mpc)
    assert convert.luminosity_distance(z) == pytest.approx(hubble, rel=1e-4)


def test_gw150914_distance_gives_its_published_redshift():
    # GW150914: d_L = 410 (+160 -180) Mpc and z = 0.09 (+0.03 -0.04) (Abbott et al. 2016,
    # PRL 116, 061102, Table I; from memory), with the Planck 2015 cosmology of that era.
    assert convert.redshift_from_distance(410.0, "Planck15") == pytest.approx(0.09, abs=0.01)


def test_gw150914_component_masses_give_its_chirp_mass():
    # 36 + 29 Msun -> chirp mass of about 28 Msun (Abbott et al. 2016, PRL 116, 061102;
    # from memory).
    assert convert.chirp_mass(36.0, 29.0) == pytest.approx(28.0, abs=0.5)


def test_out_of_range_is_nan_not_extrapolated():
    # Common practice, no source: outside the grid the answer is missing, never extrapolated.
    assert np.isnan(convert.luminosity_distance(-0.1))
    assert np.isnan(convert.luminosity_distance(convert.Z_MAX * 1.01))
    assert np.isnan(convert.redshift_from_distance(-1.0))
    assert np.isnan(convert.redshift_from_distance(1e12))
