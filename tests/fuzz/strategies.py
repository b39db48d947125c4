"""Hypothesis strategies that build hostile input tables for the ingest stage, with an oracle.

:func:`hostile_cases` draws a :class:`Case`: the bytes of one input file (CSV, TSV, whitespace
text, Parquet, Feather, FITS or ECSV) and what the loader must make of it. A case starts from a
clean table of binaries whose canonical values are known, then applies hostile changes:

- file level: empty file, header only, comment lines only, UTF-8 byte-order mark, CRLF or bare
  CR line ends, UTF-16 or Latin-1 bytes, truncation at a random byte, random byte flips
  (corrupt Parquet, Feather, FITS);
- header level: duplicate names, blank names, two columns claiming one quantity, unknown
  columns with unicode names, units that are not masses, that astropy cannot parse, or that
  are logarithmic;
- cell level: strings in numeric columns, missing values (empty, NaN, null), infinities
  (including decimal overflow such as ``1e400``), huge and tiny finite numbers, out-of-range
  values, unicode event labels, odd but valid number spellings (``+1.5E+01``, padded);
- row level: rows written with another delimiter, short rows, rows with extra fields;
- redundant columns (chirp mass next to m1 and m2, luminosity distance next to redshift) that
  agree, or disagree beyond the documented tolerance in chosen rows.

The oracle in :class:`Case` says whether the whole file must load, must fail with a
``GwdeficitError``, or may do either; which data rows must be rejected; and, for rows that must
be accepted, the canonical values they must come out with. Those values are computed here
independently of the loader, from the written numbers with astropy (unit conversion, Planck18
luminosity distance) and the textbook chirp-mass definition; they are never read back from the
loader itself.
"""

from __future__ import annotations

import io
import math
from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from hypothesis import strategies as st

FORMATS = ("csv", "tsv", "txt", "parquet", "feather", "fits", "ecsv")
TEXT_FORMATS = ("csv", "tsv", "txt")
SUFFIX = {
    "csv": ".csv",
    "tsv": ".tsv",
    "txt": ".txt",
    "parquet": ".parquet",
    "feather": ".feather",
    "fits": ".fits",
    "ecsv": ".ecsv",
}
DELIM = {"csv": ",", "tsv": "\t", "txt": " "}

# Header spellings the alias table documents (gwdeficit.io.aliases), and units with the factor
# to the canonical unit taken from astropy.units (the reference, not the loader).
M_SPELLINGS = {1: ("m1", "mass_1", "Mass1", "m1_source", "component_mass_1"), 2: ("m2", "mass_2")}
DET_SPELLINGS = {1: ("m1_det", "mass_1_detector"), 2: ("m2_det", "mass_2_detector")}
CHI_SPELLINGS = {1: ("chi1", "a1", "spin1"), 2: ("chi2", "a2", "spin2")}
TILT_SPELLINGS = {1: ("tilt1", "theta1"), 2: ("tilt2", "theta2")}
Z_SPELLINGS = ("z", "redshift")
DL_SPELLINGS = ("dl", "luminosity_distance", "distance")
MASS_UNITS = (None, "Msun", "solMass", "kg", "g")
LENGTH_UNITS = (None, "Mpc", "Gpc", "kpc")
ANGLE_UNITS = (None, "rad", "deg")
NOT_A_MASS = ("km", "s", "Mpc", "deg", "erg", "Hz")
UNPARSEABLE = ("furlong", "msun2x", "kg kg /", "solMass**", "[unit]", "?")
LOGARITHMIC = ("dex(solMass)", "mag")

NON_NUMERIC = ("abc", "1.2.3", "--1", "1e", "0x1A", "true", "1 2", "1,5", "∞", "m1", "NA", "null")
MISSING = ("", "nan", "NaN", "-nan", "  ")
INFINITE = ("inf", "-inf", "Infinity", "-Infinity", "1e400", "-1e999")
EXTREME = (
    "1e308",
    "1.7976931348623157e308",
    "5e-324",
    "1e-300",
    "-0",
    "0",
    "2.2250738585072014e-308",
)
UNICODE_DIGITS = ("３０", "٣٠", "½")

