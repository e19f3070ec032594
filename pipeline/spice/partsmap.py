"""The parts-map TOML file: kinds, packages and pins per element, model, subcircuit or letter."""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from ..blocktables import OLD_TABLE, TABLE, block_tables
from ..errors import DesignError
from ..model import Finding, RawTable
from ..tomlsrc import TomlSource
from ..tomlsrc import load as _load_toml
from .tokens import REF_RE

_PM_TOP = ("defaults", "models", "subckt", "refs", "design", TABLE, OLD_TABLE)
_PM_MAP_KEYS = ("kind", "package", "pins")
_PM_REF_KEYS = ("kind", "package", "pins", "ref", "value", "tolerance", "rating", "manufacturer", "mpn",
                "note", "dnp", "supplier", "order_code", "description")
_PM_DEFAULT_KEYS = ("kind", "package")
PASSTHROUGH = ("supplier", "order_code", "description")
#: Element letters read as one board part each (``X``, a subcircuit instance, aside); lower case.
PART_LETTERS = ("r", "c", "l", "d", "q", "m", "j")


def letters_text(letters: tuple[str, ...]) -> str:
    """Element letters as messages name them: ``("r", "c", "l")`` -> ``"R, C or L"``."""
    up = [c.upper() for c in letters]
    return ", ".join(up[:-1]) + " or " + up[-1]


@dataclass(frozen=True)
class Spec:
    """What one parts-map table (or record) says about an element."""

    origin: str  # "refs", "record", "subckt", "models", "defaults"
    file: str
    key: str
    line: int | None
    kind: str = ""
    package: str = ""
    pins: tuple[str, ...] | None = None
    ref: str = ""
    fields: tuple[tuple[str, Any], ...] = ()

    def get(self, k: str, default: Any = None) -> Any:
        for kk, v in self.fields:
            if kk == k:
                return v
        return default


@dataclass
class PartsMap:
    defaults: dict[str, Spec] = field(default_factory=dict)
    models: dict[str, Spec] = field(default_factory=dict)
    subckt: dict[str, Spec] = field(default_factory=dict)
    refs: dict[str, Spec] = field(default_factory=dict)
    revision: str | None = None
    stages: tuple[RawTable, ...] = ()
    notes: list[Finding] = field(default_factory=list)  # warnings of the reading
    used: set[str] = field(default_factory=set)


def read_parts_map(path: Path, shown: str, library: Any) -> PartsMap:
    """Read the parts map (module docstring of :mod:`pipeline.spice`); every fault names its key and line.

    Kinds and packages are checked against ``library`` as they are read.
    """
    rd = _MapReader(_load_toml(path, shown, DesignError), shown, library)
    data = rd.src.data
    rd.unknown("", data, _PM_TOP)
    pm = PartsMap()
    for letter, body in rd.table("defaults", data.get("defaults", {})).items():
        key = f"defaults.{letter}"
        if letter.lower() not in PART_LETTERS:
            raise rd.err(key, f"defaults are per element letter {letters_text(PART_LETTERS)}, not '{letter}'")
        if letter.lower() in pm.defaults:
            raise rd.err(key, f"defaults for {letter.upper()} given twice")
        pm.defaults[letter.lower()] = rd.spec("defaults", key, rd.table(key, body), _PM_DEFAULT_KEYS)
    for group, target in (("models", pm.models), ("subckt", pm.subckt), ("refs", pm.refs)):
        for name, body in rd.table(group, data.get(group, {})).items():
            key = f"{group}.{name}"
            if name.lower() in target:
                raise rd.err(key, f"'{name}' is given twice (names are not case-sensitive in SPICE)")
            target[name.lower()] = rd.spec(group, key, rd.table(key, body),
                                           _PM_REF_KEYS if group == "refs" else _PM_MAP_KEYS)
    head = rd.table("design", data.get("design", {}))
    rd.unknown("design", head, ("revision",))
    if "revision" in head:
        pm.revision = rd.text("design.revision", head["revision"])
    pm.stages, pm.notes = block_tables(rd.src, DesignError)
    return pm


@dataclass(frozen=True)
class _MapReader:
    """Typed reads of one parts-map file, each fault located at its key."""

    src: TomlSource
    shown: str
    library: Any

    def err(self, key: str, reason: str) -> DesignError:
        return self.src.error(key, reason, DesignError)

    def table(self, key: str, value: Any) -> dict:
        if not isinstance(value, dict):
            raise self.err(key, f"expected a table, found {type(value).__name__}")
        return value

    def unknown(self, prefix: str, t: dict, allowed: tuple[str, ...]) -> None:
        for k in t:
            if k not in allowed:
                raise self.err(f"{prefix}.{k}" if prefix else k,
                               f"unknown key '{k}'; expected one of: {', '.join(allowed)}")

    def text(self, key: str, v: Any) -> str:
        if isinstance(v, bool) or not isinstance(v, (str, int, float)):
            raise self.err(key, f"expected text, found {type(v).__name__}")
        return str(v).strip()

    def spec(self, origin: str, key: str, body: dict, allowed: tuple[str, ...]) -> Spec:
        """One ``refs`` / ``subckt`` / ``models`` / ``defaults`` table as a :class:`Spec`."""
        self.unknown(key, body, allowed)
        kind = self.text(f"{key}.kind", body["kind"]) if "kind" in body else ""
        if kind:
            self.library.kind(kind, file=self.shown, line=self.src.line(f"{key}.kind"), key=f"{key}.kind")
        package = self.text(f"{key}.package", body["package"]) if "package" in body else ""
        if package:
            package = self.library.package(package, file=self.shown, line=self.src.line(f"{key}.package"),
                                           key=f"{key}.package").name
        ref = self.text(f"{key}.ref", body["ref"]) if "ref" in body else ""
        if ref and not REF_RE.match(ref):
            raise self.err(f"{key}.ref",
                           f"'{ref}' is not a usable reference: start with a letter, then letters, digits or _")
        return Spec(origin, self.shown, key, self.src.line(key), kind, package, self._pins(key, body), ref,
                    self._fields(key, body))

    def _pins(self, key: str, body: dict) -> tuple[str, ...] | None:
        if "pins" not in body:
            return None
        raw = body["pins"]
        if not isinstance(raw, list) or not raw:
            raise self.err(f"{key}.pins", "pins is a list naming, in node order, each node's kind pin: "
                           "pins = [\"3\", \"2\", \"8\", \"4\", \"1\"]")
        return tuple(self.text(f"{key}.pins", p) for p in raw)

    def _fields(self, key: str, body: dict) -> tuple[tuple[str, Any], ...]:
        fields: list[tuple[str, Any]] = [(k, self.text(f"{key}.{k}", body[k]))
                                         for k in ("value", "tolerance", "rating", "manufacturer", "mpn", "note",
                                                   *PASSTHROUGH) if k in body]
        if "dnp" in body:
            if not isinstance(body["dnp"], bool):
                raise self.err(f"{key}.dnp", "dnp must be true or false")
            fields.append(("dnp", body["dnp"]))
        return tuple(fields)
