"""Remnant stage: apply the fit registry to binaries (arrays) or to a canonical catalogue.

- :func:`remnant_arrays` works on numpy arrays (any broadcastable shapes) and returns a mapping
  of output columns (the names of ``schema.REMNANT_COLUMNS`` plus per-fit columns).
- :func:`compute_remnants` works on a canonical catalogue DataFrame and returns it with the
  remnant columns appended and the stage's metadata in ``df.attrs``.

``gwdeficit.remnant(...)`` (this module, callable) is :func:`remnant_arrays`.

For binary black holes every registered fit (or a chosen subset) is evaluated; the default
estimate of each quantity is the mean over the NR-calibrated (``in_default``) fits and its
spread (max - min and the population standard deviation, ddof = 0) is the fit systematic.
``in_fit_range`` is True where the row lies inside the calibrated range of every selected fit
that has one; rows outside get extrapolated values and a :class:`FitRangeWarning`.

Angles the kick formulas need but a catalogue cannot give (the in-plane spin phase at merger)
are drawn uniformly in [0, 2 pi) from the run's generator, and so is ``phi12`` where it is
missing (NaN); the metadata records both, with the seed.

Rows are dispatched by ``kind`` in exactly one place, :data:`KIND_BRANCHES`. Neutron-star
binaries (NSBH, BNS) are not treated here: they pass through with NaN physics columns, an
empty ``remnant_kind`` and status ``not_estimated:neutron_star`` until a neutron-star branch is
wired into that table.
"""

from __future__ import annotations

import sys
import types
import warnings
from collections.abc import Callable, Iterator, Mapping, Sequence
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

import numpy as np
from numpy.typing import ArrayLike, NDArray

from gwdeficit import schema
from gwdeficit.fits.registry import (
    QUANTITIES,
    QUANTITY_COLUMNS,
    Fit,
    FitRangeWarning,
    components,
    select_fits,
)
from gwdeficit.schema import (
    CATALOGUE_COLUMNS,
    KINDS,
    REMNANT_COLUMNS,
    BadRowsError,
    SchemaError,
)

if TYPE_CHECKING:
    import pandas as pd

__all__ = [
    "BLOCK_ROWS",
    "KIND_BRANCHES",
    "STATUS_ESTIMATED",
    "STATUS_NEUTRON_STAR",
    "FitRangeWarning",
    "RemnantEstimate",
    "RemnantInputError",
    "compute_remnants",
    "remnant",
    "remnant_arrays",
    "summarize_remnants",
]

BLOCK_ROWS = 1 << 15  # rows per evaluation block: keeps the temporaries in cache
TWO_PI = 2.0 * np.pi
TILT_TOLERANCE = 1e-9  # rad; tilts may exceed [0, pi] by rounding only

STATUS_ESTIMATED = "estimated"
STATUS_NEUTRON_STAR = "not_estimated:neutron_star"

# Quantity -> default (mean) column and its unit scale: per-fit kernels give chif, E_rad/M and
# km/s; mass columns are scaled by the total mass.
_DEFAULT_COLUMN = {"final_spin": "chif", "final_mass": "erad_msun", "recoil": "vkick_kms"}
_INPUT_COLUMNS = ("m1_msun", "m2_msun", "chi1", "chi2", "tilt1_rad", "tilt2_rad", "phi12_rad")
_REMNANT_NAMES = tuple(c.name for c in REMNANT_COLUMNS)
_PER_FIT_UNITS = {"chif": "", "mf_msun": "solMass", "erad_msun": "solMass", "vkick_kms": "km / s"}


class RemnantInputError(BadRowsError):
    """Binary-black-hole rows whose values the fits cannot take (masses, spins, angles)."""

    def __init__(self, path: str, column: str, reason: str, rows: Sequence[int]) -> None:
        super().__init__(path, column, reason, rows)
        shown = ", ".join(str(r) for r in self.rows[:20])
        more = f" (and {self.n_total - 20} more)" if self.n_total > 20 else ""
        self.args = (
            f"{self.path}: column '{column}': {reason} in {self.n_total} row(s): "
            f"rows {shown}{more}. No remnant was computed; fix these rows in the catalogue.",
        )


