"""The :class:`Library`: lookups of packages, families and part kinds, and :func:`load_library`."""

from __future__ import annotations

import difflib
import sys
from dataclasses import dataclass, field, replace
from pathlib import Path
from types import MappingProxyType
from typing import Iterable, Mapping

from pipeline.errors import LibraryError, UnknownNameError
from pipeline.model import Package, PartKind, PinDef
from pipeline.order import natural_key

from ._data import compact
from .courtyards import CourtyardRule, read_courtyard
from .kinds import read_kinds
from .heights import read_heights
from .lands import read_land_rules, read_terminals
from .pinrows import BadPinRow, PinRows, read_pin_rows
from .packages import PackageFamily, PackageInfo, info_for, read_families, read_packages

__all__ = ["DEFAULT_ROOT", "Library", "load_library"]

PACKAGES_FILE = "packages.csv"
FAMILIES_FILE = "families.toml"
KINDS_FILE = "kinds.toml"
COURTYARD_FILE = "courtyard.toml"
LANDS_FILE = "lands.toml"
TERMINALS_FILE = "terminals.csv"
HEIGHTS_FILE = "heights.csv"
PINROWS_FILE = "pinrows.toml"
_FILES = (COURTYARD_FILE, LANDS_FILE, TERMINALS_FILE, PACKAGES_FILE, FAMILIES_FILE, KINDS_FILE,
          HEIGHTS_FILE, PINROWS_FILE)


def _default_root() -> Path:
    """The footprint data: the checkout's ``footprints/`` (editable install), else the
    copy a regular install puts under ``<prefix>/share/snugboard/footprints``."""
    here = Path(__file__).resolve().parents[2] / "footprints"
    if here.is_dir():
        return here
    installed = Path(sys.prefix) / "share" / "snugboard" / "footprints"
    return installed if installed.is_dir() else here


#: The repository's own footprint data folder.
DEFAULT_ROOT = _default_root()

#: Where a lookup's unknown name is reported when the caller names no place.
LIBRARY_PLACE = "footprints"


