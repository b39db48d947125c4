"""Remnants of mergers involving neutron stars (NSBH and BNS): one vectorised entry point,
:func:`ns_remnant`, that the remnant stage calls for NS rows.

Mass bookkeeping (gravitational versus baryonic mass)
-----------------------------------------------------
A neutron star of gravitational mass M_g has a larger baryonic (rest) mass
M_b = M_g + BE, with the binding energy BE from Lattimer & Prakash 2001 (ApJ 550, 426:
BE / M_g = 0.6 C / (1 - 0.5 C)) or Timmes, Woosley & Weaver 1996 (ApJ 457, 834:
BE = 0.075 M_g^2), see :func:`gwdeficit.fits.ns_eos.baryonic_mass`.

The published ejecta, disk and remnant-matter fits give BARYONIC masses, and ``ejected_msun`` is
that baryonic mass left outside the final compact object (unbound ejecta plus bound disk and
tail). Its gravitational-mass equivalent ``ejected_grav_msun`` takes each ejected baryon to carry
the mean gravitational-to-baryonic mass ratio of the neutron-star matter it came from:

    ejected_grav = ejected * sum(M_g,NS) / sum(M_b,NS)

(for an NSBH the sums run over the one neutron star). It neglects the kinetic energy of
unbound ejecta and the orbital binding of the disk (each a few per cent of its rest mass;
common practice, no source). The gravitational bookkeeping then closes exactly:

    m1 + m2 = mf + erad + ejected_grav

and the baryonic bookkeeping of a BNS is mb1 + mb2 = mb_remnant + ejected. The catalogue-wide
``deficit_msun`` is erad + ejected (baryonic), as the schema defines it; it exceeds
m1 + m2 - mf by ejected - ejected_grav, the binding-energy share of the ejecta.

Tidal information
-----------------
Where a row carries lambda (lambda2 for the NS of an NSBH, both for a BNS) it is used and the
compactness follows from the C-Love relation ``eos_relation``; where it is missing, the caller's
``ns_radius_km`` gives the compactness and lambda follows from the same relation. Rows with
neither are not estimated (no silent default); the keys ``tidal_source1/2`` and
``eos_relation`` record what was used.

What is estimated per kind
--------------------------
- NSBH, no matter left outside the BH (Foucart, Hinderer & Nissanke 2018 gives zero): the
  binary-black-hole fits apply (``bbh_remnant``), ejected = 0.
- NSBH, disrupted (matter left outside): ejected from FHN 2018; the final BH mass, spin and
  radiated energy are NOT estimated (no published fit whose coefficients could be verified),
  status ``not_estimated:nsbh_disrupted_no_verified_bh_fit``.
- BNS: erad is the PN inspiral energy to contact, a LOWER BOUND (``erad_lower_bound`` True);
  ejected = dynamical ejecta (Dietrich & Ujevic 2017) + disk (Radice et al. 2018);
  mf from the bookkeeping above; chif not estimated (NaN); remnant kind from Bauswein et al.
  2013 and Breu & Rezzolla 2016 when the caller gives M_TOV (and R_1.6 or a radius).
"""

from __future__ import annotations

import warnings
from collections.abc import Callable, Mapping
from typing import Any

import numpy as np
from numpy.typing import ArrayLike, NDArray

from gwdeficit.fits import bns as _bns
from gwdeficit.fits import ns_eos as _eos
from gwdeficit.fits import nsbh as _nsbh
from gwdeficit.schema import OptionError

FloatArray = NDArray[np.float64]
BbhRemnant = Callable[..., Mapping[str, ArrayLike]]

NS_KINDS = ("NSBH", "BNS")

STATUS_ESTIMATED = "estimated"
STATUS_NO_TIDAL = "not_estimated:no_tidal_deformability_or_radius"
STATUS_DISRUPTED = "not_estimated:nsbh_disrupted_no_verified_bh_fit"
STATUS_NO_BBH = "not_estimated:no_bbh_remnant_function"
STATUS_BAD_INPUT = "not_estimated:non_finite_input"

ERAD_BBH = "bbh-fits"
ERAD_PN_CONTACT = "pn3-tidal-to-contact"
ERAD_NONE = "none"

# Status and erad-method labels are carried as small integer codes until the end of
# :func:`ns_remnant` (full-length string arrays are costly at 1e6 rows).
_STATUS_LABELS = (STATUS_BAD_INPUT, STATUS_NO_TIDAL, STATUS_DISRUPTED, STATUS_NO_BBH,
                  STATUS_ESTIMATED)  # fmt: skip