@dataclass(frozen=True, eq=False)
class RemnantEstimate(Mapping):
    """Result of :func:`remnant_arrays`: a read-only mapping of column name -> array, plus facts.

    Keys: every name of ``schema.REMNANT_COLUMNS`` except ``remnant_kind``/``remnant_status``,
    and per-fit columns such as ``chif__barausse_rezzolla_2009``. Arrays have the broadcast
    shape of the inputs.
    """

    columns: dict[str, NDArray[Any]]
    fits: tuple[str, ...]
    n_outside_range: dict[str, int] = field(default_factory=dict)
    n_phi12_drawn: int = 0
    n_phase_drawn: int = 0

    def __getitem__(self, key: str) -> NDArray[Any]:
        return self.columns[key]

    def __iter__(self) -> Iterator[str]:
        return iter(self.columns)

    def __len__(self) -> int:
        return len(self.columns)

    def __getattr__(self, name: str) -> NDArray[Any]:
        columns = self.__dict__.get("columns", {})
        if name in columns:
            return columns[name]
        raise AttributeError(name)


# --------------------------------------------------------------------------------------------
# Binary black holes: the array core
# --------------------------------------------------------------------------------------------


def _output_names(fits: Sequence[Fit]) -> list[str]:
    names = [n for n in _REMNANT_NAMES if n not in ("remnant_kind", "remnant_status")]
    for f in fits:
        names.extend(f.columns)
    return names


def _bbh_core(
    m1: NDArray[np.float64],
    m2: NDArray[np.float64],
    chi1: NDArray[np.float64],
    chi2: NDArray[np.float64],
    tilt1: NDArray[np.float64],
    tilt2: NDArray[np.float64],
    phi12: NDArray[np.float64],
    phase: NDArray[np.float64],
    fits: Sequence[Fit],
    progress: Callable[[int], None] | None = None,
    block_rows: int = BLOCK_ROWS,
) -> tuple[dict[str, NDArray[Any]], dict[str, int]]:
    """Evaluate ``fits`` on 1-d arrays (finite, validated; phi12 already filled) block by block.

    Returns the output columns and, per fit, the number of rows outside its calibrated range.
    """
    n = m1.shape[0]
    cols: dict[str, NDArray[Any]] = {name: np.empty(n) for name in _output_names(fits)}
    cols["in_fit_range"] = np.empty(n, dtype=bool)
    outside = {f.name: 0 for f in fits}
    by_q = {qty: [f for f in fits if f.quantity == qty] for qty in QUANTITIES}
    for start in range(0, n, block_rows):
        sl = slice(start, min(start + block_rows, n))
        a1, a2 = m1[sl], m2[sl]
        c1, c2, t1, t2 = chi1[sl], chi2[sl], tilt1[sl], tilt2[sl]
        swap = a2 > a1
        if swap.any():  # body 1 the heavier, with its spin; phi12 keeps its cosine
            a1, a2 = np.where(swap, a2, a1), np.where(swap, a1, a2)
            c1, c2 = np.where(swap, c2, c1), np.where(swap, c1, c2)
            t1, t2 = np.where(swap, t2, t1), np.where(swap, t1, t2)
        mtot = a1 + a2
        q = a2 / a1
        comp = components(q, c1, c2, np.cos(t1), np.cos(t2), np.cos(phi12[sl]), np.cos(phase[sl]))
        ok = np.ones(mtot.shape, dtype=bool)
        for qty in QUANTITIES:
            default_vals = []
            for f in by_q[qty]:
                val = f.kernel(comp)
                if qty == "final_mass":
                    erad = mtot * val
                    cols[f.columns[0]][sl] = mtot - erad
                    cols[f.columns[1]][sl] = erad
                    val = erad
                else:
                    cols[f.columns[0]][sl] = val
                if f.calibrated:
                    inside = f.in_range(q, c1, c2)
                    outside[f.name] += int(inside.size - np.count_nonzero(inside))
                    ok &= inside
                if f.in_default:
                    default_vals.append(val)
            _mean_and_spread(cols, _DEFAULT_COLUMN[qty], default_vals, sl)
        erad = cols["erad_msun"][sl]
        cols["mf_msun"][sl] = mtot - erad
        cols["mf_msun_range"][sl] = cols["erad_msun_range"][sl]
        cols["mf_msun_std"][sl] = cols["erad_msun_std"][sl]
        cols["erad_frac"][sl] = erad / mtot
        cols["ejected_msun"][sl] = 0.0
        cols["deficit_msun"][sl] = erad
        cols["in_fit_range"][sl] = ok
        if progress is not None:
            progress(sl.stop - sl.start)
    return cols, outside


