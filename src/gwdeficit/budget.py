"""Mass-loss budgets: per-merger deficits x merger-rate density x volume, with bootstrap errors.

For a population (one kind of binary, or the whole table) with rate density ``R`` at the rate's
reference redshift and a volume with rate-weighted comoving volume ``V_eff``
(:meth:`gwdeficit.volumes.Volume.effective_gpc3`), each bootstrap draw gives

    merger_rate   = R V_eff                      (mergers per Myr)
    deficit_rate  = merger_rate <deficit>        (Msun per Myr; <.> = population mean per merger)
    erad_rate     = merger_rate <E_rad>,  ejected_rate = merger_rate <M_ej>
    gw_luminosity = erad_rate c^2                (erg/s and, as a separate row, Lsun)

plus the means per merger and the retained fraction ``<vkick < v_esc>``. The population means
come from the hierarchical bootstrap of :mod:`gwdeficit.resample`, the rate from the
:class:`~gwdeficit.rates.RateModel`. With per-kind rates, kind ``all`` sums the kinds' rates
(and rate-weights their means). Each summary row reports the median, the 68% and 90% central
intervals of the draws, and the error budget: ``share_<source>`` = variance of the quantity
with only that source switched on / variance with every source on (the single-source runs reuse
the full run's random numbers; the shares add up to about one when the sources act
independently and their effects are small). A population mean uses the same draws in every
volume; a volume only rescales the rate.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Collection, Mapping, Sequence
from dataclasses import dataclass, field, replace
from typing import TYPE_CHECKING, Any

import numpy as np
from numpy.typing import NDArray

from gwdeficit.rates import (
    DEFAULT_RATES,
    DEFAULT_RATES_SOURCE,
    RateEvolution,
    RateModel,
    default_rate,
    parse_rate,
)
from gwdeficit.resample import (
    POPULATION_SOURCES,
    SELECTIONS,
    Population,
    Stat,
    event_kinds,
    prepare_population,
    retained_name,
    run_bootstrap,
    variance_shares,
)
from gwdeficit.schema import (
    ERROR_SOURCES,
    KINDS,
    META_COSMOLOGY,
    META_FITS,
    META_PROVENANCE,
    META_RATE_MODEL,
    META_SUMMARY,
    RATE_SUMMARY_COLUMNS,
    OptionError,
    SchemaError,
)
from gwdeficit.volumes import (
    MWEG_DENSITY_MPC3,
    STELLAR_DENSITY_MSUN_MPC3,
    Volume,
    check_density,
    describe_cosmology,
    parse_volumes,
    resolve_cosmology,
)

if TYPE_CHECKING:
    import pandas as pd

#: Metadata keys written by this stage besides the schema's.
META_VOLUMES = "gwdeficit.volumes"
META_GALAXY_DENSITY = "gwdeficit.galaxy_density_mpc3"
META_STELLAR_DENSITY = "gwdeficit.stellar_density_msun_mpc3"
META_DRAWS = "gwdeficit.draws"
META_SEED = "gwdeficit.seed"
META_SELECTION = "gwdeficit.selection"
META_SOURCES = "gwdeficit.error_sources"
META_INPUT_HASH = "gwdeficit.input_hash"

#: Central-interval probabilities of the summary columns.
QUANTILES = {
    "median": 0.5,
    "lo68": 0.5 - 0.6826894921370859 / 2,
    "hi68": 0.5 + 0.6826894921370859 / 2,
    "lo90": 0.05,
    "hi90": 0.95,
}

#: The per-merger columns averaged over the population.
MEAN_COLUMNS = {
    "mean_deficit": "deficit_msun",
    "mean_erad": "erad_msun",
    "mean_ejected": "ejected_msun",
}

#: Madau & Dickinson 2014 fitted their star-formation history over 0 < z < 8.
MADAU_DICKINSON_ZMAX = 8.0

_UNITS = {
    "merger_rate": "1 / Myr",
    "deficit_rate": "solMass / Myr",
    "erad_rate": "solMass / Myr",
    "ejected_rate": "solMass / Myr",
    "mean_deficit": "solMass",
    "mean_erad": "solMass",
    "mean_ejected": "solMass",
}


def share_column(source: str) -> str:
    """Name of the error-budget column of a source: ``share_<source>``."""
    return f"share_{source}"


SUMMARY_COLUMNS: tuple[str, ...] = (
    *RATE_SUMMARY_COLUMNS,
    *(share_column(s) for s in ERROR_SOURCES),
)


@dataclass(frozen=True)
class RateBudget:
    """Result of :func:`compute_budget`.

    table: tidy summary (:data:`SUMMARY_COLUMNS`), one row per volume x kind x quantity (x unit).
    draws: with ``keep_draws``, every draw of every row (columns draw, volume, kind, quantity,
    unit, value); else None.
    meta: Parquet metadata (JSON-able) for rates.parquet.
    notes: human-readable remarks (rows left out, kinds left out, defaults used, ...).
    counts: row and event counts per population; they add up to the input rows.
    """

    table: pd.DataFrame
    draws: pd.DataFrame | None
    meta: dict[str, Any]
    notes: tuple[str, ...]
    counts: dict[str, Any] = field(default_factory=dict)


@dataclass
class _Group:
    label: str
    kind: str | None
    model: RateModel
    pop: Population


def _luminosity_factors() -> tuple[float, float]:
    """(erg/s, Lsun) per Msun c^2 per Myr, from astropy constants and units."""
    import astropy.constants as const
    import astropy.units as u

    power = u.Msun * const.c**2 / u.Myr
    return float(power.to_value(u.erg / u.s)), float(power.to_value(u.Lsun))


def _as_model(rate: RateModel | str | float, evolution: RateEvolution | None) -> RateModel:
    if isinstance(rate, RateModel):
        return rate
    return parse_rate(rate, evolution=evolution)


def _summary(values: NDArray[np.float64]) -> dict[str, float]:
    q = np.quantile(values, list(QUANTILES.values()))
    return dict(zip(QUANTILES, (float(x) for x in q), strict=True))


def _kinds_present(kinds_of_events: pd.Series) -> list[str]:
    present = set(kinds_of_events.astype(str))
    known = [k for k in KINDS if k in present]
    return known + sorted(present - set(KINDS))


def compute_budget(
    remnants: pd.DataFrame,
    volumes: Sequence[str | Volume] = ("mw",),
    rate: RateModel | str | float | None = None,
    rates_by_kind: Mapping[str, RateModel | str | float] | None = None,
    evolution: RateEvolution | None = None,
    escape_speeds_kms: Sequence[float] = (),
    selection: str = "none",
    n_draws: int = 2000,
    seed: int = 0,
    cosmology: Any = None,
    galaxy_density_mpc3: float = MWEG_DENSITY_MPC3,
    stellar_density_msun_mpc3: float = STELLAR_DENSITY_MSUN_MPC3,
    sources: Collection[str] = ERROR_SOURCES,
    default_rate_z: float | None = None,
    keep_draws: bool = False,
    progress: Callable[[int, int], None] | None = None,
    source: str = "remnants table",
    inputs: Mapping[str, str] | None = None,
    engine: Any = None,
) -> RateBudget:
    """Fold a remnants table with rate models and volumes into a tidy mass-loss budget.

    remnants: the remnant stage's table (schema.REMNANT_COLUMNS with event, sample, weight,
      kind, remnant_status and the per-fit columns; metadata in ``attrs``).
    volumes: specifications (``mw``, ``gpc3``, ``mpc3``, ``stellar:MASS``, ``sphere:RADIUS``,
      ``cosmic[:ZMAX]``) or :class:`Volume` objects.
    rate: one rate for the whole table (its rows are then kind ``all``, or the table's only
      kind). rates_by_kind: separate rates per kind; kinds without a rate are left out and said
      so. Neither: the defaults of :data:`gwdeficit.rates.DEFAULT_RATES` per kind present.
      Text rates are parsed with :func:`gwdeficit.rates.parse_rate` and ``evolution``; the
      defaults take the shape of ``evolution`` at their own reference redshift, or at
      ``default_rate_z`` when given.
    escape_speeds_kms: add the retained fraction below each escape speed.
    selection: population reweighting, one of :data:`gwdeficit.resample.SELECTIONS`.
    n_draws, seed: bootstrap size and the seed of the run's single random generator.
    cosmology: astropy cosmology, name or metadata dict; default the table's
      ``attrs[META_COSMOLOGY]``, else Planck18.
    sources: error sources switched on (schema.ERROR_SOURCES); the others are held fixed.
    progress: called as ``progress(done, total)`` in draws.
    source / inputs: name of the input in messages; input hashes for the provenance record.
    engine: None (the table in memory), or an out-of-core engine (for example
      :class:`gwdeficit.stream.StreamPopulations`) providing ``event_kinds()`` and functions
      ``prepare_population``, ``run_bootstrap`` and ``counts`` with the signatures of
      :func:`~gwdeficit.resample.prepare_population`, :func:`~gwdeficit.resample.run_bootstrap`
      and :func:`_counts`; ``remnants`` then only supplies the columns and ``attrs``.
    """
    import pandas as pd

    from gwdeficit.workdir import merge_provenance, provenance_record

    n_draws = int(n_draws)
    if n_draws < 2:
        raise OptionError(f"number of draws {n_draws} must be at least 2")
    if selection not in SELECTIONS:
        raise OptionError(f"selection {selection!r} is not known; valid: {', '.join(SELECTIONS)}")
    unknown = [s for s in sources if s not in ERROR_SOURCES]
    if unknown:
        raise OptionError(f"error source(s) {unknown} not known; valid: {', '.join(ERROR_SOURCES)}")
    srcs = [s for s in ERROR_SOURCES if s in set(sources)]
    vols = parse_volumes(volumes)
    check_density(galaxy_density_mpc3, "galaxy density", "Mpc^-3")
    check_density(stellar_density_msun_mpc3, "stellar-mass density", "Msun Mpc^-3")
    speeds = sorted({float(v) for v in escape_speeds_kms})
    for v in speeds:
        if not (np.isfinite(v) and v > 0):
            raise OptionError(f"escape speed {v!r} km/s must be a positive finite number")
    if rate is not None and rates_by_kind:
        raise OptionError("give either one rate for the whole table or rates per kind, not both")
    notes: list[str] = []
    if "kind" not in remnants.columns:
        raise SchemaError(f"{source}: missing column 'kind'")

    meta_cosmo = remnants.attrs.get(META_COSMOLOGY)
    if cosmology is None and meta_cosmo is None:
        notes.append("the input names no cosmology; Planck18 (astropy) is used")
    cosmo = resolve_cosmology(cosmology if cosmology is not None else meta_cosmo)

    # Populations and their rate models.
    stats = [Stat(name, col) for name, col in MEAN_COLUMNS.items()]
    stats += [Stat(retained_name(v), "vkick_kms", v) for v in speeds]
    columns = list(dict.fromkeys(st.column for st in stats))
    kinds_of_events = event_kinds(remnants) if engine is None else engine.event_kinds()
    present = _kinds_present(kinds_of_events)
    planned: list[tuple[str, str | None, RateModel]] = []
    defaults_used = False
    mode = "single" if rate is not None else "per-kind"
    if rate is not None:
        label = present[0] if len(present) == 1 else "all"
        planned.append((label, None, _as_model(rate, evolution)))
    else:
        if rates_by_kind:
            models = {}
            for key, r in rates_by_kind.items():
                k = str(key).strip().upper()
                if k not in KINDS:
                    raise OptionError(f"rate kind {key!r} is not known; valid: {', '.join(KINDS)}")
                models[k] = _as_model(r, evolution)
        else:
            defaults_used = True
            models = {k: default_rate(k, evolution) for k in present if k in DEFAULT_RATES}
            if default_rate_z is not None:
                models = {
                    k: m.with_evolution(replace(m.evolution, z_ref=float(default_rate_z)))
                    for k, m in models.items()
                }
            notes.append("no rate given: default rate ranges per kind from " + DEFAULT_RATES_SOURCE)
        for k in present:
            if k in models:
                planned.append((k, k, models[k]))
            else:
                notes.append(f"kind {k}: no rate given; left out")
        for k in models:
            if k not in present:
                notes.append(f"kind {k}: a rate was given but the table has no {k} events")
    groups: list[_Group] = []
    left_out: dict[str, str] = {}
    for label, kind, model in planned:
        try:
            pop = (prepare_population if engine is None else engine.prepare_population)(
                remnants,
                columns,
                selection=selection,
                kind=kind,
                source=source,
                digest=True,
                kinds_of_events=kinds_of_events,
            )
        except SchemaError as exc:
            if kind is None or "no estimated rows" not in str(exc):
                raise
            left_out[label] = "no estimated rows with weight > 0"
            notes.append(f"kind {label}: {exc}; left out")
            continue
        groups.append(_Group(label, kind, model, pop))
    for k in present:
        if k not in {g.label for g in groups} and k not in left_out and mode == "per-kind":
            left_out[k] = "no rate"
    if not groups:
        raise OptionError(
            f"{source}: nothing to fold: no kind has both estimated rows and a rate "
            f"(kinds in the table: {', '.join(present) or 'none'}; " + "; ".join(notes) + ")"
        )

    # Bootstrap: one generator from the seed; independent child streams per population.
    rng = np.random.default_rng(seed)
    streams = rng.spawn(2 * len(groups))
    pop_on = [s for s in srcs if s in POPULATION_SOURCES]
    configs: list[tuple[str, ...]] = [tuple(pop_on), (), *((s,) for s in pop_on)]
    total = n_draws * len(groups)
    done = 0

    def tick(n: int) -> None:
        nonlocal done
        done += n
        if progress is not None:
            progress(done, total)

    # per group: cfg name -> (population stat draws dict, rate draws)
    per_group: dict[str, dict[str, tuple[dict[str, NDArray], NDArray]]] = {}
    for i, g in enumerate(groups):
        boot = run_bootstrap if engine is None else engine.run_bootstrap
        res = boot(g.pop, stats, configs, n_draws, streams[2 * i], progress=tick)
        full, fixed = res[0], res[1]
        singles = dict(zip(pop_on, res[2:], strict=True))
        r_draw = (
            g.model.draw(n_draws, streams[2 * i + 1])
            if "rate" in srcs
            else np.full(n_draws, g.model.median)
        )
        r_fix = np.full(n_draws, g.model.median)
        cfg: dict[str, tuple[dict[str, NDArray], NDArray]] = {"all": (full, r_draw)}
        for s in pop_on:
            cfg[s] = (singles[s], r_fix)
        if "rate" in srcs:
            cfg["rate"] = (fixed, r_draw)
        per_group[g.label] = cfg
        _group_notes(g, notes)

    k_erg, k_lsun = _luminosity_factors()
    cfg_names = ["all", *srcs]
    rows: list[dict[str, Any]] = []
    draw_values: list[NDArray] = []
    dropped: list[str] = []
    eff_cache: dict[tuple, float] = {}

    def quantities(
        pstats: dict[str, NDArray], rates: NDArray, veff: float
    ) -> dict[tuple[str, str], NDArray]:
        mr = rates * veff * 1.0e6
        out = {("merger_rate", _UNITS["merger_rate"]): mr}
        for name, unit_name in (
            ("deficit_rate", "mean_deficit"),
            ("erad_rate", "mean_erad"),
            ("ejected_rate", "mean_ejected"),
        ):
            out[(name, _UNITS[name])] = mr * pstats[unit_name]
        erad_rate = out[("erad_rate", _UNITS["erad_rate"])]
        out[("gw_luminosity", "erg / s")] = erad_rate * k_erg
        out[("gw_luminosity", "solLum")] = erad_rate * k_lsun
        for name in MEAN_COLUMNS:
            out[(name, _UNITS[name])] = pstats[name] * np.ones_like(mr)
        for v in speeds:
            out[(retained_name(v), "")] = pstats[retained_name(v)] * np.ones_like(mr)
        return out

    for vol in vols:
        if (
            vol.form == "cosmic"
            and vol.value > MADAU_DICKINSON_ZMAX
            and any(g.model.evolution.kind == "madau-dickinson" for g in groups)
        ):
            notes.append(
                f"volume {vol.spec}: the Madau & Dickinson 2014 shape is extrapolated beyond "
                f"its fitted range z < {MADAU_DICKINSON_ZMAX:g}"
            )
        by_label: dict[str, dict[str, dict[tuple[str, str], NDArray]]] = {}
        for g in groups:
            key = (vol.spec, g.model.evolution)
            if key not in eff_cache:
                eff_cache[key] = vol.effective_gpc3(
                    g.model.evolution, cosmo, galaxy_density_mpc3, stellar_density_msun_mpc3
                )
            veff = eff_cache[key]
            by_label[g.label] = {
                c: quantities(*per_group[g.label][c], veff) for c in per_group[g.label]
            }
        if mode == "per-kind" and len(groups) >= 2:
            by_label["all"] = {
                c: _combine([by_label[g.label][c] for g in groups]) for c in cfg_names
            }
        for label, cfgq in by_label.items():
            for (qname, unit), full in cfgq["all"].items():
                if not np.all(np.isfinite(full)):
                    dropped.append(f"{vol.spec}/{label}/{qname}")
                    continue
                row: dict[str, Any] = {
                    "volume": vol.spec,
                    "kind": label,
                    "quantity": qname,
                    "unit": unit,
                    **_summary(full),
                }
                shares = variance_shares(full, {s: cfgq[s][(qname, unit)] for s in srcs})
                for s in ERROR_SOURCES:
                    row[share_column(s)] = shares.get(s, math.nan)
                rows.append(row)
                if keep_draws:
                    draw_values.append(full)
    if dropped:
        notes.append(
            "not reported (missing values in the remnants table make every draw NaN): "
            + ", ".join(sorted(set(dropped)))
        )
    held = [s for s in ERROR_SOURCES if s not in srcs]
    if held:
        notes.append(f"error source(s) held fixed: {', '.join(held)} (their shares are NaN)")

    table = pd.DataFrame(rows, columns=list(SUMMARY_COLUMNS))
    draws = None
    if keep_draws:
        draws = pd.DataFrame(
            {
                "draw": np.tile(np.arange(n_draws, dtype=np.int64), len(table)),
                **{
                    c: pd.Categorical(np.repeat(table[c].to_numpy(), n_draws))
                    for c in ("volume", "kind", "quantity", "unit")
                },
                "value": np.concatenate(draw_values) if draw_values else np.empty(0),
            }
        )

    counts = (_counts if engine is None else engine.counts)(
        remnants, groups, left_out, kinds_of_events
    )
    fits_meta = {
        "used": {g.label: g.pop.info.get("fits", {}) for g in groups},
        "left_out": {g.label: g.pop.info.get("fits_left_out", {}) for g in groups},
        "available": remnants.attrs.get(META_FITS),
    }
    import hashlib

    h = hashlib.sha256("".join(g.label + g.pop.digest for g in groups).encode()).hexdigest()
    params = {
        "volumes": [v.spec for v in vols],
        "mode": mode,
        "selection": selection,
        "draws": n_draws,
        "seed": int(seed),
        "escape_speeds_kms": speeds,
        "sources": srcs,
    }
    meta: dict[str, Any] = {
        META_RATE_MODEL: {
            "mode": mode,
            "defaults_used": defaults_used,
            "models": {g.label: g.model.describe() for g in groups},
            "left_out": left_out,
        },
        META_COSMOLOGY: describe_cosmology(cosmo),
        META_VOLUMES: [v.describe(galaxy_density_mpc3, stellar_density_msun_mpc3) for v in vols],
        META_GALAXY_DENSITY: float(galaxy_density_mpc3),
        META_STELLAR_DENSITY: float(stellar_density_msun_mpc3),
        META_DRAWS: n_draws,
        META_SEED: int(seed),
        META_SELECTION: selection,
        META_SOURCES: srcs,
        META_FITS: fits_meta,
        META_INPUT_HASH: h,
        META_SUMMARY: {"notes": notes, "counts": counts},
        META_PROVENANCE: merge_provenance(
            remnants.attrs, provenance_record("rate", inputs, **params)
        ),
    }
    table.attrs.update(meta)
    return RateBudget(table=table, draws=draws, meta=meta, notes=tuple(notes), counts=counts)


def _combine(
    parts: Sequence[dict[tuple[str, str], NDArray]],
) -> dict[tuple[str, str], NDArray]:
    """Kind ``all`` from per-kind draws: rates add, means and fractions are rate-weighted."""
    keys = list(parts[0])
    mr_key = ("merger_rate", _UNITS["merger_rate"])
    mr = [p[mr_key] for p in parts]
    mr_tot = np.sum(mr, axis=0)
    out: dict[tuple[str, str], NDArray] = {}
    for key in keys:
        if not all(key in p for p in parts):
            continue
        name = key[0]
        if name.endswith("_rate") or name == "gw_luminosity":
            out[key] = np.sum([p[key] for p in parts], axis=0)
        else:
            out[key] = np.sum([m * p[key] for m, p in zip(mr, parts, strict=True)], axis=0) / mr_tot
    return out


def _group_notes(g: _Group, notes: list[str]) -> None:
    info = g.pop.info
    if info.get("rows_not_estimated"):
        why = ", ".join(f"{k}: {v}" for k, v in info["not_estimated_reasons"].items())
        notes.append(
            f"{g.label}: {info['rows_not_estimated']} row(s) not estimated ({why}); left out of "
            "the mean per merger"
        )
    if info.get("events_zero_weight"):
        notes.append(
            f"{g.label}: {info['events_zero_weight']} event(s) whose estimated rows all have "
            f"weight 0 ({info['rows_zero_weight_events']} row(s)); left out"
        )
    if info.get("events_mixed_kind"):
        notes.append(
            f"{g.label}: {info['events_mixed_kind']} event(s) have rows of several kinds; each "
            "counts once, in the kind carrying most of its weight"
        )
    for name, why in info.get("fits_left_out", {}).items():
        notes.append(f"{g.label}: fit {name} left out of the fit choice ({why})")
    for fam, names in info.get("fits", {}).items():
        if not names:
            notes.append(
                f"{g.label}: no per-fit {fam.replace('_', ' ')} columns usable; the fits source "
                "keeps the default mean column"
            )
    if info.get("rows_outside_calibration"):
        notes.append(
            f"{g.label}: {info['rows_outside_calibration']} used row(s) lie outside a fit's "
            "calibrated range (flagged in_fit_range = false by the remnant stage)"
        )
    for col, n in info.get("nan_values", {}).items():
        notes.append(f"{g.label}: column {col} is missing on {n} estimated row(s)")


def _counts(
    remnants: pd.DataFrame,
    groups: Sequence[_Group],
    left_out: Mapping[str, str],
    kinds_of_events: pd.Series,
) -> dict[str, Any]:
    """Row and event counts; rows_in = sum of the populations' rows + rows of kinds left out."""
    per: dict[str, Any] = {}
    for g in groups:
        info = g.pop.info
        per[g.label] = {
            k: info.get(k)
            for k in (
                "rows_in",
                "rows_used",
                "rows_not_estimated",
                "rows_zero_weight_events",
                "events_in",
                "events_used",
                "events_zero_weight",
                "rows_outside_calibration",
            )
        }
    rows_left: dict[str, int] = {}
    if left_out:
        ev = remnants["event"].astype(str)
        ek = kinds_of_events.astype(str)
        rows_left = {k: int(ev.isin(ek.index[ek == k]).sum()) for k in left_out}
    return {
        "rows_in": len(remnants),
        "populations": per,
        "rows_in_kinds_left_out": rows_left,
    }


