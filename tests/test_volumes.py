"""Volume specifications and the comoving-volume integrals (astropy as the reference library)."""

from __future__ import annotations

import numpy as np
import pytest
from astropy.cosmology import FlatLambdaCDM, Planck18
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.integrate import quad

from gwdeficit.rates import RateEvolution
from gwdeficit.schema import GwdeficitError, OptionError
from gwdeficit.volumes import (
    COSMIC_ZMAX_DEFAULT,
    MWEG_DENSITY_MPC3,
    STELLAR_DENSITY_MSUN_MPC3,
    VOLUME_FORMS,
    Volume,
    comoving_volume_integral,
    parse_volume,
    parse_volumes,
    redshift_at_comoving_distance,
)


def _astropy_integral(cosmo, zmax, shape=lambda z: 1.0, observer=False):
    """Reference: scipy quad over astropy's differential comoving volume (Gpc^3)."""

    def f(z):
        dv = 4 * np.pi * cosmo.differential_comoving_volume(z).to_value("Gpc3 / sr")
        return dv * shape(z) / ((1 + z) if observer else 1.0)

    return quad(f, 0, zmax, epsabs=0, epsrel=1e-11, limit=200)[0]


@pytest.mark.parametrize(
    ("text", "form", "value"),
    [
        ("mw", "mw", None),
        ("MW", "mw", None),
        ("gpc3", "gpc3", None),
        ("mpc3", "mpc3", None),
        ("stellar:6e10", "stellar", 6e10),
        ("sphere:100", "sphere", 100.0),
        ("sphere: 1 Gpc", "sphere", 1000.0),
        ("sphere:3.0857e24 cm", "sphere", 1.0),
        ("stellar:1e10 solMass", "stellar", 1e10),
        ("cosmic", "cosmic", COSMIC_ZMAX_DEFAULT),
        ("cosmic:1", "cosmic", 1.0),
    ],
)
def test_parse_forms(text, form, value):
    v = parse_volume(text)
    assert v.form == form
    if value is None:
        assert np.isnan(v.value)
    else:
        assert v.value == pytest.approx(value, rel=1e-4)


@pytest.mark.parametrize(
    "text",
    [
        "",
        "galaxy",
        "mw:3",
        "sphere",
        "sphere:",
        "sphere:-3",
        "sphere:0",
        "stellar:abc",
        "cosmic:x",
        "sphere:1kg",
        "stellar:5 km",
        "cosmic:-1",
        "cosmic:2000",
        "gpc",
    ],
)
def test_bad_volumes_list_the_valid_forms(text):
    with pytest.raises(OptionError) as exc:
        parse_volume(text)
    msg = str(exc.value)
    assert "valid forms" in msg and "sphere:RADIUS" in msg and "cosmic:ZMAX" in msg
    assert repr(text.strip()) in msg or text.strip() == ""


def test_forms_listed():
    assert VOLUME_FORMS == (
        "mw",
        "gpc3",
        "mpc3",
        "stellar:MASS",
        "sphere:RADIUS",
        "cosmic",
        "cosmic:ZMAX",
    )


def test_parse_volumes_splits_commas_and_drops_repeats():
    vols = parse_volumes(["mw,gpc3", "mw", "sphere:100", " cosmic:1 "])
    assert [v.spec for v in vols] == ["mw", "gpc3", "sphere:100", "cosmic:1"]
    with pytest.raises(OptionError, match="no volume"):
        parse_volumes([" , "])


def test_local_volumes():
    none = RateEvolution()
    assert parse_volume("gpc3").effective_gpc3(none) == 1.0
    assert parse_volume("mpc3").effective_gpc3(none) == pytest.approx(1e-9)
    # one MWEG: 1 / n_gal of comoving volume (Kopparapu et al. 2008 density)
    assert parse_volume("mw").effective_gpc3(none) == pytest.approx(1 / (0.0116 * 1e9))
    assert MWEG_DENSITY_MPC3 == 0.0116
    assert parse_volume("mw").effective_gpc3(none, galaxy_density_mpc3=0.01) == pytest.approx(1e-7)
    eff = parse_volume("stellar:6e10").effective_gpc3(none)
    assert eff == pytest.approx(6e10 / STELLAR_DENSITY_MSUN_MPC3 / 1e9)
    eff2 = parse_volume("stellar:6e10").effective_gpc3(none, stellar_density_msun_mpc3=6e8)
    assert eff2 == pytest.approx(1e-7)