def _mean_and_spread(
    cols: dict[str, NDArray[Any]], name: str, vals: list[NDArray[np.float64]], sl: slice
) -> None:
    """Write mean, max - min and population std (ddof 0) of ``vals`` into cols[name*][sl]."""
    k = len(vals)
    mean = vals[0].copy()
    lo, hi = vals[0].copy(), vals[0].copy()
    for v in vals[1:]:
        mean += v
        np.minimum(lo, v, out=lo)
        np.maximum(hi, v, out=hi)
    mean /= k
    var = np.zeros_like(mean)
    if k > 1:
        for v in vals:
            d = v - mean
            var += d * d
        var /= k
    cols[name][sl] = mean
    cols[f"{name}_range"][sl] = hi - lo
    cols[f"{name}_std"][sl] = np.sqrt(var)


def _validate_bbh(
    source: str,
    labels: NDArray[Any],
    values: Mapping[str, NDArray[np.float64]],
) -> None:
    """Raise :class:`RemnantInputError` for values the BBH fits cannot take."""
    with np.errstate(invalid="ignore"):
        checks = [
            ("m1_msun", lambda x: ~(np.isfinite(x) & (x > 0)), "mass not a positive finite number"),
            ("m2_msun", lambda x: ~(np.isfinite(x) & (x > 0)), "mass not a positive finite number"),
            ("chi1", lambda x: ~((x >= 0) & (x <= 1)), "spin magnitude not in [0, 1]"),
            ("chi2", lambda x: ~((x >= 0) & (x <= 1)), "spin magnitude not in [0, 1]"),
            (
                "tilt1_rad",
                lambda x: ~((x >= -TILT_TOLERANCE) & (x <= np.pi + TILT_TOLERANCE)),
                "tilt angle not in [0, pi] rad",
            ),
            (
                "tilt2_rad",
                lambda x: ~((x >= -TILT_TOLERANCE) & (x <= np.pi + TILT_TOLERANCE)),
                "tilt angle not in [0, pi] rad",
            ),
            ("phi12_rad", np.isinf, "infinite azimuth (use NaN for unknown)"),
        ]
        for column, bad_of, reason in checks:
            bad = bad_of(values[column])
            if bad.any():
                raise RemnantInputError(source, column, reason, labels[bad].tolist())


def _draw_angles(
    rng: np.random.Generator,
    n: int,
    phi12: NDArray[np.float64],
    needs_phi12: NDArray[np.bool_],
    kick_phase: NDArray[np.float64] | None,
) -> tuple[NDArray[np.float64], NDArray[np.float64], int]:
    """Kick phase (drawn unless given) and phi12 with its NaNs filled; fixed draw order.

    Draws, in this order: n kick phases (if not given), then n values for phi12 if any row in
    ``needs_phi12`` has it missing. Returns (phase, phi12_filled, rows whose phi12 was drawn).
    """
    phase = rng.uniform(0.0, TWO_PI, n) if kick_phase is None else kick_phase
    missing = np.isnan(phi12) & needs_phi12
    n_drawn = int(np.count_nonzero(missing))
    filled = np.where(np.isnan(phi12), 0.0, phi12)
    if n_drawn:
        draws = rng.uniform(0.0, TWO_PI, n)
        filled[missing] = draws[missing]
    return phase, filled, n_drawn