_ERAD_LABELS = (ERAD_NONE, ERAD_BBH, ERAD_PN_CONTACT)
_SC = {label: np.int8(i) for i, label in enumerate(_STATUS_LABELS)}
_EC = {label: np.int8(i) for i, label in enumerate(_ERAD_LABELS)}


def _labels(codes: NDArray[np.int8], labels: tuple[str, ...]) -> NDArray[np.str_]:
    """Strings for integer codes; the dtype fits the longest label actually present."""
    present = np.unique(codes)
    table = np.full(len(labels), "", dtype=object)
    table[present] = [labels[i] for i in present]
    return np.asarray(table.astype(str))[codes]


# Names used in the per-row ``out_of_range`` key and in :func:`ns_fits_metadata`.
FIT_FHN2018 = "foucart-hinderer-nissanke-2018"
FIT_DU2017 = "dietrich-ujevic-2017"
FIT_RADICE2018 = "radice-2018-disk"
FIT_BBH = "bbh-fits"


def ns_fits_metadata(eos_relation: str = _eos.DEFAULT_C_LOVE) -> list[dict[str, Any]]:
    """JSON-able description of the neutron-star fits (for the ``gwdeficit.fits`` record)."""
    rel = _eos.c_love_relation(eos_relation)
    return [
        {"name": rel.name, "quantity": "ns_compactness", "citation": rel.source,
         "calibrated": {"lambda_min": rel.lambda_range[0], "lambda_max": rel.lambda_range[1]}},
        {"name": FIT_FHN2018, "quantity": "nsbh_remnant_matter",
         "citation": "Foucart, Hinderer & Nissanke 2018, PRD 98, 081501(R), eq. 4",
         "calibrated": dict(_nsbh.FHN2018_RANGE)},
        {"name": FIT_DU2017, "quantity": "bns_dynamical_ejecta",
         "citation": "Dietrich & Ujevic 2017, CQG 34, 105014, eq. 1",
         "calibrated": dict(_bns.DU2017_RANGE)},
        {"name": FIT_RADICE2018, "quantity": "bns_disk_mass",
         "citation": "Radice et al. 2018, ApJ 869, 130", "calibrated": dict(_bns.RADICE2018_RANGE)},
        {"name": "bauswein-2013", "quantity": "bns_prompt_collapse_mass",
         "citation": "Bauswein, Baumgarte & Janka 2013, PRL 111, 131101",
         "calibrated": {"equal_mass": True}},
        {"name": "breu-rezzolla-2016", "quantity": "bns_supramassive_limit",
         "citation": "Breu & Rezzolla 2016, MNRAS 459, 646", "calibrated": {}},
        {"name": ERAD_PN_CONTACT, "quantity": "bns_erad_lower_bound",
         "citation": "Blanchet 2014, Living Rev. Relativ. 17, 2, eq. 233; Flanagan & Hinderer "
         "2008, PRD 77, 021502", "calibrated": {}},
    ]  # fmt: skip


def _kerr_isco_radius(chi: FloatArray) -> FloatArray:
    """Kerr ISCO radius in units of the BH mass for signed aligned spin chi (prograde > 0)."""
    from gwdeficit.fits import isco

    return np.asarray(isco.isco_radius(chi), dtype=np.float64)


def _as_float(a: ArrayLike, shape: tuple[int, ...], name: str) -> FloatArray:
    """Broadcast to ``shape`` and flatten to a writable 1-D float64 copy."""
    try:
        out = np.broadcast_to(np.asarray(a, dtype=np.float64), shape)
    except ValueError as exc:
        raise OptionError(f"{name}: shape {np.shape(a)} does not match {shape}") from exc
    return np.array(out, dtype=np.float64).reshape(-1)


def _flat_option(a: ArrayLike | None, shape: tuple[int, ...], name: str) -> FloatArray | None:
    return None if a is None else _as_float(a, shape, name)


