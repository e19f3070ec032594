"""Packages: the rows of ``packages.csv`` and the parametric families of ``families.toml``.

Each row or family member becomes a :class:`~pipeline.model.Package` with its
courtyards at the three density levels (:mod:`.courtyards`). Lengths are
millimetres; ``footprints/README.md`` documents every column.
"""

from __future__ import annotations

import re
from dataclasses import dataclass, replace
from pathlib import Path
from typing import Any, Mapping

from pipeline.errors import LibraryError
from pipeline.model import DENSITY_LEVELS, Courtyard, Package, Pad

from ._data import (NAME_RE, TOKEN_RE, Fields, check_header, compact, csv_number, csv_rows,
                    fmt_number, read_toml)
from .courtyards import CourtyardRule, courtyard_size
from .lands import LandRules, Terminals, package_pads, pad_extent, through_hole_row_pads

__all__ = ["PACKAGE_COLUMNS", "PackageInfo", "PackageFamily", "make_package", "read_packages",
           "read_families"]

#: Column headings of packages.csv, in order.
PACKAGE_COLUMNS = (
    "name", "aliases", "family", "body_length_mm", "body_width_mm", "height_mm",
    "pin_count", "pitch_mm", "courtyard_class", "source", "land_basis", "height_basis",
)
_DIMENSIONS = ("body_length_mm", "body_width_mm", "height_mm")
#: A family's numeric fields: the body, then its through-hole or plain pads.
_FAMILY_NUMERIC = _DIMENSIONS + ("pin_count", "pitch_mm", "rows", "row_spacing_mm", "pad_mm",
                                 "drill_mm")
_MAY_BE_ZERO = ("pitch_mm", "row_spacing_mm", "drill_mm")
_BASES = ("source", "land_basis", "height_basis")


@dataclass(frozen=True)
class PackageInfo:
    """How a package's figures were obtained (text from the data files)."""

    name: str
    family: str
    courtyard_class: str
    source: str
    land_basis: str
    height_basis: str
    excess: tuple[tuple[str, float], ...]


def make_package(*, name: str, aliases: tuple[str, ...], family: str, dims: Mapping[str, float],
                 pin_count: int, source: str, rule: CourtyardRule, grid: float,
                 pads_by_level: tuple[tuple[str, tuple[Pad, ...]], ...]) -> Package:
    """A :class:`Package` with its pads and its courtyard at every density level.

    Each level's courtyard surrounds the body and that level's pads
    (:func:`~.courtyards.courtyard_size`); the land extents kept on the package
    are those of the nominal level.
    """
    courtyards = []
    for level, pads in pads_by_level:
        land_l, land_w = pad_extent(pads)
        length, width = courtyard_size(dims["body_length_mm"], dims["body_width_mm"], land_l,
                                       land_w, rule.excess(level), grid)
        courtyards.append(Courtyard(level, length, width))
    land_l, land_w = pad_extent(dict(pads_by_level)["nominal"])
    return Package(
        name=name, aliases=aliases, family=family,
        body_length_mm=dims["body_length_mm"], body_width_mm=dims["body_width_mm"],
        height_mm=dims["height_mm"], land_length_mm=land_l, land_width_mm=land_w,
        pin_count=pin_count, pitch_mm=dims["pitch_mm"], source=source,
        courtyards=tuple(courtyards), pads_by_level=pads_by_level,
    )


def info_for(name: str, family: str, cls: str, texts: Mapping[str, str],
             rule: CourtyardRule) -> PackageInfo:
    """The :class:`PackageInfo` of a row or family member."""
    return PackageInfo(
        name=name, family=family, courtyard_class=cls, source=texts["source"],
        land_basis=texts["land_basis"], height_basis=texts["height_basis"],
        excess=tuple((lv, rule.excess(lv)) for lv in DENSITY_LEVELS),
    )


def _unknown_class(cls: str, rules: Mapping[str, CourtyardRule]) -> str:
    return f"unknown courtyard class '{cls}' (known in courtyard.toml: {', '.join(sorted(rules))})"


