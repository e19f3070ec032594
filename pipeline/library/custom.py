"""Packages defined in a design file: ``[packages.NAME]``, any real part the library lacks.

A table gives the body (``body = [length, width]``, ``height_mm``) and the pads,
either as an explicit list (``pads = [ { number, x, y, size = [w, h], shape,
drill }, ... ]``) or as a ``pattern``:

- ``one-row``: ``pins`` pads along x at ``pitch``;
- ``two-rows``: ``pins`` pads in two rows along x, ``span`` apart (centre to
  centre), numbered anticlockwise from pin 1 at the left of the lower row;
- ``four-sides``: ``pins / 4`` pads a side, ``span`` between opposite sides'
  centres, anticlockwise from the left of the lower side;
- ``grid``: ``rows`` x ``columns`` pads, ``pitch`` along x and ``row_pitch``
  along y, numbered row by row from the lower left;

each with ``pad = [along, across]`` (mm; turned on the left and right sides of
``four-sides``), optional ``drill``, ``shape`` and ``exposed = [length, width]``
for a centre pad ``EP``; ``numbers`` renames the pins in order. Optional
``courtyard = [length, width]`` replaces the derived courtyard (the IPC-7351B
general excess around body and pads otherwise). Lengths are millimetres in the
package frame of :mod:`.lands`. Bad input raises the caller's error (file and
key) through ``fail(key, reason)``.
"""

from __future__ import annotations

import math
from dataclasses import replace
from typing import Any, Callable

from pipeline.model import DENSITY_LEVELS, PAD_SHAPES, Courtyard, Package, Pad

from .courtyards import CourtyardRule
from .packages import make_package

__all__ = ["PACKAGE_KEYS", "PATTERNS", "package_from_table"]

PACKAGE_KEYS = ("body", "height_mm", "pads", "pattern", "courtyard", "description")
PATTERNS = ("one-row", "two-rows", "four-sides", "grid")
_PAD_KEYS = ("number", "x", "y", "size", "shape", "drill")
_PATTERN_KEYS = ("layout", "pins", "pitch", "span", "rows", "columns", "row_pitch", "pad", "drill",
                 "shape", "exposed", "numbers")
#: How far a pad may stand clear of its body before it is taken for a typo (our own limit).
REACH_MM = 3.0

Fail = Callable[[str, str], Exception]


def _num(fail: Fail, key: str, value: Any, *, zero: bool = False) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value):
        raise fail(key, f"expected a number of millimetres, got {value!r}")
    if value < 0 or (value == 0 and not zero):
        raise fail(key, f"must be {'at least' if zero else 'above'} 0, got {value!r}")
    return float(value)


def _pair(fail: Fail, key: str, value: Any) -> tuple[float, float]:
    if not isinstance(value, list) or len(value) != 2:
        raise fail(key, "expected [length, width] in millimetres")
    return _num(fail, key, value[0]), _num(fail, key, value[1])


def _shape(fail: Fail, key: str, value: Any) -> str:
    if value not in PAD_SHAPES:
        raise fail(key, f"unknown pad shape {value!r}; use {', '.join(PAD_SHAPES)}")
    return value


def _explicit_pads(fail: Fail, key: str, raw: Any) -> list[Pad]:
    if not isinstance(raw, list) or not raw:
        raise fail(key, "pads is a list of { number, x, y, size = [w, h] } tables")
    pads = []
    for i, p in enumerate(raw):
        k = f"{key}[{i}]"
        if not isinstance(p, dict):
            raise fail(k, "expected { number, x, y, size = [w, h] }")
        unknown = sorted(set(p) - set(_PAD_KEYS))
        if unknown:
            raise fail(f"{k}.{unknown[0]}", f"unknown key; allowed: {', '.join(_PAD_KEYS)}")
        for need in ("number", "x", "y", "size"):
            if need not in p:
                raise fail(f"{k}.{need}", f"pad {i + 1} needs {need}")
        for axis in ("x", "y"):
            if isinstance(p[axis], bool) or not isinstance(p[axis], (int, float)):
                raise fail(f"{k}.{axis}", f"expected a number of millimetres, got {p[axis]!r}")
        w, h = _pair(fail, f"{k}.size", p["size"])
        pads.append(Pad(str(p["number"]).strip(), float(p["x"]), float(p["y"]),
                        _shape(fail, f"{k}.shape", p.get("shape", "rect")), w, h,
                        _num(fail, f"{k}.drill", p.get("drill", 0.0), zero=True)))
    return pads


def _pattern_places(fail: Fail, key: str, pt: dict) -> list[tuple[float, float, bool]]:
    """(x, y, turned) of each pin in order; ``turned`` on the left and right sides."""
    layout = pt.get("layout")
    if layout not in PATTERNS:
        raise fail(f"{key}.layout", f"unknown layout {layout!r}; use {', '.join(PATTERNS)}")
    if layout == "grid":
        rows, cols = (pt.get("rows"), pt.get("columns"))
        if not all(isinstance(v, int) and not isinstance(v, bool) and v >= 1 for v in (rows, cols)):
            raise fail(f"{key}.rows", "a grid needs whole numbers rows and columns")
        pitch = _num(fail, f"{key}.pitch", pt.get("pitch"))
        row_pitch = _num(fail, f"{key}.row_pitch", pt.get("row_pitch"))
        return [((c - (cols - 1) / 2) * pitch, (r - (rows - 1) / 2) * row_pitch, False)
                for r in range(rows) for c in range(cols)]
    pins = pt.get("pins")
    per_side = {"one-row": 1, "two-rows": 2, "four-sides": 4}[layout]
    if isinstance(pins, bool) or not isinstance(pins, int) or pins < 1 or pins % per_side:
        raise fail(f"{key}.pins", f"pins must be a whole number divisible by {per_side}")
    pitch = _num(fail, f"{key}.pitch", pt.get("pitch"), zero=pins == per_side)
    n = pins // per_side
    along = [(i - (n - 1) / 2) * pitch for i in range(n)]
    if layout == "one-row":
        return [(a, 0.0, False) for a in along]
    half = _num(fail, f"{key}.span", pt.get("span")) / 2
    lower = [(a, -half, False) for a in along]
    if layout == "two-rows":
        return lower + [(-a, half, False) for a in along]
    return (lower + [(half, a, True) for a in along] + [(-a, half, False) for a in along]
            + [(-half, -a, True) for a in along])


