"""The generic footprint library and the part kinds, read from ``footprints/``.

Everything here is data-driven: ``footprints/packages.csv`` lists packages
(body, land extent, height, pins, pitch, sources), ``footprints/families.toml``
describes parametric families (``header-1xN-2.54``, ``pad-Dmm``) that are
expanded on demand, ``footprints/courtyard.toml`` holds the IPC-7351B
courtyard excess per density level, and ``footprints/kinds.toml`` the part
kinds with their pins and pin roles. ``footprints/README.md`` documents the
formats and the policies behind the numbers.

Lengths are millimetres. Density levels are ``"most"`` (IPC-7351B level A),
``"nominal"`` (B) and ``"least"`` (C).

Courtyard rule (IPC-7351B, REFERENCES.md section 3): the smallest rectangle
around body and lands, grown by the level's excess on every side, rounded up
to the 0.05 mm grid::

    length = ceil_grid(max(body_length, land_length) + 2 * excess)
    width  = ceil_grid(max(body_width,  land_width)  + 2 * excess)

Examples
--------
>>> lib = load_library()
>>> lib.package("so-8").name
'SOIC-8'
>>> lib.package("1608").name
'0603'
>>> cy = courtyard(lib.package("0603"), "nominal")
>>> (cy.length_mm, cy.width_mm)
(2.8, 1.3)
>>> [p.name for p in lib.pins_for(lib.kind("header"), lib.package("header-1x3-2.54"))]
['1', '2', '3']
"""

from __future__ import annotations

import csv
import difflib
import math
import re
import sys
import tomllib
from dataclasses import dataclass, field, replace
from pathlib import Path
from types import MappingProxyType
from typing import Any, Iterable, Mapping

from pipeline.errors import LibraryError
from pipeline.model import PIN_ROLES, Courtyard, Package, PartKind, PinDef
from pipeline.order import natural_key
from pipeline.tomlsrc import number_problem

__all__ = [
    "DEFAULT_ROOT",
    "LEVELS",
    "CATEGORIES",
    "VALUE_UNITS",
    "PACKAGE_COLUMNS",
    "CourtyardRule",
    "PackageFamily",
    "PackageInfo",
    "Library",
    "UnknownNameError",
    "load_library",
    "courtyard",
    "courtyard_size",
    "ceil_to_grid",
    "normalize_level",
    "pin_mismatch",
]

#: The repository's own footprint data folder.
def _default_root() -> Path:
    """The footprint data: the checkout's ``footprints/`` (editable install), else the
    copy a regular install puts under ``<prefix>/share/snugboard/footprints``."""
    here = Path(__file__).resolve().parent.parent / "footprints"
    if here.is_dir():
        return here
    installed = Path(sys.prefix) / "share" / "snugboard" / "footprints"
    return installed if installed.is_dir() else here


DEFAULT_ROOT = _default_root()

#: IPC-7351B density levels, in the order A, B, C.
LEVELS = ("most", "nominal", "least")

#: Part-kind categories (pipeline.model.PartKind).
CATEGORIES = ("passive", "polarized", "semiconductor", "ic", "connector")

#: Units a part kind's value may have ("" = takes no value).
VALUE_UNITS = ("ohm", "F", "H", "")

PACKAGES_FILE = "packages.csv"
FAMILIES_FILE = "families.toml"
KINDS_FILE = "kinds.toml"
COURTYARD_FILE = "courtyard.toml"

#: Column headings of packages.csv, in order.
PACKAGE_COLUMNS = (
    "name",
    "aliases",
    "family",
    "body_length_mm",
    "body_width_mm",
    "height_mm",
    "land_length_mm",
    "land_width_mm",
    "pin_count",
    "pitch_mm",
    "courtyard_class",
    "source",
    "land_basis",
    "height_basis",
)

_DIMENSIONS = (
    "body_length_mm",
    "body_width_mm",
    "height_mm",
    "land_length_mm",
    "land_width_mm",
)
_FAMILY_NUMERIC = _DIMENSIONS + ("pin_count", "pitch_mm")
_LEVEL_ALIASES = {
    "most": "most",
    "a": "most",
    "m": "most",
    "nominal": "nominal",
    "b": "nominal",
    "n": "nominal",
    "least": "least",
    "c": "least",
    "l": "least",
}
_NAME_RE = re.compile(r"^[A-Za-z0-9][A-Za-z0-9.+\-]*$")
_TOKEN_RE = re.compile(r"^[a-z0-9][a-z0-9\-]*$")
_GRID_EPS = 1e-6


# --------------------------------------------------------------------------
# Small pure helpers
# --------------------------------------------------------------------------
class UnknownNameError(KeyError):
    """A package, kind or level name the library does not know.

    A :class:`KeyError` whose ``str()`` is the plain message (not its repr).
    ``name`` is what was asked for; ``suggestions`` the closest known names.
    """

    def __init__(self, message: str, name: str = "", suggestions: tuple[str, ...] = ()):
        super().__init__(message)
        self.name = name
        self.suggestions = suggestions

    def __str__(self) -> str:
        return str(self.args[0])


def ceil_to_grid(value: float, grid: float = 0.05) -> float:
    """Round ``value`` (mm) up to the next multiple of ``grid`` (mm).

    A value already on the grid (within 1e-6 grid steps of float noise) is kept.

    >>> ceil_to_grid(2.80)
    2.8
    >>> ceil_to_grid(2.81)
    2.85
    """
    steps = math.ceil(value / grid - _GRID_EPS)
    return round(steps * grid, 6)


