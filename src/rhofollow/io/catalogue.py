"""Read and validate candidate catalogues (CSV, ECSV, VOTable).

This module is the project's input boundary. :func:`read_catalogue` turns a file into a
:class:`~rhofollow.core.types.CatalogueResult`: the rows that passed validation become
:class:`~rhofollow.core.types.Target` records whose values are already in the units their
canonical column names state (``period_d`` in days, ``t14_h`` in hours, ``rho_star_cgs`` in g/cm^3,
...); every problem becomes a :class:`~rhofollow.core.types.RowIssue` naming the file, the 1-based
data-row number, the column and the reason. A bad row is skipped; every good row is kept.

Only problems with the file as a whole (missing, unreadable, no data rows, no ``name`` column,
ambiguous columns) raise, as :class:`CatalogueError`.

Column names are case-insensitive and may carry surrounding spaces. In ECSV and VOTable files a
column may carry a unit instead of the name suffix (``period`` with unit ``d``), or carry a unit
that differs from its suffix (``period_d`` in ``h``); values are converted with astropy.units.
Every numeric column ``X`` may have ``X_err`` (symmetric 1-sigma) or ``X_errlo`` and ``X_errhi``.
"""
from __future__ import annotations

import csv
import math
import os
import re
import warnings
from dataclasses import dataclass, field
from pathlib import Path

import astropy.units as u

from rhofollow.core.types import CatalogueResult, Measurement, RowIssue, Target
from rhofollow.errors import InputError

__all__ = ["CatalogueError", "ColumnSpec", "COLUMNS", "read_catalogue", "SUPPORTED_EXTENSIONS",
           "PHYSICAL_RANGES"]


class CatalogueError(InputError, ValueError):
    """The catalogue file as a whole cannot be used (missing, unreadable, no rows, no name column).

    ``str(exc)`` is one sentence that names the file.
    """

    def __init__(self, source: str | os.PathLike, reason: str):
        self.source = str(source)
        self.reason = reason
        super().__init__(f"{self.source}: {reason}", file=self.source)


# ---------------------------------------------------------------------------------------------
# Column specification
# ---------------------------------------------------------------------------------------------

#: Parts per million, defined locally (not registered in astropy's global unit registry).
PPM = u.def_unit("ppm", 1e-6 * u.dimensionless_unscaled)
_PPT = u.def_unit("ppt", 1e-3 * u.dimensionless_unscaled)
_LOCAL_UNITS = {"ppm": PPM, "ppt": _PPT}
_LOGG_UNIT = u.dex(u.cm / u.s**2)


@dataclass(frozen=True)
class ColumnSpec:
    """A canonical catalogue column: its name, the name without unit suffix, and its unit.

    ``unit`` is None for pure numbers (a/R*, b, Rp/R*, e, fractions).
    """

    name: str
    stem: str
    unit: u.UnitBase | None
    description: str


def _spec(name, unit, description, stem=None):
    if stem is None:
        stem = name.rsplit("_", 1)[0] if unit is not None else name
    return ColumnSpec(name, stem, unit, description)


_GCC = u.g / u.cm**3

#: The numeric catalogue columns (``name`` is the one text column), in DESIGN.md order.
COLUMNS: dict[str, ColumnSpec] = {c.name: c for c in [
    _spec("period_d", u.d, "orbital period"),
    _spec("t0_bjd", u.d, "mid-transit epoch, BJD_TDB"),
    _spec("ra_deg", u.deg, "right ascension (ICRS)"),
    _spec("dec_deg", u.deg, "declination (ICRS)"),
    _spec("a_rs", None, "scaled semi-major axis a/R* from a circular-orbit fit"),
    _spec("b", None, "impact parameter"),
    _spec("rp_rs", None, "radius ratio Rp/R*"),
    _spec("t14_h", u.h, "total transit duration T14"),
    _spec("t23_h", u.h, "full transit duration T23"),
    _spec("depth_ppm", PPM, "transit depth"),
    _spec("rho_circ_cgs", _GCC, "circular-orbit stellar density"),
    _spec("rho_star_cgs", _GCC, "independent stellar density"),
    _spec("mstar_msun", u.M_sun, "stellar mass"),
    _spec("rstar_rsun", u.R_sun, "stellar radius"),
    _spec("logg_cgs", _LOGG_UNIT, "stellar surface gravity log10(g / cm s^-2)"),
    _spec("teff_k", u.K, "stellar effective temperature"),
    _spec("feh_dex", u.dex, "stellar metallicity [Fe/H]"),
    _spec("vmag", u.mag, "V magnitude"),
    _spec("ecc", None, "known orbital eccentricity"),
    _spec("omega_deg", u.deg, "known argument of periastron (RV convention)"),
    _spec("mp_mearth", u.M_earth, "known planet mass"),
    _spec("contam_frac", None, "known fraction of third light in the aperture"),
    _spec("companion_rho_cgs", _GCC, "density of a possible other host star"),
    _spec("companion_flux_frac", None, "flux fraction of the possible other host star"),
    _spec("jitter_ms", u.m / u.s, "expected RV jitter"),
]}

#: Stems that may appear without a unit and then mean the suffix's (universal) convention.
_UNITLESS_STEM_OK = {"logg", "teff", "feh"}
_ERR_SUFFIXES = ("_errlo", "_errhi", "_err")

