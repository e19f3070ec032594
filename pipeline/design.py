"""Stage 1: read a sized design from its TOML file.

Entry point: :func:`read_design`. The format is CONTRACT.md section 2,
extended with ``[kinds.NAME]`` (part kinds defined in the design),
``[voltages]`` (declared net voltages) and ``[blocks.NAME]`` (declared
circuit blocks, read by :mod:`pipeline.circuit`). README.md documents every
key.

What the reader guarantees to later stages:

* every part has a known kind and package, its pins resolved from the kind
  (a header's pins from its package);
* passive values are parsed to SI base units (ohm, F, H); tolerances to
  fractions; ratings to volts and watts;
* every pin on a net names an existing part and pin, and is stored by pin
  *number*, whether the user wrote a number or a name.

What it leaves to :mod:`pipeline.check` (findings, not errors): single-pin
nets, a pin on two nets, net names differing only in case, unconnected
parts and pins.
"""

from __future__ import annotations

import math
import re
from pathlib import Path
from typing import Any, Iterable

from . import values as _values
from .blocktables import OLD_TABLE, TABLE, block_tables
from .errors import DesignError, Where
from .findings_group import listed
from .gcpause import paused_gc
from .library.custom import package_from_table
from .library.kinds import CATEGORIES
from .model import Package, OLD_PIN_ROLES, PIN_ROLES, Ask, Design, Finding, Fixed, Net, Part, PartKind, PinDef, PinRef, RawTable
from .tomlsrc import TomlSource, load

__all__ = ["read_design", "read_design_text", "KIND_CATEGORIES"]

KIND_CATEGORIES = CATEGORIES  # the library's list: one home

_TOP_KEYS = ("design", "packages", "kinds", "parts", "nets", "voltages", TABLE, OLD_TABLE)
_DESIGN_KEYS = ("name", "revision", "note")
_PART_KEYS = (
    "kind", "value", "package", "tolerance", "rating", "manufacturer", "mpn",
    "note", "dnp", "supplier", "order_code", "description", "height_mm", "at", "rotation", "side",
    "near", "within_mm", "at_edge",
)
_PASSTHROUGH = ("supplier", "order_code", "description")
_KIND_KEYS = ("category", "package", "pins", "description", "value_unit", "board_feature")
_PIN_KEYS = ("number", "name", "role")
_REF_RE = re.compile(r"^[A-Za-z][A-Za-z0-9_]*$")
_NET_RE = re.compile(r"^[^\s\"',;]+$")


def read_design(path: Path, library: Any, *, display: str | None = None) -> tuple[Design, list[Finding]]:
    """Read the design TOML file at ``path``.

    Parameters
    ----------
    path : Path
        The design file.
    library : pipeline.library.Library
        Packages and part kinds to resolve against.
    display : str, optional
        The file name as the user wrote it, for messages and
        ``Design.source``.

    Returns
    -------
    (Design, list of Finding)
        The design and the reader's warnings.

    Raises
    ------
    DesignError
        Any bad input, naming the file, line and key (or ref / pin).
    """
    with paused_gc():  # many long-lived objects and no cycles (pipeline.gcpause)
        src = load(Path(path), display or str(path), DesignError)
        return _read(src, library)


def read_design_text(text: str, library: Any, *, display: str = "design.toml") -> tuple[Design, list[Finding]]:
    """Like :func:`read_design` from text in memory (tests, tools).

    Examples
    --------
    >>> from pipeline.library import load_library
    >>> d, w = read_design_text('''
    ... [parts.R1]
    ... kind = "resistor"
    ... value = "4k7"
    ... package = "0603"
    ... [parts.R2]
    ... kind = "resistor"
    ... value = "10k"
    ... package = "0603"
    ... [nets]
    ... IN = ["R1.1"]
    ... MID = ["R1.2", "R2.1"]
    ... GND = ["R2.2"]
    ... ''', load_library())
    >>> d.part("R1").value
    4700.0
    >>> [str(p) for p in d.net("MID").pins]
    ['R1.2', 'R2.1']
    """
    return _read(TomlSource.from_text(display, text, DesignError), library)


# --------------------------------------------------------------------------
def _err(src: TomlSource, key: str, reason: str, **kw: Any) -> DesignError:
    return src.error(key, reason, DesignError, **kw)


def _expect_table(src: TomlSource, key: str, value: Any) -> dict:
    if not isinstance(value, dict):
        raise _err(src, key, f"expected a table, found {type(value).__name__}")
    return value