def _warn_outside(
    n_outside: int, n_rows: int, by_fit: Mapping[str, int], stacklevel: int = 3
) -> None:
    """Emit :class:`FitRangeWarning` when ``n_outside`` of ``n_rows`` rows are out of range."""
    if n_outside:
        detail = ", ".join(f"{k}: {v}" for k, v in by_fit.items() if v)
        warnings.warn(
            FitRangeWarning(
                f"{n_outside} of {n_rows} binary-black-hole rows lie outside the calibrated "
                f"range of at least one fit (rows per fit: {detail}); their values are "
                "extrapolations (column in_fit_range is False)"
            ),
            stacklevel=stacklevel,
        )


def remnant_arrays(
    m1_msun: ArrayLike,
    m2_msun: ArrayLike,
    chi1: ArrayLike = 0.0,
    chi2: ArrayLike = 0.0,
    tilt1_rad: ArrayLike = 0.0,
    tilt2_rad: ArrayLike = 0.0,
    phi12_rad: ArrayLike = np.nan,
    *,
    fits: Sequence[str] | None = None,
    seed: int | None = 0,
    rng: np.random.Generator | None = None,
    kick_phase: ArrayLike | None = None,
) -> RemnantEstimate:
    """Remnant of binary-black-hole mergers from NR fits, on arrays.

    Arguments (broadcast together): source-frame masses in Msun (either order: the fits are
    symmetric under exchanging the bodies with their spins), spin magnitudes in [0, 1], tilts
    between each spin and the orbital angular momentum in [0, pi] rad, the azimuth ``phi12``
    between the in-plane spins in rad (NaN: unknown, drawn uniformly where it matters).
    ``fits``: names from the registry (default: all). ``kick_phase``: the in-plane spin phase
    at merger in rad (default: drawn uniformly in [0, 2 pi) from ``rng``, or from
    ``numpy.random.default_rng(seed)`` when no generator is given).

    Returns a :class:`RemnantEstimate`: ``mf_msun``, ``chif``, ``erad_msun``, ``erad_frac``,
    ``ejected_msun`` (0), ``deficit_msun``, ``vkick_kms``, the ``*_range``/``*_std`` spreads,
    ``in_fit_range`` and per-fit columns. Emits :class:`FitRangeWarning` when any binary lies
    outside a selected fit's calibrated range. Raises :class:`RemnantInputError` (a
    ``GwdeficitError``) for non-physical values, naming the 1-based flat position.
    """
    chosen = select_fits(fits)
    arrays = [m1_msun, m2_msun, chi1, chi2, tilt1_rad, tilt2_rad, phi12_rad]
    if kick_phase is not None:
        arrays.append(kick_phase)
    try:
        bcast = np.broadcast_arrays(*(np.asarray(a, dtype=np.float64) for a in arrays))
    except ValueError as exc:
        raise schema.OptionError(f"remnant: input arrays do not broadcast together: {exc}") from exc
    shape = bcast[0].shape
    flat = [np.ascontiguousarray(a).reshape(-1) for a in bcast]
    values = dict(zip(_INPUT_COLUMNS, flat[:7], strict=True))
    n = flat[0].size
    _validate_bbh("<arrays>", np.arange(1, n + 1), values)
    if kick_phase is not None and not np.all(np.isfinite(flat[7])):
        bad = np.flatnonzero(~np.isfinite(flat[7])) + 1
        raise RemnantInputError("<arrays>", "kick_phase", "not a finite angle", bad.tolist())
    gen = rng if rng is not None else np.random.default_rng(seed)
    phase, phi12, n_phi_drawn = _draw_angles(
        gen, n, values["phi12_rad"], _inplane_both(values), flat[7] if len(flat) > 7 else None
    )
    cols, outside = _bbh_core(
        values["m1_msun"],
        values["m2_msun"],
        values["chi1"],
        values["chi2"],
        values["tilt1_rad"],
        values["tilt2_rad"],
        phi12,
        phase,
        chosen,
    )
    _warn_outside(n - int(np.count_nonzero(cols["in_fit_range"])), n, outside)
    return RemnantEstimate(
        columns={k: v.reshape(shape) for k, v in cols.items()},
        fits=tuple(f.name for f in chosen),
        n_outside_range=outside,
        n_phi12_drawn=n_phi_drawn,
        n_phase_drawn=n if kick_phase is None else 0,
    )