REQUIRED = ("period_d", "t0_bjd")
COORDS = ("ra_deg", "dec_deg")

#: Extension (lower case) -> astropy reader format ("csv" is read by this module).
SUPPORTED_EXTENSIONS = {".csv": "csv", ".ecsv": "ascii.ecsv", ".vot": "votable",
                        ".xml": "votable", ".votable": "votable"}

# Guard bands for warnings (row kept). Chosen ranges, common practice, no source.
TORRES_TEFF_RANGE = (4300.0, 10000.0)   # Torres et al. 2010 calibrated on stars above ~0.6 M_sun
_EXTREME = {
    "period_d": (0.1, 1000.0),
    "rho_star_cgs": (1e-3, 150.0),
    "rho_circ_cgs": (1e-3, 150.0),
    "mstar_msun": (0.08, 5.0),
    "rstar_rsun": (0.08, 20.0),
    "logg_cgs": (2.0, 5.5),
    "feh_dex": (-2.5, 1.0),
    "vmag": (-1.5, 20.0),
    "rp_rs": (0.0, 0.3),
}
_T0_RANGE = (2.0e6, 2.8e6)   # a full BJD (2,000,000 is 811 BC; 2,800,000 is AD 2953)

#: Physical ranges (canonical units): a value outside is a row error (``README.md`` lists them
#: with the reasons). Generous on purpose: brown-dwarf hosts to giants, periods from hours to about
#: a century. Each entry: (low, high, low_inclusive, high_inclusive, where the limit comes from).
_RHO_MAX = 1000.0      # g/cm^3: densest brown dwarfs ~250 (0.075 M_sun in 0.075 R_sun); white dwarfs out of scope
_RHO_MIN = 1.0e-6      # g/cm^3: a 1 M_sun giant of 100 R_sun has 1.4e-6
PHYSICAL_RANGES: dict[str, tuple[float, float, bool, bool, str]] = {
    "period_d": (0.004, 36525.0, True, True,
                 "low: P at a/R* = 1 around a 1000 g/cm^3 host, P = sqrt(3 pi / (G rho)) (Kepler's third "
                 "law); high: 100 years, longer than any transit survey can phase (common practice, no source)"),
    "a_rs": (1.0, 1.0e5, False, True,
             "low: the orbit must lie outside the star; high: a/R* = (G rho P^2 / 3 pi)^(1/3) = 4e4 for "
             "1000 g/cm^3 at 100 years (Kepler's third law)"),
    "b": (0.0, 2.0, True, True, "a transit needs b < 1 + Rp/R* <= 2 (geometry)"),
    "rp_rs": (1.0e-4, 1.0, True, False,
              "low: depth (Rp/R*)^2 = 0.01 ppm, far below any photometric precision; high: the "
              "occulter must be smaller than the star (common practice, no source)"),
    "depth_ppm": (0.01, 1.0e6, True, False, "as rp_rs: 0.01 ppm to a full eclipse"),
    "t14_h": (0.01, 2.0e4, True, True,
              "low: 36 s; high: T14 ~ P (1 + k) / (pi a/R*) = 1.4e4 h at 100 years around a "
              "1e-6 g/cm^3 giant (circular-orbit duration)"),
    "t23_h": (0.001, 2.0e4, True, True,
              "low: 3.6 s, below any photometric cadence (a shorter flat bottom is a grazing "
              "transit: leave t23_h out); high: as t14_h"),
    "rho_circ_cgs": (1.0e-9, 1.0e6, True, True,
                     "the stellar range widened by ((1 + e sin w) / sqrt(1 - e^2))^3 for e up to "
                     "0.99 (Kipping 2010 photo-eccentric factor) and by blends"),
    "rho_star_cgs": (_RHO_MIN, _RHO_MAX, True, True,
                     "1e-6 (a 100 R_sun giant) to 1000 g/cm^3 (above the densest brown dwarfs)"),
    "companion_rho_cgs": (_RHO_MIN, _RHO_MAX, True, True, "as rho_star_cgs"),
    "mstar_msun": (0.01, 150.0, True, True,
                   "the deuterium-burning limit (~13 Jupiter masses) to the most massive stars"),
    "rstar_rsun": (0.04, 1000.0, True, True,
                   "below the smallest brown dwarfs (~0.08 R_sun) to red supergiants"),
    "logg_cgs": (-1.0, 7.0, True, True,
                 "supergiants (log g ~ 0) to above old brown dwarfs (~5.5), below white dwarfs (~8) "
                 "(common practice, no source)"),
    "teff_k": (250.0, 60000.0, True, True, "the coolest Y dwarfs to O stars (common practice, no source)"),
    "feh_dex": (-5.0, 1.5, True, True,
                "the most metal-poor known stars to the most metal-rich (common practice, no source)"),
    "vmag": (-2.0, 30.0, True, True, "brighter than Sirius (-1.46) to beyond any telescope's RV reach"),
    "omega_deg": (-360.0, 720.0, True, True, "an angle more than a turn outside [0, 360) is a typo"),
    "mp_mearth": (1.0e-3, 3.0e4, True, True,
                  "a tenth of the Moon's mass to the hydrogen-burning limit (~80 Jupiter masses)"),
    "jitter_ms": (0.0, 1000.0, True, True,
                  "pulsating giants reach hundreds of m/s (common practice, no source)"),
}
#: Largest 1-sigma error accepted per column: the width of its physical range (an error larger
#: than the whole range says nothing and overflows the draws). t0_bjd: one longest period.
_ERROR_MAX = {c: hi - lo for c, (lo, hi, *_r) in PHYSICAL_RANGES.items()}
_ERROR_MAX.update({"t0_bjd": 36525.0, "ra_deg": 360.0, "dec_deg": 180.0, "ecc": 1.0,
                   "contam_frac": 1.0, "companion_flux_frac": 1.0})

