"""Read the cavity drawing (DXF) into millimetre polygons.

One entry function, :func:`read_cavity`, turns a DXF drawing of the free
space inside an enclosure into a :class:`pipeline.model.Cavity`: the floor
outline, the keep-outs, the depth zones and (optionally) the user's own board
outline, all as shapely polygons in millimetres in the drawing's own frame.
Problems with the drawing raise :class:`pipeline.errors.CavityError` naming the
file, the entity and a point in drawing units; everything the user should
know but that does not stop the run comes back as warning findings.

Layer roles
-----------
Layer names are compared without regard to case.

==============  ==========================================================
``CAVITY``      exactly one closed outline: the free floor area. Further
                closed loops on the layer that lie wholly inside it are
                holes (posts drawn on the floor); a loop outside it, or one
                that crosses or touches it, is an error ("several
                outlines"), as is a loop inside a hole.
``KEEPOUT``     closed shapes where no board may be. Every loop is filled.
``DEPTH-<mm>``  closed shapes where floor-to-lid depth is ``<mm>``
                millimetres whatever the drawing's units (``DEPTH-1.5``,
                also ``DEPTH-1,5`` and ``DEPTH-1.5mm``); every loop is
                filled. ``DEPTH-0`` is allowed (the lid touches the floor).
``BOARD``       optional: the user's own board outline, read like
                ``CAVITY`` (one outline, inner loops are holes).
==============  ==========================================================

``layer_map`` (project.toml's ``[cavity] layers``) maps the user's layer
names onto the roles: ``{"CAVITY": "Outline", "KEEPOUT": ["Bosses", "Ribs"],
"DEPTH": {"Lid rib": 1.5}}``. A role that is mapped takes only the named
layers (so with ``KEEPOUT`` mapped, a layer called ``KEEPOUT`` is ignored);
a role that is not mapped keeps its default name. ``CAVITY``, ``KEEPOUT``
and ``BOARD`` take a layer name or a list of names, ``DEPTH`` a table of
layer name to depth in mm. Entities inside a block on layer ``0`` take the
layer of the INSERT that places them (the DXF rule). Every other layer is
ignored and named in one warning.

Geometry read
-------------
LINE, ARC, CIRCLE, ELLIPSE (and elliptical arcs), SPLINE, LWPOLYLINE and
2D/3D POLYLINE (bulges are arcs), in model space and inside block
references (INSERT and MINSERT, any scale, rotation, mirroring and nesting
up to :data:`MAX_BLOCK_DEPTH` levels). Mirrored entities (extrusion
``(0, 0, -1)``) are converted from their object coordinate system. Entities
not parallel to the XY plane are projected onto it (a warning says so).
Other entity types on role layers (text, hatches, dimensions, points,
3D faces, meshes) are not read and are named in a warning.

Method
------
1. The file is loaded strictly (``ezdxf.readfile``) and audited; if that
   fails on the file's structure, the recovering loader
   (``ezdxf.recover.readfile``) is used. Every repair becomes a
   ``cavity.repaired`` warning.
2. Block references are walked recursively, composing each INSERT's
   transformation matrix with its parent's; entity geometry is
   flattened in its own frame and the points are transformed, so no
   entity is re-created or approximated by the library.
3. Arcs, circles and bulges are flattened analytically with vertices on
   the true curve and a chord error (sagitta ``s = r (1 - cos(theta/2))``)
   of at most ``chord_tol_mm``; ellipses and splines with ezdxf's adaptive
   flattening to the same distance. The tolerance is converted to drawing
   units and divided by the largest scale factor of the block
   transformation. For entities larger than 1 m it is relaxed to
   1/50,000 of their size (:data:`REL_TOL`) so that a drawing in the wrong
   units cannot produce millions of vertices.
4. Open pieces on one layer are chained end to end: end points closer than
   :data:`JOIN_TOL_MM` (0.01 mm, converted to drawing units) are one node;
   every node must join exactly two piece ends. A free end is an error
   giving the gap to the nearest other free end; three or more ends at one
   node are an error (duplicated or branching entities). This is a linear
   walk (``O(n log n)`` for the node search), not a loop search, so it
   cannot hang. Pieces are never joined across layers.
5. Each loop becomes a polygon and is checked with
   ``shapely.is_valid_reason``; a loop that crosses or touches itself is an
   error located where it does.
6. Geometry is converted to millimetres last, so every location in an error
   message is in drawing units.

Units
-----
``$INSUNITS`` gives the drawing units (:data:`MM_PER_UNIT`, exact
definitions: 1 in = 25.4 mm since the 1959 international yard and pound
agreement, 1 ft = 12 in, 1 mil = 0.001 in, SI prefixes for metric units). A
drawing with ``$INSUNITS`` 0 or missing (every R12 file) takes
``default_units`` (project.toml ``[cavity] units``) and an info finding says
so.

Limits
------
Files over :data:`MAX_FILE_BYTES`, more than :data:`MAX_ENTITIES` entities
after expanding block references or more than :data:`MAX_VERTICES` flattened
vertices are refused with a message (a cavity drawing needs only a few
outlines). Clipped block references (XCLIP) are read unclipped.
"""

from __future__ import annotations

import logging
import math
import os
import re
from collections import Counter
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Callable, Iterator, Mapping, Sequence

import numpy as np
import shapely
from shapely.geometry import Polygon

from pipeline.errors import CavityError
from pipeline.model import Cavity, DepthZone, Finding

__all__ = [
    "read_cavity",
    "parse_layer_map",
    "LayerRoles",
    "MM_PER_UNIT",
    "UNIT_NAMES",
    "unit_code",
    "JOIN_TOL_MM",
    "REL_TOL",
    "MAX_FILE_BYTES",
    "MAX_ENTITIES",
    "MAX_VERTICES",
    "MAX_BLOCK_DEPTH",
    "MIN_PLAUSIBLE_AREA_MM2",
    "MAX_PLAUSIBLE_SIDE_MM",
]

#: End points of loose pieces closer than this (mm) are joined.
JOIN_TOL_MM = 0.01
#: Flattening tolerance floor relative to an entity's size.
REL_TOL = 2e-5
#: Largest file read (bytes).
MAX_FILE_BYTES = 64 * 1024 * 1024
#: Largest count of entities read, after expanding block references.
MAX_ENTITIES = 250_000
#: Largest count of flattened vertices on role layers.
MAX_VERTICES = 2_000_000
#: Deepest nesting of block references followed.
MAX_BLOCK_DEPTH = 16
#: Outline area below which the outline is implausibly small, mm^2.
MIN_PLAUSIBLE_AREA_MM2 = 25.0
#: Outline side above which the outline is implausibly large, mm.
MAX_PLAUSIBLE_SIDE_MM = 1000.0