def _inplane_both(values: Mapping[str, NDArray[np.float64]]) -> NDArray[np.bool_]:
    """Rows where both spins have an in-plane component, so that phi12 matters."""
    with np.errstate(invalid="ignore"):
        return (np.abs(values["chi1"] * np.sin(values["tilt1_rad"])) > 1e-12) & (
            np.abs(values["chi2"] * np.sin(values["tilt2_rad"])) > 1e-12
        )


# --------------------------------------------------------------------------------------------
# Catalogue DataFrames: dispatch by kind
# --------------------------------------------------------------------------------------------


@dataclass(frozen=True, eq=False)
class Rows:
    """The rows of one kind handed to a branch of :data:`KIND_BRANCHES`.

    ``frame`` is the whole catalogue and ``mask`` selects this branch's rows; ``values`` holds
    the input columns of those rows as float arrays (``phi12_rad`` with missing values already
    drawn), ``phase`` the drawn in-plane spin phase at merger, ``labels`` the row numbers used
    in error messages, ``fits`` the selected fits, ``source`` the file name for messages.
    """

    frame: pd.DataFrame
    mask: NDArray[np.bool_]
    values: Mapping[str, NDArray[np.float64]]
    phase: NDArray[np.float64]
    labels: NDArray[Any]
    fits: tuple[Fit, ...]
    source: str
    progress: Callable[[int], None] | None = None


@dataclass(frozen=True)
class BranchResult:
    """What a branch returns: columns for its rows (missing ones stay NaN / False / "")."""

    columns: dict[str, NDArray[Any]]
    n_outside_range: dict[str, int] = field(default_factory=dict)


def _bbh_branch(rows: Rows) -> BranchResult:
    """Binary black holes: every selected fit, default mean and spread."""
    v = rows.values
    _validate_bbh(rows.source, rows.labels, v)
    cols, outside = _bbh_core(
        v["m1_msun"],
        v["m2_msun"],
        v["chi1"],
        v["chi2"],
        v["tilt1_rad"],
        v["tilt2_rad"],
        v["phi12_rad"],
        rows.phase,
        rows.fits,
        progress=rows.progress,
    )
    n = v["m1_msun"].size
    cols["remnant_kind"] = np.full(n, "BH", dtype=object)
    cols["remnant_status"] = np.full(n, STATUS_ESTIMATED, dtype=object)
    return BranchResult(cols, outside)


def _neutron_star_branch(rows: Rows) -> BranchResult:
    """NSBH and BNS: not estimated by the black-hole fits (placeholder for the NS branch)."""
    n = int(np.count_nonzero(rows.mask))
    if rows.progress is not None:
        rows.progress(n)
    return BranchResult({"remnant_status": np.full(n, STATUS_NEUTRON_STAR, dtype=object)})


# The one place where rows are dispatched by kind. A branch takes :class:`Rows` and returns a
# :class:`BranchResult` with per-row arrays for its rows.
KIND_BRANCHES: dict[str, Callable[[Rows], BranchResult]] = {
    "BBH": _bbh_branch,
    "NSBH": _neutron_star_branch,
    "BNS": _neutron_star_branch,
}


def _check_frame(df: pd.DataFrame, source: str) -> None:
    missing = [c for c in (*_INPUT_COLUMNS, "kind") if c not in df.columns]
    if missing:
        raise SchemaError(
            f"{source}: catalogue lacks column(s) {', '.join(missing)} needed by the remnant stage"
        )
    prefixes = tuple(f"{c}{schema.PER_FIT_SEPARATOR}" for c in _PER_FIT_UNITS)
    clash = [c for c in df.columns if c in _REMNANT_NAMES or str(c).startswith(prefixes)]
    if clash:
        raise SchemaError(
            f"{source}: table already has remnant column(s) {', '.join(map(str, clash[:5]))}; "
            "give the remnant stage a catalogue, not a remnants table"
        )