def test_local_volumes_use_the_rate_today():
    evo = RateEvolution("powerlaw", 3.0, 0.2)
    assert parse_volume("gpc3").effective_gpc3(evo) == pytest.approx(1.2**-3)


def test_bad_densities():
    with pytest.raises(OptionError, match="galaxy density"):
        parse_volume("mw").effective_gpc3(RateEvolution(), galaxy_density_mpc3=0)
    with pytest.raises(OptionError, match="stellar-mass density"):
        parse_volume("mw").effective_gpc3(RateEvolution(), stellar_density_msun_mpc3=-1)


def test_comoving_volume_integral_matches_astropy_comoving_volume():
    for z in (0.05, 1.0, 6.0):
        ref = Planck18.comoving_volume(z).to_value("Gpc3")  # astropy as reference library
        assert comoving_volume_integral(Planck18, z) == pytest.approx(ref, rel=1e-8)
    assert comoving_volume_integral(Planck18, 0.0) == 0.0


def test_sphere_without_evolution_is_a_euclidean_ball():
    # Planck18 is spatially flat: the comoving ball of radius r holds 4/3 pi r^3.
    r = 250.0
    assert parse_volume(f"sphere:{r}").effective_gpc3(RateEvolution(), Planck18) == pytest.approx(
        4 / 3 * np.pi * (r / 1000) ** 3, rel=1e-8
    )


def test_sphere_with_evolution_matches_quadrature():
    evo = RateEvolution("powerlaw", 2.9, 0.0)
    z_r = redshift_at_comoving_distance(Planck18, 1500.0)
    assert Planck18.comoving_distance(z_r).to_value("Mpc") == pytest.approx(1500.0, rel=1e-9)
    ref = _astropy_integral(Planck18, z_r, lambda z: (1 + z) ** 2.9)
    assert parse_volume("sphere:1500").effective_gpc3(evo, Planck18) == pytest.approx(ref, rel=1e-7)


def test_cosmic_volume_in_another_cosmology():
    cosmo = FlatLambdaCDM(H0=70, Om0=0.3)
    evo = RateEvolution("madau-dickinson", 0.0, 0.0)
    shape = evo.factor
    ref = _astropy_integral(cosmo, 3.0, lambda z: float(shape(z)), observer=True)
    assert parse_volume("cosmic:3").effective_gpc3(evo, cosmo) == pytest.approx(ref, rel=1e-6)


def test_sphere_beyond_the_horizon():
    with pytest.raises(OptionError, match="sphere radius"):
        parse_volume("sphere:1e6").effective_gpc3(RateEvolution(), Planck18)


def test_describe():
    d = parse_volume("stellar:6e10").describe(stellar_density_msun_mpc3=5e8)
    assert d["stellar_density_msun_mpc3"] == 5e8 and d["time"] == "source frame"
    assert parse_volume("cosmic:2").describe()["time"] == "observer frame"
    assert isinstance(parse_volume(Volume("mw", "mw")), Volume)


@settings(max_examples=300, deadline=None)
@given(
    st.one_of(
        st.text(max_size=30),
        st.from_regex(
            r"\A(mw|gpc3|mpc3|stellar|sphere|cosmic)(:[-0-9.e+ ]{0,8}( ?[a-zA-Z]{0,4}))?\Z"
        ),
    )
)
def test_any_text_gives_a_volume_or_a_user_error(text):
    try:
        v = parse_volume(text)
    except GwdeficitError:
        return
    assert v.form in {"mw", "gpc3", "mpc3", "stellar", "sphere", "cosmic"}