_INCH = 25.4  # mm, exact (international inch, 1959)
_US_SURVEY_FOOT = 1200.0 / 3937.0 * 1000.0  # mm (US survey foot definition)

#: Millimetres per drawing unit for each ``$INSUNITS`` code (DXF reference,
#: header variable ``$INSUNITS``). 0 (unitless) is absent on purpose.
MM_PER_UNIT: dict[int, float] = {
    1: _INCH,
    2: 12 * _INCH,
    3: 63360 * _INCH,
    4: 1.0,
    5: 10.0,
    6: 1000.0,
    7: 1e6,
    8: 1e-6 * _INCH,
    9: 1e-3 * _INCH,
    10: 36 * _INCH,
    11: 1e-7,
    12: 1e-6,
    13: 1e-3,
    14: 100.0,
    15: 1e4,
    16: 1e5,
    17: 1e12,
    18: 1.495978707e14,  # astronomical unit (IAU 2012: 149 597 870 700 m)
    19: 9.4607304725808e18,  # light year (IAU: Julian year x c)
    20: 3.0856775814913673e19,  # parsec (IAU 2015)
    21: _US_SURVEY_FOOT,
    22: _US_SURVEY_FOOT / 12.0,
    23: _US_SURVEY_FOOT * 3.0,
    24: _US_SURVEY_FOOT * 5280.0,
}

#: Short unit name for each ``$INSUNITS`` code.
UNIT_NAMES: dict[int, str] = {
    1: "inch", 2: "foot", 3: "mile", 4: "mm", 5: "cm", 6: "m", 7: "km",
    8: "microinch", 9: "mil", 10: "yard", 11: "angstrom", 12: "nm",
    13: "micron", 14: "dm", 15: "dam", 16: "hm", 17: "Gm", 18: "au",
    19: "light year", 20: "parsec", 21: "US survey foot", 22: "US survey inch",
    23: "US survey yard", 24: "US survey mile",
}

_UNIT_WORDS: dict[str, int] = {
    "mm": 4, "millimeter": 4, "millimeters": 4, "millimetre": 4, "millimetres": 4,
    "cm": 5, "centimeter": 5, "centimeters": 5, "centimetre": 5, "centimetres": 5,
    "m": 6, "meter": 6, "meters": 6, "metre": 6, "metres": 6,
    "dm": 14, "decimeter": 14, "decimetre": 14,
    "in": 1, "inch": 1, "inches": 1, '"': 1,
    "ft": 2, "foot": 2, "feet": 2,
    "mil": 9, "mils": 9, "thou": 9,
    "um": 13, "µm": 13, "μm": 13, "micron": 13, "microns": 13,
    "micrometer": 13, "micrometre": 13, "micrometers": 13, "micrometres": 13,
}

_ROLES = ("CAVITY", "KEEPOUT", "DEPTH", "BOARD")
_CURVES = ("LINE", "ARC", "CIRCLE", "ELLIPSE", "SPLINE", "LWPOLYLINE", "POLYLINE")
_SPLINE_FRAME_VERTEX = 16  # POLYLINE VERTEX flag: spline frame control point (DXF reference)

Progress = Callable[[str, float], None]


def unit_code(text: str) -> int:
    """``$INSUNITS`` code for a unit name such as ``"mm"``, ``"inch"`` or ``"mil"``.

    Raises
    ------
    KeyError
        For an unknown name.

    Examples
    --------
    >>> unit_code("Inch"), unit_code("mm"), unit_code("micron")
    (1, 4, 13)
    """
    key = str(text).strip().casefold()
    if key not in _UNIT_WORDS:
        raise KeyError(text)
    return _UNIT_WORDS[key]


# --------------------------------------------------------------------------
# Layer roles
# --------------------------------------------------------------------------
@dataclass(frozen=True)
class LayerRoles:
    """Which layers hold which role, from project.toml's ``[cavity] layers``.

    Each field is ``None`` when the role is not mapped (its default name
    applies) or the layer names that hold it, as the user wrote them
    (matched without regard to case). ``depth`` pairs layer names with
    depths in mm.
    """

    cavity: tuple[str, ...] | None = None
    keepout: tuple[str, ...] | None = None
    board: tuple[str, ...] | None = None
    depth: tuple[tuple[str, float], ...] | None = None

    def role_of(self, layer: str) -> tuple[str, float | None] | None:
        """The role of ``layer``: ``("CAVITY", None)``, ``("DEPTH", 1.5)``, ... or None.

        Raises ``ValueError`` for a layer named ``DEPTH-...`` (with the
        depth role unmapped) whose name gives no depth.

        Examples
        --------
        >>> LayerRoles().role_of("depth-1.5")
        ('DEPTH', 1.5)
        >>> LayerRoles(cavity=("outline",)).role_of("CAVITY") is None
        True
        """
        key = layer.casefold()
        for role, names in (("CAVITY", self.cavity), ("KEEPOUT", self.keepout),
                            ("BOARD", self.board)):
            if names is None:
                if key == role.casefold():
                    return role, None
            elif key in (n.casefold() for n in names):
                return role, None
        if self.depth is None:
            if key.startswith("depth-"):
                return "DEPTH", _depth_from_layer_name(layer)
        else:
            for name, d in self.depth:
                if key == name.casefold():
                    return "DEPTH", d
        return None


def _depth_from_layer_name(layer: str) -> float:
    text = layer[len("depth-"):].strip()
    m = re.fullmatch(r"(\d+(?:[.,]\d*)?|[.,]\d+)\s*(?:mm)?", text, flags=re.IGNORECASE)
    if not m:
        raise ValueError(
            f"layer name {layer!r} gives no depth: name a depth layer DEPTH-<mm> "
            "with a number of millimetres, e.g. DEPTH-1.5"
        )
    value = float(m.group(1).replace(",", "."))
    if not math.isfinite(value):
        raise ValueError(f"layer name {layer!r} gives no finite depth")
    return value