def _units(df: pd.DataFrame, fits: Sequence[Fit]) -> dict[str, str]:
    units = {
        k: v
        for k, v in (df.attrs.get(schema.META_UNITS) or schema.units_of(CATALOGUE_COLUMNS)).items()
        if k in df.columns
    }
    units.update(schema.units_of(REMNANT_COLUMNS))
    for f in fits:
        for col, base in zip(f.columns, QUANTITY_COLUMNS[f.quantity], strict=True):
            units[col] = _PER_FIT_UNITS[base]
    return units


def compute_remnants(
    df: pd.DataFrame,
    *,
    seed: int | None = 0,
    rng: np.random.Generator | None = None,
    fits: Sequence[str] | None = None,
    source: str | None = None,
    inputs: Mapping[str, str] | None = None,
    progress: Callable[[int, int], None] | None = None,
) -> pd.DataFrame:
    """Remnant columns for every row of a canonical catalogue DataFrame.

    Returns a new DataFrame: every input column, then ``schema.REMNANT_COLUMNS``, then the
    per-fit columns; no row is dropped or reordered. ``df.attrs`` of the result carries the
    stage metadata (``gwdeficit.fits``, ``.units``, ``.remnant_draws``, ``.provenance`` with this
    stage's record appended, and ``.cosmology``/``.conversions`` copied from the catalogue).

    ``seed``/``rng``: the run's generator (``rng`` wins; else ``default_rng(seed)``) for the
    kick phase and missing phi12. ``fits``: registry names (default: all). ``source``: file
    name for messages; ``inputs``: {path: sha256} for provenance. ``progress(done, total)`` is
    called after each block of rows. Emits :class:`FitRangeWarning` when rows lie outside a
    calibrated range; raises ``SchemaError`` for missing columns and ``BadRowsError``
    subclasses for bad rows (named by ``input_row`` when present).
    """
    from gwdeficit import workdir

    src = source or "<DataFrame>"
    _check_frame(df, src)
    chosen = select_fits(fits)
    n = len(df)
    kinds = df["kind"].astype(str).to_numpy(dtype=object)
    labels = df["input_row"].to_numpy() if "input_row" in df.columns else np.arange(1, n + 1)
    bad_kind = ~np.isin(kinds, KINDS)
    if bad_kind.any():
        raise RemnantInputError(
            src, "kind", f"kind not one of {', '.join(KINDS)}", labels[bad_kind].tolist()
        )
    values = {c: df[c].to_numpy(dtype=np.float64, na_value=np.nan) for c in _INPUT_COLUMNS}
    gen = rng if rng is not None else np.random.default_rng(seed)
    is_bbh = kinds == "BBH"
    phase, phi12, n_phi_drawn = _draw_angles(
        gen, n, values["phi12_rad"], is_bbh & _inplane_both(values), None
    )
    values["phi12_rad"] = phi12

    done = [0]

    def _tick(k: int) -> None:
        done[0] += k
        if progress is not None:
            progress(done[0], n)

    out_cols: dict[str, NDArray[Any]] = {name: np.full(n, np.nan) for name in _output_names(chosen)}
    out_cols["in_fit_range"] = np.zeros(n, dtype=bool)
    out_cols["remnant_kind"] = np.full(n, "", dtype=object)
    out_cols["remnant_status"] = np.full(n, "", dtype=object)
    outside = {f.name: 0 for f in chosen}
    for kind, branch in KIND_BRANCHES.items():
        mask = kinds == kind
        if not mask.any():
            continue
        result = branch(
            Rows(
                frame=df,
                mask=mask,
                values={k: v[mask] for k, v in values.items()},
                phase=phase[mask],
                labels=labels[mask],
                fits=chosen,
                source=src,
                progress=_tick,
            )
        )
        for name, arr in result.columns.items():
            out_cols[name][mask] = arr
        for name, k in result.n_outside_range.items():
            outside[name] = outside.get(name, 0) + k

    import pandas as pd

    order = [*_REMNANT_NAMES, *(c for f in chosen for c in f.columns)]
    new = pd.DataFrame({name: out_cols[name] for name in order}, index=df.index)
    out = pd.concat([df, new], axis=1)
    estimated = out_cols["remnant_status"] == STATUS_ESTIMATED
    n_est = int(np.count_nonzero(estimated))
    n_out = int(np.count_nonzero(estimated & ~out_cols["in_fit_range"]))
    _warn_outside(n_out, n_est, outside)

    draws = {
        "seed": seed if rng is None else None,
        "generator": "numpy.random.default_rng(seed)" if rng is None else "caller-supplied",
        "kick_phase": {
            "rows": int(np.count_nonzero(is_bbh)),
            "distribution": "uniform in [0, 2 pi) rad",
            "reason": "in-plane spin phase at merger is not a catalogue parameter",
        },
        "phi12": {
            "rows": n_phi_drawn,
            "distribution": "uniform in [0, 2 pi) rad",
            "reason": "phi12_rad missing (NaN) where both spins have in-plane components",
        },
    }
    fit_meta = []
    for f in chosen:
        meta = f.metadata()
        meta["n_outside_range"] = outside.get(f.name, 0)
        fit_meta.append(meta)
    record = workdir.provenance_record(
        "remnant",
        inputs=inputs,
        seed=draws["seed"],
        fits=[f.name for f in chosen],
        rows=n,
        rows_estimated=n_est,
        phi12_drawn=n_phi_drawn,
    )
    attrs: dict[str, Any] = {}
    for key in (schema.META_COSMOLOGY, schema.META_CONVERSIONS):
        if key in df.attrs:
            attrs[key] = df.attrs[key]
    attrs[schema.META_FITS] = fit_meta
    attrs[schema.META_UNITS] = _units(df, chosen)
    attrs[schema.META_REMNANT_DRAWS] = draws
    attrs[schema.META_PROVENANCE] = workdir.merge_provenance(df.attrs, record)
    out.attrs = attrs
    return out