def _pattern_pads(fail: Fail, key: str, pt: Any) -> list[Pad]:
    if not isinstance(pt, dict):
        raise fail(key, "pattern is a table { layout, pins, pitch, span, pad = [along, across] }")
    unknown = sorted(set(pt) - set(_PATTERN_KEYS))
    if unknown:
        raise fail(f"{key}.{unknown[0]}", f"unknown key; allowed: {', '.join(_PATTERN_KEYS)}")
    places = _pattern_places(fail, key, pt)
    along, across = _pair(fail, f"{key}.pad", pt.get("pad"))
    drill = _num(fail, f"{key}.drill", pt.get("drill", 0.0), zero=True)
    shape = _shape(fail, f"{key}.shape", pt.get("shape", "rect"))
    numbers = pt.get("numbers", [str(i + 1) for i in range(len(places))])
    if not isinstance(numbers, list) or len(numbers) != len(places):
        raise fail(f"{key}.numbers", f"numbers lists one pin number for each of the {len(places)} pads")
    pads = [Pad(str(num), round(x, 6), round(y, 6), shape, across if turned else along,
                along if turned else across, drill)
            for num, (x, y, turned) in zip(numbers, places)]
    if "exposed" in pt:
        w, h = _pair(fail, f"{key}.exposed", pt["exposed"])
        pads.append(Pad("EP", 0.0, 0.0, "rect", w, h))
    return pads


def _check_pads(fail: Fail, name: str, pads: list[Pad], body: tuple[float, float],
                courtyard: tuple[float, float] | None, key: str) -> None:
    """Every pad near its body, inside an overridden courtyard; numbers used once (EP apart)."""
    seen: set[str] = set()
    for p in pads:
        if p.number in seen:
            raise fail(key, f"pad number {p.number} appears twice")
        seen.add(p.number)
        hx, hy = p.width_mm / 2, p.height_mm / 2
        gap = max(abs(p.x_mm) - hx - body[0] / 2, abs(p.y_mm) - hy - body[1] / 2)
        if gap > REACH_MM:
            raise fail(key, f"pad {p.number} at ({p.x_mm:g}, {p.y_mm:g}) stands {gap:.2f} mm clear of "
                            f"the {body[0]:g} x {body[1]:g} mm body (more than {REACH_MM:g} mm: a typo?)")
        if courtyard and (abs(p.x_mm) + hx > courtyard[0] / 2 + 1e-9
                          or abs(p.y_mm) + hy > courtyard[1] / 2 + 1e-9):
            raise fail(key, f"pad {p.number} reaches outside the {courtyard[0]:g} x {courtyard[1]:g} "
                            "mm courtyard")


def package_from_table(name: str, table: Any, key: str, fail: Fail, rule: CourtyardRule,
                       grid: float) -> Package:
    """The :class:`Package` a ``[packages.NAME]`` table describes (see the module docstring).

    ``fail(key, reason)`` builds the caller's located error; ``rule`` and
    ``grid`` are the library's general courtyard excess and rounding.
    """
    if not isinstance(table, dict):
        raise fail(key, "expected a table [packages.NAME]")
    unknown = sorted(set(table) - set(PACKAGE_KEYS))
    if unknown:
        raise fail(f"{key}.{unknown[0]}", f"unknown key; allowed: {', '.join(PACKAGE_KEYS)}")
    body = _pair(fail, f"{key}.body", table.get("body"))
    height = _num(fail, f"{key}.height_mm", table.get("height_mm"))
    if ("pads" in table) == ("pattern" in table):
        raise fail(f"{key}.pads", "give either pads = [ ... ] or pattern = { ... }, one of them")
    pads = (_explicit_pads(fail, f"{key}.pads", table["pads"]) if "pads" in table
            else _pattern_pads(fail, f"{key}.pattern", table["pattern"]))
    court = _pair(fail, f"{key}.courtyard", table["courtyard"]) if "courtyard" in table else None
    _check_pads(fail, name, pads, body, court, f"{key}.{'pads' if 'pads' in table else 'pattern'}")
    numbered = [p for p in pads if p.number != "EP"]
    pitch = float(table["pattern"].get("pitch", 0.0)) if "pattern" in table else 0.0
    pkg = make_package(
        name=name, aliases=(), family="custom",
        dims={"body_length_mm": body[0], "body_width_mm": body[1], "height_mm": height,
              "pitch_mm": pitch},
        pin_count=len(numbered), source=f"defined in the design ({key})", rule=rule, grid=grid,
        pads_by_level=tuple((lv, tuple(pads)) for lv in DENSITY_LEVELS))
    if court is None:
        return pkg
    return replace(pkg, courtyards=tuple(Courtyard(lv, court[0], court[1]) for lv in DENSITY_LEVELS))