def courtyard_size(
    body_length: float,
    body_width: float,
    land_length: float,
    land_width: float,
    excess: float,
    grid: float = 0.05,
) -> tuple[float, float]:
    """Courtyard length and width, mm: body and lands plus ``excess`` a side.

    The smallest rectangle around body and lands (both centred on the
    package origin) grown by ``excess`` on every side and rounded up to
    ``grid`` (IPC-7351B; REFERENCES.md section 3).

    >>> courtyard_size(1.6, 0.8, 2.3, 0.8, 0.25)
    (2.8, 1.3)
    """
    length = ceil_to_grid(max(body_length, land_length) + 2.0 * excess, grid)
    width = ceil_to_grid(max(body_width, land_width) + 2.0 * excess, grid)
    return length, width


def normalize_level(level: str) -> str:
    """The canonical density level for ``level``.

    Accepts ``most`` / ``nominal`` / ``least`` and the IPC-7351B letters
    ``A`` / ``B`` / ``C``, in any case. Raises :class:`UnknownNameError`
    (a KeyError) otherwise.

    >>> normalize_level("B")
    'nominal'
    """
    key = str(level).strip().casefold()
    if key in _LEVEL_ALIASES:
        return _LEVEL_ALIASES[key]
    raise UnknownNameError(
        f"unknown density level '{level}': use most, nominal or least (IPC-7351B A, B, C)",
        str(level),
        LEVELS,
    )


def courtyard(package: Package, level: str) -> Courtyard:
    """The IPC-7351B courtyard of ``package`` at density ``level``.

    ``level`` as :func:`normalize_level` accepts. Same as
    ``package.courtyard(normalize_level(level))``.

    >>> courtyard(load_library().package("SOIC-8"), "least").width_mm
    7.1
    """
    return package.courtyard(normalize_level(level))


def pin_mismatch(kind: PartKind, package: Package) -> str | None:
    """A sentence saying why ``kind`` cannot sit in ``package``, or ``None``.

    A kind with fixed pins needs a package with exactly as many pins
    (exposed pads are not counted in ``pin_count``); a header kind takes any.

    >>> lib = load_library()
    >>> pin_mismatch(lib.kind("opamp-dual"), lib.package("SOT-23")) is None
    False
    """
    if kind.pins_from_package:
        return None
    if len(kind.pins) != package.pin_count:
        return (
            f"kind '{kind.name}' has {len(kind.pins)} pins but package "
            f"'{package.name}' has {package.pin_count}"
        )
    return None


def _compact(text: str) -> str:
    return re.sub(r"[\s_\-]+", "", text.casefold())


def _fmt_number(value: float) -> str:
    return f"{round(value, 6):g}"


# --------------------------------------------------------------------------
# Data records (library-internal; Package and PartKind live in model.py)
# --------------------------------------------------------------------------
@dataclass(frozen=True)
class CourtyardRule:
    """One row of the courtyard-excess table: excess per side per level, mm."""

    name: str
    most: float
    nominal: float
    least: float
    applies_to: str
    source: str

    def excess(self, level: str) -> float:
        """Excess per side at ``level`` (``most``, ``nominal``, ``least``)."""
        return float(getattr(self, normalize_level(level)))


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
        raise KeyError(field_name)

    def canonical_name(self, value: float) -> str:
        text = str(int(value)) if self.integer else _fmt_number(value)
        return self.pattern.replace("{" + self.parameter + "}", text)

    def range_text(self) -> str:
        unit = "" if self.integer else " mm"
        return (
            f"{self.name} takes {self.parameter} from {_fmt_number(self.minimum)} "
            f"to {_fmt_number(self.maximum)}{unit}"
        )

    def expand(self, value: float, rule: CourtyardRule, grid: float) -> Package:
        """The :class:`~pipeline.model.Package` for parameter ``value``."""
        dims = {f: self.value(f, value) for f in _FAMILY_NUMERIC}
        return _make_package(
            name=self.canonical_name(value),
            aliases=(),
            family=self.family,
            dims=dims,
            pin_count=int(round(dims["pin_count"])),
            source=self.source,
            rule=rule,
            grid=grid,
        )


def _make_package(
    *,
    name: str,
    aliases: tuple[str, ...],
    family: str,
    dims: Mapping[str, float],
    pin_count: int,
    source: str,
    rule: CourtyardRule,
    grid: float,
) -> Package:
    courtyards = []
    for level in LEVELS:
        length, width = courtyard_size(
            dims["body_length_mm"],
            dims["body_width_mm"],
            dims["land_length_mm"],
            dims["land_width_mm"],
            rule.excess(level),
            grid,
        )
        courtyards.append(Courtyard(level, length, width))
    return Package(
        name=name,
        aliases=aliases,
        family=family,
        body_length_mm=dims["body_length_mm"],
        body_width_mm=dims["body_width_mm"],
        height_mm=dims["height_mm"],
        land_length_mm=dims["land_length_mm"],
        land_width_mm=dims["land_width_mm"],
        pin_count=pin_count,
        pitch_mm=dims["pitch_mm"],
        source=source,
        courtyards=tuple(courtyards),
    )