def summarize_remnants(df: pd.DataFrame) -> dict[str, Any]:
    """Summary of a remnants table: counts by kind and status, deficit quantiles, range flags.

    Deficit quantiles (5, 50, 95 per cent, unweighted over estimated rows) are given in Msun
    and in erg (Msun c^2 from astropy constants).
    """
    import astropy.constants as const
    import astropy.units as u

    status = df["remnant_status"].astype(str)
    est = (status == STATUS_ESTIMATED).to_numpy()
    deficit = df["deficit_msun"].to_numpy(dtype=np.float64)[est]
    erg_per_msun = float((const.M_sun * const.c**2).to_value(u.erg))
    quant = {}
    if deficit.size:
        for p in (5, 50, 95):
            v = float(np.percentile(deficit, p))
            quant[f"p{p:02d}"] = {"msun": v, "erg": v * erg_per_msun}
    fits_meta = df.attrs.get(schema.META_FITS) or []
    return {
        "rows": len(df),
        "kinds": {str(k): int(v) for k, v in df["kind"].astype(str).value_counts().items()},
        "estimated": int(est.sum()),
        "status": {str(k): int(v) for k, v in status.value_counts().items()},
        "deficit_quantiles": quant,
        "total_deficit_msun": float(deficit.sum()),
        "outside_fit_range": int((est & ~df["in_fit_range"].to_numpy(dtype=bool)).sum()),
        "outside_by_fit": {m["name"]: m.get("n_outside_range", 0) for m in fits_meta},
        "fits": [m["name"] for m in fits_meta],
        "erg_per_msun_c2": erg_per_msun,
    }


# ``gwdeficit.remnant`` is both this module and, in the public API, the array function. The
# package resolves its lazy export ``remnant`` to the attribute ``remnant`` of this module and
# Python's import system sets the package attribute to the module itself, so both are this
# module, made callable: ``gwdeficit.remnant(m1, m2, ...)`` is :func:`remnant_arrays`, and
# ``import gwdeficit.remnant`` / ``from gwdeficit.remnant import compute_remnants`` keep working.
class _CallableModule(types.ModuleType):
    def __call__(self, *args: Any, **kwargs: Any) -> RemnantEstimate:
        return remnant_arrays(*args, **kwargs)


sys.modules[__name__].__class__ = _CallableModule
remnant = sys.modules[__name__]