#: Characters refused in target names: C0 and C1 control characters (NUL, tab, CR, LF, ...),
#: DEL, and the Unicode line and paragraph separators; they break files, tables and terminals.
_CONTROL = re.compile("[\x00-\x1f\x7f-\x9f\u2028\u2029]")


# ---------------------------------------------------------------------------------------------
# Raw table: what every reader produces
# ---------------------------------------------------------------------------------------------

@dataclass
class _RawColumn:
    header: str                      # as written in the file, stripped
    unit: object                     # astropy unit, UnrecognizedUnit, or None
    cells: list                      # one entry per data row; None = blank
    problem: str = ""                # column-level problem (every non-blank cell then fails)


@dataclass
class _RawTable:
    columns: list[_RawColumn]
    n_rows: int
    row_problems: dict[int, list[tuple[str, str]]] = field(default_factory=dict)
    row_notes: dict[int, list[tuple[str, str]]] = field(default_factory=dict)
    file_notes: list[str] = field(default_factory=list)


def _read_csv(path: Path, source: str) -> _RawTable:
    """Read a comma-separated file; every cell stays text. Lines starting with '#' are comments."""
    try:
        with open(path, newline="", encoding="utf-8-sig") as fh:
            lines = [row for row in csv.reader(fh)]
    except UnicodeDecodeError:
        raise CatalogueError(source, "is not UTF-8 text (is it a spreadsheet or binary file? "
                             "export it as CSV)") from None
    except csv.Error as exc:
        raise CatalogueError(source, f"is not a readable CSV file ({exc})") from None
    rows = [r for r in lines if any(c.strip() for c in r) and not r[0].lstrip().startswith("#")]
    if not rows:
        raise CatalogueError(source, "is empty (no header row)")
    header = [h.strip() for h in rows[0]]
    # Drop trailing empty header cells (a trailing comma on the header line).
    while header and header[-1] == "":
        header.pop()
    if len(header) == 1:
        for sep, label in ((";", "semicolons"), ("\t", "tabs")):
            if sep in header[0]:
                raise CatalogueError(source, f"the header uses {label} to separate columns; "
                                     "CSV catalogues must be comma-separated")
    data = rows[1:]
    n_cols = len(header)
    cols = [_RawColumn(h, None, []) for h in header]
    table = _RawTable(cols, len(data))
    for i, r in enumerate(data, start=1):
        cells = list(r)
        if len(cells) > n_cols:
            extra = [c for c in cells[n_cols:] if c.strip()]
            if extra:
                table.row_problems.setdefault(i, []).append(
                    ("(whole row)", f"has {len(cells)} cells but the header has {n_cols} columns"))
            cells = cells[:n_cols]
        elif len(cells) < n_cols:
            table.row_notes.setdefault(i, []).append(
                ("", f"has {len(cells)} cells but the header has {n_cols} columns; "
                     "the missing cells are treated as blank"))
            cells = cells + [""] * (n_cols - len(cells))
        for c, v in zip(cols, cells):
            v = v.strip()
            c.cells.append(v if v else None)
    return table


def _read_astropy(path: Path, source: str, fmt: str) -> _RawTable:
    """Read ECSV or VOTable through astropy.table; astropy's warnings become file-level notes."""
    from astropy.table import Table
    from astropy.time import Time

    label = "ECSV" if fmt == "ascii.ecsv" else "VOTable"
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        try:
            t = Table.read(path, format=fmt)
        except Exception as exc:  # noqa: BLE001 - any reader failure is a file-level problem
            t = _ecsv_as_text(path) if fmt == "ascii.ecsv" else None
            if t is None:
                msg = str(exc).strip().splitlines()[0] if str(exc).strip() else type(exc).__name__
                raise CatalogueError(source, f"cannot be read as {label} ({msg})") from None
    notes = []
    for w in caught:
        if issubclass(w.category, u.UnitsWarning):
            continue  # unrecognised units are judged per column (ppm is known here)
        text = str(w.message).strip().splitlines()[0] if str(w.message).strip() else ""
        if text and text not in notes:
            notes.append(f"{label} reader: {text}")
    cols = []
    n = len(t)
    for name in t.colnames:
        col = t[name]
        header = str(name).strip()
        if isinstance(col, Time):
            try:
                cells = [float(x) for x in col.tdb.jd]
            except Exception as exc:  # noqa: BLE001
                cols.append(_RawColumn(header, None, [None] * n,
                                       f"time column cannot be converted to BJD_TDB ({exc})"))
                continue
            cols.append(_RawColumn(header, u.d, cells))
            continue
        if getattr(col, "ndim", 1) > 1:
            cols.append(_RawColumn(header, None, [None] * n,
                                   "has more than one value per row"))
            continue
        unit = getattr(col, "unit", None)
        cells = []
        for v in col.tolist():
            if isinstance(v, bytes):
                v = v.decode("utf-8", "replace")
            if isinstance(v, str):
                v = v.strip() or None
            cells.append(v)
        cols.append(_RawColumn(header, unit, cells))
    return _RawTable(cols, n, file_notes=notes)