# ------------------------------------------------------------------ families
@dataclass(frozen=True)
class PackageFamily:
    """A parametric package family such as ``header-1xN-2.54`` or ``pad-Dmm``.

    Each numeric field is ``base + per * value`` where ``value`` is the
    family parameter (``N`` pins, ``D`` mm); ``fields`` holds
    ``(field, base, per)`` triples for the fields of :class:`Package`.
    """

    name: str
    pattern: str
    aliases: tuple[str, ...]
    family: str
    parameter: str
    integer: bool
    minimum: float
    maximum: float
    fields: tuple[tuple[str, float, float], ...]
    courtyard_class: str
    source: str
    land_basis: str
    height_basis: str

    def _regexes(self) -> tuple[re.Pattern[str], ...]:
        group = r"(\d+)" if self.integer else r"(\d+(?:\.\d*)?|\.\d+)"
        out = []
        for pat in (self.pattern,) + self.aliases:
            head, tail = pat.casefold().split("{" + self.parameter.casefold() + "}")
            out.append(re.compile("^" + re.escape(head) + group + re.escape(tail) + "$"))
        return tuple(out)

    def match(self, name: str) -> float | None:
        """The parameter value if ``name`` has this family's form, else None.

        The range is not checked here (see :meth:`in_range`).
        """
        key = name.strip().casefold()
        for rx in self._regexes():
            m = rx.match(key)
            if m:
                return float(int(m.group(1))) if self.integer else float(m.group(1))
        return None

    def in_range(self, value: float) -> bool:
        """Whether ``value`` is an allowed parameter value."""
        return self.minimum - 1e-9 <= value <= self.maximum + 1e-9

    def value(self, field_name: str, value: float) -> float:
        """Field ``field_name`` at parameter ``value``: base + per * value."""
        for f, base, per in self.fields:
            if f == field_name:
                return round(base + per * value, 6)
        raise LookupError(field_name)  # a programming error: fields hold every numeric column

    def canonical_name(self, value: float) -> str:
        text = str(int(value)) if self.integer else fmt_number(value)
        return self.pattern.replace("{" + self.parameter + "}", text)

    def range_text(self) -> str:
        unit = "" if self.integer else " mm"
        return (f"{self.name} takes {self.parameter} from {fmt_number(self.minimum)} "
                f"to {fmt_number(self.maximum)}{unit}")

    def texts(self) -> dict[str, str]:
        return {"source": self.source, "land_basis": self.land_basis,
                "height_basis": self.height_basis}

    def expand(self, value: float, rule: CourtyardRule, grid: float) -> Package:
        """The :class:`~pipeline.model.Package` for parameter ``value``.

        Its pads: ``rows`` rows of round pads ``pad_mm`` across at ``pitch_mm``,
        ``row_spacing_mm`` apart, with holes of ``drill_mm`` (0: surface pads),
        numbered across the rows (odd pins in the lower row), the same at every
        density level.
        """
        dims = {f: self.value(f, value) for f in _FAMILY_NUMERIC}
        pin_count = int(round(dims["pin_count"]))
        pads = through_hole_row_pads(pin_count, int(dims["rows"]), dims["pitch_mm"],
                                     dims["row_spacing_mm"], dims["pad_mm"], dims["drill_mm"],
                                     anticlockwise=False)
        if pin_count == 1:  # a lone pad is round
            pads = tuple(replace(p, shape="circle") for p in pads)
        return make_package(
            name=self.canonical_name(value), aliases=(), family=self.family, dims=dims,
            pin_count=pin_count, source=self.source, rule=rule, grid=grid,
            pads_by_level=tuple((lv, pads) for lv in DENSITY_LEVELS),
        )


_FAMILY_KEYS = (
    "pattern", "aliases", "family", "parameter", "integer", "min", "max",
    "courtyard_class", "source", "land_basis", "height_basis",
) + _FAMILY_NUMERIC
_FAMILY_REQUIRED = tuple(k for k in _FAMILY_KEYS if k != "aliases")


def read_families(path: Path, rules: Mapping[str, CourtyardRule]) -> tuple[PackageFamily, ...]:
    """The parametric families of ``families.toml``, checked."""
    src = read_toml(path)
    return tuple(_read_family(Fields(src, name), src.data[name], rules) for name in sorted(src.data))