def ns_remnant(
    m1_msun: ArrayLike,
    m2_msun: ArrayLike,
    chi1: ArrayLike,
    chi2: ArrayLike,
    tilt1_rad: ArrayLike,
    tilt2_rad: ArrayLike,
    lambda1: ArrayLike,
    lambda2: ArrayLike,
    kind: ArrayLike,
    *,
    phi12_rad: ArrayLike | None = None,
    ns_radius_km: ArrayLike | None = None,
    eos_relation: str = _eos.DEFAULT_C_LOVE,
    baryonic_relation: str = _eos.DEFAULT_BARYONIC,
    mtov_msun: float | ArrayLike | None = None,
    r16_km: float | ArrayLike | None = None,
    bbh_remnant: BbhRemnant | None = None,
    warn: bool = True,
) -> dict[str, NDArray[Any]]:
    """Remnant mass, spin, radiated energy and ejected mass of NSBH and BNS mergers, per row.

    Parameters (arrays broadcast to one shape; units in the names): ``m1_msun >= m2_msun``
    source-frame gravitational masses (for NSBH body 1 is the black hole); spin magnitudes and
    tilts (rad); ``lambda1``/``lambda2`` dimensionless tidal deformabilities, NaN where unknown
    (lambda1 of an NSBH is ignored); ``kind`` "NSBH" or "BNS".
    Keywords: ``ns_radius_km`` neutron-star radius used where lambda is missing (a fixed-radius
    EOS approximation); ``eos_relation`` the C-Love relation (``"yagi-yunes-2017"``,
    ``"maselli-2013"``); ``baryonic_relation`` (``"lattimer-prakash-2001"``,
    ``"timmes-woosley-weaver-1996"``); ``mtov_msun`` and ``r16_km`` EOS parameters for the BNS
    remnant kind (``r16_km`` defaults to ``ns_radius_km``); ``bbh_remnant`` callable
    ``(m1, m2, chi1, chi2, tilt1, tilt2, phi12) -> {"mf_msun", "chif", "erad_msun", ...}`` for
    the non-disrupted NSBH limit.

    Returns a dict of arrays of the input shape: ``mf_msun``, ``chif``, ``erad_msun``,
    ``ejected_msun`` (baryonic), ``ejected_grav_msun``, ``deficit_msun`` (erad + ejected),
    ``remnant_kind``, ``in_fit_range``, ``disrupted``, ``remnant_status``, ``erad_method``,
    ``erad_lower_bound``, ``vkick_kms``, ``mb1_msun``, ``mb2_msun`` (NaN for a BH),
    ``mb_remnant_msun`` (BNS), ``lambda1_used``, ``lambda2_used``, ``compactness1``,
    ``compactness2``, ``tidal_source1``, ``tidal_source2``, ``remnant_baryonic_frac`` (NSBH,
    FHN 2018), ``ejecta_dyn_msun``, ``disk_msun``, ``mthresh_msun`` (BNS prompt-collapse mass),
    ``eos_relation``, ``baryonic_relation``, ``out_of_range`` (";"-joined names of the fits
    whose calibrated range the row lies outside; "" if none). With ``warn`` (default) one
    :class:`gwdeficit.fits.registry.FitRangeWarning` summarises the out-of-range counts per
    fit. See the module docstring for the bookkeeping and for what is not estimated.
    """
    kind_arr = np.asarray(kind).astype(str)
    inputs = (m1_msun, m2_msun, chi1, chi2, tilt1_rad, tilt2_rad, lambda1, lambda2)
    try:
        shape = np.broadcast_shapes(*(np.shape(a) for a in inputs), kind_arr.shape)
    except ValueError as exc:
        raise OptionError(f"ns_remnant: input arrays do not broadcast together: {exc}") from exc
    m1 = _as_float(m1_msun, shape, "m1_msun")
    m2 = _as_float(m2_msun, shape, "m2_msun")
    c1, c2 = _as_float(chi1, shape, "chi1"), _as_float(chi2, shape, "chi2")
    t1, t2 = _as_float(tilt1_rad, shape, "tilt1_rad"), _as_float(tilt2_rad, shape, "tilt2_rad")
    l1, l2 = _as_float(lambda1, shape, "lambda1"), _as_float(lambda2, shape, "lambda2")
    phi12 = _as_float(np.nan if phi12_rad is None else phi12_rad, shape, "phi12_rad")
    kind_arr = np.broadcast_to(kind_arr, shape).reshape(-1)
    ns_radius_km = _flat_option(ns_radius_km, shape, "ns_radius_km")
    mtov_msun = _flat_option(mtov_msun, shape, "mtov_msun")
    r16_km = _flat_option(r16_km, shape, "r16_km")
    bad_kind = ~np.isin(kind_arr, NS_KINDS)
    if bad_kind.any():
        found = sorted(set(kind_arr[bad_kind].tolist()))
        raise OptionError(f"ns_remnant handles kinds {', '.join(NS_KINDS)} only; got {found}")
    _eos.c_love_relation(eos_relation)  # validate the names before any work
    if baryonic_relation not in _eos.BARYONIC_RELATIONS:
        raise OptionError(
            f"baryonic-mass relation {baryonic_relation!r} is not known; valid: "
            + ", ".join(_eos.BARYONIC_RELATIONS)
        )
    with np.errstate(invalid="ignore"):
        if np.any((m1 <= 0) | (m2 <= 0)):
            raise OptionError("masses must be positive")
    is_nsbh = kind_arr == "NSBH"
    is_bns = ~is_nsbh
    # every spin is needed: the BBH fits of the NSBH limit use the NS spin too
    finite = np.isfinite(m1) & np.isfinite(m2) & np.isfinite(c1) & np.isfinite(t1)
    finite &= np.isfinite(c2) & np.isfinite(t2)

    flat = m1.shape
    nan = np.full(flat, np.nan)
    out: dict[str, NDArray[Any]] = {
        "mf_msun": nan.copy(),
        "chif": nan.copy(),
        "erad_msun": nan.copy(),
        "ejected_msun": nan.copy(),
        "ejected_grav_msun": nan.copy(),
        "vkick_kms": nan.copy(),
        "in_fit_range": np.zeros(flat, dtype=bool),
        "disrupted": np.zeros(flat, dtype=bool),
        "remnant_kind": np.full(flat, "", dtype="<U4"),
        "remnant_status": np.full(flat, _SC[STATUS_BAD_INPUT]),
        "erad_method": np.full(flat, _EC[ERAD_NONE]),
        "erad_lower_bound": np.zeros(flat, dtype=bool),
        "remnant_baryonic_frac": nan.copy(),
        "ejecta_dyn_msun": nan.copy(),
        "disk_msun": nan.copy(),
        "mthresh_msun": nan.copy(),
        "mb_remnant_msun": nan.copy(),
    }
    flags: dict[str, NDArray[np.bool_]] = {}  # fit name -> rows outside its calibrated range

    # Neutron-star properties: body 2 is a NS in both kinds, body 1 only in a BNS.
    # (the BH of an NSBH is masked to NaN so that no stellar radius is applied to it)
    ns1 = _eos.resolve_neutron_stars(
        np.where(is_bns, m1, np.nan),
        np.where(is_bns, l1, np.nan),
        ns_radius_km=ns_radius_km,
        eos_relation=eos_relation,
        baryonic_relation=baryonic_relation,
    )
    ns2 = _eos.resolve_neutron_stars(
        m2,
        l2,
        ns_radius_km=ns_radius_km,
        eos_relation=eos_relation,
        baryonic_relation=baryonic_relation,
    )
    bh1 = is_nsbh
    out["mb1_msun"] = np.where(bh1, np.nan, ns1.mb_msun)
    out["mb2_msun"] = ns2.mb_msun.copy()
    out["lambda1_used"] = np.where(bh1, 0.0, ns1.lam)
    out["lambda2_used"] = ns2.lam.copy()
    out["compactness1"] = np.where(bh1, np.nan, ns1.compactness)
    out["compactness2"] = ns2.compactness.copy()
    out["tidal_source1"] = np.where(bh1, "bh", ns1.source)
    out["tidal_source2"] = ns2.source.copy()
    out["eos_relation"] = np.full(flat, eos_relation)
    out["baryonic_relation"] = np.full(flat, baryonic_relation)

    ns2_ok = ns2.source != _eos.SOURCE_NONE
    have_tidal = np.where(is_bns, (ns1.source != _eos.SOURCE_NONE) & ns2_ok, ns2_ok)
    out["remnant_status"][finite & ~have_tidal] = _SC[STATUS_NO_TIDAL]

    sel = is_nsbh & finite & have_tidal
    if sel.any():
        _nsbh_rows(out, flags, sel, m1, m2, c1, c2, t1, t2, phi12, ns2, bbh_remnant)
    sel = is_bns & finite & have_tidal
    if sel.any():
        r16 = ns_radius_km if r16_km is None else r16_km
        _bns_rows(out, flags, sel, m1, m2, ns1, ns2, mtov_msun, r16)

    out["deficit_msun"] = out["erad_msun"] + out["ejected_msun"]
    used = (is_bns & (ns1.source != _eos.SOURCE_NONE)) | (ns2.source != _eos.SOURCE_NONE)
    flags[eos_relation] = used & ~np.where(is_bns, ns1.in_range & ns2.in_range, ns2.in_range)
    out["out_of_range"] = _join_flags(flags, flat)
    if warn:
        _warn_out_of_range(
            flags, int(np.count_nonzero(out["remnant_status"] != _SC[STATUS_BAD_INPUT]))
        )
    out["remnant_status"] = _labels(out["remnant_status"], _STATUS_LABELS)
    out["erad_method"] = _labels(out["erad_method"], _ERAD_LABELS)
    return {key: value.reshape(shape) for key, value in out.items()}