EVENT_ALPHABET = st.characters(
    whitelist_categories=("Lu", "Ll", "Lo", "Nd", "Pd", "Po", "Sm", "So"),
    blacklist_characters="\"'#\\",
)
ASCII_ALPHABET = st.characters(
    min_codepoint=ord("0"), max_codepoint=ord("z"), whitelist_categories=("Lu", "Ll", "Nd")
)


def _msun_per(unit: str | None) -> float:
    """Solar masses per one ``unit`` (astropy.units; IAU 2015 nominal solar mass)."""
    import astropy.units as u

    return 1.0 if unit in (None, "Msun", "solMass") else float(u.Unit(unit).to(u.solMass))


def _mpc_per(unit: str | None) -> float:
    import astropy.units as u

    return 1.0 if unit in (None, "Mpc") else float(u.Unit(unit).to(u.Mpc))


def _rad_per(unit: str | None) -> float:
    return 1.0 if unit in (None, "rad") else math.pi / 180.0


def planck18_dl(z: np.ndarray) -> np.ndarray:
    """Luminosity distance in Mpc from astropy's Planck18 (Planck Collaboration 2020, A&A 641,
    A6, table 2; astropy is the reference implementation)."""
    from astropy.cosmology import Planck18

    return np.asarray(Planck18.luminosity_distance(np.asarray(z, float)).to_value("Mpc"))


def chirp_mass(m1: np.ndarray, m2: np.ndarray) -> np.ndarray:
    """(m1 m2)^(3/5) / (m1 + m2)^(1/5): Cutler & Flanagan 1994, Phys. Rev. D 49, 2658, eq. 1.1
    (definition)."""
    return (m1 * m2) ** 0.6 / (m1 + m2) ** 0.2


@dataclass
class Col:
    """One input column: header name, quantity, unit text and one cell per row."""

    name: str
    field: str  # m1, m2, chi1, ..., event, weight, mchirp, junk
    unit: str | None
    cells: list[Any]  # float (clean number), str (written as is), None (null)

    @property
    def header(self) -> str:
        return self.name if self.unit is None else f"{self.name} [{self.unit}]"


@dataclass(frozen=True)
class Case:
    """A hostile input file and what the loader must make of it.

    outcome: ``"load"`` (must load), ``"error"`` (must raise a GwdeficitError) or
    ``"either"``. n_rows: data rows the loader must report as read (None: not known).
    must_reject: 1-based rows that must not be accepted. expected: row -> canonical values
    that an accepted row must carry (only rows that must be accepted are listed).
    maybe_reject: rows whose fate is not fixed (extreme or odd values), so that a BadRowsError
    under ``on_bad="error"`` is acceptable.
    """

    fmt: str
    payload: bytes
    tags: tuple[str, ...]
    outcome: str
    n_rows: int | None
    must_reject: frozenset[int] = frozenset()
    expected: Mapping[int, Mapping[str, Any]] = field(default_factory=dict)
    maybe_reject: frozenset[int] = frozenset()

    @property
    def filename(self) -> str:
        return "input" + SUFFIX[self.fmt]

    def __repr__(self) -> str:  # shown by hypothesis on failure
        head = self.payload[:600]
        return (
            f"Case(fmt={self.fmt!r}, tags={self.tags}, outcome={self.outcome!r}, "
            f"n_rows={self.n_rows}, must_reject={sorted(self.must_reject)}, payload={head!r})"
        )


# --------------------------------------------------------------------------------------------
# The clean table
# --------------------------------------------------------------------------------------------


