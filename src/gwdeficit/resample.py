"""Hierarchical bootstrap of population means per merger, and the split of its error budget.

The population mean per merger of a remnant quantity ``x`` (mass deficit, radiated energy,
ejected mass, or the indicator ``vkick < v_esc`` for the retained fraction) is

    <x> = sum_e W_e E_e[s x] / sum_e W_e E_e[s]

over events ``e``; ``E_e[.]`` is the weighted mean over the event's rows (posterior samples) by
their ``weight``; ``s`` is the selection factor of a row (1, or 1 / sensitive volume-time, see
:data:`SELECTIONS`); ``W_e`` is the event's weight in the population: 1 when the event has
several rows (posterior samples: each event counts once), the row weight when it is a single
row (population-synthesis binaries, catalogue point values).

Each bootstrap draw switches on any of the error sources (schema.ERROR_SOURCES but "rate",
which the caller folds in):

- ``catalogue``: the events are resampled with replacement (uniformly; the weighted mean above
  then honours ``W_e``); off: every event once.
- ``posterior``: one row of each drawn event is picked with probability proportional to its
  weight (per-event cumulative weights offset by the event index, searched for uniform draws
  offset the same way, the search confined to the event's rows); off: the event's weighted
  mean ``E_e``.
- ``fits``: one final-mass fit (``erad_msun__<fit>``, deficit = that + ``ejected_msun``) and one
  recoil fit (``vkick_kms__<fit>``) are drawn uniformly from the remnant stage's default fits
  that are finite on every row; off: the default mean columns.

Everything is vectorised over draws and events (chunks of draws bound the memory); the random
ingredients of a chunk are drawn once and shared by every source configuration evaluated on it
(common random numbers), so a source's single-source run reuses exactly the draws of the full
run. Rows are sorted by (event, sample) first, so results do not depend on row order.
"""

from __future__ import annotations

import hashlib
from collections.abc import Callable, Collection, Mapping, Sequence
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

import numpy as np
from numpy.typing import NDArray

from gwdeficit.schema import (
    ERROR_SOURCES,
    META_FITS,
    PER_FIT_SEPARATOR,
    REMNANTS_HINT,
    BadRowsError,
    OptionError,
    SchemaError,
)

if TYPE_CHECKING:
    import pandas as pd

#: Population reweightings for selection effects. ``none``: s = 1. ``inspiral-volume``:
#: s = Mc^(-15/6), the inverse of the sensitive volume of an inspiral-dominated search, which
#: grows as chirp mass to the 15/6 (common practice, no source). ``column``: s = 1 / vt_gpc3_yr,
#: the user's sensitive volume-time per row.
SELECTIONS = ("none", "inspiral-volume", "column")

#: Sources the bootstrap resamples itself (the rate is drawn by the caller).
POPULATION_SOURCES = ("catalogue", "posterior", "fits")

#: Remnant-stage fit families: quantity name in the fit list -> per-fit column prefix.
FIT_FAMILIES = {"final_mass": "erad_msun", "recoil": "vkick_kms"}

#: Columns with per-fit alternatives and the family that provides them.
_COLUMN_FAMILY = {"deficit_msun": "final_mass", "erad_msun": "final_mass", "vkick_kms": "recoil"}

#: Number of (draw x event) picks per chunk; bounds the memory of one chunk to ~100 MB.
CHUNK_PICKS = 1 << 20

NOT_ESTIMATED_PREFIX = "not_estimated"


def retained_name(v_esc_kms: float) -> str:
    """Name of the retained-fraction statistic for an escape speed: ``retained_fraction@<v>``."""
    return f"retained_fraction@{float(v_esc_kms):g}"


@dataclass(frozen=True)
class Stat:
    """One population mean: of ``column``, or of ``column < threshold`` when threshold is set."""

    name: str
    column: str
    threshold: float | None = None


@dataclass(frozen=True, eq=False)
class Population:
    """A remnants table prepared for the bootstrap: sorted rows, event index, weights, values.

    Build it with :func:`prepare_population`. ``values[column]`` has shape (rows, 1 + n_alt):
    column 0 is the default (mean-of-fits) value, the others the per-fit alternatives of the
    column's family (``fit_names[family]``, in that order).
    """

    n_events: int
    starts: NDArray[np.int64]
    counts: NDArray[np.int64]
    key: NDArray[np.float64]
    uniform: NDArray[np.bool_]
    event_weight: NDArray[np.float64]
    row_factor: NDArray[np.float64]
    row_weight: NDArray[np.float64]
    values: dict[str, NDArray[np.float64]]
    fit_names: dict[str, tuple[str, ...]]
    info: dict[str, Any] = field(default_factory=dict)
    digest: str = ""
    guide: NDArray[np.int64] | None = None

    @property
    def n_rows(self) -> int:
        return int(self.key.size)

    def n_alternatives(self, family: str) -> int:
        return len(self.fit_names.get(family, ()))