# --------------------------------------------------------------------------
# The library
# --------------------------------------------------------------------------
@dataclass(frozen=True)
class Library:
    """Packages, package families, courtyard rules and part kinds.

    Build it with :func:`load_library`; derive one with user-defined kinds
    with :meth:`with_kinds`. Lookups are case-insensitive.
    """

    root: Path
    listed: tuple[Package, ...]
    infos: tuple[PackageInfo, ...]
    family_table: tuple[PackageFamily, ...]
    rules: tuple[CourtyardRule, ...]
    grid_mm: float
    kind_table: tuple[PartKind, ...]
    _by_name: Mapping[str, Package] = field(init=False, compare=False, hash=False, repr=False)
    _by_compact: Mapping[str, Package] = field(
        init=False, compare=False, hash=False, repr=False
    )
    _kinds: Mapping[str, PartKind] = field(init=False, compare=False, hash=False, repr=False)
    _infos: Mapping[str, PackageInfo] = field(init=False, compare=False, hash=False, repr=False)

    def __post_init__(self) -> None:
        by_name: dict[str, Package] = {}
        by_compact: dict[str, Package] = {}
        for pkg in self.listed:
            for n in (pkg.name,) + pkg.aliases:
                by_name.setdefault(n.casefold(), pkg)
                by_compact.setdefault(_compact(n), pkg)
        object.__setattr__(self, "_by_name", MappingProxyType(by_name))
        object.__setattr__(self, "_by_compact", MappingProxyType(by_compact))
        object.__setattr__(
            self, "_kinds", MappingProxyType({k.name.casefold(): k for k in self.kind_table})
        )
        object.__setattr__(
            self, "_infos", MappingProxyType({i.name.casefold(): i for i in self.infos})
        )

    # ---------------------------------------------------------------- packages
    def _rule(self, name: str) -> CourtyardRule:
        for r in self.rules:
            if r.name == name:
                return r
        raise KeyError(name)

    def _family_lookup(self, name: str) -> tuple[PackageFamily, float] | None:
        for fam in self.family_table:
            v = fam.match(name)
            if v is not None:
                return fam, v
        return None

    def package(self, name: str) -> Package:
        """The package called ``name`` (a name, an alias or a family member).

        Names are matched without regard to case; a second try ignores
        ``-``, ``_`` and spaces (``SOT23-5`` finds ``SOT-23-5``). Family
        members such as ``header-1x7-2.54`` and ``pad-1.5mm`` are expanded
        from ``families.toml``.

        Raises
        ------
        KeyError
            (:class:`UnknownNameError`) naming the closest known names, or
            the allowed range for a family member out of range.

        >>> load_library().package("SOT23").name
        'SOT-23'
        """
        text = str(name).strip()
        if not text:
            raise UnknownNameError("empty package name", text)
        key = text.casefold()
        if key in self._by_name:
            return self._by_name[key]
        hit = self._family_lookup(text)
        if hit is not None:
            fam, value = hit
            if not fam.in_range(value):
                raise UnknownNameError(
                    f"unknown package '{text}': {fam.range_text()}", text, (fam.name,)
                )
            return fam.expand(value, self._rule(fam.courtyard_class), self.grid_mm)
        ck = _compact(text)
        if ck in self._by_compact:
            return self._by_compact[ck]
        suggestions = self._suggest_packages(text)
        hint = f"; closest: {', '.join(suggestions)}" if suggestions else ""
        raise UnknownNameError(
            f"unknown package '{text}'{hint} (list them with the packages command)",
            text,
            suggestions,
        )

    def _suggest_packages(self, text: str) -> tuple[str, ...]:
        display: dict[str, str] = {}
        for pkg in self.listed:
            for n in (pkg.name,) + pkg.aliases:
                display.setdefault(n.casefold(), pkg.name)
        for fam in self.family_table:
            display.setdefault(fam.name.casefold(), fam.name)
        matches = difflib.get_close_matches(text.casefold(), sorted(display), n=8, cutoff=0.5)
        out: list[str] = []
        for m in matches:
            if display[m] not in out:
                out.append(display[m])
        return tuple(out[:5])

    def has_package(self, name: str) -> bool:
        """Whether :meth:`package` finds ``name``."""
        try:
            self.package(name)
        except KeyError:
            return False
        return True

    def packages(self) -> tuple[Package, ...]:
        """The listed packages (not family members), in natural name order."""
        return tuple(sorted(self.listed, key=lambda p: natural_key(p.name)))

    def families(self) -> tuple[PackageFamily, ...]:
        """The parametric families, sorted by name."""
        return tuple(sorted(self.family_table, key=lambda f: f.name))

    def courtyard_rules(self) -> tuple[CourtyardRule, ...]:
        """The courtyard-excess table, sorted by class name."""
        return tuple(sorted(self.rules, key=lambda r: r.name))

    def info(self, name: str) -> PackageInfo:
        """Sources and bases of the figures of package ``name`` (KeyError)."""
        pkg = self.package(name)
        hit = self._infos.get(pkg.name.casefold())
        if hit is not None:
            return hit
        fam_hit = self._family_lookup(pkg.name)
        assert fam_hit is not None  # package() found it, so it is a family member
        fam = fam_hit[0]
        rule = self._rule(fam.courtyard_class)
        return PackageInfo(
            name=pkg.name,
            family=fam.family,
            courtyard_class=fam.courtyard_class,
            source=fam.source,
            land_basis=fam.land_basis,
            height_basis=fam.height_basis,
            excess=tuple((lv, rule.excess(lv)) for lv in LEVELS),
        )

    # ------------------------------------------------------------------- kinds
    def kind(self, name: str) -> PartKind:
        """The part kind called ``name`` (case-insensitive).

        Raises
        ------
        KeyError
            (:class:`UnknownNameError`) naming the closest known kinds.

        >>> [p.name for p in load_library().kind("diode").pins]
        ['K', 'A']
        """
        text = str(name).strip()
        hit = self._kinds.get(text.casefold())
        if hit is not None:
            return hit
        names = sorted(k.name for k in self.kind_table)
        close = tuple(difflib.get_close_matches(text.casefold(), names, n=5, cutoff=0.5))
        hint = f"; closest: {', '.join(close)}" if close else ""
        raise UnknownNameError(
            f"unknown part kind '{text}'{hint} (list them with the kinds command)",
            text,
            close,
        )

    def has_kind(self, name: str) -> bool:
        """Whether :meth:`kind` finds ``name``."""
        return str(name).strip().casefold() in self._kinds

    def kinds(self) -> tuple[PartKind, ...]:
        """Every part kind, sorted by name."""
        return tuple(sorted(self.kind_table, key=lambda k: k.name))

    def pins_for(self, kind: PartKind, package: Package) -> tuple[PinDef, ...]:
        """The pins a part of ``kind`` in ``package`` has.

        A kind with ``pins_from_package`` (a header) gets pins ``1 .. N``,
        N = ``package.pin_count``, role passive; any other kind its own pins.
        Whether the counts agree is :func:`pin_mismatch`'s question.
        """
        if kind.pins_from_package:
            return tuple(
                PinDef(str(i), str(i), "passive") for i in range(1, package.pin_count + 1)
            )
        return kind.pins

    def with_kinds(self, extra: Iterable[PartKind]) -> "Library":
        """A copy of this library with ``extra`` kinds added.

        An extra kind whose name (ignoring case) equals an existing one
        replaces it; the last of several equal names wins. Callers that must
        not shadow a built-in kind check :meth:`has_kind` first.
        """
        merged = {k.name.casefold(): k for k in self.kind_table}
        for k in extra:
            if not isinstance(k, PartKind):
                raise TypeError(f"with_kinds takes PartKind values, not {type(k).__name__}")
            merged[k.name.casefold()] = k
        return replace(self, kind_table=tuple(sorted(merged.values(), key=lambda k: k.name)))