_ECSV_NUMERIC = re.compile(r"datatype: *(float\d*|int\d*|uint\d*)\b")


def _ecsv_as_text(path: Path):
    """Re-read an ECSV whose numeric cells do not all parse, with those columns as text.

    The header keeps the units; each bad cell then becomes a row-level issue instead of sinking
    the whole file. Returns None when the file still cannot be read.
    """
    from astropy.table import Table

    try:
        lines = path.read_text(encoding="utf-8").split("\n")
        fixed = [_ECSV_NUMERIC.sub("datatype: string", ln) if ln.startswith("# - {") else ln
                 for ln in lines]
        return Table.read("\n".join(fixed), format="ascii.ecsv")
    except Exception:  # noqa: BLE001 - the caller reports the original failure
        return None


# ---------------------------------------------------------------------------------------------
# Column resolution and unit conversion
# ---------------------------------------------------------------------------------------------

@dataclass
class _Bound:
    """A file column resolved to a canonical column (value or one of its error columns)."""

    raw: _RawColumn
    canon: str
    kind: str          # "value", "err", "errlo", "errhi"
    convert: object = None     # callable float -> float
    factor: float = 1.0        # error scale factor
    problem: str = ""


def _norm(header: str) -> str:
    return header.strip().lstrip("\ufeff").strip().lower()


def _resolve_name(key: str) -> tuple[str | None, str, bool]:
    """Map a normalised header to (canonical, kind, by_stem). canonical None = unknown."""
    kind = "value"
    base = key
    for suf in _ERR_SUFFIXES:
        if key.endswith(suf) and len(key) > len(suf):
            base, kind = key[: -len(suf)], suf[1:]
            break
    if base in COLUMNS:
        return base, kind, False
    for spec in COLUMNS.values():
        if spec.stem == base and spec.stem != spec.name:
            return spec.name, kind, True
    return None, kind, False


def _is_dimless(unit) -> bool:
    return unit is not None and not isinstance(unit, u.UnrecognizedUnit) \
        and not isinstance(unit, u.FunctionUnitBase) and unit == u.dimensionless_unscaled


def _as_unit(unit):
    """Turn a unit read from a file into an astropy unit (or raise ValueError with a reason)."""
    if isinstance(unit, u.UnrecognizedUnit):
        local = _LOCAL_UNITS.get(str(unit).strip().lower())
        if local is None:
            raise ValueError(f"unit '{unit}' is not a recognised unit")
        return local
    if isinstance(unit, str):
        local = _LOCAL_UNITS.get(unit.strip().lower())
        if local is not None:
            return local
        return u.Unit(unit)
    return unit


def _converter(unit, spec: ColumnSpec, by_stem: bool, label: str):
    """Return (convert, err_factor) taking a value in ``unit`` to the spec's unit.

    ``err_factor`` is None when an error in that unit cannot be scaled linearly. Raises ValueError
    with a reason when the unit cannot convert at all.
    """
    target = spec.unit
    ident = (lambda x: x), 1.0
    if unit is None:
        if by_stem and spec.stem not in _UNITLESS_STEM_OK:
            raise ValueError(f"column '{label}' has no unit; name it '{spec.name}' or give it a "
                             f"unit convertible to {_unit_text(spec)}")
        return ident
    unit = _as_unit(unit)
    if _is_dimless(unit):
        # A suffixed name with an empty unit means the suffix's unit; so do log/mag columns.
        if target is None or not by_stem or isinstance(target, u.FunctionUnitBase):
            return ident
    if target is None:
        target = u.dimensionless_unscaled
    if spec.name == "logg_cgs" and unit == u.dex:
        return ident  # plain "dex" on log g: the cgs convention
    try:
        f0 = unit.to(target, 0.0, equivalencies=u.temperature()) \
            if not isinstance(unit, u.FunctionUnitBase) else None
        f1 = unit.to(target, 1.0, equivalencies=u.temperature())
    except (u.UnitsError, ValueError, TypeError):
        raise ValueError(f"unit '{unit}' of column '{label}' cannot be converted to "
                         f"{_unit_text(spec)}") from None

    def convert(x, _unit=unit, _target=target):
        return float(_unit.to(_target, x, equivalencies=u.temperature()))

    if isinstance(unit, u.FunctionUnitBase) and isinstance(target, u.FunctionUnitBase):
        factor = 1.0 if type(unit) is type(target) else None  # dex -> dex: an offset only
    elif isinstance(unit, u.FunctionUnitBase):
        factor = None
    else:
        factor = float(f1 - f0) if f0 is not None else None
        if not (factor is not None and math.isfinite(factor) and factor > 0):
            factor = None
    return convert, factor


def _unit_text(spec: ColumnSpec) -> str:
    if spec.unit is None:
        return "a pure number"
    if spec.unit is _LOGG_UNIT:
        return "dex(cm/s2)"
    return f"'{spec.unit}'"