@st.composite
def _clean_table(draw, fmt: str) -> tuple[list[Col], dict[str, np.ndarray], list[str]]:
    """Columns with clean cells, the true canonical values per row, and tags."""
    n = draw(st.integers(0, 7))
    tags: list[str] = []
    finite = {"allow_nan": False, "allow_infinity": False}
    m_a = np.array(draw(st.lists(st.floats(0.5, 150.0, **finite), min_size=n, max_size=n)))
    m_b = np.array(draw(st.lists(st.floats(0.5, 150.0, **finite), min_size=n, max_size=n)))
    # (subnormal redshifts give d_L = 0 in astropy: a relative check against 0 is undefined)
    zs = st.floats(0.0, 5.0, allow_subnormal=False, **finite)
    z = np.array(draw(st.lists(zs, min_size=n, max_size=n)))
    cols: list[Col] = []
    truth: dict[str, np.ndarray] = {"z": z}

    dist = draw(st.sampled_from(("z", "dl", "both")))
    detector = dist != "dl" and draw(st.booleans())
    for i, m in ((1, m_a), (2, m_b)):
        unit = draw(st.sampled_from(MASS_UNITS))
        if detector:
            name = draw(st.sampled_from(DET_SPELLINGS[i]))
            written = m * (1 + z) / _msun_per(unit)  # detector-frame mass = (1+z) m_source
        else:
            name = draw(st.sampled_from(M_SPELLINGS[i]))
            written = m / _msun_per(unit)
        cols.append(Col(name, f"m{i}", unit, [float(x) for x in written]))
    if detector:
        tags.append("detector-frame")

    spins = draw(st.booleans())
    if spins:
        for i in (1, 2):
            chi = np.array(draw(st.lists(st.floats(0.0, 1.0, **finite), min_size=n, max_size=n)))
            tilt = np.array(
                draw(st.lists(st.floats(0.0, math.pi, **finite), min_size=n, max_size=n))
            )
            truth[f"chi{i}"], truth[f"tilt{i}_rad"] = chi, tilt
            cols.append(
                Col(
                    draw(st.sampled_from(CHI_SPELLINGS[i])),
                    f"chi{i}",
                    None,
                    [float(x) for x in chi],
                )
            )
            unit = draw(st.sampled_from(ANGLE_UNITS))
            cols.append(
                Col(
                    draw(st.sampled_from(TILT_SPELLINGS[i])),
                    f"tilt{i}",
                    unit,
                    [float(t / _rad_per(unit)) for t in tilt],
                )
            )
    else:
        for k in ("chi1", "chi2", "tilt1_rad", "tilt2_rad"):
            truth[k] = np.zeros(n)

    if dist in ("z", "both"):
        cols.append(Col(draw(st.sampled_from(Z_SPELLINGS)), "z", None, [float(x) for x in z]))
    if dist in ("dl", "both"):
        unit = draw(st.sampled_from(LENGTH_UNITS))
        dl = planck18_dl(z) if n else np.zeros(0)
        cols.append(
            Col(
                draw(st.sampled_from(DL_SPELLINGS)),
                "dl",
                unit,
                [float(d / _mpc_per(unit)) for d in dl],
            )
        )
        truth["dl_given_mpc"] = dl
    tags.append(f"distance:{dist}")

    if draw(st.booleans()):
        alphabet = ASCII_ALPHABET if fmt in ("txt", "fits") else EVENT_ALPHABET
        labels = draw(st.lists(st.text(alphabet, min_size=1, max_size=6), min_size=n, max_size=n))
        cols.insert(draw(st.integers(0, len(cols))), Col("event", "event", None, labels))
        truth["event"] = np.array(labels, dtype=object)
        tags.append("event")
    if draw(st.booleans()):
        w = draw(st.lists(st.floats(0.0, 1e6, **finite), min_size=n, max_size=n))
        cols.append(Col("weight", "weight", None, w))
        truth["weight"] = np.array(w)

    # Canonical labelling: m1 >= m2, spins swapped with their bodies.
    swap = m_a < m_b
    truth["m1_msun"] = np.where(swap, m_b, m_a)
    truth["m2_msun"] = np.where(swap, m_a, m_b)
    for a, b in (("chi1", "chi2"), ("tilt1_rad", "tilt2_rad")):
        truth[a], truth[b] = np.where(swap, truth[b], truth[a]), np.where(swap, truth[a], truth[b])
    # Equal masses (to rounding of the unit conversions): either labelling is right.
    truth["_tie"] = np.abs(m_a - m_b) <= 1e-9 * np.maximum(m_a, m_b)
    truth["_n"] = np.array(n)
    return cols, truth, tags


# --------------------------------------------------------------------------------------------
# Mutations
# --------------------------------------------------------------------------------------------