def _expect_str(src: TomlSource, key: str, value: Any) -> str:
    if isinstance(value, bool) or not isinstance(value, (str, int, float)):
        raise _err(src, key, f"expected text, found {type(value).__name__}")
    return str(value).strip()


def _unknown(src: TomlSource, prefix: str, table: dict, allowed: Iterable[str]) -> None:
    allowed = tuple(allowed)
    for k in table:
        if k not in allowed:
            raise _err(src, f"{prefix}.{k}" if prefix else k,
                       f"unknown key '{k}'; expected one of: {', '.join(allowed)}")


def _read(src: TomlSource, library: Any) -> tuple[Design, list[Finding]]:
    data = src.data
    warnings: list[Finding] = []
    _unknown(src, "", data, _TOP_KEYS)

    head = _expect_table(src, "design", data.get("design", {}))
    _unknown(src, "design", head, _DESIGN_KEYS)
    name = _expect_str(src, "design.name", head.get("name", Path(src.display).stem))
    revision = _expect_str(src, "design.revision", head.get("revision", ""))

    packages = _read_packages(src, _expect_table(src, "packages", data.get("packages", {})), library)
    library = library.with_packages(packages)
    kinds, default_pkgs = _read_kinds(src, _expect_table(src, "kinds", data.get("kinds", {})), library,
                                      warnings)
    lib = library.with_kinds(kinds) if kinds else library

    parts_tbl = _expect_table(src, "parts", data.get("parts", {}))
    if not parts_tbl:
        raise _err(src, "parts", "the design has no parts: add [parts.REF] tables")
    memo: dict = {}  # lookups and parses already made: the same text gives the same result
    parts = tuple(_read_part(src, ref, body, lib, default_pkgs, memo) for ref, body in parts_tbl.items())
    by_ref = {p.ref: p for p in parts}
    _check_near(src, parts, by_ref)
    warnings.extend(_height_notes(parts, lib))

    nets_tbl = _expect_table(src, "nets", data.get("nets", {}))
    volts = _read_voltages(src, _expect_table(src, "voltages", data.get("voltages", {})), nets_tbl)
    nets = tuple(
        _read_net(src, name_, pins, by_ref, volts.get(name_), warnings)
        for name_, pins in nets_tbl.items()
    )

    stages, notes = block_tables(src, DesignError)
    warnings.extend(notes)
    design = Design(
        name=name, revision=revision, source=src.display, parts=parts, nets=nets,
        stages=stages, kinds=tuple(kinds), packages=packages,
    )
    return design, warnings


def _read_kinds(src: TomlSource, table: dict, library: Any,
                warnings: list[Finding]) -> tuple[list[PartKind], dict[str, str]]:
    """Design-defined kinds and their default packages (kind name -> package)."""
    out = []
    defaults: dict[str, str] = {}
    for kname, body in table.items():
        key = f"kinds.{kname}"
        body = _expect_table(src, key, body)
        _unknown(src, key, body, _KIND_KEYS)
        if library.has_kind(kname):
            raise _err(src, key, f"kind '{kname}' already exists in the library; give yours another name")
        category = _expect_str(src, f"{key}.category", body.get("category", "ic"))
        if category not in KIND_CATEGORIES:
            raise _err(src, f"{key}.category", f"unknown category '{category}'; expected one of: {', '.join(KIND_CATEGORIES)}")
        unit = _expect_str(src, f"{key}.value_unit", body.get("value_unit", ""))
        if unit not in ("", "ohm", "F", "H"):
            raise _err(src, f"{key}.value_unit", f"unknown value unit '{unit}'; expected ohm, F, H or nothing")
        pins_raw = body.get("pins")
        if not isinstance(pins_raw, list) or not pins_raw:
            raise _err(src, f"{key}.pins", "a kind needs a list of pins: pins = [ { number = 1, name = \"OUT\", role = \"output\" }, ... ]")
        pins: list[PinDef] = []
        seen_numbers: set[str] = set()
        for i, p in enumerate(pins_raw):
            pkey = f"{key}.pins"
            if not isinstance(p, dict):
                raise _err(src, pkey, f"pin {i + 1} must be a table {{ number, name, role }}")
            _unknown(src, pkey, p, _PIN_KEYS)
            if "number" not in p:
                raise _err(src, pkey, f"pin {i + 1} has no number")
            number = _expect_str(src, pkey, p["number"])
            if number in seen_numbers:
                raise _err(src, pkey, f"pin number {number} appears twice")
            seen_numbers.add(number)
            pname = _expect_str(src, pkey, p.get("name", number))
            role = _expect_str(src, pkey, p.get("role", "terminal"))
            if role in OLD_PIN_ROLES:
                warnings.append(Finding(
                    "warning", "design.old-role-name", (f"{kname}.{number}",),
                    f"{src.display}: {pkey}: pin {number} role '{role}' is the previous release's "
                    f"spelling; write '{OLD_PIN_ROLES[role]}' (the old one is read until the next release)"))
                role = OLD_PIN_ROLES[role]
            if role not in PIN_ROLES:
                raise _err(src, pkey, f"pin {number}: unknown role '{role}'; expected one of: {', '.join(PIN_ROLES)}")
            pins.append(PinDef(number, pname, role))
        desc = _expect_str(src, f"{key}.description", body.get("description", ""))
        feature = body.get("board_feature", False)
        if not isinstance(feature, bool):
            raise _err(src, f"{key}.board_feature", "board_feature must be true or false")
        default_pkg = _expect_str(src, f"{key}.package", body.get("package", ""))
        if default_pkg:
            library.package(default_pkg, **_at(src, f"{key}.package"))
        out.append(PartKind(
            name=kname, category=category, pins=tuple(pins), value_unit=unit, board_feature=feature,
            description=desc, source=f"defined in {src.display}" + (f"; default package {default_pkg}" if default_pkg else ""),
        ))
        defaults[kname] = default_pkg
    return out, defaults