def _bind_columns(table: _RawTable, source: str, issues: list[RowIssue]):
    """Resolve headers; return (name column, {canon: {kind: _Bound}}). Raises on header faults."""
    name_col = None
    bound: dict[str, dict[str, _Bound]] = {}
    seen: dict[tuple[str, str], str] = {}
    unknown = []
    for col in table.columns:
        key = _norm(col.header)
        if key == "":
            if any(c is not None for c in col.cells):
                unknown.append("(unnamed column)")
            continue
        if key == "name":
            if name_col is not None:
                raise CatalogueError(source, f"has two name columns ('{name_col.header}' and "
                                     f"'{col.header}')")
            name_col = col
            continue
        canon, kind, by_stem = _resolve_name(key)
        if canon is None:
            unknown.append(col.header)
            continue
        if (canon, kind) in seen:
            target = canon if kind == "value" else f"{canon}_{kind}"
            raise CatalogueError(source, f"columns '{seen[(canon, kind)]}' and '{col.header}' "
                                 f"both give {target}; keep one of them")
        seen[(canon, kind)] = col.header
        b = _Bound(col, canon, kind)
        spec = COLUMNS[canon]
        if col.problem:
            b.problem = col.problem
        else:
            try:
                b.convert, b.factor = _converter(col.unit, spec, by_stem, col.header)
            except ValueError as exc:
                b.problem = str(exc)
        bound.setdefault(canon, {})[kind] = b
    if name_col is None:
        raise CatalogueError(source, "has no 'name' column (column names found: "
                             + ", ".join(repr(c.header) for c in table.columns[:12])
                             + (", ..." if len(table.columns) > 12 else "") + ")")
    # Error columns inherit the value column's unit when they carry none of their own.
    for canon, kinds in bound.items():
        val = kinds.get("value")
        for kind, b in kinds.items():
            if kind == "value":
                continue
            if val is None:
                if not b.problem:
                    issues.append(RowIssue(source, 0, b.raw.header,
                                           f"error column without its value column '{canon}'; "
                                           "ignored", severity="warning"))
                b.problem = b.problem or "ignored"
                continue
            if b.raw.unit is None and not b.problem and not val.problem:
                b.factor = val.factor
            if not b.problem and b.factor is None:
                b.problem = (f"errors in unit '{b.raw.unit or val.raw.unit}' of column "
                             f"'{b.raw.header}' cannot be scaled to {_unit_text(COLUMNS[canon])}")
    for canon, kinds in bound.items():
        for kind, b in kinds.items():
            if b.problem and b.problem != "ignored":
                issues.append(RowIssue(source, 0, b.raw.header, b.problem))
    if unknown:
        issues.append(RowIssue(source, 0, "", "unknown columns ignored: " + ", ".join(unknown),
                               severity="warning"))
    return name_col, bound


# ---------------------------------------------------------------------------------------------
# Cells
# ---------------------------------------------------------------------------------------------

_SEXAGESIMAL = re.compile(r"^[+-]?\d{1,3}\s*[:hd\u00b0 ]\s*\d{1,2}\s*[:m' ]\s*\d{1,2}(\.\d*)?\s*[s\"]?$")


def _parse_number(v) -> tuple[float | None, str]:
    """Return (value, "") or (None, reason). ``v`` is not blank."""
    if isinstance(v, bool):
        return None, f"'{v}' is not a number"
    if isinstance(v, (int, float)) or hasattr(v, "__float__") and not isinstance(v, str):
        try:
            x = float(v)
        except (TypeError, ValueError, OverflowError):
            return None, f"'{v}' is not a number"
    else:
        s = str(v).strip()
        try:
            x = float(s.replace("_", "x"))  # no digit-group underscores: '1_0' is text
        except (ValueError, OverflowError):
            shown = s if len(s) <= 40 else s[:37] + "..."
            hint = ""
            if _SEXAGESIMAL.match(s):
                hint = " (sexagesimal is not accepted; give decimal degrees)"
            return None, f"'{shown}' is not a number{hint}"
    if not math.isfinite(x):
        return None, f"value {v!s} is not finite (NaN or infinity)"
    return x, ""


def _text(v) -> str:
    if v is None:
        return ""
    if isinstance(v, float) and v.is_integer():
        return str(int(v))
    return str(v).strip()


# ---------------------------------------------------------------------------------------------
# Row validation
# ---------------------------------------------------------------------------------------------

_POSITIVE = {
    "period_d": "the period", "t14_h": "a duration", "t23_h": "a duration",
    "rho_circ_cgs": "a density", "rho_star_cgs": "a density", "companion_rho_cgs": "a density",
    "mstar_msun": "a mass", "rstar_rsun": "a radius", "mp_mearth": "a mass",
    "teff_k": "a temperature",
}
_UNIT_INTERVAL_HALF_OPEN = {"ecc": "the eccentricity", "contam_frac": "a light fraction",
                            "companion_flux_frac": "a light fraction"}
_INF = math.inf

