"""File columns resolved to canonical columns, units converted with astropy.units, cells parsed."""
from __future__ import annotations

import math
import re
from dataclasses import dataclass
import astropy.units as u

from rhofollow.core.types import RowIssue
from rhofollow.io.catalogue.columns import COLUMNS, CatalogueError, ColumnSpec, _ERR_SUFFIXES, _LOCAL_UNITS, _LOGG_UNIT, _UNITLESS_STEM_OK
from rhofollow.io.catalogue.tables import _RawColumn, _RawTable


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
