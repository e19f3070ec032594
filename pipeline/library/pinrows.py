"""Parametric pin rows and wire-to-board connectors: the ``pins`` packages.

A package is named by keys (grammar in ``footprints/README.md``)::

    pins(rows=1, n=4, pitch=2.54, mount=tht, entry=vertical)   # the written form
    pins-rows1-n4-pitch2.54-tht-vertical                       # the canonical name

``rows`` (1 or 2, default 1), ``n`` positions per row (required), ``pitch``
in mm (a pitch of ``footprints/pinrows.toml``, default 2.54), ``mount``
(``tht`` or ``smd``, default ``tht``) and ``entry`` (``vertical`` or
``side``, default ``vertical``). ``header-RxN-2.54`` and ``header-RxN``
(the previous names) are aliases of ``rows=R, n=N, pitch=2.54, mount=tht,
entry=vertical``. Every figure comes from the pitch's table in
``pinrows.toml``, each with its source. Millimetres; cost O(pins).
"""

from __future__ import annotations

import re
from dataclasses import dataclass, replace
from pathlib import Path
from typing import Any, Mapping

from pipeline.model import DENSITY_LEVELS, Package, Pad

from ._data import Fields, read_toml
from .courtyards import CourtyardRule
from .lands import through_hole_row_pads

__all__ = ["PinRowSpec", "PitchRule", "PinRows", "BadPinRow", "read_pin_rows"]

#: Keys of a ``pins(...)`` name, their allowed words, and their defaults.
MOUNTS = ("tht", "smd")
ENTRIES = ("vertical", "side")
_DEFAULTS = {"rows": "1", "pitch": "2.54", "mount": "tht", "entry": "vertical"}
_KEYS = ("rows", "n", "pitch", "mount", "entry")
#: The pitch of the previous ``header-RxN-2.54`` names.
_HEADER_PITCH = "2.54"
_PITCH_FIELDS = ("post_mm", "end_mm", "tht_pad_mm", "tht_drill_mm", "smd_pad_x_mm",
                 "smd_pad_y_mm", "vertical_depth_mm", "vertical_height_mm", "side_depth_mm",
                 "side_height_mm", "side_back_mm")
_MAY_BE_ZERO = ("tht_pad_mm", "tht_drill_mm")

_WRITTEN = re.compile(r"^pins\s*\((?P<body>[^()]*)\)$")
_CANONICAL = re.compile(r"^pins-rows(\d+)-n(\d+)-pitch([\d.]+)-([a-z]+)-([a-z]+)$")
_HEADER = re.compile(r"^header-(\d+)x(\d+)(?:-2\.54)?$")


class BadPinRow(Exception):
    """A ``pins`` name with a bad key or value (the catalogue turns it into an UnknownNameError)."""

    def __init__(self, key: str, reason: str) -> None:
        self.key, self.reason = key, reason
        super().__init__(f"{key}: {reason}")


@dataclass(frozen=True)
class PinRowSpec:
    """The keys of one pin row package: rows, positions per row, pitch (text key), mount, entry."""

    rows: int
    n: int
    pitch: str
    mount: str
    entry: str

    @property
    def name(self) -> str:
        """The canonical name, e.g. ``pins-rows1-n4-pitch2.54-tht-vertical``."""
        return f"pins-rows{self.rows}-n{self.n}-pitch{self.pitch}-{self.mount}-{self.entry}"


@dataclass(frozen=True)
class PitchRule:
    """The figures of one pitch (``pinrows.toml``), mm; ``values`` maps each field to its number."""

    pitch: str
    values: tuple[tuple[str, float], ...]
    source: str

    def __getitem__(self, key: str) -> float:
        return dict(self.values)[key]


