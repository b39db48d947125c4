"""Units of input columns: reading them from headers, parsing them with astropy.units.

A header may carry its unit in brackets at the end (``m1 [kg]``, ``dL (Gpc)``, ``tilt1 {deg}``);
a unit may also be given with ``--unit column=unit`` or come from the file's own metadata (FITS,
ECSV). Every unit is parsed by astropy.units and converted to the canonical unit of its
quantity; only linear scale factors occur (mass, length, angle, volume x time).
"""

from __future__ import annotations

import re
from dataclasses import dataclass

from gwdeficit.schema import UnitError

#: Physical dimension of each kind of quantity -> canonical unit (astropy syntax).
CANONICAL_UNITS: dict[str, str] = {
    "mass": "solMass",
    "length": "Mpc",
    "angle": "rad",
    "dimensionless": "",
    "volume_time": "Gpc3 yr",
}

# Spellings astropy does not know (or knows case-sensitively), mapped to astropy syntax.
_SPELLINGS: dict[str, str] = {
    "msun": "solMass",
    "msol": "solMass",
    "m_sun": "solMass",
    "m_sol": "solMass",
    "solmass": "solMass",
    "solar mass": "solMass",
    "solar masses": "solMass",
    "m⊙": "solMass",
    "mpc": "Mpc",
    "gpc": "Gpc",
    "kpc": "kpc",
    "pc": "pc",
    "deg": "deg",
    "degree": "deg",
    "degrees": "deg",
    "rad": "rad",
    "radian": "rad",
    "radians": "rad",
    "dimensionless": "",
    "none": "",
    "-": "",
    "1": "",
}

_HEADER_UNIT = re.compile(
    r"^(?P<name>.*?)\s*(?:\[(?P<u1>[^\]]*)\]|\((?P<u2>[^)]*)\)|\{(?P<u3>[^}]*)\})\s*$"
)


def split_header(header: str) -> tuple[str, str | None]:
    """Split ``"m1 [Msun]"`` into ``("m1", "Msun")``; ``("m1", None)`` when no unit is given."""
    text = str(header).strip()
    m = _HEADER_UNIT.match(text)
    if not m or not m.group("name").strip():
        return text, None
    unit = next(g for g in (m.group("u1"), m.group("u2"), m.group("u3")) if g is not None)
    return m.group("name").strip(), unit.strip()


@dataclass(frozen=True)
class UnitConversion:
    """How one input column's values become canonical: ``canonical = factor * value``."""

    given: str  # unit text as written ("" for dimensionless)
    canonical: str  # canonical unit (astropy syntax)
    factor: float


def parse_unit(text: str, what: str = "unit") -> object:
    """Parse a unit string with astropy.units (a few common spellings are normalised first)."""
    import astropy.units as u

    raw = str(text).strip()
    spelled = _SPELLINGS.get(raw.lower(), raw)
    try:
        return u.Unit(spelled, parse_strict="raise")
    except (ValueError, TypeError) as exc:
        try:
            return u.Unit(spelled.replace("^", ""), parse_strict="raise")
        except (ValueError, TypeError):
            pass
        raise UnitError(f"{what}: unit {raw!r} is not a unit astropy can parse") from exc


def conversion(text: str | None, dimension: str, what: str = "column") -> UnitConversion:
    """Conversion of a column with unit ``text`` to the canonical unit of ``dimension``.

    ``text=None`` means no unit was given: the canonical unit is assumed (factor 1).
    Raises :class:`~gwdeficit.schema.UnitError` for unknown or non-convertible units.
    """
    import astropy.units as u

    canonical = CANONICAL_UNITS[dimension]
    if text is None:
        return UnitConversion(given=canonical, canonical=canonical, factor=1.0)
    unit = parse_unit(text, what)
    if isinstance(unit, u.FunctionUnitBase):  # dex, mag, dB: not a scale factor
        raise UnitError(
            f"{what}: unit {text!r} is logarithmic; give the values in a linear unit "
            f"({canonical or 'dimensionless'})"
        )
    target = u.Unit(canonical) if canonical else u.dimensionless_unscaled
    try:
        factor = float(unit.to(target))
    except u.UnitConversionError as exc:
        raise UnitError(
            f"{what}: unit {text!r} cannot be converted to {canonical or 'a dimensionless number'}"
        ) from exc
    return UnitConversion(given=str(text).strip(), canonical=canonical, factor=factor)