# --------------------------------------------------------------------------
# Loading and validating the data files
# --------------------------------------------------------------------------
_CACHE: dict[tuple, Library] = {}


def load_library(root: Path | str | None = None) -> Library:
    """Read the footprint library under ``root`` (default: the repo's footprints/).

    The result is cached per folder and per the files' modification times
    and sizes, so repeated calls are cheap and an edited file is re-read.

    Raises
    ------
    LibraryError
        A missing or malformed data file; the error names the file and the
        line, row or key.
    """
    base = DEFAULT_ROOT if root is None else Path(root)
    if not base.is_dir():
        raise LibraryError(str(base), "footprint data folder not found")
    signature = []
    for fname in (COURTYARD_FILE, PACKAGES_FILE, FAMILIES_FILE, KINDS_FILE):
        path = base / fname
        try:
            st = path.stat()
        except OSError:
            raise LibraryError(str(path), "footprint data file not found") from None
        signature.append((fname, st.st_mtime_ns, st.st_size))
    key = (str(base.resolve()), tuple(signature))
    hit = _CACHE.get(key)
    if hit is not None:
        return hit
    lib = _load(base)
    _CACHE[key] = lib
    return lib


def _load(base: Path) -> Library:
    grid, rules = _read_courtyard(base / COURTYARD_FILE)
    rule_map = {r.name: r for r in rules}
    families = _read_families(base / FAMILIES_FILE, rule_map)
    listed, infos = _read_packages(base / PACKAGES_FILE, rule_map, grid, families)
    kinds = _read_kinds(base / KINDS_FILE)
    return Library(
        root=base,
        listed=listed,
        infos=infos,
        family_table=families,
        rules=rules,
        grid_mm=grid,
        kind_table=kinds,
    )


def _read_text(path: Path) -> str:
    try:
        return path.read_text(encoding="utf-8")
    except UnicodeDecodeError as e:
        raise LibraryError(str(path), f"not UTF-8 text ({e.reason})") from None
    except OSError as e:
        raise LibraryError(str(path), f"cannot be read ({e.strerror})") from None


def _read_toml(path: Path) -> tuple[dict[str, Any], str]:
    text = _read_text(path)
    try:
        return tomllib.loads(text), text
    except tomllib.TOMLDecodeError as e:
        m = re.search(r"line (\d+)", str(e))
        raise LibraryError(
            str(path), f"not valid TOML ({e})", line=int(m.group(1)) if m else None
        ) from None


def _table_line(text: str, *parts: str) -> int | None:
    """1-based line of the TOML table header ``[part.part...]`` (bare or quoted keys)."""
    key_rx = r"\s*\.\s*".join(r"""(?:%s|"%s"|'%s')""" % ((re.escape(p),) * 3) for p in parts)
    rx = re.compile(r"^\s*\[\s*" + key_rx + r"\s*\]")
    for i, line in enumerate(text.splitlines(), start=1):
        if rx.match(line):
            return i
    return None


