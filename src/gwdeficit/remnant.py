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

import os
import queue
import sys
import types
import warnings
from collections.abc import Callable, Iterator, Mapping, Sequence
from concurrent.futures import ThreadPoolExecutor
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
    "default_threads",
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
        hint = "No remnant was computed; fix these rows in the catalogue."
        super().__init__(path, column, reason, rows, hint=hint)


@dataclass(frozen=True, eq=False)
class RemnantEstimate(Mapping):
    """Result of :func:`remnant_arrays`: a read-only mapping of column name -> array, plus facts.

    Keys: every name of ``schema.REMNANT_COLUMNS`` except ``remnant_kind``/``remnant_status``,
    and per-fit columns such as ``chif__barausse_rezzolla_2009``. Arrays have the broadcast
    shape of the inputs and are read-only; columns that are equal by definition (for example
    ``deficit_msun`` and ``erad_msun``, or the default and the only NR fit of a quantity)
    share memory. Copy an array (``np.array(r["chif"])``) to modify it.
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


def _cos_sin32(x: NDArray[np.float64]) -> tuple[NDArray[np.float32], NDArray[np.float32]]:
    """cos and sin of angles in single precision (errors <= 3e-7).

    numpy's float32 cosine and sine are vectorised (SIMD), its float64 ones are not: on the
    project machine about 2 ns against 43 ns per value. The spin components built from these
    carry absolute errors <= 3e-7 (relative ~1e-7 for the in-plane parts of nearly aligned
    spins, since the sine is computed directly), far below the accuracy of any fit (>= 1e-3).
    The compiled kernel widens them to float64; the public per-fit functions in
    gwdeficit.fits use float64 cos and sin.
    """
    x32 = x.astype(np.float32)
    return np.cos(x32), np.sin(x32)


def _cos32(x: NDArray[np.float64]) -> NDArray[np.float32]:
    """cos of angles in single precision (see :func:`_cos_sin32`)."""
    return np.cos(x.astype(np.float32))


@dataclass(frozen=True, eq=False)
class _BbhInput:
    """Validated-in-blocks inputs of :func:`_bbh_core` (1-d float64 arrays of one length)."""

    values: Mapping[str, NDArray[np.float64]]  # _INPUT_COLUMNS; phi12 may hold NaN
    phase: NDArray[np.float64]  # in-plane spin phase at merger, rad
    phi12_draws: NDArray[np.float64] | None  # replacements for missing phi12, rad
    labels: NDArray[Any] | None  # row numbers for error messages (None: 1-based positions)
    source: str


def _block_is_valid(m1, m2, c1, c2, t1, t2, p) -> bool:
    """Cheap all-rows check (one compiled pass; NaN fails every comparison but phi12's)."""
    from gwdeficit.fits._kernels import all_valid

    return bool(all_valid(m1, m2, c1, c2, t1, t2, p, -TILT_TOLERANCE, np.pi + TILT_TOLERANCE))


def default_threads(threads: int | None = None) -> int:
    """Threads for the BBH fits: ``threads`` if given (>= 1), else the environment variable
    ``GWDEFICIT_THREADS``, else the CPUs this process may run on. Results do not depend on it."""
    if threads is None:
        env = os.environ.get("GWDEFICIT_THREADS", "").strip()
        if env:
            try:
                threads = int(env)
            except ValueError as exc:
                raise schema.OptionError(
                    f"GWDEFICIT_THREADS={env!r} is not a whole number of threads"
                ) from exc
            if threads < 1:
                raise schema.OptionError(f"GWDEFICIT_THREADS={env!r}: threads must be at least 1")
        else:
            try:
                threads = len(os.sched_getaffinity(0))
            except (AttributeError, OSError):  # not on Linux
                threads = os.cpu_count() or 1
    if threads < 1:
        raise schema.OptionError(f"threads must be at least 1 (got {threads})")
    return int(threads)


def _bbh_core(
    inp: _BbhInput,
    fits: Sequence[Fit],
    progress: Callable[[int], None] | None = None,
    block_rows: int = BLOCK_ROWS,
    threads: int | None = None,
) -> tuple[dict[str, NDArray[Any]], dict[str, int], int]:
    """Validate and evaluate ``fits`` block by block on binary-black-hole rows.

    The formulas run as compiled loops over each block (:mod:`gwdeficit.fits._kernels`)
    writing straight into the output columns; numpy computes the single-precision cosines and
    sines of the block's angles (vectorised) beforehand. Blocks are independent and run on
    ``threads`` threads (:func:`default_threads`; the compiled loops and numpy release the
    GIL), each with its own scratch; every row's value is the same for any number of threads.
    Returns the output columns, per fit the number of rows outside its calibrated range, and
    the number of rows whose missing phi12 was replaced by a draw where it matters (both spins
    with an in-plane component).
    """
    from gwdeficit.fits import _kernels as kn

    _raise_malloc_threshold()
    v = inp.values
    m1, m2, chi1, chi2 = v["m1_msun"], v["m2_msun"], v["chi1"], v["chi2"]
    tilt1, tilt2, phi12 = v["tilt1_rad"], v["tilt2_rad"], v["phi12_rad"]
    n = m1.shape[0]
    plan = _kernel_plan(fits)
    out = np.empty((len(plan.names), n))
    row = {name: j for j, name in enumerate(plan.names)}
    stat_of = dict(zip(QUANTITIES, plan.stats, strict=True))
    # Fused loops for the default set's pairs: the two NR mass fits with their mean (and mf,
    # E_rad / M of the mean), the two recoil fits with their mean. Same values either way.
    pair = [f for f in fits if f.quantity == "final_mass" and f.in_default]
    mass_pair = None
    if len(pair) == 2:
        a, b = pair
        mass_pair = (a.slot, b.slot, *(row[c] for f in pair for c in f.columns))
    mass_rows = [
        (f.slot, row[f.columns[0]], row[f.columns[1]])
        for f in fits
        if f.quantity == "final_mass" and (mass_pair is None or not f.in_default)
    ]
    kicks = sorted(f.slot for f in fits if f.quantity == "recoil" and f.in_default)
    kick_pair = kicks == [kn.LOUSTO12, kn.CAMPANELLI07]
    enabled = plan.enabled.copy()
    if kick_pair:
        enabled[kn.LOUSTO12] = enabled[kn.CAMPANELLI07] = False
    stats = [
        stat_of[qty]
        for qty in QUANTITIES
        if not (qty == "final_mass" and mass_pair) and not (qty == "recoil" and kick_pair)
    ]
    mean_rows = [row[c] for c in ("erad_msun", "mf_msun", "erad_frac")]
    ok = np.empty(n, dtype=bool)
    b = min(block_rows, max(n, 1))
    starts = range(0, n, block_rows)
    n_threads = min(default_threads(threads), max(len(starts), 1))
    scratch: queue.SimpleQueue[tuple[NDArray[Any], ...]] = queue.SimpleQueue()
    for _ in range(n_threads):
        # work columns, E_rad / M of the mass fits (and unused slots), range flags
        scratch.put((np.empty((kn.N_WORK, b)), np.empty((kn.N_SLOTS, b)), np.empty(b, bool)))

    def run_block(start: int) -> tuple[NDArray[np.int64], int, int]:
        """One block: output rows [start, start + k); (rows outside per slot, phi drawn, k)."""
        work, frac, range_scratch = scratch.get()
        try:
            sl = slice(start, min(start + block_rows, n))
            k = sl.stop - sl.start
            outside_by_slot = np.zeros(kn.N_SLOTS, dtype=np.int64)
            a1, a2, c1, c2 = m1[sl], m2[sl], chi1[sl], chi2[sl]
            t1, t2, p = tilt1[sl], tilt2[sl], phi12[sl]
            if not _block_is_valid(a1, a2, c1, c2, t1, t2, p):
                _validate_bbh(inp.source, inp.labels, v)  # raises, naming every bad row
            missing = np.isnan(p)
            any_missing = inp.phi12_draws is not None and bool(missing.any())
            if any_missing:
                p = np.where(missing, inp.phi12_draws[sl], p)
            ct1, st1 = _cos_sin32(t1)
            ct2, st2 = _cos_sin32(t2)
            # tilts lie in [0, pi]; float32(pi) > pi makes its sine -9e-8: clip to the exact 0
            np.maximum(st1, 0.0, out=st1)
            np.maximum(st2, 0.0, out=st2)
            n_phi = 0
            if any_missing:
                inplane = (c1 * st1 > 1e-12) & (c2 * st2 > 1e-12)
                n_phi = int(np.count_nonzero(missing & inplane))
            w = work[:, :k]
            raw = [out[j, sl] if j >= 0 else frac[slot, :k] for slot, j in enumerate(plan.raw_rows)]
            kn.raw_block(
                enabled, a1, a2, c1, c2, ct1, st1, ct2, st2, _cos32(p), _cos32(inp.phase[sl]),
                raw, w,
            )  # fmt: skip
            mtot = w[kn.W_MTOT]
            if kick_pair:
                stat = stat_of["recoil"][2]
                rows_lc = (plan.raw_rows[kn.LOUSTO12], plan.raw_rows[kn.CAMPANELLI07])
                kn.kick_pair(w, *(out[j, sl] for j in (*rows_lc, stat, stat + 1, stat + 2)))
            if mass_pair:
                slot_a, slot_b, *cols = mass_pair
                stat = stat_of["final_mass"][2]
                kn.mass_pair(
                    mtot, raw[slot_a], raw[slot_b],
                    *(out[j, sl] for j in (*cols, stat, stat + 1, stat + 2, *mean_rows[1:])),
                )  # fmt: skip
            for slot, mf_row, erad_row in mass_rows:
                kn.mass_columns(mtot, raw[slot], out[mf_row, sl], out[erad_row, sl])
            for lo, hi, stat in stats:
                kn.mean_spread(out[lo:hi, sl], out[stat, sl], out[stat + 1, sl], out[stat + 2, sl])
            if not mass_pair:
                erad, mf, frac_mean = (out[j, sl] for j in mean_rows)
                np.subtract(mtot, erad, out=mf)
                np.divide(erad, mtot, out=frac_mean)
            okb = ok[sl]
            for j, (q_lo, chi_hi, slots) in enumerate(plan.ranges):
                inside = okb if j == 0 else range_scratch[:k]
                kn.in_range(w[kn.W_Q], w[kn.W_X1], w[kn.W_X2], q_lo, chi_hi, inside)
                n_out = k - int(np.count_nonzero(inside))
                for slot in slots:
                    outside_by_slot[slot] += n_out
                if j:
                    okb &= inside
            if not plan.ranges:
                okb[:] = True
            return outside_by_slot, n_phi, k
        finally:
            scratch.put((work, frac, range_scratch))

    outside_by_slot = np.zeros(kn.N_SLOTS, dtype=np.int64)
    n_phi_drawn = 0

    def collect(result: tuple[NDArray[np.int64], int, int]) -> None:
        nonlocal n_phi_drawn
        outside_by_slot[:] += result[0]
        n_phi_drawn += result[1]
        if progress is not None:
            progress(result[2])

    if n_threads == 1:
        for start in starts:
            collect(run_block(start))
    else:
        with ThreadPoolExecutor(n_threads, thread_name_prefix="gwdeficit-fits") as pool:
            futures = [pool.submit(run_block, start) for start in starts]
            try:
                for fut in futures:  # in row order: progress and errors as with one thread
                    collect(fut.result())
            except BaseException:
                for fut in futures:
                    fut.cancel()
                raise
    cols: dict[str, NDArray[Any]] = dict(zip(plan.names, out, strict=True))
    cols["mf_msun_range"] = cols["erad_msun_range"]
    cols["mf_msun_std"] = cols["erad_msun_std"]
    cols["deficit_msun"] = cols["erad_msun"]
    cols["in_fit_range"] = ok
    for arr in cols.values():
        arr.flags.writeable = False
    # zero for every binary black hole: one read-only value seen n times, no memory
    cols["ejected_msun"] = np.broadcast_to(np.float64(0.0), (n,))
    outside = {f.name: int(outside_by_slot[f.slot]) for f in fits}
    return cols, outside, n_phi_drawn


@dataclass(frozen=True, eq=False)
class _KernelPlan:
    """Output rows of :func:`_bbh_core` and the per-slot settings of the compiled kernels.

    ``names``: output columns in row order; per quantity the NR-calibrated fits' values
    (erad for final mass) sit in adjacent rows ``lo:hi`` followed by the rows of mean, range
    and std (``stats``: (lo, hi, first stat row)). ``raw_rows[slot]``: the output row a
    spin/recoil slot's value goes to (-1: a mass fit or not selected; those go to scratch).
    ``ranges``: the distinct calibrated ranges (q_min, chi_max) with the slots that have each.
    """

    names: tuple[str, ...]
    enabled: NDArray[np.bool_]
    raw_rows: tuple[int, ...]
    stats: tuple[tuple[int, int, int], ...]
    ranges: tuple[tuple[float, float, tuple[int, ...]], ...]


def _kernel_plan(fits: Sequence[Fit]) -> _KernelPlan:
    """Output layout and per-slot settings for the selected fits."""
    from gwdeficit.fits._kernels import N_SLOTS

    names: list[str] = []
    enabled = np.zeros(N_SLOTS, dtype=bool)
    raw_rows = [-1] * N_SLOTS
    stats = []
    by_range: dict[tuple[float, float], list[int]] = {}
    for f in fits:
        enabled[f.slot] = True
        rng = f.calibrated_range
        if rng:
            key = (rng.get("q_min", -np.inf), rng.get("chi_max", np.inf))
            by_range.setdefault(key, []).append(f.slot)
    for qty in QUANTITIES:
        ordered = sorted((f for f in fits if f.quantity == qty), key=lambda f: not f.in_default)
        lo = len(names)
        for f in ordered:  # value columns (erad for mass), NR-calibrated fits first
            if qty != "final_mass":
                raw_rows[f.slot] = len(names)
            names.append(f.columns[-1])
        hi = lo + sum(f.in_default for f in ordered)
        base = _DEFAULT_COLUMN[qty]
        stats.append((lo, hi, len(names)))
        names.extend((base, f"{base}_range", f"{base}_std"))
        if qty == "final_mass":
            names.extend(f.columns[0] for f in ordered)
    names.extend(("mf_msun", "erad_frac"))
    ranges = tuple((lo, hi, tuple(slots)) for (lo, hi), slots in by_range.items())
    return _KernelPlan(tuple(names), enabled, tuple(raw_rows), tuple(stats), ranges)


_MALLOC_WARMED = False


def _raise_malloc_threshold() -> None:
    """Release one 16 MB array so that glibc stops giving block temporaries fresh pages.

    glibc serves allocations above its mmap threshold (128 kB at start) with fresh pages and
    returns them on free; every block temporary then costs page faults, which dominated the
    run time here (3-4x). Freeing an mmapped chunk raises the threshold to its size and the
    heap-trim threshold to twice that (dynamic threshold, mallopt(3)), after which the
    temporaries are recycled from the heap. Harmless with other allocators. Done once.
    """
    global _MALLOC_WARMED
    if not _MALLOC_WARMED:
        buf = np.empty(1 << 21)
        del buf
        _MALLOC_WARMED = True


def _validate_bbh(
    source: str,
    labels: NDArray[Any] | None,
    values: Mapping[str, NDArray[np.float64]],
) -> None:
    """Raise :class:`RemnantInputError` for values the BBH fits cannot take (rows named by
    ``labels``, or by their 1-based position when None)."""
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
                rows = np.flatnonzero(bad) + 1 if labels is None else labels[bad]
                raise RemnantInputError(source, column, reason, rows.tolist())


def _draw_angles(
    rng: np.random.Generator,
    n: int,
    any_missing: bool,
    kick_phase: NDArray[np.float64] | None,
) -> tuple[NDArray[np.float64], NDArray[np.float64] | None]:
    """Draw the kick phase (unless given) and replacements for missing phi12, in that order.

    n kick phases uniform in [0, 2 pi), then, if any BBH row lacks phi12 (``any_missing``),
    n values uniform in [0, 2 pi) of which the rows with NaN use theirs. Drawing whole arrays
    keeps a row's values independent of how the rows are split into blocks. Keep this order
    and the ``rng.random(n)`` calls: gwdeficit.stream reproduces them batch by batch.
    """
    if kick_phase is None:
        phase = rng.random(n)
        phase *= TWO_PI
    else:
        phase = kick_phase
    draws = None
    if any_missing:
        draws = rng.random(n)
        draws *= TWO_PI
    return phase, draws


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
    threads: int | None = None,
) -> RemnantEstimate:
    """Remnant of binary-black-hole mergers from NR fits, on arrays.

    Arguments (broadcast together): source-frame masses in Msun (either order: the fits are
    symmetric under exchanging the bodies with their spins), spin magnitudes in [0, 1], tilts
    between each spin and the orbital angular momentum in [0, pi] rad, the azimuth ``phi12``
    between the in-plane spins in rad (NaN: unknown, drawn uniformly where it matters).
    ``fits``: names from the registry (default: all). ``kick_phase``: the in-plane spin phase
    at merger in rad (default: drawn uniformly in [0, 2 pi) from ``rng``, or from
    ``numpy.random.default_rng(seed)`` when no generator is given). ``threads``: threads for
    the fits (default :func:`default_threads`: ``GWDEFICIT_THREADS`` or every usable CPU);
    the values do not depend on it.

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
    given = flat[7] if kick_phase is not None else None
    if given is not None and not np.all(np.isfinite(given)):
        bad = np.flatnonzero(~np.isfinite(given)) + 1
        raise RemnantInputError("<arrays>", "kick_phase", "not a finite angle", bad.tolist())
    gen = rng if rng is not None else np.random.default_rng(seed)
    phase, draws = _draw_angles(gen, n, bool(np.isnan(values["phi12_rad"]).any()), given)
    inp = _BbhInput(values, phase, draws, None, "<arrays>")
    cols, outside, n_phi_drawn = _bbh_core(inp, chosen, threads=threads)
    _warn_outside(n - int(np.count_nonzero(cols["in_fit_range"])), n, outside)
    return RemnantEstimate(
        columns={k: v.reshape(shape) for k, v in cols.items()},
        fits=tuple(f.name for f in chosen),
        n_outside_range=outside,
        n_phi12_drawn=n_phi_drawn,
        n_phase_drawn=n if kick_phase is None else 0,
    )


# --------------------------------------------------------------------------------------------
# Catalogue DataFrames: dispatch by kind
# --------------------------------------------------------------------------------------------


@dataclass(frozen=True, eq=False)
class Rows:
    """The rows of one kind handed to a branch of :data:`KIND_BRANCHES`.

    ``frame`` is the whole catalogue and ``mask`` selects this branch's rows; ``values`` holds
    the input columns of those rows as float arrays (``phi12_rad`` NaN where missing),
    ``phase`` the drawn in-plane spin phase at merger, ``phi12_draws`` the drawn values for
    missing phi12 (None if no BBH row lacks it), ``labels`` the row numbers used in error
    messages, ``fits`` the selected fits, ``source`` the file name for messages.
    """

    frame: pd.DataFrame
    mask: NDArray[np.bool_]
    values: Mapping[str, NDArray[np.float64]]
    phase: NDArray[np.float64]
    phi12_draws: NDArray[np.float64] | None
    labels: NDArray[Any]
    fits: tuple[Fit, ...]
    source: str
    progress: Callable[[int], None] | None = None
    options: Mapping[str, Any] = field(default_factory=dict)
    threads: int | None = None


@dataclass(frozen=True)
class BranchResult:
    """What a branch returns: columns for its rows (missing ones stay NaN / False / "")."""

    columns: dict[str, NDArray[Any]]
    n_outside_range: dict[str, int] = field(default_factory=dict)
    n_phi12_drawn: int = 0


def _bbh_branch(rows: Rows) -> BranchResult:
    """Binary black holes: every selected fit, default mean and spread."""
    inp = _BbhInput(rows.values, rows.phase, rows.phi12_draws, rows.labels, rows.source)
    cols, outside, n_phi_drawn = _bbh_core(
        inp, rows.fits, progress=rows.progress, threads=rows.threads
    )
    n = rows.values["m1_msun"].size
    cols["remnant_kind"] = np.full(n, "BH", dtype=object)
    cols["remnant_status"] = np.full(n, STATUS_ESTIMATED, dtype=object)
    return BranchResult(cols, outside, n_phi_drawn)


#: Extra per-row columns written when a catalogue holds neutron-star rows (NaN / False / ""
#: on black-hole rows).
NS_EXTRA_COLUMNS: tuple[str, ...] = (
    "ns_disrupted",
    "ns_erad_lower_bound",
    "ns_erad_method",
    "ns_tidal_source",
    "ns_out_of_range",
)

#: Options of the neutron-star branch accepted by ``compute_remnants(ns_options=...)``.
NS_OPTION_KEYS: tuple[str, ...] = (
    "ns_radius_km",
    "eos_relation",
    "baryonic_relation",
    "mtov_msun",
    "r16_km",
)


def _neutron_star_branch(rows: Rows) -> BranchResult:
    """NSBH and BNS rows through :func:`gwdeficit.fits.neutron_star.ns_remnant`.

    Non-disrupted NSBH rows (no matter left outside the black hole according to Foucart,
    Hinderer & Nissanke 2018) get every binary-black-hole fit, evaluated with the same kick
    phase and phi12 draws as black-hole rows, so their per-fit columns are filled like a
    BBH's. Other neutron-star rows carry the neutron-star estimates in the default columns
    (per-fit and spread columns NaN) and a ``remnant_status`` that says what was not estimated.
    """
    from gwdeficit.fits.neutron_star import STATUS_NO_BBH, ns_remnant

    n = rows.values["m1_msun"].size
    v = rows.values
    sub = rows.frame.loc[rows.mask] if len(rows.frame) != n else rows.frame
    lam = {
        c: (
            sub[c].to_numpy(dtype=np.float64, na_value=np.nan)
            if c in sub.columns
            else np.full(n, np.nan)
        )
        for c in ("lambda1", "lambda2")
    }
    kinds = sub["kind"].astype(str).to_numpy()
    res = ns_remnant(
        v["m1_msun"],
        v["m2_msun"],
        v["chi1"],
        v["chi2"],
        v["tilt1_rad"],
        v["tilt2_rad"],
        lam["lambda1"],
        lam["lambda2"],
        kinds,
        phi12_rad=v["phi12_rad"],
        bbh_remnant=None,
        **dict(rows.options),
    )
    status = np.asarray(res["remnant_status"], dtype=object)
    cols: dict[str, NDArray[Any]] = {}
    for name in (
        "mf_msun",
        "chif",
        "erad_msun",
        "ejected_msun",
        "deficit_msun",
        "vkick_kms",
    ):
        cols[name] = np.array(res[name], dtype=np.float64)
    cols["in_fit_range"] = np.array(res["in_fit_range"], dtype=bool)
    cols["remnant_kind"] = np.asarray(res["remnant_kind"], dtype=object)
    outside: dict[str, int] = {}
    n_phi_drawn = 0

    # Black-hole limit of NSBH rows: the binary-black-hole fits with the run's draws.
    bh_limit = np.flatnonzero(status == STATUS_NO_BBH)
    if bh_limit.size:
        inp = _BbhInput(
            {k: a[bh_limit] for k, a in v.items()},
            rows.phase[bh_limit],
            None if rows.phi12_draws is None else rows.phi12_draws[bh_limit],
            rows.labels[bh_limit],
            rows.source,
        )
        bbh, outside, n_phi_drawn = _bbh_core(inp, rows.fits, threads=rows.threads)
        for name, arr in bbh.items():
            if name == "in_fit_range":
                cols[name][bh_limit] &= arr
            elif name in ("ejected_msun",):
                continue
            else:
                col = cols.setdefault(name, np.full(n, np.nan))
                col[bh_limit] = arr
        cols["deficit_msun"][bh_limit] = bbh["erad_msun"]
        cols["remnant_kind"][bh_limit] = "BH"
        status[bh_limit] = STATUS_ESTIMATED
    total = v["m1_msun"] + v["m2_msun"]
    cols["erad_frac"] = cols["erad_msun"] / total
    cols["remnant_status"] = status
    cols["ns_disrupted"] = np.asarray(res["disrupted"], dtype=bool)
    cols["ns_erad_lower_bound"] = np.asarray(res["erad_lower_bound"], dtype=bool)
    method = np.asarray(res["erad_method"], dtype=object)
    method[bh_limit] = "bbh-fits"
    cols["ns_erad_method"] = method
    src1 = np.asarray(res["tidal_source1"], dtype=object)
    src2 = np.asarray(res["tidal_source2"], dtype=object)
    cols["ns_tidal_source"] = np.where(kinds == "BNS", src1 + "," + src2, src2).astype(object)
    cols["ns_out_of_range"] = np.asarray(res["out_of_range"], dtype=object)
    if rows.progress is not None:
        rows.progress(n)
    return BranchResult(cols, outside, n_phi_drawn)


# The one place where rows are dispatched by kind. A branch takes :class:`Rows` and returns a
# :class:`BranchResult` with per-row arrays for its rows.
KIND_BRANCHES: dict[str, Callable[[Rows], BranchResult]] = {
    "BBH": _bbh_branch,
    "NSBH": _neutron_star_branch,
    "BNS": _neutron_star_branch,
}


@dataclass(frozen=True, eq=False)
class KindCodes:
    """A ``kind`` column as integer codes: ``codes[i]`` indexes ``found`` (-1: missing).

    Built by hashing the labels once (``pd.factorize``), so that masks per kind are integer
    comparisons rather than comparisons of Python strings row by row.
    """

    codes: NDArray[np.intp]
    found: list[str]

    @classmethod
    def of(cls, kind: pd.Series) -> KindCodes:
        import pandas as pd

        codes, uniques = pd.factorize(kind.astype(str))
        return cls(codes, [str(k) for k in uniques])

    def mask(self, kind: str) -> NDArray[np.bool_]:
        """Rows of ``kind``."""
        if kind not in self.found:
            return np.zeros(self.codes.size, dtype=bool)
        return self.codes == self.found.index(kind)

    def unknown(self) -> NDArray[np.bool_]:
        """Rows whose kind is missing or not one of ``schema.KINDS``."""
        known = np.array([k in KINDS for k in self.found] + [False])  # code -1 -> False
        return ~known[self.codes]


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


def _units(df: pd.DataFrame, attrs: Mapping[str, Any], fits: Sequence[Fit]) -> dict[str, str]:
    units = {
        k: v
        for k, v in (attrs.get(schema.META_UNITS) or schema.units_of(CATALOGUE_COLUMNS)).items()
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
    ns_options: Mapping[str, Any] | None = None,
    threads: int | None = None,
) -> pd.DataFrame:
    """Remnant columns for every row of a canonical catalogue DataFrame.

    Returns a new DataFrame: every input column, then ``schema.REMNANT_COLUMNS``, then the
    per-fit columns; no row is dropped or reordered. ``df.attrs`` of the result carries the
    stage metadata (``gwdeficit.fits``, ``.units``, ``.remnant_draws``, ``.provenance`` with this
    stage's record appended, and ``.cosmology``/``.conversions`` copied from the catalogue).

    ``seed``/``rng``: the run's generator (``rng`` wins; else ``default_rng(seed)``) for the
    kick phase and missing phi12. ``fits``: registry names (default: all). ``source``: file
    name for messages; ``inputs``: {path: sha256} for provenance. ``progress(done, total)`` is
    called after each block of rows. ``ns_options``: keywords of the neutron-star branch
    (:data:`NS_OPTION_KEYS`: ``ns_radius_km`` used where a tidal deformability is missing,
    ``eos_relation``, ``baryonic_relation``, ``mtov_msun``, ``r16_km``); see
    :func:`gwdeficit.fits.neutron_star.ns_remnant`. Neutron-star rows with neither a tidal
    deformability nor a radius are not estimated (no silent default). ``threads``: threads
    for the black-hole fits (:func:`default_threads`; values do not depend on it). Emits
    :class:`FitRangeWarning` when rows lie outside a calibrated range; raises
    ``SchemaError`` for missing columns and ``BadRowsError`` subclasses for bad rows (named by
    ``input_row`` when present).
    """
    from gwdeficit import workdir

    src = source or "<DataFrame>"
    _check_frame(df, src)
    attrs_in = df.attrs
    if attrs_in:
        # pandas deep-copies ``attrs`` into every column it hands out (Series.__finalize__):
        # with a catalogue's metadata that was ~20% of a 2^16-row call. Work on a shallow copy
        # without them; the metadata is read from ``attrs_in``.
        df = df.copy(deep=False)
        df.attrs = {}
    chosen = select_fits(fits)
    n_threads = default_threads(threads)
    ns_opts = {k: val for k, val in dict(ns_options or {}).items() if val is not None}
    unknown = sorted(set(ns_opts) - set(NS_OPTION_KEYS))
    if unknown:
        raise schema.OptionError(
            f"unknown neutron-star option(s) {', '.join(unknown)}; "
            f"valid: {', '.join(NS_OPTION_KEYS)}"
        )
    n = len(df)
    import pandas as pd

    kinds = KindCodes.of(df["kind"])
    labels = df["input_row"].to_numpy() if "input_row" in df.columns else np.arange(1, n + 1)
    bad_kind = kinds.unknown()
    if bad_kind.any():
        raise RemnantInputError(
            src, "kind", f"kind not one of {', '.join(KINDS)}", labels[bad_kind].tolist()
        )
    values = {}
    for c in _INPUT_COLUMNS:
        try:
            values[c] = df[c].to_numpy(dtype=np.float64, na_value=np.nan)
        except (ValueError, TypeError) as exc:  # a hand-made table with text in a number column
            raise schema.SchemaError(
                f"{src}: column {c!r} does not hold numbers ({exc}); make the catalogue with "
                "'gwdeficit ingest'"
            ) from exc
    gen = rng if rng is not None else np.random.default_rng(seed)
    is_bbh = kinds.mask("BBH")
    # Rows that may meet the black-hole fits: BBH, and NSBH in their no-disruption limit.
    bh_like = is_bbh | kinds.mask("NSBH")
    phase, draws = _draw_angles(gen, n, bool(np.isnan(values["phi12_rad"][bh_like]).any()), None)
    has_ns = bool(np.any(~is_bbh))
    n_phi_drawn = 0

    done = [0]

    def _tick(k: int) -> None:
        done[0] += k
        if progress is not None:
            progress(done[0], n)

    # Output columns and what a row no branch fills holds (NaN / False / ""); allocated when a
    # branch fills part of one, taken as they are when one branch has every row.
    fill: dict[str, Any] = {name: np.nan for name in _output_names(chosen)}
    fill.update(in_fit_range=False, remnant_kind="", remnant_status="")
    if has_ns:
        fill.update(ns_disrupted=False, ns_erad_lower_bound=False)
        fill.update(ns_erad_method="", ns_tidal_source="", ns_out_of_range="")

    def dtype_of(name: str) -> type:
        value = fill[name]
        return bool if isinstance(value, bool) else object if isinstance(value, str) else float

    def blank(name: str) -> NDArray[Any]:
        return np.full(n, fill[name], dtype=dtype_of(name))

    out_cols: dict[str, NDArray[Any]] = {}
    outside = {f.name: 0 for f in chosen}
    for kind, branch in KIND_BRANCHES.items():
        mask = kinds.mask(kind)
        if not mask.any():
            continue
        whole = bool(mask.all())
        sel = slice(None) if whole else mask  # a[:] is a view, a[mask] a copy
        result = branch(
            Rows(
                frame=df,
                mask=mask,
                values={k: v[sel] for k, v in values.items()},
                phase=phase[sel],
                phi12_draws=None if draws is None else draws[sel],
                labels=labels[sel],
                fits=chosen,
                source=src,
                progress=_tick,
                options=ns_opts,
                threads=n_threads,
            )
        )
        for name, arr in result.columns.items():
            if whole:  # same dtype as the blank column would have
                out_cols[name] = np.asarray(arr, dtype=dtype_of(name))
            else:
                out_cols.setdefault(name, blank(name))[mask] = arr
        for name, k in result.n_outside_range.items():
            outside[name] = outside.get(name, 0) + k
        n_phi_drawn += result.n_phi12_drawn

    order = [*_REMNANT_NAMES, *(c for f in chosen for c in f.columns)]
    if has_ns:
        order += list(NS_EXTRA_COLUMNS)
    for name in order:
        if name not in out_cols:
            out_cols[name] = blank(name)
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
        ns_options=ns_opts,
    )
    attrs: dict[str, Any] = {}
    for key in (schema.META_COSMOLOGY, schema.META_CONVERSIONS):
        if key in attrs_in:
            attrs[key] = attrs_in[key]
    if has_ns:
        from gwdeficit.fits.neutron_star import ns_fits_metadata

        attrs[schema.META_NEUTRON_STAR] = {
            "fits": ns_fits_metadata(ns_opts.get("eos_relation", _default_eos())),
            "options": ns_opts,
            "note": (
                "BNS erad_msun is the post-Newtonian inspiral energy to contact, a lower bound "
                "(ns_erad_lower_bound); disrupted NSBH rows carry ejected_msun only. Neutron-star "
                "rows with no tidal deformability and no --ns-radius are not estimated."
            ),
        }
    attrs[schema.META_FITS] = fit_meta
    attrs[schema.META_UNITS] = _units(df, attrs_in, chosen)
    attrs[schema.META_REMNANT_DRAWS] = draws
    attrs[schema.META_PROVENANCE] = workdir.merge_provenance(attrs_in, record)
    out.attrs = attrs
    return out


def _default_eos() -> str:
    from gwdeficit.fits import ns_eos

    return ns_eos.DEFAULT_C_LOVE


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