def _read_packages(src: TomlSource, table: dict, library: Any) -> tuple[Package, ...]:
    """The design's own packages (``[packages.NAME]``, pipeline.library.custom)."""
    out = []
    for name, body in table.items():
        key = f"packages.{name}"
        if library.has_package(name):
            raise _err(src, key, f"package '{name}' already exists in the library; give yours another name")
        out.append(package_from_table(name, body, key, lambda k, why: _err(src, k, why),
                                      library.general_rule(), library.grid_mm))
    return tuple(out)


def _height_notes(parts: tuple[Part, ...], lib: Any) -> list[Finding]:
    """One note naming the chip capacitors that take the package's (capacitor) height.

    Chip resistors take their size code's resistor thickness (``heights.csv``);
    a chip capacitor's thickness depends on its value, so it takes the package
    height unless the design gives ``height_mm``.
    """
    refs = [p.ref for p in parts if p.kind == "capacitor" and p.height_mm is None
            and lib.package(p.package).family == "chip"]
    if not refs:
        return []
    named = set(refs)  # a set: one hash lookup per part, not a scan of refs
    sizes = sorted({p.package for p in parts if p.ref in named})
    shown = ", ".join(f"{s} {lib.package(s).height_mm:.2f} mm" for s in sizes)
    return [Finding("info", "design.height-default", tuple(refs),
                    f"{listed(refs)}: chip capacitors take the package height ({shown}, a "
                    "thick capacitor's); chip resistors take the resistor thickness. Give "
                    "height_mm on a part to use its datasheet figure")]


def _where(src: TomlSource, key: str, reason: str = "") -> Where:
    """Where a value parser reports bad text: this file, at ``key`` (``reason``: see :class:`Where`)."""
    return Where(src.display, src.line(key), key, reason)


def _at(src: TomlSource, key: str) -> dict[str, Any]:
    """Where a library lookup reports an unknown name: this file, at ``key``."""
    return {"file": src.display, "line": src.line(key), "key": key}


#: the keys that place a part (their values carry its line): a table with one is read on its own
_PLACING_KEYS = ("at", "rotation", "side", "near", "within_mm", "at_edge")


def _read_part(src: TomlSource, ref: str, body: Any, lib: Any, default_pkgs: dict[str, str],
               memo: dict | None = None) -> Part:
    """One ``[parts.REF]`` table as a :class:`Part`: its kind and package (:func:`_part_kind`), value,
    tolerance and rating (:func:`_part_values`), then the plain keys (:func:`_part_fields`). Cost
    O(keys of the table).

    ``memo`` keeps what was read from the same text before, shared by the parts of one file: a
    kind and package pair, a value, tolerance or rating, and the fields of a whole table of plain
    keys (text, numbers and flags, each with its type: ``dnp = 1`` is not ``dnp = true``), so
    the many parts that read alike cost one dictionary lookup each. Only text that was read
    without error is kept, so an error still names the first part that shows it."""
    memo = {} if memo is None else memo
    key = f"parts.{ref}"
    if not _REF_RE.match(ref):
        raise _err(src, key, f"'{ref}' is not a usable reference: start with a letter, then letters, digits or _")
    body = _expect_table(src, key, body)
    same = None
    if all(type(v) in (str, int, float, bool) for v in body.values()) and not any(k in body for k in _PLACING_KEYS):
        same = ("table", tuple((k, type(v), v) for k, v in body.items()))
    fields = memo.get(same) if same is not None else None
    if fields is None:
        fields = _part_fields(src, key, body, lib, default_pkgs, memo)
        if same is not None:
            memo[same] = fields
    return Part(ref=ref, line=src.line(key) or 0, **fields)