@dataclass(frozen=True)
class Library:
    """Packages, package families, courtyard rules and part kinds.

    Build it with :func:`load_library`; derive one with user-defined kinds
    with :meth:`with_kinds`. Lookups are case-insensitive. An unknown name
    raises :class:`~pipeline.errors.UnknownNameError` with the closest names,
    placed at ``file`` / ``line`` / ``key`` when the caller gives them (where
    the user wrote the name), else at ``footprints``.
    """

    root: Path
    listed: tuple[Package, ...]
    infos: tuple[PackageInfo, ...]
    family_table: tuple[PackageFamily, ...]
    rules: tuple[CourtyardRule, ...]
    grid_mm: float
    kind_table: tuple[PartKind, ...]
    heights: Mapping[tuple[str, str], tuple[float, str]] = field(default_factory=dict, compare=False)
    pin_rows: PinRows | None = field(default=None, compare=False)
    _by_name: Mapping[str, Package] = field(init=False, compare=False, hash=False, repr=False)
    _by_compact: Mapping[str, Package] = field(init=False, compare=False, hash=False, repr=False)
    _kinds: Mapping[str, PartKind] = field(init=False, compare=False, hash=False, repr=False)
    _infos: Mapping[str, PackageInfo] = field(init=False, compare=False, hash=False, repr=False)
    #: family members and pin-row packages already built, by the text asked for (each is built once)
    _made: dict[str, Package] = field(init=False, compare=False, hash=False, repr=False)

    def __post_init__(self) -> None:
        by_name: dict[str, Package] = {}
        by_compact: dict[str, Package] = {}
        for pkg in self.listed:
            for n in (pkg.name,) + pkg.aliases:
                by_name.setdefault(n.casefold(), pkg)
                by_compact.setdefault(compact(n), pkg)
        object.__setattr__(self, "_by_name", MappingProxyType(by_name))
        object.__setattr__(self, "_by_compact", MappingProxyType(by_compact))
        object.__setattr__(
            self, "_kinds", MappingProxyType({k.name.casefold(): k for k in self.kind_table}))
        object.__setattr__(
            self, "_infos", MappingProxyType({i.name.casefold(): i for i in self.infos}))
        object.__setattr__(self, "_made", {})

    # ---------------------------------------------------------------- packages
    def _rule(self, name: str) -> CourtyardRule:
        return next(r for r in self.rules if r.name == name)  # checked when read

    def _family_lookup(self, name: str) -> tuple[PackageFamily, float] | None:
        for fam in self.family_table:
            v = fam.match(name)
            if v is not None:
                return fam, v
        return None

    def package(self, name: str, *, file: str = LIBRARY_PLACE, **where: object) -> Package:
        """The package called ``name`` (a name, an alias or a family member).

        Names are matched without regard to case; a second try ignores
        ``-``, ``_`` and spaces (``SOT23-5`` finds ``SOT-23-5``). Family
        members such as ``header-1x7-2.54`` and ``pad-1.5mm`` are expanded
        from ``families.toml``, once per name asked for (kept for the next
        ask). Cost O(1) for a listed or already built name.

        Raises
        ------
        UnknownNameError
            At ``file`` (and ``line=``, ``key=`` given in ``where``), naming
            the closest known names, or the allowed range for a family member
            out of range.

        >>> load_library().package("SOT23").name
        'SOT-23'
        """
        text = str(name).strip()
        if not text:
            raise UnknownNameError(file, "empty package name", name=text, **where)
        hit = self._by_name.get(text.casefold())
        if hit is None:
            hit = self._made.get(text)
        if hit is not None:
            return hit
        pin_row = self._pin_row(text, file, where)
        if pin_row is not None:
            self._made[text] = pin_row
            return pin_row
        fam_hit = self._family_lookup(text)
        if fam_hit is not None:
            fam, value = fam_hit
            if not fam.in_range(value):
                raise UnknownNameError(file, f"unknown package '{text}': {fam.range_text()}",
                                       name=text, suggestions=(fam.name,), **where)
            made = self._made[text] = fam.expand(value, self._rule(fam.courtyard_class), self.grid_mm)
            return made
        hit = self._by_compact.get(compact(text))
        if hit is not None:
            return hit
        suggestions = self._suggest_packages(text)
        hint = f"; closest: {', '.join(suggestions)}" if suggestions else ""
        raise UnknownNameError(
            file, f"unknown package '{text}'{hint} (list them with the packages command)",
            name=text, suggestions=suggestions, **where)

    def _pin_row(self, text: str, file: str, where: Mapping[str, object]) -> Package | None:
        """The ``pins`` package named by ``text`` (:mod:`.pinrows`), None for another form."""
        if self.pin_rows is None:
            return None
        try:
            spec = self.pin_rows.parse(text)
        except BadPinRow as e:
            raise UnknownNameError(file, f"package '{text}': {e.key}: {e.reason}", name=text,
                                   **where) from None
        if spec is None:
            return None
        return self.pin_rows.build(spec, self._rule("general"), self.grid_mm)

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
        except UnknownNameError:
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
        """Sources and bases of the figures of package ``name`` (UnknownNameError)."""
        pkg = self.package(name)
        hit = self._infos.get(pkg.name.casefold())
        if hit is not None:
            return hit
        spec = self.pin_rows.parse(pkg.name) if self.pin_rows is not None else None
        if spec is not None:
            return info_for(pkg.name, "pins", "general", self.pin_rows.texts(spec),
                            self._rule("general"))
        fam_hit = self._family_lookup(pkg.name)
        assert fam_hit is not None  # package() found it, so it is a family member
        fam = fam_hit[0]
        return info_for(pkg.name, fam.family, fam.courtyard_class, fam.texts(),
                        self._rule(fam.courtyard_class))

    def part_height(self, kind: str, package: Package) -> tuple[float, str]:
        """Seated height (mm) of a part of ``kind`` in ``package``, and where it comes from.

        A row of ``heights.csv`` for this package and kind wins (a chip resistor's
        thickness); otherwise the package's own height, the tallest part it may
        carry. A part's ``height_mm`` in the design overrides both (the caller's
        business).

        >>> lib = load_library()
        >>> lib.part_height("resistor", lib.package("0603"))[0], lib.part_height("capacitor", lib.package("0603"))[0]
        (0.55, 0.9)
        """
        hit = self.heights.get((package.name.casefold(), str(kind).casefold()))
        if hit is not None:
            return hit
        return package.height_mm, f"package {package.name} height (the tallest part it may carry)"

    # ------------------------------------------------------------------- kinds
    def kind(self, name: str, *, file: str = LIBRARY_PLACE, **where: object) -> PartKind:
        """The part kind called ``name`` (case-insensitive).

        Raises
        ------
        UnknownNameError
            At ``file`` (and ``where``), naming the closest known kinds.

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
            file, f"unknown part kind '{text}'{hint} (list them with the kinds command)",
            name=text, suggestions=close, **where)

    def has_kind(self, name: str) -> bool:
        """Whether :meth:`kind` finds ``name``."""
        return str(name).strip().casefold() in self._kinds

    def kinds(self) -> tuple[PartKind, ...]:
        """Every part kind, sorted by name."""
        return tuple(sorted(self.kind_table, key=lambda k: k.name))

    def pins_for(self, kind: PartKind, package: Package) -> tuple[PinDef, ...]:
        """The pins a part of ``kind`` in ``package`` has.

        A kind with ``pins_from_package`` (a header) gets pins ``1 .. N``,
        N = ``package.pin_count``, role terminal; any other kind its own pins.
        Whether the counts agree is :func:`pin_mismatch`'s question.
        """
        if kind.pins_from_package:
            return tuple(
                PinDef(str(i), str(i), "terminal") for i in range(1, package.pin_count + 1))
        return kind.pins

    def with_packages(self, extra: Iterable[Package]) -> "Library":
        """A copy of this library with ``extra`` packages (a design's own) listed too.

        Callers refuse a name the library already knows (:meth:`has_package`) first.
        """
        extra = tuple(extra)
        return self if not extra else replace(self, listed=self.listed + extra)

    def general_rule(self) -> CourtyardRule:
        """The general courtyard-excess class, for packages defined outside the library."""
        return self._rule("general")

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
    for fname in _FILES:
        path = base / fname
        try:
            st = path.stat()
        except OSError:
            raise LibraryError(str(path), "footprint data file not found") from None
        signature.append((fname, st.st_mtime_ns, st.st_size))
    key = (str(base.resolve()), tuple(signature))
    hit = _CACHE.get(key)
    if hit is None:
        hit = _CACHE[key] = _load(base)
    return hit


def _load(base: Path) -> Library:
    grid, rules = read_courtyard(base / COURTYARD_FILE)
    rule_map = {r.name: r for r in rules}
    families = read_families(base / FAMILIES_FILE, rule_map)
    land_rules = read_land_rules(base / LANDS_FILE)
    terminals = read_terminals(base / TERMINALS_FILE, land_rules)
    pin_rows = read_pin_rows(base / PINROWS_FILE)
    listed, infos = read_packages(base / PACKAGES_FILE, rule_map, grid, families, terminals,
                                  land_rules, pin_rows)
    return Library(root=base, listed=listed, infos=infos, family_table=families, rules=rules,
                   grid_mm=grid, kind_table=read_kinds(base / KINDS_FILE),
                   heights=MappingProxyType(read_heights(base / HEIGHTS_FILE)),
                   pin_rows=pin_rows)