def _read_family(f: Fields, table: Any, rules: Mapping[str, CourtyardRule]) -> PackageFamily:
    if not isinstance(table, dict):
        raise f.here("expected a [FAMILY] table")
    f.check_keys(table, _FAMILY_KEYS, _FAMILY_REQUIRED)
    param = f.text("parameter", table["parameter"])
    if not re.match(r"^[A-Za-z]\w*$", param):
        raise f.error("parameter", f"bad parameter name '{param}'")
    pattern, aliases = _family_patterns(f, table, "{" + param + "}")
    integer = f.flag("integer", table["integer"])
    lo = f.number("min", table["min"], minimum=0.0, strict=True)
    hi = f.number("max", table["max"], minimum=0.0, strict=True)
    if hi < lo:
        raise f.error("max", f"max {hi:g} is below min {lo:g}")
    if integer and (lo != int(lo) or hi != int(hi)):
        raise f.error("min", "min and max of a whole-number parameter must be whole numbers")
    fields = tuple(_family_field(f, table[name], name, param, integer, lo, hi)
                   for name in _FAMILY_NUMERIC)
    cls = f.text("courtyard_class", table["courtyard_class"])
    if cls not in rules:
        raise f.error("courtyard_class", _unknown_class(cls, rules))
    family = f.text("family", table["family"])
    if not TOKEN_RE.match(family):
        raise f.error("family", f"bad family '{family}' (lower-case word)")
    return PackageFamily(
        name=f.prefix, pattern=pattern, aliases=aliases, family=family, parameter=param,
        integer=integer, minimum=lo, maximum=hi, fields=fields, courtyard_class=cls,
        **{k: f.text(k, table[k]) for k in _BASES},
    )


def _family_patterns(f: Fields, table: dict, placeholder: str) -> tuple[str, tuple[str, ...]]:
    """The family's name pattern and alias patterns, each with the placeholder once."""
    pattern = f.text("pattern", table["pattern"])
    aliases_raw = table.get("aliases", [])
    if not isinstance(aliases_raw, list):
        raise f.error("aliases", "expected a list of texts")
    aliases = tuple(f.text(f"aliases[{i}]", a) for i, a in enumerate(aliases_raw))
    for k, p in [("pattern", pattern)] + [(f"aliases[{i}]", a) for i, a in enumerate(aliases)]:
        if p.count(placeholder) != 1:
            raise f.error(k, f"'{p}' must contain {placeholder} exactly once")
    return pattern, aliases


def _family_field(f: Fields, raw: Any, name: str, param: str, integer: bool, lo: float,
                  hi: float) -> tuple[str, float, float]:
    """One numeric field ``(name, base, per)``, positive over the whole parameter range."""
    if isinstance(raw, dict):
        sub = Fields(f.src, f.key(name))
        sub.check_keys(raw, ("base", "per"), ("per",))
        base = sub.number("base", raw.get("base", 0.0), minimum=None)
        per = sub.number("per", raw["per"], minimum=None)
    else:
        base, per = f.number(name, raw, minimum=None), 0.0
    strict = name not in _MAY_BE_ZERO
    for v in (lo, hi):  # linear: the extremes bound every value
        at = base + per * v
        if at < 0 or (strict and at <= 0):
            raise f.error(name, f"gives {at:g} at {param} = {v:g}; must be "
                                f"{'greater than' if strict else 'at least'} 0")
    if name == "pin_count":
        whole = base == int(base) and per == int(per)
        if not whole or (per != 0 and not integer):
            raise f.error(name, "pin_count must be a whole number for every parameter value")
    return name, base, per


# ------------------------------------------------------------------ packages
class _Names:
    """The names and aliases seen so far, to refuse clashes with a clear message."""

    def __init__(self, path: Path, families: tuple[PackageFamily, ...], pin_rows=None) -> None:
        self.path = path
        self.families = families
        self.pin_rows = pin_rows  # a .pinrows.PinRows: its names are refused too
        self.seen: dict[str, tuple[str, int]] = {}  # casefold name -> (package, line)
        self.seen_compact: dict[str, tuple[str, int]] = {}

    def add(self, name: str, aliases: tuple[str, ...], line: int) -> None:
        for n in (name,) + aliases:
            key = f"{name}.{'name' if n == name else 'aliases'}"
            if not NAME_RE.match(n):
                raise LibraryError(str(self.path), f"bad alias '{n}'", line=line, key=key)
            prev = self.seen.get(n.casefold())
            if prev is not None:
                raise LibraryError(str(self.path), f"'{n}' is already used by package {prev[0]} "
                                   f"(line {prev[1]})", line=line, key=key)
            prev_c = self.seen_compact.get(compact(n))
            if prev_c is not None and prev_c[0] != name:
                raise LibraryError(str(self.path), f"'{n}' differs from a name of package "
                                   f"{prev_c[0]} (line {prev_c[1]}) only in '-', '_' or spaces",
                                   line=line, key=key)
            for fam in self.families:
                if fam.match(n) is not None:
                    raise LibraryError(str(self.path), f"'{n}' has the form of family "
                                       f"{fam.name} from families.toml", line=line, key=key)
            if self.pin_rows is not None and _is_pin_row(self.pin_rows, n):
                raise LibraryError(str(self.path), f"'{n}' has the form of a pin row name "
                                   "(pinrows.toml)", line=line, key=key)
            self.seen[n.casefold()] = (name, line)
            self.seen_compact.setdefault(compact(n), (name, line))