def _numeric_cols(cols: list[Col]) -> list[int]:
    return [k for k, c in enumerate(cols) if c.field not in ("event", "junk")]


@st.composite
def hostile_cases(draw) -> Case:
    """A hostile input file with its oracle (see the module docstring)."""
    fmt = draw(st.sampled_from(FORMATS))
    cols, truth, tags = draw(_clean_table(fmt))
    n = int(truth["_n"])
    must_reject: set[int] = set()
    ambiguous: set[int] = set()  # rows whose fate the oracle does not fix
    outcome = "load"
    n_rows: int | None = n
    text = fmt in TEXT_FORMATS

    # -- redundant columns ----------------------------------------------------------------
    if n and draw(st.booleans()):
        mc = chirp_mass(truth["m1_msun"], truth["m2_msun"])
        cells = [float(x) for x in mc]
        if draw(st.booleans()):
            for r in draw(st.sets(st.integers(0, n - 1), min_size=1, max_size=n)):
                cells[r] *= 1 + draw(st.sampled_from((-1, 1))) * draw(st.floats(0.01, 0.5))
                must_reject.add(r + 1)
            tags.append("mchirp-disagrees")
        else:
            tags.append("mchirp-agrees")
        cols.append(Col("chirp_mass", "mchirp", None, cells))
    if n and "dl_given_mpc" in truth and any(c.field == "z" for c in cols) and draw(st.booleans()):
        k = next(i for i, c in enumerate(cols) if c.field == "dl")
        for r in draw(st.sets(st.integers(0, n - 1), min_size=1, max_size=n)):
            if truth["z"][r] > 1e-3:  # at dl ~ 0 a relative disagreement is not well defined
                cols[k].cells[r] *= 1 + draw(st.floats(0.01, 0.5))
                must_reject.add(r + 1)
        tags.append("dl-disagrees")

    # -- unknown columns (must be ignored) --------------------------------------------------
    if draw(st.booleans()):
        name = draw(
            st.text(st.characters(whitelist_categories=("Lo", "So", "Ll")), min_size=3, max_size=6)
            if fmt not in ("txt", "fits")
            else st.sampled_from(("notes", "comment_x", "qualityflag"))
        )
        from gwdeficit.io.aliases import match_name

        if match_name(name) is None and name.strip() == name:
            alphabet = ASCII_ALPHABET if fmt in ("txt", "fits") else EVENT_ALPHABET
            junk = draw(
                st.lists(
                    st.one_of(
                        st.text(alphabet, min_size=1, max_size=5), st.sampled_from(NON_NUMERIC[:6])
                    ),
                    min_size=n,
                    max_size=n,
                )
            )
            cols.insert(draw(st.integers(0, len(cols))), Col(name, "junk", None, junk))
            tags.append("unknown-column")

    # -- cell mutations -----------------------------------------------------------------------
    if n and draw(st.booleans()):
        mutated: set[tuple[int, int]] = set()
        for _ in range(draw(st.integers(1, 4))):
            r = draw(st.integers(0, n - 1))
            k = draw(st.sampled_from(_numeric_cols(cols)))
            if (r, k) in mutated:  # one change per cell, so the oracle stays exact
                continue
            mutated.add((r, k))
            kind = draw(
                st.sampled_from(
                    (
                        "non-numeric",
                        "missing",
                        "infinite",
                        "extreme",
                        "out-of-range",
                        "unicode-digit",
                    )
                )
            )
            col = cols[k]
            if kind == "non-numeric":
                pool = NON_NUMERIC
                if fmt == "txt":  # one whitespace-free token per cell
                    pool = tuple(t for t in NON_NUMERIC if " " not in t and "," not in t)
                token = draw(st.sampled_from(pool))
                if fmt == "fits":
                    token = "abc"
                col.cells[r] = token
                must_reject.add(r + 1)
            elif kind == "missing":
                if fmt == "txt":
                    col.cells[r] = "nan"
                elif text:
                    col.cells[r] = draw(st.sampled_from(MISSING))
                else:
                    col.cells[r] = draw(st.sampled_from((None, math.nan)))
                must_reject.add(r + 1)
            elif kind == "infinite":
                col.cells[r] = (
                    draw(st.sampled_from(INFINITE))
                    if text
                    else draw(st.sampled_from((math.inf, -math.inf)))
                )
                must_reject.add(r + 1)
            elif kind == "extreme":
                token = draw(st.sampled_from(EXTREME))
                col.cells[r] = token if text else float(token)
                ambiguous.add(r + 1)
            elif kind == "unicode-digit":
                if fmt in ("txt", "fits"):
                    continue
                col.cells[r] = draw(st.sampled_from(UNICODE_DIGITS))
                ambiguous.add(r + 1)
            else:  # out of the documented range, written in the column's own unit
                bad = {
                    "m1": -draw(st.floats(0.0, 10.0)),
                    "m2": -draw(st.floats(0.0, 10.0)),
                    "mchirp": -draw(st.floats(0.0, 10.0)),
                    "chi1": draw(st.floats(1.01, 5.0)),
                    "chi2": -draw(st.floats(0.01, 5.0)),
                    "tilt1": draw(st.floats(math.pi * 1.01, 10.0)),
                    "tilt2": -draw(st.floats(0.01, 3.0)),
                    "z": -draw(st.floats(0.01, 5.0)),
                    "dl": -draw(st.floats(1.0, 1e4)),
                    "weight": -draw(st.floats(0.01, 10.0)),
                }[col.field]
                if col.field.startswith("tilt"):
                    bad /= _rad_per(col.unit)
                col.cells[r] = bad
                must_reject.add(r + 1)
            tags.append(f"cell:{kind}:{col.field}")

    # -- header mutations -----------------------------------------------------------------
    header_kind = draw(
        st.sampled_from(("none",) * 6 + ("duplicate", "blank", "alias-clash", "unit"))
    )
    if header_kind == "duplicate" and len(cols) >= 2 and fmt not in ("fits", "ecsv"):
        a, b = draw(st.lists(st.integers(0, len(cols) - 1), min_size=2, max_size=2, unique=True))
        cols[b].name, cols[b].unit = cols[a].name, cols[a].unit
        outcome = "error"
        tags.append("header:duplicate")
    elif header_kind == "blank" and text:
        cols.insert(draw(st.integers(0, len(cols))), Col("", "junk", None, ["1"] * n))
        # (a whitespace header cannot show a blank name: the rows just hold one field more)
        outcome = "error" if fmt != "txt" else "either"
        tags.append("header:blank")
    elif header_kind == "alias-clash":
        k = next(i for i, c in enumerate(cols) if c.field == "m1")
        clash = next(s for s in M_SPELLINGS[1] + DET_SPELLINGS[1] if s != cols[k].name)
        if not clash.endswith(("_det", "_detector")) or "detector-frame" in tags:
            cols.append(Col(clash, "junk", cols[k].unit, list(cols[k].cells)))
            outcome = "error"
            tags.append("header:alias-clash")
    elif header_kind == "unit":
        k = next(i for i, c in enumerate(cols) if c.field == "m1")
        family = draw(st.sampled_from(("not-a-mass", "unparseable", "logarithmic")))
        if text or fmt in ("parquet", "feather"):
            pool = {
                "not-a-mass": NOT_A_MASS,
                "unparseable": UNPARSEABLE,
                "logarithmic": LOGARITHMIC,
            }
        else:  # astropy must be able to store the unit in the file
            pool = {
                "not-a-mass": NOT_A_MASS,
                "unparseable": ("furlong", "msun2x"),
                "logarithmic": ("mag",),
            }
        unit = draw(st.sampled_from(pool[family]))
        if fmt == "txt":
            unit = unit.replace(" ", "")
        if unit not in ("[unit]",) or text:
            cols[k].unit = unit
            outcome = "error"
            tags.append(f"unit:{family}:{unit}")

    # -- render ----------------------------------------------------------------------------
    if text:
        payload, file_tags, outcome, n_rows, row_fix = _render_text(draw, fmt, cols, n, outcome)
        tags += file_tags
        must_reject |= row_fix["reject"]
        ambiguous |= row_fix["ambiguous"]
    else:
        retype: dict[int, str] = {}
        if fmt in ("parquet", "feather") and draw(st.integers(0, 2)) == 0:
            kind = draw(st.sampled_from(ARROW_RETYPES))
            if kind in ("dictionary", "large_string", "float-dictionary"):
                pool = [
                    k
                    for k, c in enumerate(cols)
                    if (c.field == "event") == (kind == "dictionary")
                    and not any(isinstance(v, str) or v is None for v in c.cells)
                ]
                if pool:  # the same values in another Arrow type: must load unchanged
                    retype[draw(st.sampled_from(pool))] = kind
            elif kind.startswith("extra-"):  # an unknown column of an odd type: ignored
                cols.append(Col("qualityflag", "junk", None, [None] * n))
                retype[len(cols) - 1] = kind
            elif kind.startswith("event-"):
                pool = [k for k, c in enumerate(cols) if c.field == "event"]
                if pool:
                    retype[pool[0]] = kind
                    outcome = "either" if outcome == "load" else outcome
                    ambiguous |= set(range(1, n + 1))
            else:  # a mass column that holds no numbers at all
                retype[next(k for k, c in enumerate(cols) if c.field == "m1")] = kind
                must_reject = set()  # the new column replaces every m1 cell, mutated or not
                if outcome == "load":  # (the type is only seen once a batch holds rows)
                    outcome = "either" if kind == "huge-uint64" or n == 0 else "error"
                ambiguous |= set(range(1, n + 1))
            if retype:
                tags.append(f"arrow-type:{kind}")
        payload = _render_binary(fmt, cols, retype)
        if draw(st.integers(0, 3)) == 0:
            payload, what = _corrupt(draw, payload)
            tags.append(what)
            outcome, n_rows = "either", None
            must_reject, ambiguous = set(), set(range(1, n + 1))

    if outcome != "load":
        expected: dict[int, dict[str, Any]] = {}
    else:
        expected = {}
        for r in range(1, n + 1):
            if r in must_reject or r in ambiguous:
                continue
            row = {k: truth[k][r - 1] for k in truth if k not in ("_n", "dl_given_mpc")}
            row["_tie"] = bool(truth["_tie"][r - 1])
            if "dl_given_mpc" in truth:
                row["dl_given_mpc"] = truth["dl_given_mpc"][r - 1]
            expected[r] = row
    if n_rows is None:
        must_reject, ambiguous = set(), set()
    else:  # e.g. a header-only file keeps none of the drawn rows
        must_reject = {r for r in must_reject if r <= n_rows}
        expected = {r: v for r, v in expected.items() if r <= n_rows}
        ambiguous = {r for r in ambiguous if r <= n_rows} - must_reject
    return Case(
        fmt,
        payload,
        tuple(tags),
        outcome,
        n_rows,
        frozenset(must_reject),
        expected,
        frozenset(ambiguous),
    )