def _join_flags(flags: Mapping[str, NDArray[np.bool_]], shape: tuple[int, ...]) -> NDArray[Any]:
    """Per row, the ";"-joined names of the fits whose range the row lies outside."""
    names = list(flags)
    bits = np.zeros(shape, dtype=np.int64)
    for i, name in enumerate(names):
        bits |= flags[name].astype(np.int64) << i
    codes, inverse = np.unique(bits, return_inverse=True)
    labels = [";".join(n for i, n in enumerate(names) if int(c) >> i & 1) for c in codes]
    return np.asarray(labels, dtype=str)[inverse.reshape(shape)]


def out_of_range_warning(counts: Mapping[str, int], n_rows: int) -> Warning | None:
    """The :class:`FitRangeWarning` for ``counts`` (fit name -> rows outside its calibrated
    range, zeros ignored) among ``n_rows`` neutron-star rows of one kind; None if no row is
    outside. The streamed engine builds the same warning from counts over all its batches."""
    from gwdeficit.fits.registry import FitRangeWarning

    parts = ", ".join(f"{name} ({n} rows)" for name, n in counts.items() if n)
    if not parts:
        return None
    return FitRangeWarning(
        f"neutron-star rows outside the calibrated range of: {parts}, of {n_rows} rows; the "
        "fits are extrapolated there (in_fit_range is False for them)"
    )