def _is_pin_row(pin_rows, name: str) -> bool:
    """Whether ``name`` has a pin row form (a bad value still counts)."""
    from .pinrows import BadPinRow
    try:
        return pin_rows.parse(name) is not None
    except BadPinRow:
        return True


def read_packages(
    path: Path, rules: Mapping[str, CourtyardRule], grid: float,
    families: tuple[PackageFamily, ...], terminals: Mapping[str, Terminals],
    land_rules: LandRules, pin_rows=None,
) -> tuple[tuple[Package, ...], tuple[PackageInfo, ...]]:
    """The listed packages of ``packages.csv`` and how each was sourced.

    Steps: check the header; per row, split the cells, check the names against
    those seen and the family forms, read the numbers, look up the courtyard
    class, compute the pads from the package's terminals (:mod:`.lands`),
    then build the package.
    """
    header_line, header, rows = csv_rows(path)
    check_header(path, header_line, header, PACKAGE_COLUMNS)
    names = _Names(path, families, pin_rows)
    packages: list[Package] = []
    infos: list[PackageInfo] = []
    for line, cells in rows:
        row = _row_cells(path, line, cells)
        name = row["name"]
        if not NAME_RE.match(name):
            raise LibraryError(str(path), f"bad package name '{name}'", line=line, key="name")
        aliases = tuple(row["aliases"].split())
        names.add(name, aliases, line)
        dims, pin_count = _row_numbers(path, line, row)
        family, cls = _row_classes(path, line, row, rules)
        if name not in terminals:
            raise LibraryError(str(path), f"package {name} has no row in terminals.csv, so it "
                               "has no land pattern", line=line, key=f"{name}.name")
        pads = package_pads(terminals[name], pin_count, dims["pitch_mm"], land_rules)
        packages.append(make_package(name=name, aliases=aliases, family=family, dims=dims,
                                     pin_count=pin_count, source=row["source"], rule=rules[cls],
                                     grid=grid, pads_by_level=pads))
        infos.append(info_for(name, family, cls, row, rules[cls]))
    if not packages:
        raise LibraryError(str(path), "no packages listed")
    return tuple(packages), tuple(infos)


def _row_cells(path: Path, line: int, cells: list[str]) -> dict[str, str]:
    if len(cells) != len(PACKAGE_COLUMNS):
        raise LibraryError(str(path), f"row has {len(cells)} fields, expected {len(PACKAGE_COLUMNS)}",
                           line=line)
    return dict(zip(PACKAGE_COLUMNS, cells))


def _row_numbers(path: Path, line: int, row: Mapping[str, str]) -> tuple[dict[str, float], int]:
    """The dimensions (mm), pitch (mm, 0 allowed) and pin count of a row."""
    name = row["name"]
    dims = {c: csv_number(row[c], path, line, f"{name}.{c}") for c in _DIMENSIONS}
    dims["pitch_mm"] = csv_number(row["pitch_mm"], path, line, f"{name}.pitch_mm", strict=False)
    pc_text = row["pin_count"]
    if not pc_text.isdigit() or int(pc_text) < 1:
        raise LibraryError(str(path), f"pin_count must be a whole number of at least 1, got "
                           f"'{pc_text}'", line=line, key=f"{name}.pin_count")
    return dims, int(pc_text)


def _row_classes(path: Path, line: int, row: Mapping[str, str],
                 rules: Mapping[str, CourtyardRule]) -> tuple[str, str]:
    """The row's family and courtyard class, checked; its source texts must not be empty."""
    name, family, cls = row["name"], row["family"], row["courtyard_class"]
    if not TOKEN_RE.match(family):
        raise LibraryError(str(path), f"bad family '{family}' (lower-case word)", line=line,
                           key=f"{name}.family")
    if cls not in rules:
        raise LibraryError(str(path), _unknown_class(cls, rules), line=line,
                           key=f"{name}.courtyard_class")
    for c in _BASES:
        if not row[c]:
            raise LibraryError(str(path), f"{c} must not be empty", line=line, key=f"{name}.{c}")
    return family, cls