# --------------------------------------------------------------------------------------------
# Rendering
# --------------------------------------------------------------------------------------------

_NUMBER_STYLES = ("repr", "g17", "e16", "E16", "plus", "padded")


def _number(x: float, style: str) -> str:
    x = float(x)  # numpy scalars have another repr
    if style == "g17":
        return f"{x:.17g}"
    if style == "e16":
        return f"{x:.16e}"
    if style == "E16":
        return f"{x:.16E}"
    if style == "plus":
        return ("+" + repr(x)) if x >= 0 else repr(x)
    if style == "padded":
        return f"  {x!r} "
    return repr(x)


def _quote(token: str, delim: str) -> str:
    if any(ch in token for ch in (delim, '"', "\n", "\r")) or token != token.strip():
        return '"' + token.replace('"', '""') + '"'
    return token


def _render_text(draw, fmt, cols, n, outcome):
    delim = DELIM[fmt]
    styles = ("repr", "g17", "e16", "E16", "plus") if fmt == "txt" else _NUMBER_STYLES
    style = draw(st.sampled_from(styles))
    sep = "  " if fmt == "txt" else delim

    def cell(v: Any) -> str:
        if isinstance(v, float):
            token = _number(v, style)
            return token if style != "padded" else _quote(token, delim)
        token = "" if v is None else str(v)
        return token if fmt == "txt" else _quote(token, delim)

    header = sep.join(_quote(c.header, delim) if fmt != "txt" else c.header for c in cols)
    rows = [[cell(c.cells[r]) for c in cols] for r in range(n)]
    lines = [sep.join(cells) for cells in rows]
    fix: dict[str, set[int]] = {"reject": set(), "ambiguous": set()}
    tags: list[str] = []
    n_rows: int | None = n
    row_error = False

    row_kind = draw(st.sampled_from(("none",) * 5 + ("other-delimiter", "short", "extra")))
    if n and row_kind == "other-delimiter" and fmt != "txt" and len(cols) >= 3:
        r = draw(st.integers(0, n - 1))
        other = draw(st.sampled_from(tuple(d for d in (";", "\t", ",", "|") if d != delim)))
        raw = [
            _number(v, "repr") if isinstance(v, float) else ("" if v is None else str(v))
            for v in (c.cells[r] for c in cols)
        ]
        if not any(ch in tok for tok in raw for ch in (delim, '"', other)):
            lines[r] = other.join(raw)  # the row is one cell; the other columns are missing
            fix["reject"].add(r + 1)
            tags.append(f"row:delimiter:{other!r}")
    elif n and row_kind == "short" and fmt != "txt" and cols[-1].field != "junk":
        r = draw(st.integers(0, n - 1))
        lines[r] = sep.join(rows[r][:-1])  # the last column is missing in this row
        fix["reject"].add(r + 1)
        tags.append("row:short")
    elif n and row_kind == "extra":
        r = draw(st.integers(0, n - 1))
        lines[r] = lines[r] + sep + "99"
        row_error = True  # a row longer than the header: the loader refuses the file
        tags.append("row:extra-field")

    text = "\n".join([header, *lines]) + ("\n" if draw(st.booleans()) or not lines else "")
    if draw(st.booleans()):
        text = "# written by the fuzz strategies\n# second comment\n" + text
    file_kind = draw(
        st.sampled_from(
            ("plain",) * 8
            + (
                "bom",
                "crlf",
                "cr",
                "utf16",
                "latin1",
                "empty",
                "header-only",
                "comments-only",
                "truncated",
                "blank-lines",
            )
        )
    )
    if file_kind == "header-only":
        data = (header + "\n").encode("utf-8")
        n_rows = 0 if outcome == "load" else None
        fix = {"reject": set(), "ambiguous": set()}
        row_error = False
    elif file_kind == "bom":
        data = b"\xef\xbb\xbf" + text.encode("utf-8")
    elif file_kind == "crlf":
        data = text.replace("\n", "\r\n").encode("utf-8")
    elif file_kind == "cr":
        data = text.replace("\n", "\r").encode("utf-8")
    elif file_kind == "blank-lines":
        data = text.replace("\n", "\n\n").encode("utf-8")
    else:
        data = text.encode("utf-8")
    if row_error:
        outcome, n_rows = "error", None
    if file_kind == "utf16":
        data = text.encode("utf-16")
        outcome, n_rows = ("either" if outcome == "load" else outcome), None
    elif file_kind == "latin1":
        data = text.encode("latin-1", errors="replace")
        if data != text.encode("utf-8"):
            outcome, n_rows = ("either" if outcome == "load" else outcome), None
    elif file_kind == "empty":
        data = b""
        outcome, n_rows = "error", None
    elif file_kind == "comments-only":
        data = b"# nothing but a comment\n#\n"
        outcome, n_rows = "error", None
    elif file_kind == "truncated":
        data = data[: draw(st.integers(0, max(len(data) - 1, 0)))]
        outcome, n_rows = "either", None
        fix = {"reject": set(), "ambiguous": set(range(1, n + 1))}
    tags.append(f"file:{file_kind}")
    return data, tags, outcome, n_rows, fix