def _key_line(text: str, table_line: int | None, key: str) -> int | None:
    """Line of ``key = ...`` inside the table starting at ``table_line``, if written."""
    if table_line is None:
        return None
    rx = re.compile(r"""^\s*(?:%s|"%s"|'%s')\s*=""" % ((re.escape(key),) * 3))
    lines = text.splitlines()
    for i in range(table_line, len(lines)):
        if re.match(r"^\s*\[", lines[i]):
            break
        if rx.match(lines[i]):
            return i + 1
    return None


def _refined(err: LibraryError, text: str, table: str, table_line: int | None) -> LibraryError:
    """``err`` with its line moved to the key it names inside ``table``, when found.

    Pin errors (``KIND.pins[i]...``) already carry the pin's own line.
    """
    if not err.key or not err.key.startswith(table + "."):
        return err
    rest = err.key[len(table) + 1:]
    if rest.startswith("pins["):
        return err
    first = re.split(r"[.\[]", rest, maxsplit=1)[0]
    line = _key_line(text, table_line, first)
    if line is None or line == err.line:
        return err
    return LibraryError(err.file, err.reason, line=line, key=err.key)


def _nth_line_after(text: str, start: int | None, pattern: str, index: int) -> int | None:
    """Line of the ``index``-th (0-based) match of ``pattern`` after line ``start``,
    stopping at the next table header."""
    if start is None:
        return None
    rx = re.compile(pattern)
    seen = 0
    lines = text.splitlines()
    for i in range(start, len(lines)):
        line = lines[i]
        if re.match(r"^\s*\[", line):
            break
        if rx.search(line):
            if seen == index:
                return i + 1
            seen += 1
    return start


def _toml_number(
    value: Any, path: Path, key: str, line: int | None, *, minimum: float | None = 0.0,
    strict: bool = False,
) -> float:
    problem = number_problem(value, lo=minimum, lo_open=strict)  # the one rule for TOML numbers
    if problem:
        raise LibraryError(str(path), problem, line=line, key=key)
    return float(value)


def _toml_text(value: Any, path: Path, key: str, line: int | None, *, required: bool = True) -> str:
    if not isinstance(value, str):
        raise LibraryError(str(path), f"expected text, got {value!r}", line=line, key=key)
    if required and not value.strip():
        raise LibraryError(str(path), "must not be empty", line=line, key=key)
    return value.strip()


def _check_keys(
    table: Mapping[str, Any], allowed: Iterable[str], required: Iterable[str],
    path: Path, prefix: str, line: int | None,
) -> None:
    allowed = set(allowed)
    for k in sorted(table):
        if k not in allowed:
            raise LibraryError(
                str(path),
                f"unknown key '{k}' (allowed: {', '.join(sorted(allowed))})",
                line=line,
                key=f"{prefix}.{k}" if prefix else k,
            )
    for k in required:
        if k not in table:
            raise LibraryError(
                str(path), f"missing key '{k}'", line=line, key=f"{prefix}.{k}" if prefix else k
            )


# ----------------------------------------------------------------- courtyard
def _read_courtyard(path: Path) -> tuple[float, tuple[CourtyardRule, ...]]:
    data, text = _read_toml(path)
    _check_keys(data, ("grid_mm", "grid_source", "excess"), ("grid_mm", "grid_source", "excess"),
                path, "", None)
    grid = _toml_number(data["grid_mm"], path, "grid_mm", _line_of_key(text, "grid_mm"),
                        minimum=0.0, strict=True)
    _toml_text(data["grid_source"], path, "grid_source", _line_of_key(text, "grid_source"))
    excess = data["excess"]
    if not isinstance(excess, dict) or not excess:
        raise LibraryError(str(path), "expected [excess.NAME] tables", key="excess")
    rules = []
    for name in sorted(excess):
        table = excess[name]
        key = f"excess.{name}"
        line = _table_line(text, "excess", name)
        if not isinstance(table, dict):
            raise LibraryError(str(path), "expected a table", line=line, key=key)
        try:
            _check_keys(table, LEVELS + ("applies_to", "source"), LEVELS + ("source",), path, key, line)
            vals = {lv: _toml_number(table[lv], path, f"{key}.{lv}", line) for lv in LEVELS}
            rules.append(
                CourtyardRule(
                    name=name,
                    most=vals["most"],
                    nominal=vals["nominal"],
                    least=vals["least"],
                    applies_to=_toml_text(table.get("applies_to", ""), path, f"{key}.applies_to",
                                          line, required=False),
                    source=_toml_text(table["source"], path, f"{key}.source", line),
                )
            )
        except LibraryError as err:
            raise _refined(err, text, key, line) from None
    return grid, tuple(rules)


def _line_of_key(text: str, key: str) -> int | None:
    rx = re.compile(r"^\s*" + re.escape(key) + r"\s*=")
    for i, line in enumerate(text.splitlines(), start=1):
        if rx.match(line):
            return i
    return None