def parse_layer_map(layer_map: Mapping[str, Any] | None, *, source: str = "project.toml") -> LayerRoles:
    """Check project.toml's ``[cavity] layers`` value and build :class:`LayerRoles`.

    Parameters
    ----------
    layer_map : mapping or None
        ``{"CAVITY": "Outline", "KEEPOUT": ["Bosses", "Ribs"],
        "DEPTH": {"Lid rib": 1.5}}``; role names in any case.
    source : str
        The settings file named in error messages.

    Raises
    ------
    CavityError
        Naming ``source`` and the key ``cavity.layers.<ROLE>[...]``.

    Examples
    --------
    >>> r = parse_layer_map({"CAVITY": "Outline", "DEPTH": {"Lid rib": 1.5}})
    >>> r.role_of("outline"), r.role_of("LID RIB"), r.role_of("KEEPOUT")
    (('CAVITY', None), ('DEPTH', 1.5), ('KEEPOUT', None))
    """
    if layer_map is None:
        return LayerRoles()
    if not isinstance(layer_map, Mapping):
        raise CavityError(source, "layers must be a table of role = layer name(s), e.g. "
                          '{ CAVITY = "Outline" }', key="cavity.layers")
    found: dict[str, Any] = {}
    seen: dict[str, str] = {}

    def claim(name: Any, role: str, key: str) -> str:
        if not isinstance(name, str) or not name.strip():
            raise CavityError(source, f"a layer name must be non-empty text, got {name!r}", key=key)
        folded = name.strip().casefold()
        if folded in seen and seen[folded] != role:
            raise CavityError(source, f"layer {name!r} is mapped to both {seen[folded]} and {role}: "
                              "give each layer one role", key=key)
        seen[folded] = role
        return name.strip()

    for raw_role in sorted(layer_map, key=str):
        role = str(raw_role).strip().upper()
        key = f"cavity.layers.{raw_role}"
        if role not in _ROLES:
            raise CavityError(source, f"unknown layer role {raw_role!r}: the roles are "
                              + ", ".join(_ROLES), key=key)
        if role in found:
            raise CavityError(source, f"role {role} is given twice", key=key)
        value = layer_map[raw_role]
        if role == "DEPTH":
            if not isinstance(value, Mapping):
                raise CavityError(source, "DEPTH must be a table of layer name = depth in mm, "
                                  'e.g. { "Lid rib" = 1.5 }', key=key)
            pairs = []
            for name in sorted(value, key=str):
                d = value[name]
                k2 = f"{key}.{name}"
                if isinstance(d, bool) or not isinstance(d, (int, float)):
                    raise CavityError(source, f"depth must be a number of mm, got {d!r}", key=k2)
                if not math.isfinite(float(d)) or d < 0:
                    raise CavityError(source, f"depth must be a finite number of mm, 0 or more, "
                                      f"got {d!r}", key=k2)
                pairs.append((claim(name, role, k2), float(d)))
            found[role] = tuple(pairs)
        else:
            names = [value] if isinstance(value, str) else value
            if not isinstance(names, (list, tuple)) or not names:
                raise CavityError(source, f"{role} must be a layer name or a list of layer names, "
                                  f"got {value!r}", key=key)
            found[role] = tuple(claim(n, role, key) for n in names)
    return LayerRoles(
        cavity=found.get("CAVITY"),
        keepout=found.get("KEEPOUT"),
        board=found.get("BOARD"),
        depth=found.get("DEPTH"),
    )


# --------------------------------------------------------------------------
# Loading
# --------------------------------------------------------------------------
def _load(path: Path, name: str, findings: list[Finding]):
    import ezdxf
    from ezdxf import recover
    from ezdxf.lldxf.validator import dwg_version, is_binary_dxf_file, is_dxf_file

    if not path.exists():
        raise CavityError(name, "file not found")
    if not path.is_file():
        raise CavityError(name, "is not a file")
    size = path.stat().st_size
    if size > MAX_FILE_BYTES:
        raise CavityError(name, f"the file is {size / 2**20:.0f} MiB, more than the "
                          f"{MAX_FILE_BYTES // 2**20} MiB snugboard reads: save a drawing with only "
                          "the cavity layers")
    try:
        fs = os.fspath(path)
        if dwg_version(fs) is not None:
            raise CavityError(name, "is a DWG drawing, not DXF: save or export it as DXF")
        looks_dxf = is_binary_dxf_file(fs) or is_dxf_file(fs)
    except OSError as exc:
        raise CavityError(name, f"cannot be read: {exc.strerror or exc}") from None
    if size == 0:
        raise CavityError(name, "is empty: not a DXF drawing")
    if not looks_dxf:
        # ezdxf's own test: the file must start with a DXF tag pair; a
        # damaged start still gets a chance with the recovering loader.
        try:
            head = path.read_bytes()[:4096].decode("latin-1")
        except OSError as exc:
            raise CavityError(name, f"cannot be read: {exc}") from None
        if not re.search(r"^\s*0\s*\r?\n\s*SECTION\s*$", head, flags=re.MULTILINE):
            raise CavityError(name, "is not a DXF drawing (no DXF SECTION near its start)")
    try:
        doc = ezdxf.readfile(fs)
        auditor = doc.audit()
        strict_failure = None
    except Exception as exc:  # any structure problem: try the recovering loader
        strict_failure = f"{type(exc).__name__}: {exc}"
        try:
            doc, auditor = recover.readfile(fs)
        except Exception as exc2:
            raise CavityError(name, "is damaged beyond what the recovering loader can repair "
                              f"({type(exc2).__name__}: {_short(str(exc2))})") from None
    if strict_failure is not None:
        findings.append(Finding(
            "warning", "cavity.repaired", (name,),
            f"The drawing is damaged ({_short(strict_failure)}); it was read with the recovering "
            "loader: check the cavity in fit.svg and re-save the drawing from its CAD program."))
    groups: dict[str, list[str]] = {}
    for entry in list(auditor.fixes) + list(auditor.errors):
        code = getattr(getattr(entry, "code", None), "name", str(getattr(entry, "code", "")))
        groups.setdefault(code, []).append(str(getattr(entry, "message", entry)))
    for code in sorted(groups):
        msgs = groups[code]
        findings.append(Finding(
            "warning", "cavity.repaired", (name, code),
            f"The DXF loader repaired {len(msgs)} problem(s) of kind {code} in the drawing "
            f"(first: {_short(msgs[0])}); check the cavity in fit.svg."))
    return doc


class _LoaderLog(logging.Handler):
    """Collects ezdxf's log records while reading, so nothing reaches stderr."""

    def __init__(self) -> None:
        super().__init__(logging.WARNING)
        self.messages: list[str] = []

    def emit(self, record: logging.LogRecord) -> None:
        try:
            self.messages.append(record.getMessage())
        except Exception:
            self.messages.append(str(record.msg))

    def __enter__(self) -> "_LoaderLog":
        self._logger = logging.getLogger("ezdxf")
        self._propagate = self._logger.propagate
        self._logger.addHandler(self)
        self._logger.propagate = False
        return self

    def __exit__(self, *exc) -> None:
        self._logger.removeHandler(self)
        self._logger.propagate = self._propagate


def _short(text: str, n: int = 160) -> str:
    text = " ".join(str(text).split())
    return text if len(text) <= n else text[: n - 3] + "..."