# --------------------------------------------------------------------------------------------
# Preparation
# --------------------------------------------------------------------------------------------


def _factorize_sorted(labels: Any) -> tuple[NDArray[Any], NDArray[np.int64]]:
    """Sorted unique labels (as text) and each row's index into them (hash, then a small sort)."""
    import pandas as pd

    codes, uniq = pd.factorize(labels, sort=False, use_na_sentinel=False)
    if _is_text_without_na(uniq):  # e.g. Arrow strings read from Parquet: convert at once
        uniq = np.asarray(uniq.to_numpy(dtype=object), dtype=object)
    else:
        uniq = np.asarray([str(x) for x in uniq], dtype=object)
    order = np.argsort(uniq, kind="stable")
    rank = np.empty_like(order)
    rank[order] = np.arange(order.size)
    return uniq[order], rank[codes].astype(np.int64)


def _is_text_without_na(values: Any) -> bool:
    """True for a pandas string (or Arrow string) array without missing values."""
    import pandas as pd

    dtype = getattr(values, "dtype", None)
    if isinstance(dtype, pd.ArrowDtype):
        import pyarrow as pa

        text = pa.types.is_string(dtype.pyarrow_dtype) or pa.types.is_large_string(
            dtype.pyarrow_dtype
        )
    else:
        text = isinstance(dtype, pd.StringDtype)
    return bool(text) and not bool(pd.isna(values).any())


def _indicator(x: NDArray[np.float64], threshold: float) -> NDArray[np.float64]:
    """1.0 where x < threshold, 0.0 where not, NaN where x is NaN (never counted as retained)."""
    y = (x < threshold).astype(np.float64)
    y[np.isnan(x)] = np.nan
    return y


def _row_numbers(df: pd.DataFrame, positions: NDArray[np.int64]) -> list[int]:
    if "input_row" in df.columns:
        return [int(r) for r in df["input_row"].to_numpy()[positions]]
    return [int(p) + 1 for p in positions]


def default_fits(remnants: pd.DataFrame) -> dict[str, list[str]]:
    """Per family, the default fits of the remnant stage whose per-fit column is present.

    From ``remnants.attrs[schema.META_FITS]`` (entries with ``in_default``); without that
    metadata, every ``erad_msun__*`` / ``vkick_kms__*`` column counts.
    """
    out: dict[str, list[str]] = {fam: [] for fam in FIT_FAMILIES}
    fits = remnants.attrs.get(META_FITS)
    if isinstance(fits, Sequence) and not isinstance(fits, str):
        for f in fits:
            if not isinstance(f, Mapping) or not f.get("in_default", False):
                continue
            fam = f.get("quantity")
            if fam in FIT_FAMILIES:
                col = f"{FIT_FAMILIES[fam]}{PER_FIT_SEPARATOR}{f.get('name')}"
                if col in remnants.columns and f.get("name") not in out[fam]:
                    out[fam].append(str(f.get("name")))
        return out
    for fam, prefix in FIT_FAMILIES.items():
        pre = prefix + PER_FIT_SEPARATOR
        out[fam] = sorted(c[len(pre) :] for c in remnants.columns if str(c).startswith(pre))
    return out


def event_kinds(remnants: pd.DataFrame) -> pd.Series:
    """Kind of each event (index: event label): the kind carrying most of its row weight.

    Ties go to the kind first in alphabetical order. Rows of one event may differ in kind when
    a posterior straddles a boundary (for example NSBH/BNS); the event then counts once, in its
    majority kind.
    """
    import pandas as pd

    w = pd.to_numeric(remnants["weight"], errors="coerce").to_numpy(np.float64)
    w = np.where(np.isfinite(w), w, 0.0)
    ev_labels, ev = _factorize_sorted(remnants["event"])
    k_labels, k = _factorize_sorted(remnants["kind"])
    nk = max(k_labels.size, 1)
    flat = ev * nk + k
    size = ev_labels.size * nk
    weight = np.bincount(flat, weights=w, minlength=size).reshape(-1, nk)
    present = np.bincount(flat, minlength=size).reshape(-1, nk) > 0
    # kinds are sorted, so argmax picks the alphabetically first kind among tied maxima
    best = np.argmax(np.where(present, weight, -np.inf), axis=1)
    return pd.Series(k_labels[best], index=pd.Index(ev_labels, name="event"), name="kind")


def _used_mask(remnants: pd.DataFrame) -> NDArray[np.bool_]:
    status = remnants["remnant_status"].astype(str)
    return ~status.str.startswith(NOT_ESTIMATED_PREFIX).to_numpy()