def mass_loss_rates(
    remnants: pd.DataFrame,
    volumes: Sequence[str | Volume] = ("mw",),
    rate: RateModel | str | float | None = None,
    rates_by_kind: Mapping[str, RateModel | str | float] | None = None,
    evolution: RateEvolution | None = None,
    escape_speeds_kms: Sequence[float] = (),
    selection: str = "none",
    n_draws: int = 2000,
    seed: int = 0,
    cosmology: Any = None,
    galaxy_density_mpc3: float = MWEG_DENSITY_MPC3,
    stellar_density_msun_mpc3: float = STELLAR_DENSITY_MSUN_MPC3,
    sources: Collection[str] = ERROR_SOURCES,
) -> pd.DataFrame:
    """Tidy mass-loss budget of a remnants table; arguments as for :func:`compute_budget`.

    Returns the summary DataFrame (:data:`SUMMARY_COLUMNS`); its ``attrs`` hold the metadata
    (rate models, cosmology, galaxy density, draws, seed, fits, input hash, notes and counts,
    provenance).

    Example::

        from gwdeficit import mass_loss_rates
        table = mass_loss_rates(remnants, volumes=["mw", "gpc3"], rate="24 +14 -9")
    """
    return compute_budget(
        remnants,
        volumes=volumes,
        rate=rate,
        rates_by_kind=rates_by_kind,
        evolution=evolution,
        escape_speeds_kms=escape_speeds_kms,
        selection=selection,
        n_draws=n_draws,
        seed=seed,
        cosmology=cosmology,
        galaxy_density_mpc3=galaxy_density_mpc3,
        stellar_density_msun_mpc3=stellar_density_msun_mpc3,
        sources=sources,
    ).table