def _units(doc, default_code: int, name: str, findings: list[Finding]) -> tuple[str, float]:
    try:
        code = int(doc.header.get("$INSUNITS", 0) or 0)
    except (TypeError, ValueError):
        code = -1
    if code == 0:
        findings.append(Finding(
            "info", "cavity.units", (name,),
            f"The drawing declares no units ($INSUNITS 0); it was read in "
            f"{UNIT_NAMES[default_code]} from [cavity] units."))
        code = default_code
    elif code not in MM_PER_UNIT:
        findings.append(Finding(
            "warning", "cavity.units", (name,),
            f"The drawing declares unknown units ($INSUNITS {code}); it was read in "
            f"{UNIT_NAMES[default_code]} from [cavity] units: save it with known units."))
        code = default_code
    return UNIT_NAMES[code], MM_PER_UNIT[code]


# --------------------------------------------------------------------------
# Walking model space and blocks
# --------------------------------------------------------------------------
@dataclass
class _Leaf:
    entity: Any
    matrix: np.ndarray | None  # 4x4 row-vector matrix, None = identity
    layer: str
    label: str


class _Walker:
    def __init__(self, doc, name: str, findings: list[Finding]):
        self.doc = doc
        self.name = name
        self.findings = findings
        self.count = 0
        self.notes: Counter = Counter()

    def _bump(self, n: int = 1) -> None:
        self.count += n
        if self.count > MAX_ENTITIES:
            raise CavityError(self.name, f"the drawing has more than {MAX_ENTITIES} entities "
                              "(block references expanded): save a drawing with only the cavity "
                              "layers")

    def leaves(self, entities, matrix, inherit: str | None, stack: tuple[str, ...],
               via: str) -> Iterator[_Leaf]:
        for e in entities:
            self._bump()
            try:
                t = e.dxftype()
                layer = str(e.dxf.get("layer", "0") or "0")
            except Exception:
                continue
            if inherit is not None and layer == "0":
                layer = inherit
            if t == "INSERT":
                yield from self._insert(e, matrix, layer, stack, via)
                continue
            label = f"{t} #{e.dxf.get('handle', '?')}{via} on layer {layer}"
            yield _Leaf(e, matrix, layer, label)

    def _insert(self, ins, matrix, layer: str, stack: tuple[str, ...], via: str) -> Iterator[_Leaf]:
        bname = str(ins.dxf.get("name", ""))
        handle = ins.dxf.get("handle", "?")
        if len(stack) >= MAX_BLOCK_DEPTH:
            self.notes[f"block references nested deeper than {MAX_BLOCK_DEPTH} levels were not "
                       "followed"] += 1
            return
        if bname.casefold() in stack:
            self.notes[f"block {bname!r} refers to itself; the reference was not followed"] += 1
            return
        block = self.doc.blocks.get(bname) if bname else None
        if block is None:
            self.notes[f"INSERT #{handle} names a missing block {bname!r}"] += 1
            return
        try:
            if block.block is not None and block.block.is_xref:
                self.notes[f"block {bname!r} is an external reference and was not read"] += 1
                return
        except Exception:
            pass
        rows = int(ins.dxf.get("row_count", 1) or 1)
        cols = int(ins.dxf.get("column_count", 1) or 1)
        n_block = len(block)
        if rows * cols * max(n_block, 1) + self.count > MAX_ENTITIES:
            self._bump(rows * cols * max(n_block, 1))
        inserts = [ins] if rows * cols == 1 else list(ins.multi_insert())
        sub_via = f" (block {bname}, INSERT #{handle})" if not via else via
        for vi in inserts:
            m = np.array(list(vi.matrix44().rows()), dtype=float)
            total = m if matrix is None else m @ matrix
            yield from self.leaves(block, total, layer, stack + (bname.casefold(),), sub_via)


# --------------------------------------------------------------------------
# Entity conversion (drawing units)
# --------------------------------------------------------------------------
@dataclass
class _Piece:
    pts: np.ndarray  # (n, 2) drawing units, WCS
    closed: bool
    label: str
    order: int


class _EntityProblem(Exception):
    def __init__(self, reason: str, at: tuple[float, float] | None = None):
        super().__init__(reason)
        self.reason = reason
        self.at = at


def _arc_segments(r: float, span: float, tol: float, full: bool) -> int:
    """Fewest chords for an arc of radius ``r`` and angle ``span`` (rad) whose
    sagitta ``r (1 - cos(step / 2))`` stays at or below ``tol``."""
    if tol >= 2 * r:
        step = math.pi
    else:
        step = 2.0 * math.acos(1.0 - tol / r)
    n = max(1, math.ceil(span / step))
    return max(n, 3) if full else n


def _arc_points(cx: float, cy: float, r: float, a0: float, span: float, tol: float,
                full: bool = False) -> np.ndarray:
    n = _arc_segments(r, abs(span), max(tol, r * REL_TOL), full)
    t = a0 + span * np.arange(n + 1) / n
    return np.column_stack([cx + r * np.cos(t), cy + r * np.sin(t)])


def _bulge_polyline(pts: Sequence[tuple[float, float, float]], closed: bool, tol: float) -> np.ndarray:
    """Flatten ``(x, y, bulge)`` vertices; bulge = tan(included angle / 4), CCW positive."""
    out: list[np.ndarray] = []
    n = len(pts)
    if n == 0:
        return np.zeros((0, 2))
    segs = n if closed else n - 1
    out.append(np.array([[pts[0][0], pts[0][1]]], dtype=float))
    for i in range(segs):
        x0, y0, b = pts[i]
        x1, y1, _ = pts[(i + 1) % n]
        chord = math.hypot(x1 - x0, y1 - y0)
        if abs(b) < 1e-12 or chord == 0.0:
            out.append(np.array([[x1, y1]], dtype=float))
            continue
        theta = 4.0 * math.atan(b)
        r = chord / (2.0 * abs(math.sin(theta / 2.0)))
        # centre: chord midpoint moved along the chord's left normal
        nx, ny = -(y1 - y0) / chord, (x1 - x0) / chord
        off = (chord / 2.0) / math.tan(theta / 2.0)
        cx, cy = (x0 + x1) / 2.0 + nx * off, (y0 + y1) / 2.0 + ny * off
        a0 = math.atan2(y0 - cy, x0 - cx)
        arc = _arc_points(cx, cy, r, a0, theta, tol)
        arc[-1] = (x1, y1)
        out.append(arc[1:])
    res = np.concatenate(out)
    if closed:
        res = res[:-1]
    return res


def _ocs_to_wcs(ocs, xy: np.ndarray, elevation: float) -> np.ndarray:
    pts = np.column_stack([xy, np.full(len(xy), float(elevation))])
    if not ocs.transform:
        return pts
    basis = np.array([tuple(ocs.ux), tuple(ocs.uy), tuple(ocs.uz)], dtype=float)
    return pts @ basis


def _vec3_array(vs) -> np.ndarray:
    arr = np.array([(v[0], v[1], v[2]) for v in vs], dtype=float)
    return arr.reshape(-1, 3)


