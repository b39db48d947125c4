"""Input handling shared by the commands that need remnants and a rate model (rate, cosmic)."""

from __future__ import annotations

from pathlib import Path
from typing import Any

from gwdeficit.cli._common import err, parse_pairs


def load_remnants(
    file: Path | None, folder: Path, seed: int, force: bool, outputs: tuple[Path | None, ...]
) -> tuple[Path, Any]:
    """The remnants table: FILE, else <workdir>/remnants.parquet, else computed from the
    catalogue (FILE, or <workdir>/catalogue.parquet) and written to <workdir>/remnants.parquet.
    Checks that every output may be written before any work is done."""
    import warnings

    from gwdeficit import workdir as wd
    from gwdeficit.schema import InputFileError, SchemaError

    if file is not None:
        path = Path(file)
    elif (folder / wd.REMNANTS_FILE).exists():
        path = folder / wd.REMNANTS_FILE
    else:
        path = folder / wd.CATALOGUE_FILE
    if not path.exists():
        hint = (
            ""
            if file is not None
            else " (run 'gwdeficit ingest' and 'gwdeficit remnant', or give FILE)"
        )
        raise InputFileError(f"{path}: no such file{hint}")
    for o in outputs:
        if o is not None:
            wd.check_writable(o, force, inputs=(path,))
    df = wd.read_parquet(path)
    if "kind" not in df.columns:
        raise SchemaError(f"{path}: no 'kind' column; not a catalogue or remnants table")
    if "deficit_msun" in df.columns:
        return path, df
    # A catalogue: compute the remnants first, as 'gwdeficit remnant' would.
    from gwdeficit.fits.registry import FitRangeWarning
    from gwdeficit.remnant import compute_remnants

    rem_out = folder / wd.REMNANTS_FILE
    wd.check_writable(rem_out, force, inputs=(path,))
    err(f"{path} is a catalogue: computing its remnants first ({rem_out})")
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", FitRangeWarning)
        rem = compute_remnants(
            df, seed=seed, source=str(path), inputs={str(path): wd.file_sha256(path)}
        )
    for w in caught:
        if issubclass(w.category, FitRangeWarning):
            err(f"warning: {w.message}")
    wd.write_parquet(rem, rem_out, rem.attrs, force=force, inputs=(path,))
    return rem_out, wd.read_parquet(rem_out)


def rate_arguments(
    rate: str | None,
    rate_samples: str | None,
    rate_kind: list[str] | None,
    unit: str,
    evolution: str,
    kappa: float | None,
    rate_z: float | None,
) -> dict[str, Any]:
    """Keyword arguments of :func:`gwdeficit.budget.compute_budget` for the rate options."""
    from gwdeficit.rates import (
        RATE_UNIT,
        RateEvolution,
        load_rate_samples,
        parse_kind_rates,
        parse_rate,
    )
    from gwdeficit.schema import OptionError

    if evolution == "powerlaw" and kappa is None:
        raise OptionError("--evolution powerlaw needs --kappa K (the index of (1+z)^K)")
    if evolution != "powerlaw" and kappa is not None:
        raise OptionError(f"--kappa applies to --evolution powerlaw only (got {evolution!r})")
    evo = RateEvolution(evolution, 0.0 if kappa is None else kappa, rate_z or 0.0)
    per_kind = parse_pairs(rate_kind, "--rate-kind")
    given = [n for n, v in (("--rate", rate), ("--rate-samples", rate_samples)) if v]
    if per_kind:
        given.append("--rate-kind")
    if len(given) > 1:
        raise OptionError(
            f"give one of --rate, --rate-samples (whole table) or --rate-kind (per kind); got "
            f"{' and '.join(given)}"
        )
    if not given and unit != RATE_UNIT:
        raise OptionError(f"--rate-unit {unit!r} applies to a given rate; none given")
    if rate is not None:
        return {"rate": parse_rate(rate, unit=unit, evolution=evo)}
    if rate_samples is not None:
        return {"rate": load_rate_samples(rate_samples, unit=unit, evolution=evo)}
    if per_kind:
        return {"rates_by_kind": parse_kind_rates(per_kind, unit=unit, evolution=evo)}
    # Defaults per kind: they keep their own reference redshift unless --rate-z is given.
    return {"evolution": evo, "default_rate_z": rate_z}
