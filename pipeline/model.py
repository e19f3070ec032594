"""Frozen values passed between snugboard's stages.

Every stage takes some of these and returns others; no stage mutates what it
was given. Lengths are millimetres, areas mm^2, heights mm, resistance ohms,
capacitance farads, inductance henries, voltage volts, power watts.
Tolerances are fractions (``0.01`` for 1 %).

Stage-internal types live in their own stage modules; only what crosses a
stage boundary is here.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from functools import cached_property
from typing import TYPE_CHECKING, Any, Literal

if TYPE_CHECKING:  # geometry types only annotate: importing shapely here would slow every command's start
    from shapely.geometry.base import BaseGeometry

from .codes import allowed
from .values import round_sig as _sig

Severity = Literal["error", "warning", "info"]
Side = Literal["top", "bottom"]
Density = Literal["most", "nominal", "least"]

#: IPC-7351B density levels, in the order A (most), B (nominal), C (least):
#: the one list of level names (project.toml, the library, the area stage).
DENSITY_LEVELS: tuple[str, ...] = ("most", "nominal", "least")

#: Electrical roles a pin may have, in datasheet words: a supply pin, a supply output
#: (a regulator's output), a signal input, a push-pull output, an open-drain (or
#: open-collector) output, a plain terminal (resistor, capacitor, connector), and a
#: pin with no connection inside (NC). footprints/README.md, "Part kinds".
PIN_ROLES = ("supply", "supply-out", "in", "out", "open-drain", "terminal", "nc")

#: The role spellings of the previous release, still read for one release (with a
#: warning where a user wrote them): old spelling -> role.
OLD_PIN_ROLES = {
    "power-in": "supply", "power-out": "supply-out", "input": "in", "output": "out",
    "open-collector": "open-drain", "passive": "terminal", "no-connect": "nc",
}

SEVERITIES = ("error", "warning", "info")
#: The word a person reads for each severity (the CLI's line mark, the report's counts and headings).
SEVERITY_WORDS = {"error": "error", "warning": "warning", "info": "note"}


# --------------------------------------------------------------------------
# Findings: every check, reader and stage reports through these.
# --------------------------------------------------------------------------
@dataclass(frozen=True)
class Finding:
    """One result of a check, or one warning of a reader.

    ``check`` is a stable dotted code (``"connect.single-pin-net"``) so that
    scripts can filter findings; ``subject`` lists the refs, ``REF.PIN``
    pins or net names concerned; ``message`` is one sentence a user can act
    on. ``kind`` names, for the few codes whose findings are grouped
    (:data:`pipeline.findings_group.KINDS`), which kind of message of its
    code this is; it is not part of the finding's value (not compared, not
    written out): the grouping reads it instead of the message's wording.
    """

    severity: Severity
    check: str
    subject: tuple[str, ...]
    message: str
    kind: str = field(default="", compare=False, repr=False)

    def __post_init__(self) -> None:
        if not allowed(self.check, self.severity):
            raise AssertionError(f"finding code {self.check!r} with severity {self.severity!r} is not in "
                                 "pipeline/codes.py (add it there and to README)")

    def to_dict(self) -> dict[str, Any]:
        return {
            "severity": self.severity,
            "check": self.check,
            "subject": list(self.subject),
            "message": self.message,
        }


# --------------------------------------------------------------------------
# Library: packages and part kinds (data under footprints/).
# --------------------------------------------------------------------------
@dataclass(frozen=True)
class PinDef:
    """A pin of a part kind: its number (as text), name and electrical role.

    A role of the previous release's spelling (:data:`OLD_PIN_ROLES`) is
    stored as its new name.
    """

    number: str
    name: str
    role: str

    def __post_init__(self) -> None:
        if self.role in OLD_PIN_ROLES:
            object.__setattr__(self, "role", OLD_PIN_ROLES[self.role])


@dataclass(frozen=True)
class PartKind:
    """What a part is: its pins and how checks should treat it.

    ``category`` is one of ``"passive"`` (two-terminal R, C, L, ferrite),
    ``"polarized"``, ``"semiconductor"`` (diode, LED, transistor),
    ``"ic"`` (has supply pins), ``"connector"`` (wire pad, test point,
    header). ``value_unit`` is ``"ohm"``, ``"F"``, ``"H"`` or ``""`` when the
    kind takes no value. A kind with ``pins_from_package`` (a header) gets
    pins 1..N from its package's pin count.
    """

    name: str
    category: str
    pins: tuple[PinDef, ...]
    value_unit: str = ""
    pins_from_package: bool = False
    description: str = ""
    source: str = ""
    #: Copper or holes of the board itself (wire pad, test point, mounting hole, fiducial):
    #: in the netlists and the picture, never ordered in the BOM.
    board_feature: bool = False


@dataclass(frozen=True)
class Courtyard:
    """IPC-7351B courtyard size at one density level, mm (length x width)."""

    level: str
    length_mm: float
    width_mm: float

    @property
    def area_mm2(self) -> float:
        return self.length_mm * self.width_mm


#: Pad shapes (Pad.shape).
PAD_SHAPES = ("rect", "roundrect", "circle", "oblong")


@dataclass(frozen=True)
class Pad:
    """One land of a package, mm.

    In the package's frame (pipeline.library.lands: x along the length, pin 1
    where the outline puts it) or, from ``pipeline.library.pads_on_board``, on
    the board. ``width_mm`` is the pad's extent along x and ``height_mm`` along
    y before its ``rotation`` (0 or 90 degrees) is applied; ``drill_mm`` is the
    finished hole of a through-hole pad, 0 for surface mount. ``number`` is the
    pin number as text (``"EP"`` for an exposed pad).
    """

    number: str
    x_mm: float
    y_mm: float
    shape: str
    width_mm: float
    height_mm: float
    drill_mm: float = 0.0
    rotation: int = 0


@dataclass(frozen=True)
class Package:
    """A generic footprint: body, land extent, height and courtyards.

    Both extents lie along the body's axes: ``body_length_mm`` and
    ``land_length_mm`` along the pin rows (for a chip, its terminal axis, so
    there the land length is toe to toe), ``body_width_mm`` and
    ``land_width_mm`` across them (for a gull-wing IC, the land width is the
    toe-to-toe span across the rows); both are the extent of the nominal-level
    pads. ``height_mm`` is the tallest a part in this package may be.
    ``courtyards`` holds one :class:`Courtyard` per density level (``most``,
    ``nominal``, ``least``), each around the body and that level's pads. footprints/README.md
    gives the basis of every figure.
    """

    name: str
    aliases: tuple[str, ...]
    family: str
    body_length_mm: float
    body_width_mm: float
    height_mm: float
    land_length_mm: float
    land_width_mm: float
    pin_count: int
    pitch_mm: float
    source: str
    courtyards: tuple[Courtyard, ...]
    #: ``(level, pads)`` per density level: the land pattern (IPC-7351B lands differ by level).
    pads_by_level: tuple[tuple[str, tuple[Pad, ...]], ...] = ()

    def courtyard(self, level: str) -> Courtyard:
        for c in self.courtyards:
            if c.level == level:
                return c
        raise KeyError(level)

    def pads_at(self, level: str) -> tuple[Pad, ...]:
        """The pads at density ``level`` (empty when the package has none)."""
        for lv, pads in self.pads_by_level:
            if lv == level:
                return pads
        return ()

    @property
    def pads(self) -> tuple[Pad, ...]:
        """The pads at the nominal density level (IPC-7351B level B)."""
        return self.pads_at("nominal")


# --------------------------------------------------------------------------
# Design: parts and nets.
# --------------------------------------------------------------------------
@dataclass(frozen=True)
class Fixed:
    """Where the user fixed a part (design keys ``at``, ``rotation``, ``side``; issue 8).

    ``x_mm``, ``y_mm``: the courtyard centre in the drawing's frame, mm;
    ``rotation_deg`` 0, 90, 180 or 270 (counter-clockwise); ``side`` top or
    bottom. ``file`` and ``line`` locate the part for messages.
    """

    x_mm: float
    y_mm: float
    rotation_deg: int = 0
    side: Side = "top"
    file: str = ""
    line: int = 0


@dataclass(frozen=True)
class Ask:
    """Where the user asks a part to sit (design keys ``near``, ``within_mm``, ``at_edge``; issue 8).

    ``near``: the ref of the part whose pins this one should sit near ("" for
    none), ``within_mm`` the distance asked (None: the default of
    :mod:`pipeline.place_rules`); ``at_edge`` False keeps a wire pad or
    connector off the board edge, True sends any part there, None leaves it to
    the part's kind. ``file`` and ``line`` locate the part for messages.
    """

    near: str = ""
    within_mm: float | None = None
    at_edge: bool | None = None
    file: str = ""
    line: int = 0


@dataclass(frozen=True)
class NearRule:
    """A placement rule: one of this item's pads within ``within_mm`` of one of ``target``'s ``pins``.

    Distances are between pad centres, mm (:mod:`pipeline.place_rules`).
    ``own_package`` / ``target_package`` give the pads; ``level`` the density
    level. ``why`` is ``"near"`` (the design asked) or ``"decoupling"``
    (a capacitor the connection check pairs with the target's supply pins).
    """

    target: str
    pins: tuple[str, ...]
    within_mm: float
    why: str
    own_package: "Package" = field(compare=False, repr=False)
    target_package: "Package" = field(compare=False, repr=False)
    level: str = "nominal"
    file: str = ""
    line: int = 0


@dataclass(frozen=True, order=True)
class PinRef:
    """A connected pin: part ref and pin number (text). ``str()`` is ``REF.PIN``."""

    ref: str
    pin: str

    def __str__(self) -> str:
        return f"{self.ref}.{self.pin}"


@dataclass(frozen=True)
class Part:
    """One part of the design, with its kind's pins resolved.

    ``value`` is the parsed number in SI base units (ohm, F, H) or ``None``;
    ``value_text`` the text the user wrote. ``rating_v`` / ``rating_w`` are
    the voltage and power ratings, ``None`` when not given. ``extra`` carries
    keys snugboard passes through untouched (supplier, order code, ...), as
    sorted ``(key, text)`` pairs. ``line`` is the design-file line the part
    starts on, for messages (0 when unknown).
    """

    ref: str
    kind: str
    package: str
    pins: tuple[PinDef, ...]
    value: float | None = None
    value_text: str = ""
    tolerance: float | None = None
    tolerance_text: str = ""
    rating_v: float | None = None
    rating_w: float | None = None
    rating_text: str = ""
    manufacturer: str = ""
    mpn: str = ""
    note: str = ""
    dnp: bool = False
    extra: tuple[tuple[str, str], ...] = ()
    line: int = 0
    #: The part's own seated height, mm, when the design gives one (a 10 uF 0603
    #: capacitor is thicker than the package default); ``None``: by kind and package.
    height_mm: float | None = None
    fixed: Fixed | None = None
    ask: Ask | None = None

    @cached_property
    def _pin_index(self) -> dict[str, PinDef]:
        out: dict[str, PinDef] = {}
        for p in self.pins:
            out.setdefault(p.number, p)
        return out

    def pin(self, number: str) -> PinDef:
        """The pin numbered ``number``; O(1) after one O(pins) index build."""
        return self._pin_index[number]


@dataclass(frozen=True)
class Net:
    """A named net and the pins on it, in the order the design lists them.

    ``voltage`` is the declared nominal voltage (V) or ``None``;
    ``voltage_max`` the highest it reaches (a charged cell); ``battery``
    marks a net fed from a battery.
    """

    name: str
    pins: tuple[PinRef, ...]
    voltage: float | None = None
    voltage_max: float | None = None
    battery: bool = False
    line: int = 0


@dataclass(frozen=True)
class RawTable:
    """A table of the design file passed through for a later stage to read.

    ``items`` are the table's key/value pairs as TOML gave them (values may
    be nested dicts and lists); ``file`` and ``key`` locate it for messages.
    """

    name: str
    items: tuple[tuple[str, Any], ...]
    file: str
    key: str
    line: int = 0

    def get(self, k: str, default: Any = None) -> Any:
        for kk, v in self.items:
            if kk == k:
                return v
        return default


@dataclass(frozen=True)
class Design:
    """A sized design: parts, nets, and the declared stages (issue 4)."""

    name: str
    revision: str
    source: str
    parts: tuple[Part, ...]
    nets: tuple[Net, ...]
    stages: tuple[RawTable, ...] = ()
    kinds: tuple[PartKind, ...] = ()
    #: Packages the design defines itself (``[packages.NAME]``).
    packages: tuple["Package", ...] = ()
    #: every file the reader opened (the design, its includes, a parts map and its
    #: includes), resolved; outputs never write over any of them.
    inputs: tuple[str, ...] = ()

    @cached_property
    def by_ref(self) -> dict[str, Part]:
        """``ref -> Part`` (the first, if a ref is listed twice), built once in O(parts); do not mutate."""
        out: dict[str, Part] = {}
        for p in self.parts:
            out.setdefault(p.ref, p)
        return out

    @cached_property
    def _net_index(self) -> dict[str, Net]:
        out: dict[str, Net] = {}
        for n in self.nets:
            out.setdefault(n.name, n)
        return out

    def part(self, ref: str) -> Part:
        """The part ``ref`` (the first, if listed twice); O(1) after one O(parts) index build."""
        return self.by_ref[ref]

    def net(self, name: str) -> Net:
        """The net ``name`` (the first, if listed twice); O(1) after one O(nets) index build."""
        return self._net_index[name]


# --------------------------------------------------------------------------
# Project options.
# --------------------------------------------------------------------------
@dataclass(frozen=True)
class BoardOptions:
    """The ``[board]`` table of project.toml (CONTRACT section 1), extended.

    ``outline`` is ``"region"`` (propose the usable region, simplified) or
    ``"rectangle"`` (largest rectangle in any orientation);
    ``min_inside_radius_mm`` is the smallest inside corner radius of a
    proposed outline (a router bit's radius).
    """

    layers: int = 2
    thickness_mm: float = 0.8
    sides: int = 1
    density: str = "nominal"
    edge_clearance_mm: float = 0.5
    wall_clearance_mm: float = 0.3
    outline: str = "region"
    min_inside_radius_mm: float = 0.5


@dataclass(frozen=True)
class OrderOptions:
    """The ``[order]`` table: boards to build and spares.

    ``min_spares`` is the least extra count per BOM line, ``multiple`` rounds
    each line's order up to a multiple (reel or cut-tape steps).
    """

    boards: int = 1
    spares_percent: float = 0.0
    min_spares: int = 0
    multiple: int = 1


# --------------------------------------------------------------------------
# Cavity and region (millimetres, drawing frame).
# --------------------------------------------------------------------------
@dataclass(frozen=True)
class DepthZone:
    """A closed zone where floor-to-lid depth is ``depth_mm``."""

    polygon: BaseGeometry
    depth_mm: float
    layer: str


@dataclass(frozen=True)
class Cavity:
    """The cavity drawing converted to millimetres.

    ``outline`` is a shapely Polygon (may have holes); ``keepouts`` and
    ``depth_zones`` are as drawn (not yet clipped); ``board`` is the user's
    own board outline or ``None``; ``depth_mm`` the default depth.
    ``unit_name`` and ``mm_per_unit`` record how drawing units were read.
    """

    source: str
    outline: BaseGeometry
    keepouts: tuple[BaseGeometry, ...]
    depth_zones: tuple[DepthZone, ...]
    board: BaseGeometry | None
    depth_mm: float
    unit_name: str
    mm_per_unit: float
    mounts: tuple[MountMark, ...] = ()
    #: Where wires enter the cavity (layer role WIRE-ENTRY, mm), as drawn.
    wire_entries: tuple[BaseGeometry, ...] = ()


@dataclass(frozen=True)
class MountMark:
    """A keep-out declared a mounting boss (:mod:`pipeline.mount`): the board covers it.

    ``keepout`` indexes ``Cavity.keepouts``; ``screw`` is the size as written
    (``"M2.5"``); ``centre`` the boss centre in mm when the source knows it
    (a measured boss), else ``None`` (the keep-out's centroid); ``file``,
    ``key`` and ``line`` say where it was declared, for messages.
    """

    keepout: int
    screw: str
    centre: tuple[float, float] | None
    file: str
    key: str
    line: int | None = None


@dataclass(frozen=True)
class Mount:
    """A mounting boss the board covers, mm: a screw hole at ``(x_mm, y_mm)``
    of ``hole_mm`` across, a head clearance ring ``ring_mm`` across kept free
    of parts and copper, and the screw head ``head_height_mm`` tall."""

    x_mm: float
    y_mm: float
    screw: str
    hole_mm: float
    ring_mm: float
    head_height_mm: float
    boss: BaseGeometry = field(compare=False, repr=False)
    keepout: int = 0
    where: str = ""


@dataclass(frozen=True)
class HeightZone:
    """Part of the board region with one allowed component height, mm.

    ``max_height_mm`` is what a top-side part may be (local depth minus
    board thickness; bottom-side needs are the placer's to subtract).
    """

    polygon: BaseGeometry
    max_height_mm: float


@dataclass(frozen=True)
class Region:
    """Where a board may be, and how tall parts may be on it.

    ``board_region``: cavity inset by the wall clearance, minus keep-outs
    grown by it. ``zones`` partition ``board_region`` by allowed height.
    """

    board_region: BaseGeometry
    zones: tuple[HeightZone, ...]
    thickness_mm: float
    mounts: tuple[Mount, ...] = ()
    #: The union of the wire-entry zones (mm), or None when none is drawn.
    wire_entry: BaseGeometry | None = None

    @property
    def area_mm2(self) -> float:
        return float(self.board_region.area)


# --------------------------------------------------------------------------
# Placement and fit.
# --------------------------------------------------------------------------
@dataclass(frozen=True)
class PlaceItem:
    """A part as the placer sees it: courtyard size (rotation 0), height, nets."""

    ref: str
    length_mm: float
    width_mm: float
    height_mm: float
    nets: tuple[str, ...]
    pin_count: int = 2
    package: str = ""
    fixed: Fixed | None = None
    #: Goes to the board edge nearest the wire entry (wire pads, connectors; :mod:`pipeline.place_rules`).
    edge: bool = False
    near: NearRule | None = None


@dataclass(frozen=True)
class AreaEstimate:
    """Board area estimate: courtyard sum and a low / expected / high range."""

    courtyard_area_mm2: float
    low_mm2: float
    expected_mm2: float
    high_mm2: float
    rule: str


@dataclass(frozen=True)
class Placement:
    """One placed part: courtyard centre, rotation (0/90/180/270) and side."""

    ref: str
    x_mm: float
    y_mm: float
    rotation_deg: int
    side: Side
    courtyard: BaseGeometry = field(compare=False, repr=False)

    def to_dict(self) -> dict[str, Any]:
        return {
            "ref": self.ref,
            "x_mm": round(self.x_mm, 4),
            "y_mm": round(self.y_mm, 4),
            "rotation_deg": self.rotation_deg,
            "side": self.side,
        }


@dataclass(frozen=True)
class FitResult:
    """The fit verdict with everything ``fit.json`` holds (CONTRACT section 4)."""

    fits: bool
    region_area_mm2: float
    courtyard_area_mm2: float
    estimate: AreaEstimate
    placements: tuple[Placement, ...]
    board_outline: BaseGeometry | None
    blocked_by: tuple[str, ...]
    unplaced: tuple[str, ...] = ()
    wirelength_mm: float = 0.0
    warnings: tuple[Finding, ...] = ()


# --------------------------------------------------------------------------
# Declared circuit blocks: what pipeline.circuit reports about each one.
# SI units (Hz, V, A, W, ohm, F); tolerances and shares as fractions.
# --------------------------------------------------------------------------
@dataclass(frozen=True)
class Target:
    """A figure's target: the text written, the aim and the allowed range."""

    figure: str
    text: str
    aim: float
    lo: float
    hi: float

    @property
    def half(self) -> float:
        return (self.hi - self.lo) / 2.0

    def contains(self, x: Any) -> Any:
        """True where ``x`` (a number or numpy array) lies in ``[lo, hi]`` (a hair of float slack)."""
        import numpy as np

        eps = 1e-12 * max(abs(self.lo), abs(self.hi))
        x = np.asarray(x, dtype=float)
        return (x >= self.lo - eps) & (x <= self.hi + eps)

    def to_dict(self) -> dict[str, Any]:
        return {"text": self.text, "aim": _sig(self.aim), "lo": _sig(self.lo), "hi": _sig(self.hi)}


@dataclass(frozen=True)
class RolePart:
    """A part playing a role in a block: its value (SI) and tolerance (fraction)."""

    role: str
    ref: str
    kind: str
    value: float | None
    value_text: str
    tolerance: float | None
    tolerance_assumed: bool

    def to_dict(self) -> dict[str, Any]:
        return {
            "role": self.role, "ref": self.ref, "kind": self.kind, "value": _sig(self.value),
            "value_text": self.value_text, "tolerance": _sig(self.tolerance),
            "tolerance_assumed": self.tolerance_assumed,
        }


@dataclass(frozen=True)
class FigureReport:
    """One figure of a block: nominal, target, corner extremes, percentiles."""

    name: str
    unit: str
    label: str
    nominal: float
    target: Target | None
    corner_min: float
    corner_max: float
    p01: float | None
    p50: float | None
    p99: float | None
    share_out: float | None
    passes: bool | None

    def to_dict(self) -> dict[str, Any]:
        return {
            "name": self.name, "unit": self.unit, "label": self.label,
            "nominal": _sig(self.nominal),
            "target": self.target.to_dict() if self.target else None,
            "corners": {"min": _sig(self.corner_min), "max": _sig(self.corner_max)},
            "monte_carlo": {"p1": _sig(self.p01), "p50": _sig(self.p50), "p99": _sig(self.p99)},
            "share_out": _sig(self.share_out, 4),
            "passes": self.passes,
        }


@dataclass(frozen=True)
class Proposal:
    """A retune proposal: preferred values per role and what they give.

    ``error`` is the sum over targets of ((figure - aim) / half-width)^2;
    ``share_out`` the Monte Carlo share of builds (same tolerances, same
    seed) missing some target.
    """

    values: tuple[tuple[str, str, float], ...]      # (role, ref, value)
    figures: tuple[tuple[str, float], ...]
    error: float
    passes: bool
    share_out: float | None
    changed: tuple[str, ...]

    def to_dict(self) -> dict[str, Any]:
        return {
            "values": [{"role": r, "ref": ref, "value": _sig(v)} for r, ref, v in self.values],
            "figures": {k: _sig(v) for k, v in self.figures},
            "error": _sig(self.error, 4),
            "passes": self.passes,
            "share_out": _sig(self.share_out, 4),
            "changed": list(self.changed),
        }


@dataclass(frozen=True)
class Response:
    """Frequency response (dB) at ``f_hz``: nominal and corner envelope."""

    f_hz: tuple[float, ...]
    nominal_db: tuple[float, ...]
    low_db: tuple[float, ...]
    high_db: tuple[float, ...]
    f0_hz: float
    f3db_hz: float
    passband_db: float

    def to_dict(self) -> dict[str, Any]:
        return {
            "f_hz": [_sig(v) for v in self.f_hz],
            "nominal_db": [_sig(v, 5) for v in self.nominal_db],
            "low_db": [_sig(v, 5) for v in self.low_db],
            "high_db": [_sig(v, 5) for v in self.high_db],
            "f0_hz": _sig(self.f0_hz), "f3db_hz": _sig(self.f3db_hz), "passband_db": _sig(self.passband_db),
        }


@dataclass(frozen=True)
class BlockReport:
    """Everything the analysis found about one declared circuit block."""

    name: str
    type: str
    key: str
    parts: tuple[RolePart, ...]
    settings: tuple[tuple[str, float], ...]
    options: tuple[tuple[str, str], ...]
    figures: tuple[FigureReport, ...]
    draws: int
    seed: int
    share_out: float | None
    passes: bool | None
    response: Response | None
    series: tuple[tuple[str, str], ...]
    proposals: tuple[Proposal, ...]
    assumptions: tuple[str, ...]
    note: str = ""

    distribution = "uniform within +-tolerance, parts independent"

    def figure(self, name: str) -> FigureReport:
        for f in self.figures:
            if f.name == name:
                return f
        raise LookupError(name)

    def to_dict(self) -> dict[str, Any]:
        return {
            "name": self.name, "type": self.type, "key": self.key, "note": self.note,
            "parts": [p.to_dict() for p in self.parts],
            "settings": {k: _sig(v) for k, v in self.settings},
            "options": dict(self.options),
            "figures": [f.to_dict() for f in self.figures],
            "monte_carlo": {"draws": self.draws, "seed": self.seed,
                            "distribution": self.distribution, "share_out": _sig(self.share_out, 4)},
            "passes": self.passes,
            "response": self.response.to_dict() if self.response else None,
            "retune": {"series": dict(self.series), "proposals": [p.to_dict() for p in self.proposals]},
            "assumptions": list(self.assumptions),
        }