def _part_fields(src: TomlSource, key: str, body: dict, lib: Any, default_pkgs: dict[str, str],
                 memo: dict) -> dict[str, Any]:
    """The fields of :class:`Part` read from the table ``key`` (all but ``ref`` and ``line``)."""
    _unknown(src, key, body, _PART_KEYS)
    pair = ("pair", body.get("kind"), body.get("package"))
    plain = all(isinstance(t, str) or t is None for t in pair)  # text only: a usable memo key
    found = memo.get(pair) if plain else None
    if found is None:
        found = _part_kind(src, key, body, lib, default_pkgs)
        if plain:
            memo[pair] = found
    kind, package, pins = found
    values = _part_values(src, key, body, kind, memo)
    dnp = body.get("dnp", False)
    if not isinstance(dnp, bool):
        raise _err(src, f"{key}.dnp", "dnp must be true or false")
    extra = tuple(sorted(
        (k, _expect_str(src, f"{key}.{k}", body[k])) for k in _PASSTHROUGH if k in body
    ))
    height = body.get("height_mm")
    if height is not None and (isinstance(height, bool) or not isinstance(height, (int, float))
                               or not 0 < height < 100):
        raise _err(src, f"{key}.height_mm", f"height_mm must be a number of millimetres above 0, "
                                            f"got {height!r}")
    return dict(
        fixed=_read_fixed(src, key, body), ask=_read_ask(src, key, body),
        kind=kind.name, package=package.name, pins=pins, **values,
        manufacturer=_expect_str(src, f"{key}.manufacturer", body.get("manufacturer", "")),
        mpn=_expect_str(src, f"{key}.mpn", body.get("mpn", "")),
        note=_expect_str(src, f"{key}.note", body.get("note", "")),
        dnp=dnp, extra=extra,
        height_mm=None if height is None else float(height),
    )


def _part_kind(src: TomlSource, key: str, body: dict, lib: Any, default_pkgs: dict[str, str]) -> tuple:
    """``(kind, package, pins)`` of the part table ``key``: the kind and package looked up in the
    library (the kind's default package when none is written), pins checked against the package."""
    if "kind" not in body:
        raise _err(src, f"{key}.kind", "every part needs a kind, e.g. kind = \"resistor\"")
    kname = _expect_str(src, f"{key}.kind", body["kind"])
    kind = lib.kind(kname, **_at(src, f"{key}.kind"))
    pkg_name = body.get("package") or default_pkgs.get(kname, "")
    if not pkg_name:
        raise _err(src, f"{key}.package", "every part needs a package, e.g. package = \"0603\"")
    pkg_name = _expect_str(src, f"{key}.package", pkg_name)
    package = lib.package(pkg_name, **_at(src, f"{key}.package"))
    pins = tuple(lib.pins_for(kind, package))
    if not kind.pins_from_package and package.pin_count and package.pin_count != len(pins):
        raise _err(src, f"{key}.package",
                   f"package {package.name} has {package.pin_count} pins but kind {kind.name} has {len(pins)}")
    return kind, package, pins


def _parsed(memo: dict, what: tuple, parse: Any) -> Any:
    """``parse()``, kept in ``memo`` under ``what`` (the parser's name and its text); a parse that
    raises keeps nothing."""
    if what not in memo:
        memo[what] = parse()
    return memo[what]