# ------------------------------------------------------------------ packages
def _csv_rows(path: Path) -> tuple[int, list[str], list[tuple[int, list[str]]]]:
    """Header line number, header cells and (line, cells) rows of a CSV file.

    Blank lines and lines starting with ``#`` are skipped; each record must
    sit on one line.
    """
    text = _read_text(path)
    header: list[str] | None = None
    header_line = 0
    rows: list[tuple[int, list[str]]] = []
    for number, line in enumerate(text.splitlines(), start=1):
        if not line.strip() or line.lstrip().startswith("#"):
            continue
        try:
            cells = next(csv.reader([line], strict=True))
        except (csv.Error, StopIteration) as e:
            raise LibraryError(str(path), f"not a valid CSV row ({e})", line=number) from None
        cells = [c.strip() for c in cells]
        if header is None:
            header, header_line = cells, number
        else:
            rows.append((number, cells))
    if header is None:
        raise LibraryError(str(path), "no header row")
    return header_line, header, rows


def _csv_number(
    cell: str, path: Path, line: int, key: str, *, minimum: float = 0.0, strict: bool = True
) -> float:
    try:
        v = float(cell)
    except ValueError:
        raise LibraryError(str(path), f"'{cell}' is not a number", line=line, key=key) from None
    if not math.isfinite(v):
        raise LibraryError(str(path), f"'{cell}' is not a finite number", line=line, key=key)
    if v < minimum or (strict and v == minimum):
        rel = "greater than" if strict else "at least"
        raise LibraryError(
            str(path), f"must be {rel} {_fmt_number(minimum)}, got '{cell}'", line=line, key=key
        )
    return v


def _read_packages(
    path: Path,
    rules: Mapping[str, CourtyardRule],
    grid: float,
    families: tuple[PackageFamily, ...],
) -> tuple[tuple[Package, ...], tuple[PackageInfo, ...]]:
    header_line, header, rows = _csv_rows(path)
    if tuple(header) != PACKAGE_COLUMNS:
        missing = [c for c in PACKAGE_COLUMNS if c not in header]
        extra = [c for c in header if c not in PACKAGE_COLUMNS]
        detail = []
        if missing:
            detail.append("missing " + ", ".join(missing))
        if extra:
            detail.append("unknown " + ", ".join(extra))
        if not detail:
            detail.append("columns out of order")
        raise LibraryError(
            str(path),
            f"header must be {','.join(PACKAGE_COLUMNS)} ({'; '.join(detail)})",
            line=header_line,
        )
    seen: dict[str, tuple[str, int]] = {}  # casefold name -> (package, line)
    seen_compact: dict[str, tuple[str, int]] = {}
    packages: list[Package] = []
    infos: list[PackageInfo] = []
    for line, cells in rows:
        if len(cells) != len(PACKAGE_COLUMNS):
            raise LibraryError(
                str(path),
                f"row has {len(cells)} fields, expected {len(PACKAGE_COLUMNS)}",
                line=line,
            )
        row = dict(zip(PACKAGE_COLUMNS, cells))
        name = row["name"]
        if not _NAME_RE.match(name):
            raise LibraryError(str(path), f"bad package name '{name}'", line=line, key="name")
        aliases = tuple(row["aliases"].split())
        for n in (name,) + aliases:
            col = "name" if n == name else "aliases"
            if not _NAME_RE.match(n):
                raise LibraryError(str(path), f"bad alias '{n}'", line=line, key=f"{name}.{col}")
            prev = seen.get(n.casefold())
            if prev is not None:
                raise LibraryError(
                    str(path),
                    f"'{n}' is already used by package {prev[0]} (line {prev[1]})",
                    line=line,
                    key=f"{name}.{col}",
                )
            prev_c = seen_compact.get(_compact(n))
            if prev_c is not None and prev_c[0] != name:
                raise LibraryError(
                    str(path),
                    f"'{n}' differs from a name of package {prev_c[0]} (line {prev_c[1]}) "
                    "only in '-', '_' or spaces",
                    line=line,
                    key=f"{name}.{col}",
                )
            for fam in families:
                if fam.match(n) is not None:
                    raise LibraryError(
                        str(path),
                        f"'{n}' has the form of family {fam.name} from {FAMILIES_FILE}",
                        line=line,
                        key=f"{name}.{col}",
                    )
            seen[n.casefold()] = (name, line)
            seen_compact.setdefault(_compact(n), (name, line))
        family = row["family"]
        if not _TOKEN_RE.match(family):
            raise LibraryError(
                str(path), f"bad family '{family}' (lower-case word)", line=line,
                key=f"{name}.family",
            )
        dims = {c: _csv_number(row[c], path, line, f"{name}.{c}") for c in _DIMENSIONS}
        dims["pitch_mm"] = _csv_number(row["pitch_mm"], path, line, f"{name}.pitch_mm",
                                       strict=False)
        pc_text = row["pin_count"]
        if not pc_text.isdigit() or int(pc_text) < 1:
            raise LibraryError(
                str(path), f"pin_count must be a whole number of at least 1, got '{pc_text}'",
                line=line, key=f"{name}.pin_count",
            )
        cls = row["courtyard_class"]
        if cls not in rules:
            raise LibraryError(
                str(path),
                f"unknown courtyard class '{cls}' (known in {COURTYARD_FILE}: "
                f"{', '.join(sorted(rules))})",
                line=line,
                key=f"{name}.courtyard_class",
            )
        for c in ("source", "land_basis", "height_basis"):
            if not row[c]:
                raise LibraryError(str(path), f"{c} must not be empty", line=line,
                                   key=f"{name}.{c}")
        rule = rules[cls]
        packages.append(
            _make_package(
                name=name,
                aliases=aliases,
                family=family,
                dims=dims,
                pin_count=int(pc_text),
                source=row["source"],
                rule=rule,
                grid=grid,
            )
        )
        infos.append(
            PackageInfo(
                name=name,
                family=family,
                courtyard_class=cls,
                source=row["source"],
                land_basis=row["land_basis"],
                height_basis=row["height_basis"],
                excess=tuple((lv, rule.excess(lv)) for lv in LEVELS),
            )
        )
    if not packages:
        raise LibraryError(str(path), "no packages listed")
    return tuple(packages), tuple(infos)