def prepare_population(
    remnants: pd.DataFrame,
    columns: Sequence[str],
    selection: str = "none",
    kind: str | None = None,
    source: str = "remnants table",
    digest: bool = False,
    kinds_of_events: pd.Series | None = None,
) -> Population:
    """Sort, index and weigh a remnants table for :func:`run_bootstrap`.

    Rows whose ``remnant_status`` starts with ``not_estimated`` are left out (counted in
    ``info``); so are events whose used rows all have zero weight. ``kind``: keep only the
    events whose majority kind (:func:`event_kinds`) is this one. ``digest``: also compute a
    SHA-256 of the sorted, used content (row-order independent). ``kinds_of_events``: the
    result of :func:`event_kinds` when the caller has it already. Raises :class:`SchemaError`
    for missing columns and :class:`BadRowsError` for invalid weights or volume-times.
    """
    import pandas as pd

    if selection not in SELECTIONS:
        raise OptionError(f"selection {selection!r} is not known; valid: {', '.join(SELECTIONS)}")
    need = ["event", "sample", "weight", "kind", "remnant_status", *columns]
    if selection == "inspiral-volume":
        need += ["m1_msun", "m2_msun"]
    if selection == "column":
        need += ["vt_gpc3_yr"]
    if "deficit_msun" in columns:
        need += ["ejected_msun"]
    missing = [c for c in dict.fromkeys(need) if c not in remnants.columns]
    if missing:
        raise SchemaError(
            f"{source}: missing column(s) {', '.join(missing)} needed for the bootstrap"
        )

    weight_all = pd.to_numeric(remnants["weight"], errors="coerce").to_numpy(np.float64)
    bad = np.flatnonzero(~(np.isfinite(weight_all) & (weight_all >= 0)))
    if bad.size:
        raise BadRowsError(
            source,
            "weight",
            "weight is not a finite number >= 0",
            _row_numbers(remnants, bad),
            hint=REMNANTS_HINT,
        )
    labels_all, codes_all = _factorize_sorted(remnants["event"])
    # Event weight W_e, from the whole table: 1 for several rows, the row weight for one row.
    nrows_all = np.bincount(codes_all, minlength=labels_all.size)

    n_in = len(remnants)
    keep = np.ones(n_in, dtype=bool)
    info: dict[str, Any] = {"rows_in": n_in}
    if kind is not None:
        kinds = event_kinds(remnants) if kinds_of_events is None else kinds_of_events
        keep = (kinds.reindex(labels_all).to_numpy() == kind)[codes_all]
        info["rows_in"] = int(keep.sum())
        _, kcodes = _factorize_sorted(remnants["kind"])
        pairs = np.unique(codes_all[keep] * (int(kcodes.max()) + 1) + kcodes[keep])
        n_kinds_per_event = np.bincount(pairs // (int(kcodes.max()) + 1))
        info["events_mixed_kind"] = int((n_kinds_per_event > 1).sum())
    status = remnants["remnant_status"].astype(str)
    used = keep & _used_mask(remnants)
    not_est = keep & ~used
    reasons = status[not_est].value_counts().sort_index() if not_est.any() else {}
    info["rows_not_estimated"] = int(not_est.sum())
    info["not_estimated_reasons"] = {str(k): int(v) for k, v in dict(reasons).items()}
    info["events_in"] = int((np.bincount(codes_all[keep], minlength=labels_all.size) > 0).sum())

    idx = np.flatnonzero(used)
    sample_all = pd.to_numeric(remnants["sample"], errors="coerce").to_numpy(np.float64)
    # Events whose used rows have no weight cannot be sampled: left out and counted.
    wsum_all = np.bincount(codes_all[idx], weights=weight_all[idx], minlength=labels_all.size)
    has_used = np.bincount(codes_all[idx], minlength=labels_all.size) > 0
    zero_ev = has_used & (wsum_all <= 0)
    info["events_zero_weight"] = int(zero_ev.sum())
    if zero_ev.any():
        ok = ~zero_ev[codes_all[idx]]
        info["rows_zero_weight_events"] = int((~ok).sum())
        idx = idx[ok]
    else:
        info["rows_zero_weight_events"] = 0
    if idx.size == 0:
        raise SchemaError(
            f"{source}: no estimated rows with weight > 0"
            + (f" of kind {kind}" if kind else "")
            + f" ({info['rows_not_estimated']} row(s) not estimated)"
        )
    # Compact event codes (labels stay sorted, so codes follow the label order).
    present = np.bincount(codes_all[idx], minlength=labels_all.size) > 0
    newcode = np.cumsum(present) - 1
    uniq = labels_all[present]
    ev_index_all = np.flatnonzero(present)
    codes = newcode[codes_all[idx]]
    sample = sample_all[idx]

    def _sorted(c: NDArray, smp: NDArray) -> tuple[bool, bool]:
        dc, ds = np.diff(c), np.diff(smp)
        return bool(np.all((dc > 0) | ((dc == 0) & (ds >= 0)))), bool(np.any((dc == 0) & (ds == 0)))

    def _numeric(name: str) -> NDArray[np.float64]:
        return pd.to_numeric(remnants[name], errors="coerce").to_numpy(np.float64)

    # Sort by (event, sample), duplicates by their values, so row order never matters.
    is_sorted, dup = _sorted(codes, sample)
    if not is_sorted:
        order = np.lexsort((sample, codes))
        idx, codes, sample = idx[order], codes[order], sample[order]
        _, dup = _sorted(codes, sample)
    if dup:
        ties = [_numeric(c)[idx] for c in dict.fromkeys(columns)]
        order = np.lexsort((*ties[::-1], weight_all[idx], sample, codes))
        idx, codes, sample = idx[order], codes[order], sample[order]
    # idx comes from flatnonzero (increasing); only a sort can have moved it
    identity = idx.size == n_in and is_sorted and not dup
    w = weight_all if identity else weight_all[idx]

    # Values per column: default + per-fit alternatives.
    fam_fits = default_fits(remnants)
    cols_raw: dict[str, NDArray[np.float64]] = {}

    def col(name: str) -> NDArray[np.float64]:
        if name not in cols_raw:
            v = _numeric(name)
            cols_raw[name] = v if identity else v[idx]
        return cols_raw[name]

    fit_names: dict[str, tuple[str, ...]] = {}
    ineligible: dict[str, str] = {}
    for fam, prefix in FIT_FAMILIES.items():
        if not any(_COLUMN_FAMILY.get(c) == fam for c in columns):
            continue
        ok_names = []
        for name in fam_fits[fam]:
            n_bad = int(np.count_nonzero(~np.isfinite(col(f"{prefix}{PER_FIT_SEPARATOR}{name}"))))
            if n_bad == 0:
                ok_names.append(name)
            else:
                ineligible[name] = f"not finite on {n_bad} used row(s)"
        fit_names[fam] = tuple(ok_names)
    info["fits"] = {fam: list(v) for fam, v in fit_names.items()}
    info["fits_left_out"] = ineligible

    values: dict[str, NDArray[np.float64]] = {}
    nan_values: dict[str, int] = {}
    for c in dict.fromkeys(columns):
        fam = _COLUMN_FAMILY.get(c)
        names = fit_names.get(fam, ()) if fam else ()
        arr = np.empty((idx.size, 1 + len(names)))
        arr[:, 0] = col(c)
        for j, name in enumerate(names, start=1):
            alt = col(f"{FIT_FAMILIES[fam]}{PER_FIT_SEPARATOR}{name}")
            arr[:, j] = alt + col("ejected_msun") if c == "deficit_msun" else alt
        values[c] = arr
        n_nan = int(np.count_nonzero(np.isnan(arr[:, 0])))
        if n_nan:
            nan_values[c] = n_nan

    n_ev = uniq.size
    counts = np.bincount(codes, minlength=n_ev).astype(np.int64)
    starts = np.zeros(n_ev, dtype=np.int64)
    np.cumsum(counts[:-1], out=starts[1:])
    wsum = np.add.reduceat(w, starts)
    cum = np.cumsum(w)
    offsets = np.repeat(cum[starts] - w[starts], counts)
    frac = (cum - offsets) / np.repeat(wsum, counts)
    # The event's last row with weight > 0 and any zero-weight rows after it share one
    # cumulative value; make it exactly 1 so that rounding can never pick a zero-weight row.
    last = np.repeat(frac[starts + counts - 1], counts)
    frac[frac >= last] = 1.0
    key = codes.astype(np.float64) + frac
    wmax = np.maximum.reduceat(w, starts)
    wmin = np.minimum.reduceat(w, starts)
    uniform = wmax == wmin
    guide = None if uniform.all() else _guide_tables(key, starts, counts)

    single = nrows_all[ev_index_all] == 1
    event_weight = np.where(single, w[starts], 1.0)

    if selection == "none":
        factor = np.ones_like(w)
    elif selection == "inspiral-volume":
        from gwdeficit.convert import chirp_mass

        mc = chirp_mass(col("m1_msun"), col("m2_msun"))
        badm = np.flatnonzero(~(np.isfinite(mc) & (mc > 0)))
        if badm.size:
            raise BadRowsError(
                source,
                "m1_msun",
                "no positive chirp mass",
                _row_numbers(remnants, idx[badm]),
                hint=REMNANTS_HINT,
            )
        factor = mc ** (-15.0 / 6.0)
        factor = factor / np.exp(np.mean(np.log(factor)))  # scale-free; avoids under/overflow
    else:
        vt = col("vt_gpc3_yr")
        badv = np.flatnonzero(~(np.isfinite(vt) & (vt > 0)))
        if badv.size:
            raise BadRowsError(
                source,
                "vt_gpc3_yr",
                "sensitive volume-time is not a positive number",
                _row_numbers(remnants, idx[badv]),
                hint=REMNANTS_HINT,
            )
        factor = 1.0 / vt

    in_range = None
    if "in_fit_range" in remnants.columns:
        in_range = remnants["in_fit_range"].to_numpy()[idx].astype(bool)
    info.update(
        rows_used=int(idx.size),
        events_used=int(n_ev),
        rows_outside_calibration=None if in_range is None else int((~in_range).sum()),
        nan_values=nan_values,
        selection=selection,
    )

    h = hashlib.sha256()
    if digest:
        h.update("\0".join(map(str, uniq.tolist())).encode())
        for arr in (codes, sample, w, factor, *values.values()):
            h.update(np.ascontiguousarray(arr).view(np.uint8))
    return Population(
        n_events=int(n_ev),
        starts=starts,
        counts=counts,
        key=key,
        uniform=uniform,
        event_weight=event_weight.astype(np.float64),
        row_factor=factor.astype(np.float64),
        row_weight=w,
        values=values,
        fit_names=fit_names,
        info=info,
        digest=h.hexdigest() if digest else "",
        guide=guide,
    )


def _guide_tables(
    key: NDArray[np.float64], starts: NDArray[np.int64], counts: NDArray[np.int64]
) -> NDArray[np.int64]:
    """Guide tables of the per-event cumulative weights (indexed search, Chen & Asau 1974).

    For event e with n rows and k = 0..n: ``lo[k]`` is the first row whose key exceeds
    e + k/n minus a few ulps, ``hi[k]`` the first exceeding e + k/n plus a few ulps, both
    clipped to the event. A draw u in bucket k = floor(u n) then lies between
    ``lo[k]`` and ``hi[k + 1]``: a range of about one row on average, so picking a weighted
    sample costs a couple of memory reads instead of a search over the whole table. Returned
    as one array of (lo[k], hi[k + 1] + 1) pairs per bucket k = 0..n-1, so that one read gives
    the search range (packed into one int64 when the table has < 2^31 rows); entry
    ``starts[e] + k``.
    """
    n_ev = starts.size
    reps = counts + 1
    ev_g = np.repeat(np.arange(n_ev), reps)
    k = np.arange(int(reps.sum())) - np.repeat(starts + np.arange(n_ev), reps)
    base = ev_g.astype(np.float64)
    t = base + k / counts[ev_g]
    tol = 4.0 * np.spacing(base + 1.0)
    first, last = starts[ev_g], starts[ev_g] + counts[ev_g] - 1
    lo = np.clip(np.searchsorted(key, t - tol, side="right"), first, last)
    hi = np.clip(np.searchsorted(key, t + tol, side="right"), first, last)
    bucket = k < counts[ev_g]  # drop each event's k = n entry from the lo side
    pairs = np.empty((key.size, 2), dtype=np.int64)
    pairs[:, 0] = lo[bucket]
    pairs[:, 1] = hi[np.flatnonzero(bucket) + 1] + 1
    if key.size < 2**31 - 1:  # pack each pair into one int64: a single 8-byte read per pick
        return pairs[:, 0] | (pairs[:, 1] << 32)
    return pairs


# --------------------------------------------------------------------------------------------
# The bootstrap engine
# --------------------------------------------------------------------------------------------


def _check_sources(sources: Collection[str]) -> frozenset[str]:
    unknown = [s for s in sources if s not in ERROR_SOURCES]
    if unknown:
        raise OptionError(
            f"error source(s) {', '.join(map(repr, unknown))} not known; valid: "
            f"{', '.join(ERROR_SOURCES)}"
        )
    return frozenset(sources)


def _event_means(pop: Population, stats: Sequence[Stat]) -> tuple[NDArray, dict[str, NDArray]]:
    """Per event: E_e[s] and E_e[s y] for every stat and alternative (posterior switched off)."""
    w = pop.row_weight
    wsum = np.add.reduceat(w, pop.starts)
    ws = w * pop.row_factor
    den = np.add.reduceat(ws, pop.starts) / wsum
    num: dict[str, NDArray] = {}
    for st in stats:
        x = pop.values[st.column]
        y = x if st.threshold is None else _indicator(x, st.threshold)
        num[st.name] = np.add.reduceat(ws[:, None] * y, pop.starts, axis=0) / wsum[:, None]
    return den, num


def _upper_bound(
    key: NDArray[np.float64], v: NDArray[np.float64], lo: NDArray, hi: NDArray, probes: int = 2
) -> NDArray:
    """First index i in [lo, hi) with key[i] > v, for many ranges at once; the answer must
    lie in its range (the last index of a range is taken without being read).

    Short ranges (the rule with guide tables) are resolved by counting the keys <= v among the
    first ``probes`` (adjacent, so mostly one cache line); longer ones by a vectorised
    bisection over the picks still unresolved.
    """
    lo = np.asarray(lo, dtype=np.int64).ravel()
    hi = np.asarray(hi, dtype=np.int64).ravel()
    v = np.asarray(v, dtype=np.float64).ravel()
    span = hi - lo - 1  # keys that need reading
    res = lo.copy()
    last = key.size - 1
    for j in range(probes):
        need = span > j
        if not need.any():
            return res
        res += need & (key.take(np.minimum(lo + j, last)) <= v)
    idx = np.flatnonzero(span > probes)
    lo_a, hi_a, v_a = lo[idx], hi[idx] - 1, v[idx]
    while idx.size:
        mid = (lo_a + hi_a) >> 1
        right = key.take(mid) <= v_a
        lo_a = np.where(right, mid + 1, lo_a)
        hi_a = np.where(right, hi_a, mid)
        done = lo_a >= hi_a
        res[idx[done]] = lo_a[done]
        keep = ~done
        idx, lo_a, hi_a, v_a = idx[keep], lo_a[keep], hi_a[keep], v_a[keep]
    return res


def _pick_rows(pop: Population, ev: NDArray[np.int64], u: NDArray[np.float64]) -> NDArray:
    """One row of each picked event, with probability proportional to the row weights.

    Equal-weight events: row ``start + floor(u n)``. Others: the first row whose key (event
    index + cumulative normalised weight) exceeds ``event + u``, searched between the guide
    entries of u's bucket (:func:`_guide_tables`).
    """
    starts, counts = pop.starts[ev], pop.counts[ev]
    k = np.minimum((u * counts).astype(np.int64), counts - 1)
    rows = starts + k
    if pop.uniform.all():
        return rows
    assert pop.guide is not None
    if pop.uniform.any():
        sel = ~pop.uniform[ev]
        e, k0, uu = ev[sel], rows[sel], u[sel]
    else:
        sel, e, k0, uu = None, ev.ravel(), rows.ravel(), u.ravel()
    if pop.guide.ndim == 1:
        packed = pop.guide.take(k0)
        lo, hi = packed & 0xFFFFFFFF, packed >> 32
    else:
        lo, hi = pop.guide[k0, 0], pop.guide[k0, 1]
    # e + u can round up to e + 1 for u just below 1: keep it below, so that the answer is the
    # event's last row with weight (trailing zero-weight rows share its key e + 1)
    ef = e.astype(np.float64)
    v = np.minimum(ef + uu, np.nextafter(ef + 1.0, 0.0))
    r = _upper_bound(pop.key, v, lo, hi)
    if sel is None:
        return r.reshape(rows.shape)
    rows[sel] = r
    return rows


def run_bootstrap(
    pop: Population,
    stats: Sequence[Stat],
    configs: Sequence[Collection[str]],
    n_draws: int,
    rng: np.random.Generator,
    progress: Callable[[int], None] | None = None,
    chunk_picks: int = CHUNK_PICKS,
) -> list[dict[str, NDArray[np.float64]]]:
    """Draws of every stat under each source configuration, with common random numbers.

    ``configs``: one collection of switched-on sources per configuration (any of
    :data:`POPULATION_SOURCES`; "rate" is ignored here). Returns, per configuration, a dict
    stat name -> array of ``n_draws`` population means. ``progress`` is called with the number
    of draws finished after each chunk.
    """
    n_draws = int(n_draws)
    if n_draws < 1:
        raise OptionError(f"number of draws {n_draws} must be at least 1")
    cfgs = [_check_sources(c) for c in configs]
    n_ev = pop.n_events
    n_fm = pop.n_alternatives("final_mass")
    n_rc = pop.n_alternatives("recoil")
    out = [{st.name: np.empty(n_draws) for st in stats} for _ in cfgs]
    by_column: dict[str, list[Stat]] = {}
    for st in stats:
        if st.column not in pop.values:
            raise SchemaError(f"statistic {st.name!r}: column {st.column!r} was not prepared")
        by_column.setdefault(st.column, []).append(st)
    # With one row per event (population-synthesis tables, point values) the posterior source
    # changes nothing; it is then neither drawn nor evaluated (a property of the data, so every
    # call on the same population consumes the same random numbers).
    multi = bool(np.any(pop.counts > 1))
    if not multi:
        cfgs = [c - {"posterior"} for c in cfgs]
    need_means = any("posterior" not in c for c in cfgs)
    if need_means:
        den_e, num_e = _event_means(pop, stats)
        w_den = pop.event_weight * den_e  # (events,)
        w_num = {k: pop.event_weight[:, None] * v for k, v in num_e.items()}  # (events, alts)
        tot_den = float(w_den.sum())
        tot_num = {k: v.sum(axis=0) for k, v in w_num.items()}
        # every stat's per-fit event totals side by side, the denominator last: one matrix
        # product per chunk serves every catalogue-on configuration
        names = [st.name for st in stats]
        widths = [w_num[n].shape[1] for n in names]
        col0 = dict(zip(names, np.cumsum([0, *widths])[:-1].tolist(), strict=True))
        w_all = np.concatenate([*(w_num[n] for n in names), w_den[:, None]], axis=1)
    chunk = max(1, int(chunk_picks) // max(n_ev, 1))
    if not multi:
        # no per-pick gathers: larger chunks let one pass over the event totals serve several
        # draws (the matrix product is memory-bound), within ~16 M picks per chunk
        chunk = max(chunk, min(16, (16 * int(chunk_picks)) // max(n_ev, 1)))
    all_events = np.arange(n_ev, dtype=np.int64)

    flat = {c: v.ravel() for c, v in pop.values.items()}
    width = {c: v.shape[1] for c, v in pop.values.items()}
    has_nan = {c: bool(np.isnan(v).any()) for c, v in pop.values.items()}
    # A column with one value everywhere (e.g. no ejected mass in a BBH population) has that
    # population mean whatever is resampled: no gathers needed.
    const = {
        c: float(v.flat[0]) for c, v in pop.values.items() if v.size and np.all(v == v.flat[0])
    }
    unit = bool(np.all(pop.event_weight == 1.0) and np.all(pop.row_factor == 1.0))
    idx_type = np.int32 if n_ev < 2**31 - 1 else np.int64
    times_buf: NDArray[np.float64] | None = None  # (draws of a chunk, events) counts

    for b0 in range(0, n_draws, chunk):
        m = min(chunk, n_draws - b0)
        # Random ingredients of this chunk, drawn in a fixed order whatever is switched on.
        ev_cat = rng.integers(0, n_ev, size=(m, n_ev), dtype=idx_type)
        u_post = None
        if multi:
            ev_cat.sort(axis=1)  # order within a draw is irrelevant; sorted picks read in order
            u_post = rng.random((m, n_ev))
        f_fm = rng.integers(0, max(n_fm, 1), size=m)
        f_rc = rng.integers(0, max(n_rc, 1), size=m)
        zero = np.zeros(m, dtype=np.int64)
        drawn = None  # (times each event is drawn) . (event totals), per draw
        rows_m = np.arange(m)
        for cfg, res in zip(cfgs, out, strict=True):
            fits_on = "fits" in cfg
            alt = {
                "final_mass": (1 + f_fm) if (fits_on and n_fm) else zero,
                "recoil": (1 + f_rc) if (fits_on and n_rc) else zero,
                None: zero,
            }
            sl = slice(b0, b0 + m)
            if "posterior" in cfg:
                ev = ev_cat if "catalogue" in cfg else np.broadcast_to(all_events, (m, n_ev))
                rows = _pick_rows(pop, ev, u_post)
                if unit:
                    wgt, den = None, np.full(m, float(n_ev))
                else:
                    wgt = pop.event_weight[ev] * pop.row_factor[rows]
                    den = wgt.sum(axis=1)
                for column, sts in by_column.items():
                    if column in const:
                        for st in sts:
                            y0 = const[column]
                            res[st.name][sl] = (
                                y0 if st.threshold is None else float(y0 < st.threshold)
                            )
                        continue
                    a = alt[_COLUMN_FAMILY.get(column)]
                    k = width[column]
                    pos = rows * k + a[:, None] if k > 1 else rows
                    x = flat[column].take(pos)
                    for st in sts:
                        if st.threshold is None:
                            y = x
                        elif has_nan[column]:
                            y = _indicator(x, st.threshold)
                        else:
                            y = x < st.threshold
                        tot = y.sum(axis=1) if wgt is None else (wgt * y).sum(axis=1)
                        res[st.name][sl] = tot / den
            elif "catalogue" in cfg:
                # sum over drawn events = (times drawn) . (event totals): one matrix product
                # gives every fit alternative at once
                if drawn is None:
                    if times_buf is None:  # one buffer for every chunk: fresh pages are slow
                        times_buf = np.empty((chunk, n_ev))
                    times = times_buf[:m]
                    for i in range(m):  # per draw of the chunk: bins stay cache-sized
                        times[i] = np.bincount(ev_cat[i], minlength=n_ev)
                    drawn = times @ w_all
                den = drawn[:, -1]
                for st in stats:
                    a = alt[_COLUMN_FAMILY.get(st.column)]
                    res[st.name][sl] = drawn[rows_m, col0[st.name] + a] / den
            else:
                for st in stats:
                    a = alt[_COLUMN_FAMILY.get(st.column)]
                    res[st.name][sl] = tot_num[st.name][a] / tot_den
        if progress is not None:
            progress(m)
    return out


def point_estimates(pop: Population, stats: Sequence[Stat]) -> dict[str, float]:
    """Every source held fixed: each event once, its weighted mean, the default fit columns."""
    den_e, num_e = _event_means(pop, stats)
    den = float((pop.event_weight * den_e).sum())
    return {st.name: float((pop.event_weight * num_e[st.name][:, 0]).sum() / den) for st in stats}


def _stats_for(
    columns: Sequence[str], escape_speeds_kms: Sequence[float]
) -> tuple[list[Stat], list[str]]:
    stats = [Stat(c, c) for c in dict.fromkeys(columns)]
    speeds = [float(v) for v in escape_speeds_kms]
    for v in speeds:
        if not (np.isfinite(v) and v > 0):
            raise OptionError(f"escape speed {v!r} km/s must be a positive finite number")
        stats.append(Stat(retained_name(v), "vkick_kms", v))
    cols = list(dict.fromkeys([*columns, *(["vkick_kms"] if speeds else [])]))
    return stats, cols


def bootstrap_means(
    remnants: pd.DataFrame,
    columns: Sequence[str],
    n_draws: int,
    rng: np.random.Generator,
    sources: Collection[str] = ERROR_SOURCES,
    selection: str = "none",
    escape_speeds_kms: Sequence[float] = (),
    kind: str | None = None,
    progress: Callable[[int], None] | None = None,
) -> dict[str, NDArray[np.float64]]:
    """Hierarchical-bootstrap draws of the population mean per merger of each column.

    Per requested column (e.g. ``"deficit_msun"``, ``"erad_msun"``, ``"ejected_msun"``), an
    array of ``n_draws`` population means: events resampled with replacement, one sample per
    event by its weights, a fit choice per draw (module docstring). Sources not in ``sources``
    are held fixed (catalogue off: every event once; posterior off: the weighted mean over each
    event's samples; fits off: the default mean column); "rate" is ignored here. Each escape
    speed (km/s) adds the draws of the retained fraction, key ``retained_fraction@<v>``
    (fraction of mergers whose recoil is below v). ``kind`` restricts to events of that
    majority kind. Rows not estimated are left out (see :func:`prepare_population`).
    """
    src = _check_sources(sources)
    stats, cols = _stats_for(columns, escape_speeds_kms)
    pop = prepare_population(remnants, cols, selection=selection, kind=kind)
    (res,) = run_bootstrap(pop, stats, [src], n_draws, rng, progress=progress)
    return res


def retained_fraction(
    remnants: pd.DataFrame,
    escape_speeds_kms: Sequence[float],
    n_draws: int,
    rng: np.random.Generator,
    sources: Collection[str] = ERROR_SOURCES,
    selection: str = "none",
    kind: str | None = None,
) -> dict[float, NDArray[np.float64]]:
    """Bootstrap draws of the fraction of remnants whose recoil is below each escape speed.

    Same resampling as :func:`bootstrap_means`; keys are the escape speeds in km/s.
    """
    res = bootstrap_means(
        remnants, [], n_draws, rng, sources, selection, escape_speeds_kms, kind=kind
    )
    return {float(v): res[retained_name(v)] for v in escape_speeds_kms}


def variance_shares(
    full: NDArray[np.float64], single: Mapping[str, NDArray[np.float64]]
) -> dict[str, float]:
    """Share of the variance of each source: Var(draws, that source alone) / Var(full draws).

    The shares add up to about one when the sources act independently and their effects are
    small; the excess over one measures their interaction. NaN when the full draws have no
    spread.
    """
    vf = _spread(full)
    if not (np.isfinite(vf) and vf > 0):
        return {k: float("nan") for k in single}
    return {k: _spread(v) / vf for k, v in single.items()}


def _spread(x: NDArray[np.float64]) -> float:
    """Variance of draws; 0 when they differ only by rounding (relative spread < 1e-12)."""
    x = np.asarray(x, dtype=np.float64)
    scale = float(np.max(np.abs(x))) if x.size else 0.0
    if x.size == 0 or float(np.ptp(x)) <= 1e-12 * scale:
        return 0.0
    return float(np.var(x))