#: The definition checks, in the order they are reported: (column, low, high, low inclusive,
#: high inclusive, reason template with {x} the value). They run before :data:`PHYSICAL_RANGES`.
_DEFINITION_RANGES: list[tuple[str, float, float, bool, bool, str]] = (
    [(c, 0.0, _INF, False, True, f"must be positive ({what}), got {{x:g}}") for c, what in _POSITIVE.items()]
    + [(c, 0.0, 1.0, True, False, f"must be in [0, 1) ({what}), got {{x:g}}")
       for c, what in _UNIT_INTERVAL_HALF_OPEN.items()]
    + [("rp_rs", 0.0, 1.0, False, False, "must be in (0, 1), got {x:g}"),
       ("depth_ppm", 0.0, 1e6, False, False, "must be in (0, 1e6) ppm, got {x:g}"),
       ("b", 0.0, _INF, True, True, "must not be negative, got {x:g}"),
       ("ra_deg", 0.0, 360.0, True, False, "must be in [0, 360) degrees, got {x:g}"),
       ("dec_deg", -90.0, 90.0, True, True, "must be in [-90, 90] degrees, got {x:g}"),
       ("jitter_ms", 0.0, _INF, True, True, "must not be negative, got {x:g}"),
       ("t0_bjd", _T0_RANGE[0], _T0_RANGE[1], True, True,
        "{x:.12g} is not a full BJD_TDB (expected about 2.4e6 to 2.5e6); add back any offset such as "
        "2450000 or 2457000")])


def _physical_reason(canon: str, lo: float, hi: float, lo_in: bool, hi_in: bool) -> str:
    """Reason template ({x} the value) for a value outside ``PHYSICAL_RANGES[canon]``."""
    unit = COLUMNS[canon].unit
    shown = "" if unit is None or unit is _LOGG_UNIT else f" {unit}"
    return (f"{{x:g}} is outside the physical range {'[' if lo_in else '('}{lo:g}, "
            f"{hi:g}{']' if hi_in else ')'}{shown}")


def _drop_outside(v: dict[str, float], bad, canon: str, lo: float, hi: float, lo_in: bool, hi_in: bool,
                  reason: str) -> None:
    """Report ``reason`` (formatted with x = the value) on ``canon`` and drop its value when it lies
    outside the interval, so no later cross-check uses it. Nothing happens when the value is absent."""
    if canon not in v:
        return
    x = v[canon]
    if not ((x >= lo if lo_in else x > lo) and (x <= hi if hi_in else x < hi)):
        bad(canon, reason.format(x=x))
        del v[canon]