ARROW_RETYPES = (
    "dictionary",
    "large_string",
    "float-dictionary",
    "extra-list",
    "extra-struct",
    "extra-binary",
    "extra-date",
    "extra-bool",
    "event-list",
    "event-struct",
    "event-invalid-utf8",
    "bool",
    "date",
    "timestamp",
    "list",
    "struct",
    "binary",
    "huge-uint64",
)


def _retyped(kind: str, c: Col, n: int):
    """Column ``c`` as another Arrow type (see :data:`ARROW_RETYPES`)."""
    import pyarrow as pa

    if kind == "dictionary":
        return pa.array([str(v) for v in c.cells], type=pa.string()).dictionary_encode()
    if kind == "large_string":
        return pa.array([repr(float(v)) for v in c.cells], type=pa.large_string())
    if kind == "float-dictionary":
        return pa.array([float(v) for v in c.cells], type=pa.float64()).dictionary_encode()
    base = kind.split("-", 1)[1] if kind.startswith(("extra-", "event-")) else kind
    if base == "list":
        return pa.array([[i, i + 1] for i in range(n)])
    if base == "struct":
        return pa.array([{"a": i, "b": "x"} for i in range(n)])
    if base == "binary":
        return pa.array([b"\x00\x01" for _ in range(n)], type=pa.binary())
    if base == "invalid-utf8":
        return pa.array([b"\xff\xfe" + bytes([65 + i % 26]) for i in range(n)], type=pa.binary())
    if base == "date":
        return pa.array(list(range(n)), type=pa.date32())
    if base == "timestamp":
        return pa.array(list(range(n)), type=pa.timestamp("s"))
    if base == "bool":
        return pa.array([i % 2 == 0 for i in range(n)], type=pa.bool_())
    if base == "huge-uint64":
        return pa.array([2**64 - 1 - i for i in range(n)], type=pa.uint64())
    raise ValueError(kind)