# ------------------------------------------------------------------ families
_FAMILY_KEYS = (
    "pattern", "aliases", "family", "parameter", "integer", "min", "max",
    "courtyard_class", "source", "land_basis", "height_basis",
) + _FAMILY_NUMERIC
_FAMILY_REQUIRED = tuple(k for k in _FAMILY_KEYS if k != "aliases")


def _read_families(
    path: Path, rules: Mapping[str, CourtyardRule]
) -> tuple[PackageFamily, ...]:
    data, text = _read_toml(path)
    out = []
    for name in sorted(data):
        table = data[name]
        line = _table_line(text, name)
        if not isinstance(table, dict):
            raise LibraryError(str(path), "expected a [FAMILY] table", line=line, key=name)
        try:
            _check_keys(table, _FAMILY_KEYS, _FAMILY_REQUIRED, path, name, line)
            param = _toml_text(table["parameter"], path, f"{name}.parameter", line)
            if not re.match(r"^[A-Za-z]\w*$", param):
                raise LibraryError(str(path), f"bad parameter name '{param}'", line=line,
                                   key=f"{name}.parameter")
            placeholder = "{" + param + "}"
            pattern = _toml_text(table["pattern"], path, f"{name}.pattern", line)
            aliases_raw = table.get("aliases", [])
            if not isinstance(aliases_raw, list):
                raise LibraryError(str(path), "expected a list of texts", line=line,
                                   key=f"{name}.aliases")
            aliases = tuple(
                _toml_text(a, path, f"{name}.aliases[{i}]", line) for i, a in enumerate(aliases_raw)
            )
            for k, p in [("pattern", pattern)] + [(f"aliases[{i}]", a) for i, a in enumerate(aliases)]:
                if p.count(placeholder) != 1:
                    raise LibraryError(
                        str(path), f"'{p}' must contain {placeholder} exactly once", line=line,
                        key=f"{name}.{k}",
                    )
            integer = table["integer"]
            if not isinstance(integer, bool):
                raise LibraryError(str(path), f"expected true or false, got {integer!r}", line=line,
                                   key=f"{name}.integer")
            lo = _toml_number(table["min"], path, f"{name}.min", line, minimum=0.0, strict=True)
            hi = _toml_number(table["max"], path, f"{name}.max", line, minimum=0.0, strict=True)
            if hi < lo:
                raise LibraryError(str(path), f"max {hi:g} is below min {lo:g}", line=line,
                                   key=f"{name}.max")
            if integer and (lo != int(lo) or hi != int(hi)):
                raise LibraryError(str(path), "min and max of a whole-number parameter must be "
                                   "whole numbers", line=line, key=f"{name}.min")
            fields = []
            for f in _FAMILY_NUMERIC:
                raw = table[f]
                fkey = f"{name}.{f}"
                if isinstance(raw, dict):
                    _check_keys(raw, ("base", "per"), ("per",), path, fkey, line)
                    base = _toml_number(raw.get("base", 0.0), path, f"{fkey}.base", line, minimum=None)
                    per = _toml_number(raw["per"], path, f"{fkey}.per", line, minimum=None)
                else:
                    base = _toml_number(raw, path, fkey, line, minimum=None)
                    per = 0.0
                strict = f != "pitch_mm"
                for v in (lo, hi):  # linear: the extremes bound every value
                    at = base + per * v
                    if at < 0 or (strict and at <= 0):
                        raise LibraryError(
                            str(path),
                            f"gives {at:g} at {param} = {v:g}; must be "
                            f"{'greater than' if strict else 'at least'} 0",
                            line=line,
                            key=fkey,
                        )
                if f == "pin_count":
                    whole = base == int(base) and per == int(per)
                    if not whole or (per != 0 and not integer):
                        raise LibraryError(
                            str(path), "pin_count must be a whole number for every parameter value",
                            line=line, key=fkey,
                        )
                fields.append((f, base, per))
            cls = _toml_text(table["courtyard_class"], path, f"{name}.courtyard_class", line)
            if cls not in rules:
                raise LibraryError(
                    str(path),
                    f"unknown courtyard class '{cls}' (known in {COURTYARD_FILE}: "
                    f"{', '.join(sorted(rules))})",
                    line=line,
                    key=f"{name}.courtyard_class",
                )
            family = _toml_text(table["family"], path, f"{name}.family", line)
            if not _TOKEN_RE.match(family):
                raise LibraryError(str(path), f"bad family '{family}' (lower-case word)", line=line,
                                   key=f"{name}.family")
            out.append(
                PackageFamily(
                    name=name,
                    pattern=pattern,
                    aliases=aliases,
                    family=family,
                    parameter=param,
                    integer=integer,
                    minimum=lo,
                    maximum=hi,
                    fields=tuple(fields),
                    courtyard_class=cls,
                    source=_toml_text(table["source"], path, f"{name}.source", line),
                    land_basis=_toml_text(table["land_basis"], path, f"{name}.land_basis", line),
                    height_basis=_toml_text(table["height_basis"], path, f"{name}.height_basis", line),
                )
            )
        except LibraryError as err:
            raise _refined(err, text, name, line) from None
    return tuple(out)