def _check_row(v: dict[str, float], given: set[str], label, require_coords: bool,
               uncertainties: dict[str, tuple[float, float]] | None = None):
    """Return (errors, warnings) as lists of (column label, reason). ``v`` holds parsed values,
    ``uncertainties`` their (lower, upper) 1-sigma errors where given."""
    errs: list[tuple[str, str]] = []
    warns: list[tuple[str, str]] = []

    def bad(canon, reason):
        errs.append((label(canon), reason))

    for canon in REQUIRED + (COORDS if require_coords else ()):
        if canon not in given:
            bad(canon, "is required but missing")

    # definitions first, then the physical ranges; a value that fails is dropped from every later check
    for canon, lo, hi, lo_in, hi_in, reason in _DEFINITION_RANGES:
        _drop_outside(v, bad, canon, lo, hi, lo_in, hi_in, reason)
    for canon, (lo, hi, lo_in, hi_in, _why) in PHYSICAL_RANGES.items():
        _drop_outside(v, bad, canon, lo, hi, lo_in, hi_in, _physical_reason(canon, lo, hi, lo_in, hi_in))

    # Geometry cross-checks, only between values that passed their own checks.
    k = v.get("rp_rs")
    if k is None and "depth_ppm" in v:
        k = math.sqrt(v["depth_ppm"] * 1e-6)
    if "rp_rs" in v and "depth_ppm" in v and v["rp_rs"] ** 2 > 0:  # (a tiny rp_rs can underflow)
        ratio = v["depth_ppm"] * 1e-6 / v["rp_rs"] ** 2
        if not (0.5 <= ratio <= 2.0):
            warns.append((label("depth_ppm"), f"depth_ppm is {ratio:.2g} x rp_rs^2; the two "
                                              "disagree by more than a factor of 2"))
    if "b" in v:
        limit = 1.0 + (k if k is not None else 1.0)
        if v["b"] > limit:
            what = "1 + rp_rs" if k is not None else "2"
            bad("b", f"b = {v.pop('b'):g} exceeds {what} = {limit:g}: no transit")
        elif k is not None and v["b"] > 1.0 - k:
            warns.append((label("b"), f"grazing geometry (b = {v['b']:g} > 1 - rp_rs); "
                                      "durations constrain the density poorly"))
    if "a_rs" in v:
        limit = 1.0 + (k if k is not None else 0.0)
        if v["a_rs"] <= limit:
            what = "1 + rp_rs" if k is not None else "1"
            bad("a_rs", f"a_rs = {v.pop('a_rs'):g} must exceed {what} = {limit:g}: the planet "
                        "would orbit inside the star")
    if "t14_h" in v and "t23_h" in v and v["t23_h"] >= v["t14_h"]:
        bad("t23_h", f"full duration t23_h = {v['t23_h']:g} h must be shorter than total "
                     f"duration t14_h = {v['t14_h']:g} h")
        del v["t23_h"]
    if "t14_h" in v and "period_d" in v and v["t14_h"] >= 24.0 * v["period_d"]:
        bad("t14_h", f"t14_h = {v.pop('t14_h'):g} h is not shorter than the period "
                     f"({24.0 * v['period_d']:g} h)")
    if "t23_h" in v and "period_d" in v and v["t23_h"] >= 24.0 * v["period_d"]:
        bad("t23_h", f"t23_h = {v.pop('t23_h'):g} h is not shorter than the period")

    # Seager & Mallen-Ornelas (2003) exact circular inversion of the two durations.
    if all(c in v for c in ("t14_h", "t23_h", "period_d")) and k is not None:
        p_h = 24.0 * v["period_d"]
        s14 = math.sin(math.pi * v["t14_h"] / p_h) ** 2
        s23 = math.sin(math.pi * v["t23_h"] / p_h) ** 2
        r = s23 / s14 if s14 > 0 else math.inf
        if r < 1.0:
            b2 = ((1 - k) ** 2 - r * (1 + k) ** 2) / (1 - r)
            ar2 = ((1 + k) ** 2 - b2 * (1 - s14)) / s14
            if b2 < 0:
                bad("t23_h", f"the durations (t14_h, t23_h) and radius ratio {k:.4g} imply "
                             f"b^2 = {b2:.3g} < 0 (T23 too close to T14 for this depth)")
            elif ar2 < 1.0:
                bad("t14_h", f"the durations imply a/R* = {math.sqrt(max(ar2, 0)):.3g} < 1")

    if "omega_deg" in given and "ecc" not in given:
        bad("omega_deg", "omega_deg is given without ecc")
    elif "ecc" in v and "omega_deg" not in given and v["ecc"] > 0:
        warns.append((label("ecc"), "ecc is given without omega_deg; omega is treated as "
                                    "unknown"))
    if "ecc" in v:
        # the same test (and default error) the assessment applies to a measured orbit
        from rhofollow.physics.priors import MEASURED_ECC_DEFAULT_ERR, measured_ecc_problem

        lo, hi = (uncertainties or {}).get("ecc", (0.0, 0.0))
        why = measured_ecc_problem(v["ecc"], lo or MEASURED_ECC_DEFAULT_ERR, hi or MEASURED_ECC_DEFAULT_ERR)
        if why:
            bad("ecc", why)

    geo = ("a_rs" in given or "rho_circ_cgs" in given or
           ("t14_h" in given and ("t23_h" in given or "b" in given)
            and ("depth_ppm" in given or "rp_rs" in given)))
    if not geo:
        errs.append(("a_rs | t14_h | rho_circ_cgs",
                     "no transit-geometry route: give a_rs; or t14_h with t23_h or b, and "
                     "depth_ppm or rp_rs; or rho_circ_cgs"))
    star = ("rho_star_cgs" in given
            or ("rstar_rsun" in given and ("mstar_msun" in given or "logg_cgs" in given))
            or {"teff_k", "logg_cgs", "feh_dex"} <= given)
    if not star:
        errs.append(("rho_star_cgs | mstar_msun | logg_cgs | teff_k",
                     "no independent stellar-density route: give rho_star_cgs; or mstar_msun "
                     "and rstar_rsun; or logg_cgs and rstar_rsun; or teff_k, logg_cgs and "
                     "feh_dex"))

    # Warnings: the row is kept.
    if all(c in v for c in ("teff_k", "logg_cgs", "feh_dex")):
        lo, hi = TORRES_TEFF_RANGE
        if not (lo <= v["teff_k"] <= hi):
            warns.append((label("teff_k"), f"teff_k = {v['teff_k']:g} K is outside "
                                           f"{lo:g}-{hi:g} K, where the Torres et al. (2010) "
                                           "mass-radius relations are reliable"))
    for canon, (lo, hi) in _EXTREME.items():
        if canon in v and not (lo <= v[canon] <= hi):
            if canon == "rp_rs":
                warns.append((label(canon), f"rp_rs = {v[canon]:g} > {hi:g}: more like a "
                                            "stellar eclipse than a planet"))
            else:
                warns.append((label(canon), f"extreme value {v[canon]:g} (outside {lo:g} to "
                                            f"{hi:g}); please check"))
    return errs, warns


