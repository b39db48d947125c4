"""The fit registry: names, metadata, selection rules, kernels agree with public functions."""

from __future__ import annotations

import json
import re

import numpy as np
import pytest

from gwdeficit.fits import registry
from gwdeficit.schema import PER_FIT_SEPARATOR, OptionError


def test_names_are_snake_case_author_year_and_unique():
    names = [f.name for f in registry.REGISTRY]
    assert len(set(names)) == len(names)
    for n in names:
        assert re.fullmatch(r"[a-z]+(_[a-z]+)*_(19|20)\d\d", n), n


def test_every_quantity_has_an_nr_fit_and_enough_estimates():
    by = {q: [f for f in registry.REGISTRY if f.quantity == q] for q in registry.QUANTITIES}
    assert len(by["final_spin"]) >= 3 and len(by["final_mass"]) >= 2 and by["recoil"]
    for fits in by.values():
        assert any(f.in_default for f in fits)
    for f in registry.REGISTRY:
        assert f.in_default == bool(f.calibrated), "parameter-free fits stay out of the default"


def test_metadata_is_json_and_has_the_agreed_keys():
    for f in registry.REGISTRY:
        meta = json.loads(json.dumps(f.metadata()))
        assert {"name", "quantity", "citation", "calibrated", "in_default"} <= set(meta)
        assert meta["quantity"] in registry.QUANTITIES
        assert all(c.endswith(PER_FIT_SEPARATOR + f.name) for c in meta["columns"])
        assert re.search(r"(19|20)\d\d", meta["citation"])


def test_final_mass_fits_give_mass_and_energy_columns():
    f = registry.get_fit("barausse_morozova_rezzolla_2012")
    assert f.columns == (
        "mf_msun__barausse_morozova_rezzolla_2012",
        "erad_msun__barausse_morozova_rezzolla_2012",
    )


def test_selection_rules():
    assert registry.select_fits(None) == registry.REGISTRY
    with pytest.raises(OptionError, match="not known"):
        registry.select_fits(["no_such_fit_2000"])
    with pytest.raises(OptionError, match="twice"):
        registry.select_fits(["lousto_2012", "lousto_2012"])
    with pytest.raises(OptionError, match="no NR-calibrated final_mass"):
        registry.select_fits(["barausse_rezzolla_2009", "lousto_2012"])
    chosen = registry.select_fits(
        ["lousto_2012", "barausse_morozova_rezzolla_2012", "barausse_rezzolla_2009"]
    )
    assert [f.name for f in chosen] == [
        "barausse_rezzolla_2009",
        "barausse_morozova_rezzolla_2012",
        "lousto_2012",
    ]


def test_remnant_stage_agrees_with_each_public_function():
    # The remnant stage evaluates all selected fits together on blocks (float32 angles, bodies
    # in either order); each public function evaluates one fit (float64). Same kernels, so
    # they agree to the float32 angle rounding (~3e-7 in the spin components).
    import warnings

    from gwdeficit.remnant import remnant_arrays

    rng = np.random.default_rng(2)
    n = 3000
    q = rng.uniform(0.05, 1, n)
    c1, c2 = rng.uniform(0, 1, n), rng.uniform(0, 1, n)
    t1, t2 = rng.uniform(0, np.pi, n), rng.uniform(0, np.pi, n)
    p12, ph = rng.uniform(0, 2 * np.pi, n), rng.uniform(0, 2 * np.pi, n)
    heavy_second = rng.random(n) < 0.5  # half the rows list the lighter body first
    m1 = np.where(heavy_second, q, 1.0)
    m2 = np.where(heavy_second, 1.0, q)
    a1, a2 = np.where(heavy_second, c2, c1), np.where(heavy_second, c1, c2)
    b1, b2 = np.where(heavy_second, t2, t1), np.where(heavy_second, t1, t2)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", registry.FitRangeWarning)
        est = remnant_arrays(m1, m2, a1, a2, b1, b2, p12, kick_phase=ph)
    for f in registry.REGISTRY:
        args = {"final_spin": (p12,), "final_mass": (), "recoil": (p12, ph)}[f.quantity]
        public = f.function(q, c1, c2, t1, t2, *args)
        if f.quantity == "final_mass":
            got = est[f.columns[1]] / (1.0 + q)
        else:
            got = est[f.columns[0]]
        atol = {"final_spin": 2e-6, "final_mass": 2e-7, "recoil": 5e-3}[f.quantity]
        np.testing.assert_allclose(got, public, rtol=2e-6, atol=atol, err_msg=f.name)


def test_in_range():
    f = registry.get_fit("barausse_rezzolla_2009")
    ok = f.in_range(
        np.array([0.5, 0.1, 0.5]), np.array([0.5, 0.5, 0.95]), np.array([0.1, 0.1, 0.1])
    )
    assert ok.tolist() == [True, False, False]
    free = registry.get_fit("buonanno_kidder_lehner_2008")
    assert free.in_range(np.array([1e-4]), np.array([1.0]), np.array([1.0])).all()
    assert "parameter-free" in free.describe_range()


def test_fit_order_and_subsets_give_the_same_per_fit_columns():
    # Every selection (any order, any subset) must give each fit's column the values of the
    # full default run, and the mean/spread of the chosen NR fits; the stage fuses the
    # default set's mass and recoil pairs into single loops (same values by construction).
    import warnings

    from gwdeficit.remnant import remnant_arrays

    rng = np.random.default_rng(4)
    n = 5000
    m1 = rng.uniform(5, 80, n)
    spins, tilts = rng.uniform(0, 1, (2, n)), rng.uniform(0, np.pi, (2, n))
    args = (m1, m1 * rng.uniform(0.1, 1, n), *spins, *tilts, rng.uniform(0, 2 * np.pi, n))
    ph = rng.uniform(0, 2 * np.pi, n)
    names = [f.name for f in registry.REGISTRY]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", registry.FitRangeWarning)
        full = remnant_arrays(*args, kick_phase=ph)
        subsets = ([0, 4, 7], [2, 3, 5, 6, 8], [1, 4, 5, 8], [8, 7, 6, 5, 4, 3, 2, 1, 0])
        for fits in ([names[i] for i in idx] for idx in subsets):
            est = remnant_arrays(*args, fits=fits, kick_phase=ph)
            for f in map(registry.get_fit, fits):
                for c in f.columns:
                    np.testing.assert_array_equal(est[c], full[c], err_msg=f"{fits}: {c}")
            for qty, base in (("final_spin", "chif"), ("final_mass", "erad_msun"),
                              ("recoil", "vkick_kms")):  # fmt: skip
                used = [f for f in map(registry.get_fit, fits) if f.quantity == qty]
                vals = np.array([full[f.columns[-1]] for f in used if f.in_default])
                if len(vals):
                    np.testing.assert_allclose(est[base], vals.mean(axis=0), rtol=1e-14)
                    np.testing.assert_allclose(est[f"{base}_range"], np.ptp(vals, axis=0),
                                               rtol=1e-12, atol=1e-15)  # fmt: skip
            m_tot = args[0] + args[1]
            np.testing.assert_allclose(est["mf_msun"], m_tot - est["erad_msun"], rtol=1e-15)
            np.testing.assert_allclose(est["erad_frac"], est["erad_msun"] / m_tot, rtol=1e-15)