def _warn_out_of_range(flags: Mapping[str, NDArray[np.bool_]], n_rows: int) -> None:
    counts = {name: int(np.count_nonzero(f)) for name, f in flags.items()}
    warning = out_of_range_warning(counts, n_rows)
    if warning is not None:
        warnings.warn(warning, stacklevel=3)


def _nsbh_rows(
    out: dict[str, NDArray[Any]],
    flags: dict[str, NDArray[np.bool_]],
    sel: NDArray[np.bool_],
    m1: FloatArray,
    m2: FloatArray,
    c1: FloatArray,
    c2: FloatArray,
    t1: FloatArray,
    t2: FloatArray,
    phi12: FloatArray,
    ns2: _eos.NeutronStars,
    bbh_remnant: BbhRemnant | None,
) -> None:
    """Fill the NSBH rows ``sel`` of ``out`` in place."""
    q = m1[sel] / m2[sel]
    chi_al = c1[sel] * np.cos(t1[sel])  # aligned projection (common practice, no source)
    comp = ns2.compactness[sel]
    mb_ns = ns2.mb_msun[sel]
    frac = _nsbh.remnant_mass_fraction_fhn2018(q, _kerr_isco_radius(chi_al), comp)
    mrem_b = frac * mb_ns
    disrupted = mrem_b > 0
    fhn_ok = _nsbh.fhn2018_in_range(q, chi_al, comp)
    flags[FIT_FHN2018] = _scatter(sel, ~fhn_ok)
    in_range = fhn_ok & ns2.in_range[sel]

    out["remnant_baryonic_frac"][sel] = frac
    out["ejected_msun"][sel] = mrem_b
    out["ejected_grav_msun"][sel] = mrem_b * m2[sel] / mb_ns
    out["disrupted"][sel] = disrupted
    out["remnant_kind"][sel] = "BH"

    idx = np.flatnonzero(sel)
    dis_idx, clean_idx = idx[disrupted], idx[~disrupted]
    out["remnant_status"][dis_idx] = _SC[STATUS_DISRUPTED]
    out["in_fit_range"][dis_idx] = in_range[disrupted]
    if clean_idx.size == 0:
        return
    if bbh_remnant is None:
        out["remnant_status"][clean_idx] = _SC[STATUS_NO_BBH]
        out["in_fit_range"][clean_idx] = in_range[~disrupted]
        return
    i = clean_idx
    res = bbh_remnant(m1[i], m2[i], c1[i], c2[i], t1[i], t2[i], phi12[i])
    for key in ("mf_msun", "chif", "erad_msun"):
        out[key][clean_idx] = np.asarray(res[key], dtype=np.float64)
    if "vkick_kms" in res:
        out["vkick_kms"][clean_idx] = np.asarray(res["vkick_kms"], dtype=np.float64)
    bbh_ok = np.broadcast_to(np.asarray(res.get("in_fit_range", True), dtype=bool), i.shape)
    flags[FIT_BBH] = np.zeros(sel.shape, dtype=bool)
    flags[FIT_BBH][i] = ~bbh_ok
    out["in_fit_range"][clean_idx] = in_range[~disrupted] & bbh_ok
    out["remnant_status"][clean_idx] = _SC[STATUS_ESTIMATED]
    out["erad_method"][clean_idx] = _EC[ERAD_BBH]