def _finite(v: float, what: str) -> float:
    v = float(v)
    if not math.isfinite(v):
        raise _EntityProblem(f"has a non-finite {what}")
    return v


def _convert(e, tol: float) -> tuple[np.ndarray, bool]:
    """Entity -> (points (n, 3) in its own WCS/block frame, closed by construction)."""
    t = e.dxftype()
    if t == "LINE":
        s, en = e.dxf.start, e.dxf.end
        return _vec3_array([s, en]), False
    if t in ("CIRCLE", "ARC"):
        c = e.dxf.center
        r = _finite(e.dxf.radius, "radius")
        if r <= 0:
            raise _EntityProblem(f"has radius {r:g}: a circle or arc needs a positive radius",
                                 (float(c[0]), float(c[1])))
        cx, cy = _finite(c[0], "centre"), _finite(c[1], "centre")
        if t == "CIRCLE":
            xy = _arc_points(cx, cy, r, 0.0, 2 * math.pi, tol, full=True)[:-1]
            closed = True
        else:
            a0 = math.radians(_finite(e.dxf.start_angle, "start angle"))
            a1 = math.radians(_finite(e.dxf.end_angle, "end angle"))
            span = (a1 - a0) % (2 * math.pi)
            if span < 1e-12:
                span = 2 * math.pi
            xy = _arc_points(cx, cy, r, a0, span, tol)
            closed = False
        return _ocs_to_wcs(e.ocs(), xy, float(c[2])), closed
    if t == "LWPOLYLINE":
        pts = [(float(x), float(y), float(b)) for x, y, b in e.get_points("xyb")]
        if not pts:
            raise _EntityProblem("has no vertices")
        for x, y, b in pts:
            if not (math.isfinite(x) and math.isfinite(y) and math.isfinite(b)):
                raise _EntityProblem("has a non-finite vertex")
        closed = bool(e.closed)
        xy = _bulge_polyline(pts, closed, tol)
        return _ocs_to_wcs(e.ocs(), xy, float(e.dxf.get("elevation", 0.0) or 0.0)), closed
    if t == "POLYLINE":
        if e.is_polygon_mesh or e.is_poly_face_mesh:
            raise TypeError("mesh")
        closed = bool(e.is_closed)
        verts = [v for v in e.vertices if not (int(v.dxf.get("flags", 0)) & _SPLINE_FRAME_VERTEX)]
        if not verts:
            raise _EntityProblem("has no vertices")
        if e.is_3d_polyline:
            arr = _vec3_array([v.dxf.location for v in verts])
            if not np.isfinite(arr).all():
                raise _EntityProblem("has a non-finite vertex")
            return arr, closed
        pts = []
        for v in verts:
            loc = v.dxf.location
            pts.append((float(loc[0]), float(loc[1]), float(v.dxf.get("bulge", 0.0) or 0.0)))
        if not np.isfinite(np.array(pts)).all():
            raise _EntityProblem("has a non-finite vertex")
        elev = e.dxf.get("elevation", None)
        z = float(elev[2]) if elev is not None else float(verts[0].dxf.location[2])
        xy = _bulge_polyline(pts, closed, tol)
        return _ocs_to_wcs(e.ocs(), xy, z), closed
    if t == "ELLIPSE":
        major = e.dxf.major_axis
        ratio = _finite(e.dxf.ratio, "axis ratio")
        size = math.sqrt(sum(float(c) ** 2 for c in major))
        if not math.isfinite(size) or size <= 0 or ratio <= 0:
            c = e.dxf.center
            raise _EntityProblem("is degenerate (zero axis)", (float(c[0]), float(c[1])))
        span = (float(e.dxf.end_param) - float(e.dxf.start_param)) % (2 * math.pi)
        full = span < 1e-9 or abs(span - 2 * math.pi) < 1e-9
        arr = _vec3_array(e.flattening(max(tol, size * REL_TOL), segments=16))
        if full and len(arr) > 1:
            arr = arr[:-1] if np.allclose(arr[0], arr[-1], atol=tol) else arr
        return arr, full
    if t == "SPLINE":
        ctrl = _vec3_array(e.control_points) if len(e.control_points) else _vec3_array(e.fit_points)
        if len(ctrl) < 2:
            raise _EntityProblem("has fewer than two control or fit points")
        if not np.isfinite(ctrl).all():
            raise _EntityProblem("has a non-finite control point")
        size = float(np.max(np.ptp(ctrl, axis=0)))
        arr = _vec3_array(e.flattening(max(tol, size * REL_TOL), segments=4))
        if not np.isfinite(arr).all():
            raise _EntityProblem("evaluates to non-finite points")
        # The closed flag is not trusted (some writers set it on splines that
        # do not close): closure is decided from the end points.
        return arr, False
    raise TypeError(t)


def _sigma_max(m: np.ndarray) -> float:
    s = np.linalg.svd(m[:3, :3], compute_uv=False)
    return float(s[0])


# --------------------------------------------------------------------------
# Chaining open pieces into loops
# --------------------------------------------------------------------------
@dataclass
class _Ring:
    pts: np.ndarray  # (n, 2), not repeated at the end
    labels: tuple[str, ...]

    @property
    def label(self) -> str:
        if len(self.labels) == 1:
            return self.labels[0]
        return f"{self.labels[0]} and {len(self.labels) - 1} more joined to it"


def _fmt_pt(p) -> str:
    return f"({float(p[0]):.6g}, {float(p[1]):.6g})"