@dataclass(frozen=True)
class PinRows:
    """The pin row rules: one :class:`PitchRule` per pitch and the allowed ranges."""

    pitches: tuple[PitchRule, ...]
    rows_max: int
    n_min: int
    n_max: int

    def parse(self, text: str) -> PinRowSpec | None:
        """The keys of ``text`` if it names a pin row (None if it has another form).

        Raises :class:`BadPinRow` naming the key for a pin row name with a bad value.
        """
        key = text.strip().casefold()
        m = _HEADER.match(key)
        if m:
            return self._checked({"rows": m.group(1), "n": m.group(2), "pitch": _HEADER_PITCH})
        m = _CANONICAL.match(key)
        if m:
            return self._checked(dict(zip(_KEYS, m.groups())))
        m = _WRITTEN.match(key)
        if m is None:
            return None
        given: dict[str, str] = {}
        for item in re.split(r"[,;\s]+", m.group("body").strip()):
            if not item:
                continue
            k, eq, v = (part.strip() for part in item.partition("="))
            if not eq or not v:
                raise BadPinRow(k or item, f"expected key=value, got '{item}'")
            if k not in _KEYS:
                raise BadPinRow(k, f"unknown key (use {', '.join(_KEYS)})")
            if k in given:
                raise BadPinRow(k, "given twice")
            given[k] = v
        return self._checked(given)

    def _checked(self, given: Mapping[str, str]) -> PinRowSpec:
        values = {**_DEFAULTS, **given}
        if "n" not in values:
            raise BadPinRow("n", "missing: the number of positions per row")
        rows = _whole("rows", values["rows"], 1, self.rows_max)
        n = _whole("n", values["n"], self.n_min, self.n_max)
        rule = self._pitch(values["pitch"])
        mount, entry = values["mount"], values["entry"]
        if mount not in MOUNTS:
            raise BadPinRow("mount", f"'{mount}' is not one of {', '.join(MOUNTS)}")
        if entry not in ENTRIES:
            raise BadPinRow("entry", f"'{entry}' is not one of {', '.join(ENTRIES)}")
        if mount == "tht" and rule["tht_drill_mm"] <= 0:
            raise BadPinRow("mount", f"pitch {rule.pitch} is made for surface mount only (use smd)")
        return PinRowSpec(rows, n, rule.pitch, mount, entry)

    def _pitch(self, text: str) -> PitchRule:
        try:
            value = float(text)
        except ValueError:
            value = -1.0
        for rule in self.pitches:
            if abs(float(rule.pitch) - value) < 1e-6:
                return rule
        raise BadPinRow("pitch", f"'{text}' is not a known pitch (use "
                                 f"{', '.join(r.pitch for r in self.pitches)} mm)")

    def rule(self, spec: PinRowSpec) -> PitchRule:
        return self._pitch(spec.pitch)

    def texts(self, spec: PinRowSpec) -> dict[str, str]:
        """Source, land basis and height basis of a pin row package."""
        if spec.mount == "tht":
            land = ("round through-hole lands tht_pad_mm with holes tht_drill_mm, pin 1 square, "
                    "rows one pitch apart (common practice)")
        else:
            land = ("rectangular surface lands smd_pad_x_mm x smd_pad_y_mm; two rows sit outside "
                    "the pitch, pad edges one pitch apart (our own rule)")
        return {"source": self.rule(spec).source, "land_basis": land + "; pinrows.toml",
                "height_basis": f"{spec.entry} entry housing height of pinrows.toml"}

    def build(self, spec: PinRowSpec, courtyard: CourtyardRule, grid: float) -> Package:
        """The :class:`Package` of ``spec``: body, pads (the same at every level), courtyards."""
        from .packages import make_package  # packages imports lands; avoid an import cycle

        r = self.rule(spec)
        p = float(spec.pitch)
        depth, height = (r["vertical_depth_mm"], r["vertical_height_mm"]) if spec.entry == "vertical" \
            else (r["side_depth_mm"], r["side_height_mm"])
        dims = {"body_length_mm": round((spec.n - 1) * p + 2 * r["end_mm"], 6),
                "body_width_mm": round(depth + (spec.rows - 1) * p, 6),
                "height_mm": round(height + (spec.rows - 1) * p * (spec.entry == "side"), 6),
                "pitch_mm": p}
        pads = _pads(spec, r, dims["body_width_mm"])
        return make_package(name=spec.name, aliases=(), family="pins", dims=dims,
                            pin_count=spec.rows * spec.n, source=r.source, rule=courtyard,
                            grid=grid, pads_by_level=tuple((lv, pads) for lv in DENSITY_LEVELS))