def read_catalogue(path: str | os.PathLike, *, require_coords: bool = False) -> CatalogueResult:
    """Read and validate a candidate catalogue.

    Parameters
    ----------
    path : str or path-like
        A ``.csv``, ``.ecsv`` or VOTable (``.vot``, ``.xml``, ``.votable``) file.
    require_coords : bool
        Also require ``ra_deg`` and ``dec_deg`` (for anything that schedules).

    Returns
    -------
    CatalogueResult
        Valid rows as :class:`Target` (values in the canonical units), and every problem as a
        :class:`RowIssue` (severity "error": row skipped; "warning": row kept; row 0 = file level).

    Raises
    ------
    CatalogueError
        The file is missing, of an unsupported kind, unreadable, has no data rows or no ``name``
        column, or two columns give the same quantity.
    """
    source = str(path)
    p = Path(path)
    ext = p.suffix.lower()
    if ext not in SUPPORTED_EXTENSIONS:
        raise CatalogueError(source, f"unsupported file type '{p.suffix or '(none)'}'; use .csv, "
                             ".ecsv or a VOTable (.vot, .xml, .votable)")
    if not p.exists():
        raise CatalogueError(source, "file not found")
    if p.is_dir():
        raise CatalogueError(source, "is a directory, not a catalogue file")
    fmt = SUPPORTED_EXTENSIONS[ext]
    try:
        table = _read_csv(p, source) if fmt == "csv" else _read_astropy(p, source, fmt)
    except PermissionError:
        raise CatalogueError(source, "cannot be read (permission denied)") from None
    except OSError as exc:
        raise CatalogueError(source, f"cannot be read ({exc.strerror or exc})") from None
    if table.n_rows == 0:
        raise CatalogueError(source, "has a header but no data rows")

    issues: list[RowIssue] = [RowIssue(source, 0, "", n, severity="warning")
                              for n in table.file_notes]
    name_col, bound = _bind_columns(table, source, issues)

    def label(canon: str) -> str:
        b = bound.get(canon, {}).get("value")
        return b.raw.header if b is not None else canon

    targets: list[Target] = []
    first_row: dict[str, tuple[int, str]] = {}
    for i in range(table.n_rows):
        row = i + 1
        errs: list[tuple[str, str]] = list(table.row_problems.get(row, []))
        warns: list[tuple[str, str]] = list(table.row_notes.get(row, []))
        name = _text(name_col.cells[i])
        ctrl = _CONTROL.search(name)
        if not name:
            errs.append((name_col.header, "name is required but missing"))
        elif ctrl:
            errs.append((name_col.header, f"name contains a control character (U+{ord(ctrl.group()):04X} "
                                          f"at position {ctrl.start() + 1}); names must be printable text"))
            name = _CONTROL.sub("?", name)
        else:
            key = " ".join(name.split()).casefold()
            if key in first_row:
                r0, n0 = first_row[key]
                errs.append((name_col.header, f"duplicate name '{name}' (first used in row {r0})"))
            else:
                first_row[key] = (row, name)

        values: dict[str, float] = {}
        given: set[str] = set()
        err_pairs: dict[str, tuple[float, float]] = {}
        for canon, kinds in bound.items():
            vb = kinds.get("value")
            if vb is None:
                continue
            cell = vb.raw.cells[i]
            if cell is None:
                if any(kinds[k].raw.cells[i] is not None for k in kinds if k != "value"
                       and not kinds[k].problem):
                    warns.append((vb.raw.header, f"an error is given for {canon} but no value; "
                                                 "ignored"))
                continue
            given.add(canon)
            if vb.problem:
                errs.append((vb.raw.header, f"unusable column: {vb.problem}"))
                continue
            x, why = _parse_number(cell)
            if why:
                errs.append((vb.raw.header, why))
                continue
            try:
                x = vb.convert(x)
            except (ValueError, ArithmeticError, u.UnitsError) as exc:
                x, why = None, f"value {cell} cannot be converted ({exc})"
            if x is None or not math.isfinite(x):
                errs.append((vb.raw.header, why or f"value {cell} is not finite after unit "
                                                   "conversion"))
                continue
            values[canon] = x
            # Errors of this column.
            got = {}
            ok = True
            for kind in ("err", "errlo", "errhi"):
                eb = kinds.get(kind)
                if eb is None or eb.raw.cells[i] is None:
                    continue
                if eb.problem:
                    errs.append((eb.raw.header, f"unusable column: {eb.problem}"))
                    ok = False
                    continue
                e, why = _parse_number(eb.raw.cells[i])
                if why:
                    errs.append((eb.raw.header, why))
                    ok = False
                    continue
                if e < 0:
                    errs.append((eb.raw.header, f"an uncertainty cannot be negative, got {e:g}"))
                    ok = False
                    continue
                e_max = _ERROR_MAX.get(canon)
                if e_max is not None and not e * eb.factor <= e_max:
                    errs.append((eb.raw.header, f"an uncertainty of {e * eb.factor:g} is larger than "
                                                f"the whole physical range of {canon} ({e_max:g})"))
                    ok = False
                    continue
                got[kind] = e * eb.factor
            if not ok:
                continue
            if "err" in got and ("errlo" in got or "errhi" in got):
                errs.append((kinds["err"].raw.header, f"give either {canon}_err or "
                             f"{canon}_errlo/{canon}_errhi, not both"))
            elif ("errlo" in got) != ("errhi" in got):
                have, miss = ("errlo", "errhi") if "errlo" in got else ("errhi", "errlo")
                errs.append((kinds[have].raw.header, f"{canon}_{have} is given without "
                             f"{canon}_{miss}"))
            elif "err" in got:
                err_pairs[canon] = (got["err"], got["err"])
            elif got:
                err_pairs[canon] = (got["errlo"], got["errhi"])

        checked = dict(values)
        e2, w2 = _check_row(checked, given, label, require_coords, err_pairs)
        errs += e2
        warns += w2
        for col, reason in errs:
            issues.append(RowIssue(source, row, col, reason, name=name))
        for col, reason in warns:
            issues.append(RowIssue(source, row, col, reason, name=name, severity="warning"))
        if errs:
            continue
        meas = {c: Measurement(x, *err_pairs.get(c, (0.0, 0.0))) for c, x in values.items()}
        targets.append(Target(name=name, row=row, source=source, values=meas,
                              warnings=[f"column '{c}': {r}" if c else r for c, r in warns]))
    return CatalogueResult(source=source, n_rows=table.n_rows, targets=targets, issues=issues)