def _part_values(src: TomlSource, key: str, body: dict, kind: Any, memo: dict | None = None) -> dict[str, Any]:
    """The part's value (SI units of the kind's value unit), tolerance (a fraction) and rating
    (V, W), each with its text as written: :class:`Part`'s fields of those names. ``memo``: see
    :func:`_read_part`."""
    memo = {} if memo is None else memo
    value: float | None = None
    value_text = ""
    if "value" in body:
        value_text = _expect_str(src, f"{key}.value", body["value"])
        if kind.value_unit:
            value = _parsed(memo, ("value", kind.value_unit, value_text), lambda: _values.parse_value(
                value_text, kind.value_unit, at=_where(src, f"{key}.value")))
    elif kind.value_unit:
        raise _err(src, f"{key}.value", f"a {kind.name} needs a value, e.g. value = \"10k\"")
    tol = None
    tol_text = ""
    if "tolerance" in body:
        tol_text = _expect_str(src, f"{key}.tolerance", body["tolerance"])
        tol = _parsed(memo, ("tolerance", tol_text), lambda: _values.parse_tolerance(
            tol_text, at=_where(src, f"{key}.tolerance")))
    rv = rw = None
    rating_text = ""
    if "rating" in body:
        rating_text = _expect_str(src, f"{key}.rating", body["rating"])
        rv, rw = _parsed(memo, ("rating", rating_text), lambda: _values.parse_rating(
            rating_text, at=_where(src, f"{key}.rating")))
    return dict(value=value, value_text=value_text, tolerance=tol, tolerance_text=tol_text,
                rating_v=rv, rating_w=rw, rating_text=rating_text)


def _resolve_pin(src: TomlSource, key: str, text: str, by_ref: dict[str, Part]) -> PinRef:
    if "." not in text:
        raise _err(src, key, f"'{text}' is not a pin: write REF.PIN, e.g. R1.2 or U1.OUTA")
    ref, pin = text.split(".", 1)
    ref, pin = ref.strip(), pin.strip()
    part = by_ref.get(ref)
    if part is None:
        close = [r for r in by_ref if r.lower() == ref.lower()]
        hint = f"; did you mean {close[0]}?" if close else ""
        raise _err(src, key, f"no part '{ref}' in the design{hint}", ref=text)
    try:
        part.pin(pin)
        return PinRef(ref, pin)
    except KeyError:
        pass
    named = [p.number for p in part.pins if p.name == pin]
    if not named:
        named = [p.number for p in part.pins if p.name.lower() == pin.lower()]
    if len(named) == 1:
        return PinRef(ref, named[0])
    if len(named) > 1:
        raise _err(src, key, f"{part.ref} has several pins named '{pin}' (numbers {', '.join(named)}): use the number", ref=text)
    choices = ", ".join(f"{p.number} {p.name}" if p.name != p.number else p.number for p in part.pins)
    raise _err(src, key, f"{part.ref} ({part.kind}, {part.package}) has no pin '{pin}'; its pins are: {choices}", ref=text)


def _read_ask(src: TomlSource, key: str, body: dict) -> Ask | None:
    """``near = "U3"`` with ``within_mm``, ``at_edge``: where the placer should put the part."""
    if not any(k in body for k in ("near", "within_mm", "at_edge")):
        return None
    near = _expect_str(src, f"{key}.near", body.get("near", ""))
    within = body.get("within_mm")
    if within is not None and (isinstance(within, bool) or not isinstance(within, (int, float))
                               or not math.isfinite(within) or within <= 0):
        raise _err(src, f"{key}.within_mm", f"within_mm must be a number of millimetres above 0, got {within!r}")
    if within is not None and not near:
        raise _err(src, f"{key}.within_mm", "within_mm goes with near = \"REF\" (the part to sit near)")
    edge = body.get("at_edge")
    if edge is not None and not isinstance(edge, bool):
        raise _err(src, f"{key}.at_edge", f"at_edge must be true or false, not {edge!r}")
    return Ask(near, None if within is None else float(within), edge, src.display, src.line(key) or 0)


def _check_near(src: TomlSource, parts: tuple[Part, ...], by_ref: dict[str, Part]) -> None:
    """Every ``near`` names another fitted part of the design."""
    for p in parts:
        if p.ask is None or not p.ask.near:
            continue
        key = f"parts.{p.ref}.near"
        other = by_ref.get(p.ask.near)
        if other is None:
            raise _err(src, key, f"near names {p.ask.near!r}, which is not a part of the design")
        if other.ref == p.ref:
            raise _err(src, key, "near names the part itself: name the part it should sit beside")
        if other.dnp and not p.dnp:
            raise _err(src, key, f"near names {other.ref}, which is not fitted (dnp)")