def _render_binary(fmt: str, cols: list[Col], retype: Mapping[int, str] | None = None) -> bytes:
    import pyarrow as pa

    arrays, names = [], []
    retype = retype or {}
    for k, c in enumerate(cols):
        if k in retype:
            arr = _retyped(retype[k], c, len(c.cells))
        elif c.field in ("event", "junk") or any(isinstance(v, str) for v in c.cells):
            arr = pa.array(
                [
                    None if v is None else (repr(v) if isinstance(v, float) else str(v))
                    for v in c.cells
                ],
                type=pa.string(),
            )
        else:
            arr = pa.array([v for v in c.cells], type=pa.float64())
        arrays.append(arr)
        names.append(c.header if fmt in ("parquet", "feather") else c.name)
    table = pa.Table.from_arrays(arrays, names=names)
    buf = io.BytesIO()
    if fmt == "parquet":
        import pyarrow.parquet as pq

        pq.write_table(table, buf)
    elif fmt == "feather":
        import pyarrow.feather as feather

        feather.write_feather(table, buf)
    else:
        import astropy.units as u
        from astropy.table import MaskedColumn, Table

        t = Table()
        for c, arr in zip(cols, arrays, strict=True):
            values = arr.to_numpy(zero_copy_only=False)
            if pa.types.is_string(arr.type):
                mask = np.array([v is None for v in values], dtype=bool)
                data = np.array(["" if v is None else v for v in values], dtype=str)
                t[c.name] = MaskedColumn(data, mask=mask) if mask.any() else data
            else:
                t[c.name] = np.asarray(values, dtype=float)
            if c.unit is not None:
                t[c.name].unit = u.Unit(c.unit, parse_strict="silent")
        if fmt == "fits":
            import warnings

            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                t.write(buf, format="fits")
        else:
            sbuf = io.StringIO()
            t.write(sbuf, format="ascii.ecsv")
            buf.write(sbuf.getvalue().encode("utf-8"))
    return buf.getvalue()


def _corrupt(draw, payload: bytes) -> tuple[bytes, str]:
    if not payload:
        return payload, "corrupt:none"
    if draw(st.booleans()):
        cut = draw(st.integers(0, len(payload) - 1))
        return payload[:cut], f"corrupt:truncated@{cut}/{len(payload)}"
    data = bytearray(payload)
    flips = draw(
        st.lists(
            st.tuples(st.integers(0, len(data) - 1), st.integers(1, 255)), min_size=1, max_size=8
        )
    )
    for pos, x in flips:
        data[pos] ^= x
    return bytes(data), f"corrupt:flipped{len(flips)}"