# --------------------------------------------------------------------- kinds
_KIND_KEYS = ("category", "value_unit", "description", "source", "pins", "pins_from_package")
_PIN_KEYS = ("number", "name", "role")


def _read_kinds(path: Path) -> tuple[PartKind, ...]:
    data, text = _read_toml(path)
    kinds = []
    for name in sorted(data):
        table = data[name]
        line = _table_line(text, name)
        if not isinstance(table, dict):
            raise LibraryError(str(path), "expected a [KIND] table", line=line, key=name)
        if not re.match(r"^[A-Za-z0-9][A-Za-z0-9_\-]*$", name):
            raise LibraryError(str(path), f"bad kind name '{name}'", line=line, key=name)
        try:
            _check_keys(table, _KIND_KEYS, ("category", "source"), path, name, line)
            category = table["category"]
            if category not in CATEGORIES:
                raise LibraryError(
                    str(path), f"unknown category {category!r} (use {', '.join(CATEGORIES)})",
                    line=line, key=f"{name}.category",
                )
            unit = table.get("value_unit", "")
            if unit not in VALUE_UNITS:
                raise LibraryError(
                    str(path), f"unknown value_unit {unit!r} (use ohm, F, H or \"\")",
                    line=line, key=f"{name}.value_unit",
                )
            from_pkg = table.get("pins_from_package", False)
            if not isinstance(from_pkg, bool):
                raise LibraryError(str(path), f"expected true or false, got {from_pkg!r}",
                                   line=line, key=f"{name}.pins_from_package")
            raw_pins = table.get("pins", [])
            if not isinstance(raw_pins, list):
                raise LibraryError(str(path), "expected a list of pin tables", line=line,
                                   key=f"{name}.pins")
            if from_pkg and raw_pins:
                raise LibraryError(str(path), "a kind with pins_from_package lists no pins",
                                   line=line, key=f"{name}.pins")
            if not from_pkg and not raw_pins:
                raise LibraryError(str(path), "a kind needs at least one pin", line=line,
                                   key=f"{name}.pins")
            pins = []
            numbers: dict[str, int] = {}
            names: dict[str, int] = {}
            for i, raw in enumerate(raw_pins):
                pkey = f"{name}.pins[{i}]"
                pline = _nth_line_after(text, line, r"\bnumber\s*=", i)
                if not isinstance(raw, dict):
                    raise LibraryError(str(path), "expected a pin table {number, name, role}",
                                       line=pline, key=pkey)
                _check_keys(raw, _PIN_KEYS, _PIN_KEYS, path, pkey, pline)
                num = raw["number"]
                if isinstance(num, bool) or not isinstance(num, (int, str)):
                    raise LibraryError(str(path), f"pin number must be a whole number or text, "
                                       f"got {num!r}", line=pline, key=f"{pkey}.number")
                if isinstance(num, int) and num < 1:
                    raise LibraryError(str(path), f"pin number must be at least 1, got {num}",
                                       line=pline, key=f"{pkey}.number")
                num_text = str(num).strip()
                if not num_text or any(c.isspace() for c in num_text):
                    raise LibraryError(str(path), f"bad pin number {num!r}", line=pline,
                                       key=f"{pkey}.number")
                pin_name = _toml_text(raw["name"], path, f"{pkey}.name", pline)
                if any(c.isspace() for c in pin_name):
                    raise LibraryError(str(path), f"pin name {pin_name!r} contains a space",
                                       line=pline, key=f"{pkey}.name")
                role = raw["role"]
                if role not in PIN_ROLES:
                    raise LibraryError(str(path), f"unknown role {role!r} (use {', '.join(PIN_ROLES)})",
                                       line=pline, key=f"{pkey}.role")
                if num_text.casefold() in numbers:
                    raise LibraryError(str(path), f"pin number {num_text} appears twice",
                                       line=pline, key=f"{pkey}.number")
                if pin_name.casefold() in names:
                    raise LibraryError(str(path), f"pin name {pin_name} appears twice",
                                       line=pline, key=f"{pkey}.name")
                numbers[num_text.casefold()] = i
                names[pin_name.casefold()] = i
                pins.append(PinDef(num_text, pin_name, role))
            for i, p in enumerate(pins):
                j = numbers.get(p.name.casefold())
                if j is not None and j != i:
                    raise LibraryError(
                        str(path),
                        f"pin name {p.name} is the number of another pin, so a reference to it "
                        "would be ambiguous",
                        line=_nth_line_after(text, line, r"\bnumber\s*=", i),
                        key=f"{name}.pins[{i}].name",
                    )
            kinds.append(
                PartKind(
                    name=name,
                    category=category,
                    pins=tuple(pins),
                    value_unit=unit,
                    pins_from_package=from_pkg,
                    description=_toml_text(table.get("description", ""), path,
                                           f"{name}.description", line, required=False),
                    source=_toml_text(table["source"], path, f"{name}.source", line),
                )
            )
        except LibraryError as err:
            raise _refined(err, text, name, line) from None
    if not kinds:
        raise LibraryError(str(path), "no part kinds listed")
    return tuple(kinds)