def _pads(spec: PinRowSpec, r: PitchRule, body_width: float) -> tuple[Pad, ...]:
    """Pads along x, pin 1 at the left of the lower row (odd pins in the lower row of two).

    Vertical entry: the pad field centred on the body. Side entry: the back row
    ``side_back_mm`` in from the body's back edge (-y), the mating face at +y.
    """
    p = float(spec.pitch)
    count = spec.rows * spec.n
    if spec.mount == "tht":
        pads = through_hole_row_pads(count, spec.rows, p, p, r["tht_pad_mm"], r["tht_drill_mm"],
                                     anticlockwise=False)
        field = (spec.rows - 1) * p
    else:
        spacing = p + r["smd_pad_y_mm"]
        pads = tuple(replace(q, shape="rect", width_mm=r["smd_pad_x_mm"],
                             height_mm=r["smd_pad_y_mm"], drill_mm=0.0)
                     for q in through_hole_row_pads(count, spec.rows, p, spacing, 1.0, 0.0,
                                                    anticlockwise=False))
        field = (spec.rows - 1) * spacing
    if spec.entry == "vertical":
        return pads
    shift = round(-body_width / 2 + r["side_back_mm"] + field / 2, 6)
    return tuple(replace(q, y_mm=round(q.y_mm + shift, 6)) for q in pads)


def _whole(key: str, text: str, lo: int, hi: int) -> int:
    if not text.isdigit() or not lo <= int(text) <= hi:
        raise BadPinRow(key, f"'{text}' must be a whole number from {lo} to {hi}")
    return int(text)


def read_pin_rows(path: Path) -> PinRows:
    """The pin row rules of ``pinrows.toml``, checked (LibraryError at the file, line and key)."""
    src = read_toml(path)
    limits = src.data.get("limits")
    top = Fields(src, "")
    if not isinstance(limits, dict):
        raise top.error("limits", "missing [limits] table")
    lf = Fields(src, "limits")
    lf.check_keys(limits, ("rows_max", "n_min", "n_max", "source"), ("rows_max", "n_min", "n_max",
                                                                      "source"))
    whole = {k: lf.number(k, limits[k], minimum=1.0) for k in ("rows_max", "n_min", "n_max")}
    for k, v in whole.items():
        if v != int(v):
            raise lf.error(k, f"{v:g} is not a whole number")
    if whole["n_max"] < whole["n_min"]:
        raise lf.error("n_max", "n_max is below n_min")
    lf.text("source", limits["source"])
    pitches = tuple(_read_pitch(Fields(src, name), name, src.data[name])
                    for name in src.data if name != "limits")
    if not pitches:
        raise top.error("limits", "no pitch tables")
    return PinRows(tuple(sorted(pitches, key=lambda r: float(r.pitch))), int(whole["rows_max"]),
                   int(whole["n_min"]), int(whole["n_max"]))


def _read_pitch(f: Fields, name: str, table: Any) -> PitchRule:
    if not isinstance(table, dict):
        raise f.here("expected a pitch table")
    try:
        pitch = float(name)
    except ValueError:
        pitch = 0.0
    if pitch <= 0:
        raise f.here(f"table name '{name}' must be a pitch in mm (e.g. \"2.54\")")
    f.check_keys(table, _PITCH_FIELDS + ("source",), _PITCH_FIELDS + ("source",))
    values = tuple((k, f.number(k, table[k], minimum=0.0, strict=k not in _MAY_BE_ZERO))
                   for k in _PITCH_FIELDS)
    v = dict(values)
    if v["tht_drill_mm"] > 0 and v["tht_drill_mm"] < v["post_mm"] * 2 ** 0.5:
        raise f.error("tht_drill_mm", "the hole does not pass the post's diagonal")
    if v["tht_drill_mm"] > 0 and v["tht_pad_mm"] <= v["tht_drill_mm"]:
        raise f.error("tht_pad_mm", "the land must be larger than the hole")
    return PitchRule(name.strip(), values, f.text("source", table["source"]))
