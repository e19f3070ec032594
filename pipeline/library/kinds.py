"""Part kinds: ``footprints/kinds.toml``, each kind's pins with names and electrical roles."""

from __future__ import annotations

import re
from pathlib import Path
from typing import Any

from pipeline.errors import LibraryError
from pipeline.model import PIN_ROLES, Package, PartKind, PinDef

from ._data import Fields, read_toml

__all__ = ["CATEGORIES", "VALUE_UNITS", "read_kinds", "pin_mismatch"]

#: Part-kind categories (pipeline.model.PartKind).
CATEGORIES = ("passive", "polarized", "semiconductor", "ic", "connector")

#: Units a part kind's value may have ("" = takes no value).
VALUE_UNITS = ("ohm", "F", "H", "")

_KIND_KEYS = ("category", "value_unit", "description", "source", "pins", "pins_from_package",
              "board_feature")
_PIN_KEYS = ("number", "name", "role")


def pin_mismatch(kind: PartKind, package: Package) -> str | None:
    """A sentence saying why ``kind`` cannot sit in ``package``, or ``None``.

    A kind with fixed pins needs a package with exactly as many pins
    (exposed pads are not counted in ``pin_count``); a header kind takes any.

    >>> from pipeline.library import load_library
    >>> lib = load_library()
    >>> pin_mismatch(lib.kind("opamp-dual"), lib.package("SOT-23")) is None
    False
    """
    if kind.pins_from_package:
        return None
    if len(kind.pins) != package.pin_count:
        return (f"kind '{kind.name}' has {len(kind.pins)} pins but package "
                f"'{package.name}' has {package.pin_count}")
    return None


def read_kinds(path: Path) -> tuple[PartKind, ...]:
    """The part kinds of ``kinds.toml``, checked."""
    src = read_toml(path)
    kinds = []
    for name in sorted(src.data):
        f = Fields(src, name)
        if not isinstance(src.data[name], dict):
            raise f.here("expected a [KIND] table")
        if not re.match(r"^[A-Za-z0-9][A-Za-z0-9_\-]*$", name):
            raise f.here(f"bad kind name '{name}'")
        kinds.append(_read_kind(f, src.data[name]))
    if not kinds:
        raise LibraryError(str(path), "no part kinds listed")
    return tuple(kinds)


def _read_kind(f: Fields, table: dict) -> PartKind:
    f.check_keys(table, _KIND_KEYS, ("category", "source"))
    category = table["category"]
    if category not in CATEGORIES:
        raise f.error("category", f"unknown category {category!r} (use {', '.join(CATEGORIES)})")
    unit = table.get("value_unit", "")
    if unit not in VALUE_UNITS:
        raise f.error("value_unit", f"unknown value_unit {unit!r} (use ohm, F, H or \"\")")
    from_pkg = f.flag("pins_from_package", table.get("pins_from_package", False))
    raw_pins = table.get("pins", [])
    if not isinstance(raw_pins, list):
        raise f.error("pins", "expected a list of pin tables")
    if from_pkg and raw_pins:
        raise f.error("pins", "a kind with pins_from_package lists no pins")
    if not from_pkg and not raw_pins:
        raise f.error("pins", "a kind needs at least one pin")
    return PartKind(
        name=f.prefix, category=category, pins=_read_pins(f, raw_pins), value_unit=unit,
        pins_from_package=from_pkg,
        board_feature=f.flag("board_feature", table.get("board_feature", False)),
        description=f.text("description", table.get("description", ""), required=False),
        source=f.text("source", table["source"]),
    )


def _read_pins(f: Fields, raw_pins: list) -> tuple[PinDef, ...]:
    """The pins of a kind: numbers and names unique, no name equal to another pin's number."""
    pins = []
    numbers: dict[str, int] = {}
    names: dict[str, int] = {}
    for i, raw in enumerate(raw_pins):
        p = Fields(f.src, f.key(f"pins[{i}]"))
        pin = _read_pin(p, raw)
        if pin.number.casefold() in numbers:
            raise p.error("number", f"pin number {pin.number} appears twice")
        if pin.name.casefold() in names:
            raise p.error("name", f"pin name {pin.name} appears twice")
        numbers[pin.number.casefold()] = i
        names[pin.name.casefold()] = i
        pins.append(pin)
    for i, pin in enumerate(pins):
        j = numbers.get(pin.name.casefold())
        if j is not None and j != i:
            raise Fields(f.src, f.key(f"pins[{i}]")).error(
                "name", f"pin name {pin.name} is the number of another pin, so a reference to it "
                "would be ambiguous")
    return tuple(pins)


def _read_pin(p: Fields, raw: Any) -> PinDef:
    if not isinstance(raw, dict):
        raise p.here("expected a pin table {number, name, role}")
    p.check_keys(raw, _PIN_KEYS, _PIN_KEYS)
    num = raw["number"]
    if isinstance(num, bool) or not isinstance(num, (int, str)):
        raise p.error("number", f"pin number must be a whole number or text, got {num!r}")
    if isinstance(num, int) and num < 1:
        raise p.error("number", f"pin number must be at least 1, got {num}")
    num_text = str(num).strip()
    if not num_text or any(c.isspace() for c in num_text):
        raise p.error("number", f"bad pin number {num!r}")
    pin_name = p.text("name", raw["name"])
    if any(c.isspace() for c in pin_name):
        raise p.error("name", f"pin name {pin_name!r} contains a space")
    role = raw["role"]
    if role not in PIN_ROLES:
        raise p.error("role", f"unknown role {role!r} (use {', '.join(PIN_ROLES)})")
    return PinDef(num_text, pin_name, role)