def _chain(pieces: list[_Piece], tol: float, what: str, name: str, mm_per_unit: float) -> list[_Ring]:
    """Closed pieces as they are; open pieces joined end to end into loops.

    Raises CavityError for a free end (the gap to the nearest free end) or a
    node where three or more ends meet.
    """
    from scipy.spatial import cKDTree

    rings = [_Ring(p.pts, (p.label,)) for p in pieces if p.closed]
    opened = [p for p in pieces if not p.closed]
    if not opened:
        return rings
    ends = np.empty((2 * len(opened), 2))
    for i, p in enumerate(opened):
        ends[2 * i] = p.pts[0]
        ends[2 * i + 1] = p.pts[-1]
    # union-find over end points within tol
    parent = np.arange(len(ends))

    def find(i: int) -> int:
        while parent[i] != i:
            parent[i] = parent[parent[i]]
            i = parent[i]
        return int(i)

    tree = cKDTree(ends)
    for a, b in sorted(map(tuple, tree.query_pairs(tol, output_type="ndarray").tolist())):
        ra, rb = find(a), find(b)
        if ra != rb:
            parent[max(ra, rb)] = min(ra, rb)
    node = np.array([find(i) for i in range(len(ends))])
    members: dict[int, list[int]] = {}
    for i, n in enumerate(node.tolist()):
        members.setdefault(n, []).append(i)

    free = [m[0] for m in members.values() if len(m) == 1]
    if free:
        free.sort()
        fp = ends[free]
        if len(free) == 1:
            i = free[0]
            raise CavityError(name, f"the {what} is not closed: this end meets nothing (each end "
                              "must meet exactly one other end)", entity=opened[i // 2].label,
                              at=(float(ends[i][0]), float(ends[i][1])))
        ftree = cKDTree(fp)
        dist, idx = ftree.query(fp, k=2)
        best = min(range(len(free)), key=lambda k: (round(float(dist[k, 1]), 12), free[k]))
        i, j = free[best], free[int(idx[best, 1])]
        if j < i:
            i, j = j, i
        gap = float(np.hypot(*(ends[i] - ends[j])))
        other = ("its own other end" if i // 2 == j // 2 else f"the nearest free end, of "
                 f"{opened[j // 2].label},")
        raise CavityError(
            name,
            f"the {what} is not closed: its ends do not meet; {other} is at {_fmt_pt(ends[j])}, "
            f"a gap of {gap:.6g} drawing units ({gap * mm_per_unit:.4g} mm); join them in the "
            f"drawing (ends closer than {JOIN_TOL_MM} mm are joined, larger gaps are never closed)",
            entity=opened[i // 2].label, at=(float(ends[i][0]), float(ends[i][1])))
    branches = sorted((m for m in members.values() if len(m) > 2), key=lambda m: m[0])
    if branches:
        m = branches[0]
        labels = sorted({opened[k // 2].label for k in m}, key=lambda s: s)
        raise CavityError(
            name,
            f"{len(m)} entity ends meet at one point of the {what} ({'; '.join(labels[:4])}"
            f"{'; ...' if len(labels) > 4 else ''}): an outline must be one loop without branches; "
            "remove duplicated, overlapping or crossing entities",
            entity=opened[m[0] // 2].label, at=(float(ends[m[0]][0]), float(ends[m[0]][1])))
    # every node joins exactly two ends: walk the loops
    partner = np.empty(len(ends), dtype=int)
    for m in members.values():
        a, b = m
        partner[a], partner[b] = b, a
    used = np.zeros(len(opened), dtype=bool)
    for start in range(len(opened)):
        if used[start]:
            continue
        parts: list[np.ndarray] = []
        labels: list[str] = []
        k = start
        forward = True
        while not used[k]:
            used[k] = True
            p = opened[k]
            pts = p.pts if forward else p.pts[::-1]
            parts.append(pts if not parts else pts[1:])
            labels.append(p.label)
            exit_end = 2 * k + (1 if forward else 0)
            nxt = int(partner[exit_end])
            k, forward = nxt // 2, (nxt % 2 == 0)
        ring = np.concatenate(parts)[:-1]
        rings.append(_Ring(ring, tuple(labels)))
    return rings


# --------------------------------------------------------------------------
# Loops to polygons
# --------------------------------------------------------------------------
_LOC = re.compile(r"\[\s*([-+0-9.eE]+)\s+([-+0-9.eE]+)")


def _polygon(ring: _Ring, what: str, name: str, tol: float) -> Polygon:
    pts = ring.pts
    if len(pts) > 1:
        keep = np.ones(len(pts), dtype=bool)
        keep[1:] = np.any(pts[1:] != pts[:-1], axis=1)
        pts = pts[keep]
        if len(pts) > 1 and np.all(pts[0] == pts[-1]):
            pts = pts[:-1]
    at = (float(ring.pts[0][0]), float(ring.pts[0][1]))
    if len(pts) < 3:
        raise CavityError(name, f"the {what} encloses no area", entity=ring.label, at=at)
    poly = Polygon(pts)
    if not poly.is_valid:
        reason = shapely.is_valid_reason(poly)
        m = _LOC.search(reason)
        loc = (float(m.group(1)), float(m.group(2))) if m else at
        kind = reason.split("[")[0].strip()
        raise CavityError(name, f"the {what} crosses or touches itself here ({kind}): "
                          "redraw it as one simple loop", entity=ring.label, at=loc)
    if poly.area <= tol * tol:
        raise CavityError(name, f"the {what} encloses no area", entity=ring.label, at=at)
    return poly


def _one_outline(polys: list[tuple[Polygon, _Ring]], what: str, name: str) -> Polygon:
    """The largest loop is the outline; loops wholly inside it are holes."""
    order = sorted(range(len(polys)), key=lambda i: (-polys[i][0].area, i))
    outer, outer_ring = polys[order[0]]
    holes: list[tuple[Polygon, _Ring]] = []
    for i in order[1:]:
        p, ring = polys[i]
        at = (float(ring.pts[0][0]), float(ring.pts[0][1]))
        if not outer.contains_properly(p):
            if outer.intersects(p):
                reason = (f"this loop crosses or touches the {what} of {outer_ring.label}: the layer "
                          f"must hold exactly one outline (loops wholly inside it are holes)")
            else:
                reason = (f"this is a second, separate {what} (the first is {outer_ring.label}): "
                          f"the layer must hold exactly one outline (loops wholly inside it are "
                          f"holes)")
            raise CavityError(name, reason, entity=ring.label, at=at)
        for q, qring in holes:
            if q.intersects(p):
                raise CavityError(
                    name, f"this loop lies inside or across the hole {qring.label} of the {what}: "
                    "several outlines (holes may not overlap or nest)", entity=ring.label, at=at)
        holes.append((p, ring))
    if not holes:
        return outer
    result = Polygon(outer.exterior.coords, [h.exterior.coords for h, _ in holes])
    if not result.is_valid:  # holes are pairwise disjoint and inside: should not happen
        reason = shapely.is_valid_reason(result)
        m = _LOC.search(reason)
        raise CavityError(name, f"the {what} and its holes do not form a valid area ({reason})",
                          entity=outer_ring.label,
                          at=(float(m.group(1)), float(m.group(2))) if m else None)
    return result


def _to_mm(geom, k: float):
    if k == 1.0:
        return geom
    return shapely.transform(geom, lambda c: c * k)


# --------------------------------------------------------------------------
# The entry function
# --------------------------------------------------------------------------
def read_cavity(
    path: Path,
    *,
    display_name: str | None = None,
    layer_map: Mapping[str, Any] | None = None,
    default_units: str = "mm",
    depth_mm: float = 5.0,
    chord_tol_mm: float = 0.02,
    settings_file: str = "project.toml",
    progress: Progress | None = None,
) -> tuple[Cavity, list[Finding]]:
    """Read a cavity drawing into millimetre polygons.

    Parameters
    ----------
    path : pathlib.Path
        The DXF file (ASCII or binary, any version ezdxf reads).
    display_name : str, optional
        The path as the user wrote it, used in messages (default ``str(path)``).
    layer_map : mapping, optional
        project.toml ``[cavity] layers``: role -> layer name(s); see the
        module docstring.
    default_units : str
        Units of a drawing that declares none (``"mm"``, ``"inch"``, ...).
    depth_mm : float
        Floor-to-lid depth wherever no depth zone says otherwise, mm.
    chord_tol_mm : float
        Largest distance between a curve and its flattened chords, mm.
    settings_file : str
        Name of the settings file in messages about ``layer_map``,
        ``default_units`` and ``depth_mm``.
    progress : callable, optional
        ``progress(message, fraction)`` now and then.

    Returns
    -------
    (Cavity, list of Finding)
        Geometry in mm in the drawing's frame; warnings and notes.

    Raises
    ------
    CavityError
        Unreadable or non-DXF file; a chain whose ends do not meet (with the
        gap); a loop that crosses itself; zero or several CAVITY outlines;
        an open keep-out, depth zone or board outline; a bad ``DEPTH-<mm>``
        layer name or ``layer_map`` value; an entity that cannot be
        converted (named with its handle and layer). Locations are in
        drawing units.

    Examples
    --------
    >>> import ezdxf, tempfile, pathlib
    >>> doc = ezdxf.new(units=ezdxf.units.MM)
    >>> _ = doc.modelspace().add_lwpolyline([(0, 0), (40, 0), (40, 20), (0, 20)],
    ...     close=True, dxfattribs={"layer": "CAVITY"})
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "bay.dxf"; doc.saveas(p)
    >>> cavity, findings = read_cavity(p, display_name="bay.dxf")
    >>> cavity.outline.area, cavity.unit_name, findings
    (800.0, 'mm', [])
    """
    name = display_name if display_name is not None else str(path)
    findings: list[Finding] = []
    roles = parse_layer_map(layer_map, source=settings_file)
    if isinstance(depth_mm, bool) or not isinstance(depth_mm, (int, float)) or \
            not math.isfinite(depth_mm) or depth_mm <= 0:
        raise CavityError(settings_file, f"depth must be a positive number of mm, got {depth_mm!r}",
                          key="cavity.depth_mm")
    if not (isinstance(chord_tol_mm, (int, float)) and math.isfinite(chord_tol_mm)
            and chord_tol_mm > 0):
        raise ValueError(f"chord_tol_mm must be positive, got {chord_tol_mm!r}")
    try:
        default_code = unit_code(default_units)
    except KeyError:
        raise CavityError(settings_file, f"unknown units {default_units!r}: use mm, cm, m, inch, "
                          "foot, mil or micron", key="cavity.units") from None
    with _LoaderLog() as log:
        cavity = _read(Path(path), name, roles, default_code, float(depth_mm), chord_tol_mm,
                       findings, progress)
    if log.messages:
        findings.append(Finding(
            "info", "cavity.loader", (name,),
            f"The DXF library reported {len(log.messages)} message(s) while reading the drawing "
            f"(first: {_short(log.messages[0])})."))
    if progress:
        progress("cavity read", 1.0)
    return cavity, findings


def _read(path: Path, name: str, roles: LayerRoles, default_code: int, depth_mm: float,
          chord_tol_mm: float, findings: list[Finding], progress: Progress | None) -> Cavity:
    if progress:
        progress("reading the cavity drawing", 0.0)
    doc = _load(path, name, findings)
    unit_name, k = _units(doc, default_code, name, findings)
    tol = chord_tol_mm / k
    join_tol = JOIN_TOL_MM / k

    walker = _Walker(doc, name, findings)
    msp = doc.modelspace()
    total = max(len(msp), 1)
    groups: dict[tuple[str, str], list[_Piece]] = {}
    depth_of: dict[tuple[str, str], float] = {}
    ignored_layers: dict[str, int] = {}
    ignored_types: Counter = Counter()
    degenerate: list[str] = []
    not_flat: list[str] = []
    n_vertices = 0
    order = 0
    role_cache: dict[str, tuple[str, float | None] | None] = {}
    top = 0
    for leaf in walker.leaves(msp, None, None, (), ""):
        order += 1
        if leaf.matrix is None:
            top += 1
            if progress and top % 2000 == 0:
                progress("converting drawing entities", min(0.9, top / total))
        layer = leaf.layer
        if layer not in role_cache:
            try:
                role_cache[layer] = roles.role_of(layer)
            except ValueError as exc:
                raise CavityError(name, str(exc), entity=f"layer {layer}") from None
        role = role_cache[layer]
        t = leaf.entity.dxftype()
        if role is None:
            ignored_layers[layer] = ignored_layers.get(layer, 0) + 1
            continue
        if t not in _CURVES:
            ignored_types[(t, layer)] += 1
            continue
        try:
            if leaf.matrix is None:
                pts3, closed = _convert(leaf.entity, tol)
            else:
                sigma = _sigma_max(leaf.matrix)
                local_tol = tol / sigma if sigma > 0 else tol
                pts3, closed = _convert(leaf.entity, local_tol)
                if len(pts3):
                    m = leaf.matrix
                    pts3 = pts3 @ m[:3, :3] + m[3, :3]
        except CavityError:
            raise
        except _EntityProblem as exc:
            raise CavityError(name, f"this entity {exc.reason}", entity=leaf.label,
                              at=_at_in_wcs(exc.at, leaf.matrix)) from None
        except TypeError as exc:
            if leaf.entity.dxftype() == "POLYLINE" and str(exc) == "mesh":
                ignored_types[("POLYLINE mesh", layer)] += 1
                continue
            raise CavityError(name, f"this entity cannot be converted ({type(exc).__name__}: "
                              f"{_short(str(exc))})", entity=leaf.label,
                              at=_at_in_wcs(_entity_point(leaf.entity), leaf.matrix)) from None
        except Exception as exc:  # one entity's failure names that entity
            raise CavityError(name, f"this entity cannot be converted ({type(exc).__name__}: "
                              f"{_short(str(exc))}); redraw it (duplicate control or fit points "
                              "are a usual cause for splines)", entity=leaf.label,
                              at=_at_in_wcs(_entity_point(leaf.entity), leaf.matrix)) from None
        if not np.isfinite(pts3).all():
            raise CavityError(name, "this entity has non-finite coordinates", entity=leaf.label)
        n_vertices += len(pts3)
        if n_vertices > MAX_VERTICES:
            raise CavityError(name, f"the role layers flatten to more than {MAX_VERTICES} "
                              "vertices: simplify the drawing or check its units",
                              entity=leaf.label)
        if len(pts3) and float(np.ptp(pts3[:, 2])) > max(tol, join_tol):
            not_flat.append(leaf.label)
        xy = np.ascontiguousarray(pts3[:, :2])
        if len(xy) < 2 or float(np.max(np.ptp(xy, axis=0))) <= join_tol:
            degenerate.append(leaf.label)
            continue
        if not closed and float(np.hypot(*(xy[0] - xy[-1]))) <= join_tol and len(xy) > 2:
            xy, closed = xy[:-1], True
        key = (role[0], layer)
        if role[0] == "DEPTH":
            depth_of[key] = float(role[1])
        groups.setdefault(key, []).append(_Piece(xy, closed, leaf.label, order))

    for note, count in sorted(walker.notes.items()):
        findings.append(Finding("warning", "cavity.blocks", (name,),
                                f"{note} ({count} time(s))." if count > 1 else f"{note}."))
    if ignored_layers:
        names = sorted(ignored_layers, key=lambda s: (s.casefold(), s))
        findings.append(Finding(
            "warning", "cavity.ignored-layers", tuple(names),
            f"Layers ignored (no cavity role): {', '.join(names)}; map them in project.toml "
            "[cavity] layers if they hold the cavity, keep-outs or depth zones."))
    if ignored_types:
        desc = ", ".join(f"{t} x{n} on layer {lay}" for (t, lay), n in sorted(ignored_types.items()))
        findings.append(Finding(
            "warning", "cavity.ignored-entities", tuple(sorted({t for t, _ in ignored_types})),
            f"Entities not read on role layers ({desc}): only lines, arcs, circles, ellipses, "
            "splines and polylines make outlines."))
    if degenerate:
        findings.append(Finding(
            "warning", "cavity.degenerate", tuple(degenerate[:20]),
            f"{len(degenerate)} entity(ies) of zero size were skipped (first: {degenerate[0]})."))
    if not_flat:
        findings.append(Finding(
            "warning", "cavity.not-flat", tuple(not_flat[:20]),
            f"{len(not_flat)} entity(ies) are not parallel to the XY plane and were projected onto "
            f"it (first: {not_flat[0]}): draw the cavity flat in plan view."))
    if progress:
        progress("joining outlines", 0.92)

    def rings_of(role: str) -> list[tuple[Polygon, _Ring, str]]:
        out = []
        for key in sorted((kk for kk in groups if kk[0] == role),
                          key=lambda kk: groups[kk][0].order):
            what = {"CAVITY": "cavity outline", "BOARD": "board outline",
                    "KEEPOUT": f"keep-out on layer {key[1]}",
                    "DEPTH": f"depth zone on layer {key[1]}"}[role]
            for ring in _chain(groups[key], join_tol, what, name, k):
                out.append((_polygon(ring, what, name, join_tol), ring, key[1]))
        return out

    cavity_rings = rings_of("CAVITY")
    if not cavity_rings:
        layer_names = sorted({str(la.dxf.name) for la in doc.layers}, key=str.casefold)
        used = sorted(set(ignored_layers) | {kk[1] for kk in groups}, key=str.casefold)
        where = ("no entities" if not used else "entities on layers " + ", ".join(used))
        cav_names = ("layer(s) " + ", ".join(roles.cavity)) if roles.cavity else "layer CAVITY"
        damaged = ("; the file is damaged and was read with the recovering loader"
                   if any(f.check == "cavity.repaired" for f in findings) else "")
        raise CavityError(
            name, f"no closed outline on {cav_names} (the drawing has {where}; its layer table "
            f"lists {', '.join(layer_names[:12]) or 'none'}{damaged}): draw the free floor area as "
            "one closed outline on that layer, or map your layer in project.toml [cavity] layers")
    outline = _one_outline([(p, r) for p, r, _ in cavity_rings], "cavity outline", name)
    board_rings = rings_of("BOARD")
    board = _one_outline([(p, r) for p, r, _ in board_rings], "board outline", name) \
        if board_rings else None
    floor = Polygon(outline.exterior.coords)
    keepouts = []
    for p, ring, layer in rings_of("KEEPOUT"):
        if not p.intersects(floor):
            findings.append(_outside_finding(name, "keep-out", ring, k))
        keepouts.append(_to_mm(p, k))
    zones = []
    for p, ring, layer in rings_of("DEPTH"):
        if not p.intersects(floor):
            findings.append(_outside_finding(name, f"depth zone on layer {layer}", ring, k))
        zones.append(DepthZone(_to_mm(p, k), depth_of[("DEPTH", layer)], layer))
    if board is not None and not board.intersects(floor):
        findings.append(Finding(
            "warning", "cavity.outside", (name,),
            f"The board outline at {_fmt_pt(board.exterior.coords[0])} (drawing units) lies "
            "outside the cavity outline."))
    outline_mm = _to_mm(outline, k)
    x0, y0, x1, y1 = outline_mm.bounds
    w, h, area = x1 - x0, y1 - y0, outline_mm.area
    if area < MIN_PLAUSIBLE_AREA_MM2 or max(w, h) > MAX_PLAUSIBLE_SIDE_MM:
        findings.append(Finding(
            "warning", "cavity.implausible-size", (name,),
            f"The cavity outline is {w:.4g} x {h:.4g} mm ({area:.4g} mm^2) read in {unit_name}, "
            "implausible for an enclosure: wrong units are the usual cause; check the drawing's "
            "units ($INSUNITS) or [cavity] units."))
    return Cavity(
        source=name,
        outline=outline_mm,
        keepouts=tuple(keepouts),
        depth_zones=tuple(zones),
        board=_to_mm(board, k) if board is not None else None,
        depth_mm=depth_mm,
        unit_name=unit_name,
        mm_per_unit=k,
    )


def _entity_point(e) -> tuple[float, float] | None:
    """A point to locate an entity that failed to convert (its first defining point)."""
    try:
        for attr in ("start", "center", "insert"):
            if e.dxf.hasattr(attr):
                v = e.dxf.get(attr)
                return float(v[0]), float(v[1])
        for seq in ("control_points", "fit_points"):
            pts = getattr(e, seq, None)
            if pts is not None and len(pts):
                return float(pts[0][0]), float(pts[0][1])
        if e.dxftype() == "LWPOLYLINE" and len(e):
            x, y = e[0][:2]
            return float(x), float(y)
    except Exception:
        return None
    return None


def _at_in_wcs(at: tuple[float, float] | None, m: np.ndarray | None) -> tuple[float, float] | None:
    if at is None or m is None:
        return at
    p = np.array([at[0], at[1], 0.0]) @ m[:3, :3] + m[3, :3]
    return float(p[0]), float(p[1])


def _outside_finding(name: str, what: str, ring: _Ring, k: float) -> Finding:
    p = ring.pts[0]
    return Finding(
        "warning", "cavity.outside", (name, ring.label),
        f"The {what} {ring.label} at {_fmt_pt(p)} (drawing units) lies wholly outside the cavity "
        "outline and has no effect: check its position or layer.")