def _read_fixed(src: TomlSource, key: str, body: dict) -> Fixed | None:
    """``at = [x, y]`` (mm, drawing frame), ``rotation`` (0/90/180/270), ``side``: a part fixed in place."""
    if "at" not in body:
        for k in ("rotation", "side"):
            if k in body:
                raise _err(src, f"{key}.{k}", f"{k} fixes a part in place and needs at = [x, y] (mm) as well")
        return None
    at = body["at"]
    if (not isinstance(at, list) or len(at) != 2
            or not all(isinstance(v, (int, float)) and not isinstance(v, bool) and math.isfinite(v) for v in at)):
        raise _err(src, f"{key}.at", "at is the courtyard centre in the drawing's frame, in mm: at = [x, y]")
    rot = body.get("rotation", 0)
    if isinstance(rot, bool) or rot not in (0, 90, 180, 270):
        raise _err(src, f"{key}.rotation", f"rotation must be 0, 90, 180 or 270 (degrees), not {rot!r}")
    side = body.get("side", "top")
    if side not in ("top", "bottom"):
        raise _err(src, f"{key}.side", f"side must be \"top\" or \"bottom\", not {side!r}")
    return Fixed(float(at[0]), float(at[1]), int(rot), side, src.display, src.line(key) or 0)


def _read_net(src: TomlSource, name: str, pins_raw: Any, by_ref: dict[str, Part],
              volt: tuple[float | None, float | None, bool] | None, warnings: list[Finding]) -> Net:
    key = f"nets.{name}"
    if not _NET_RE.match(name):
        raise _err(src, key, f"net name '{name}' must not be empty or contain spaces, quotes, commas or semicolons")
    if not isinstance(pins_raw, list):
        raise _err(src, key, "a net is a list of pins, e.g. GND = [\"R1.2\", \"U1.4\"]")
    pins: list[PinRef] = []
    seen: set[PinRef] = set()
    for item in pins_raw:
        if not isinstance(item, str):
            raise _err(src, key, f"pins are written as text \"REF.PIN\", found {item!r}")
        pr = _resolve_pin(src, key, item, by_ref)
        if pr in seen:
            warnings.append(Finding("warning", "design.duplicate-pin", (name, str(pr)),
                                    f"{src.display}: net {name} lists {pr} twice; it is counted once."))
            continue
        seen.add(pr)
        pins.append(pr)
    v, vmax, bat = volt if volt else (None, None, False)
    return Net(name=name, pins=tuple(pins), voltage=v, voltage_max=vmax, battery=bat, line=src.line(key) or 0)


def _read_voltages(src: TomlSource, table: dict, nets: dict) -> dict[str, tuple[float | None, float | None, bool]]:
    out = {}
    for name, spec in table.items():
        key = f"voltages.{name}"
        if name not in nets:
            raise _err(src, key, f"no net '{name}' in [nets]")
        if isinstance(spec, dict):
            _unknown(src, key, spec, ("nominal", "max", "battery"))
            nominal = _volts(src, f"{key}.nominal", spec["nominal"]) if "nominal" in spec else None
            vmax = _volts(src, f"{key}.max", spec["max"]) if "max" in spec else None
            bat = spec.get("battery", False)
            if not isinstance(bat, bool):
                raise _err(src, f"{key}.battery", "battery must be true or false")
            if nominal is None and vmax is None:
                raise _err(src, key, "give nominal = \"...V\" and/or max = \"...V\"")
        else:
            nominal, vmax, bat = _volts(src, key, spec), None, False
        out[name] = (nominal, vmax, bat)
    return out


#: the largest net voltage a design may declare, either sign (100 kV: far above any board this tool
#: sizes; it keeps figures derived from it finite). Common practice, not a standard.
MAX_VOLTS = 1e5


def _volts(src: TomlSource, key: str, spec: Any) -> float:
    if isinstance(spec, bool):
        raise _err(src, key, "expected a voltage such as \"3.3V\"")
    if isinstance(spec, (int, float)):
        return float(src.number(key, spec, DesignError, lo=-MAX_VOLTS, hi=MAX_VOLTS))
    text = _expect_str(src, key, spec)
    t = text.rstrip()
    if t[-1:] in "vV":
        t = t[:-1]
    neg = t.strip().startswith("-")
    v = _values.parse_value(t.strip().lstrip("-"), "",
                            at=_where(src, key, f"'{text}' is not a voltage; write e.g. \"3.3V\" or \"-5V\""))
    return float(src.number(key, -v if neg else v, DesignError, lo=-MAX_VOLTS, hi=MAX_VOLTS))