def _bns_rows(
    out: dict[str, NDArray[Any]],
    flags: dict[str, NDArray[np.bool_]],
    sel: NDArray[np.bool_],
    m1: FloatArray,
    m2: FloatArray,
    ns1: _eos.NeutronStars,
    ns2: _eos.NeutronStars,
    mtov_msun: FloatArray | None,
    r16_km: FloatArray | None,
) -> None:
    """Fill the BNS rows ``sel`` of ``out`` in place."""
    a1, a2 = m1[sel], m2[sel]
    la1, la2 = ns1.lam[sel], ns2.lam[sel]
    k1, k2 = ns1.compactness[sel], ns2.compactness[sel]
    b1, b2 = ns1.mb_msun[sel], ns2.mb_msun[sel]

    erad = _bns.inspiral_erad_to_contact(a1, a2, la1, la2, k1, k2)
    dyn = _bns.dynamical_ejecta_du2017(a1, a2, k1, k2, b1, b2)
    disk = _bns.disk_mass_radice2018(a1, a2, la1, la2)
    ejected = dyn + disk
    ejected_grav = ejected * (a1 + a2) / (b1 + b2)
    mf = a1 + a2 - erad - ejected_grav

    out["erad_msun"][sel] = erad
    out["erad_method"][sel] = _EC[ERAD_PN_CONTACT]
    out["erad_lower_bound"][sel] = True
    out["ejecta_dyn_msun"][sel] = dyn
    out["disk_msun"][sel] = disk
    out["ejected_msun"][sel] = ejected
    out["ejected_grav_msun"][sel] = ejected_grav
    out["mf_msun"][sel] = mf
    out["mb_remnant_msun"][sel] = b1 + b2 - ejected
    du_ok = _bns.du2017_in_range(a1, a2, k1, k2)
    radice_ok = _bns.radice2018_in_range(a1, a2, la1, la2)
    flags[FIT_DU2017] = _scatter(sel, ~du_ok)
    flags[FIT_RADICE2018] = _scatter(sel, ~radice_ok)
    out["in_fit_range"][sel] = du_ok & radice_ok & ns1.in_range[sel] & ns2.in_range[sel]
    out["remnant_status"][sel] = _SC[STATUS_ESTIMATED]
    if mtov_msun is not None and r16_km is not None:
        mtov, r16 = np.asarray(mtov_msun)[sel], np.asarray(r16_km)[sel]
        if np.any(~(np.isfinite(mtov) & (mtov > 0))) or np.any(~(np.isfinite(r16) & (r16 > 0))):
            raise OptionError("M_TOV and R_1.6 must be positive numbers (Msun, km)")
        out["mthresh_msun"][sel] = _bns.prompt_collapse_threshold_bauswein2013(mtov, r16)
        out["remnant_kind"][sel] = _bns.bns_remnant_kind(a1 + a2, mf, mtov, r16)


def _scatter(sel: NDArray[np.bool_], values: NDArray[np.bool_]) -> NDArray[np.bool_]:
    """Full-length boolean array: ``values`` at the rows ``sel``, False elsewhere."""
    full = np.zeros(sel.shape, dtype=bool)
    full[sel] = values
    return full
