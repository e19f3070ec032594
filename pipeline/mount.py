"""Mounting bosses: keep-outs the board covers and is screwed to.

Entry functions: :func:`mark_points` (project.toml ``[[board.mount]]``: a
point picks the keep-out that holds it) and :func:`resolve_mounts` (every
:class:`~pipeline.model.MountMark` of a cavity to a checked
:class:`~pipeline.model.Mount`). :func:`pipeline.region.usable_region`
calls the second, so every stage that derives a region gets the mounts.

The model (millimetres)
-----------------------
* The board rests on the boss's top face and covers it: the boss is no
  longer a hole in the usable region.
* A clearance hole for the screw at the boss centre: ISO 273, medium
  series (``footprints/screws.csv``, one row per screw size with its
  source). The centre is the measured boss's centre, or the centroid of
  the drawn keep-out (the centre of a drawn circle).
* A head clearance ring around it: the ISO 7045 pan head's ``dk max``
  plus :data:`HEAD_CLEARANCE_MM` all round (common practice: room for
  the screwdriver and the head's position tolerance). No part's courtyard
  may overlap the ring (top side: the head stands there) or the boss
  (bottom side: the board rests on it); the placer keeps both sides off
  both, a conservative simplification. Copper stays off the ring on every
  layer: a head on top copper, or a metal boss under bottom copper, would
  short it (the routing step passes the ring to the router as a hole).
* The head, ``k max`` tall, must fit under the lid over the centre:
  otherwise the region step reports ``region.mount-head`` (an error).

Bad input (exit 2, naming the file and key): a point in no keep-out, two
mounts on one keep-out, a screw size not in the table, a boss narrower
than the clearance hole plus :data:`BOSS_WALL_MM` on each side (the board
would bear on nothing around the hole: common practice), or wider than
:data:`BOSS_MAX_PER_HEAD` head diameters (our own rule: such a keep-out is
a rib, a post or a wall picked by mistake, or the screw size is wrong).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from functools import lru_cache
from pathlib import Path
from typing import Sequence

import shapely
from shapely.geometry import Point, Polygon

from .errors import CavityError, InputError, LibraryError
from .model import Cavity, Mount, MountMark

__all__ = ["Screw", "screws", "screw", "mark_points", "resolve_mounts", "circle", "mount_keepout",
           "with_mount_holes", "head_room", "raised_heads",
           "HEAD_CLEARANCE_MM", "BOSS_WALL_MM", "BOSS_MAX_PER_HEAD", "SCREWS_FILE"]

#: Radial clearance around the screw head's dk max, mm (common practice).
HEAD_CLEARANCE_MM = 0.5
#: Least boss face around the clearance hole, each side, mm (common practice).
BOSS_WALL_MM = 0.5
#: A keep-out wider than this many head diameters is not a boss for that screw (our own rule).
BOSS_MAX_PER_HEAD = 3.0
#: The screw table under footprints/.
SCREWS_FILE = "screws.csv"
_COLUMNS = ["screw", "thread_mm", "clearance_hole_mm", "head_diameter_mm", "head_height_mm", "source"]
#: Circle segments per quarter turn of the hole and ring polygons.
_QUAD_SEGS = 16


@dataclass(frozen=True)
class Screw:
    """One screw size: thread, clearance hole, head diameter and height (mm), and the source."""

    name: str
    thread_mm: float
    hole_mm: float
    head_mm: float
    head_height_mm: float
    source: str

    @property
    def ring_mm(self) -> float:
        """The head clearance ring's diameter: dk max plus the clearance all round."""
        return self.head_mm + 2 * HEAD_CLEARANCE_MM


@lru_cache(maxsize=4)
def screws(root: Path | None = None) -> dict[str, Screw]:
    """The screw table, by upper-case name; a bad row raises LibraryError at its line."""
    from .library._data import csv_number, csv_rows
    from .library.catalogue import DEFAULT_ROOT

    path = (root or DEFAULT_ROOT) / SCREWS_FILE
    header_line, header, rows = csv_rows(path)
    if header != _COLUMNS:
        raise LibraryError(str(path), f"the header must be {','.join(_COLUMNS)}", line=header_line)
    out: dict[str, Screw] = {}
    for line, cells in rows:
        if len(cells) != len(_COLUMNS) or not cells[0] or not cells[-1]:
            raise LibraryError(str(path), f"expected {len(_COLUMNS)} cells with a name and a source", line=line)
        nums = [csv_number(c, path, line, k) for c, k in zip(cells[1:5], _COLUMNS[1:5])]
        out[cells[0].upper()] = Screw(cells[0], *nums, cells[5])
    return out


def screw(name: str, file: str, key: str, line: int | None = None, cls: type[InputError] = CavityError) -> Screw:
    """The screw ``name`` (any case), or ``cls`` naming the file and key and the known sizes."""
    table = screws()
    if not isinstance(name, str) or name.strip().upper() not in table:
        known = ", ".join(s.name for s in table.values())
        raise cls(file, f"unknown screw size {name!r}; known sizes: {known}", line=line, key=key)
    return table[name.strip().upper()]


def circle(x: float, y: float, d: float, *, outside: bool = False) -> Polygon:
    """A circle of diameter ``d`` as a polygon: vertices on the circle, or (``outside``) its edges
    tangent to it, so that the polygon covers the true circle (a keep-out)."""
    r = d / 2 / math.cos(math.pi / (4 * _QUAD_SEGS)) if outside else d / 2
    return Point(x, y).buffer(r, quad_segs=_QUAD_SEGS)


def mark_points(cavity: Cavity, points: Sequence[tuple[tuple[float, float], str, str, int | None]],
                file: str, cls: type[InputError]) -> Cavity:
    """``cavity`` with a mount mark for each ``(point, screw, key, line)`` declared in ``file``.

    The point picks the keep-out holding it (on its edge counts). Raises
    ``cls`` naming the file and key when no keep-out holds the point.
    """
    marks = list(cavity.mounts)
    for (x, y), size, key, line in points:
        p = Point(x, y)
        hits = [i for i, k in enumerate(cavity.keepouts) if k.buffer(1e-9).covers(p)]
        if not hits:
            raise cls(file, f"no keep-out of {cavity.source} holds the point ({x:g}, {y:g}) mm: give a point "
                      "inside the screw boss", line=line, key=key)
        marks.append(MountMark(min(hits, key=lambda i: cavity.keepouts[i].area), size, None, file, key, line))
    return replace(cavity, mounts=tuple(marks))


def resolve_mounts(cavity: Cavity) -> tuple[Mount, ...]:
    """Every mount mark of ``cavity`` as a checked :class:`Mount` (see the module notes).

    Cost: O(v) per mount in the keep-out's vertices (shapely's inscribed
    circle, Garcia-Castellanos and Lombardo 2007, polylabel).
    """
    out: list[Mount] = []
    seen: dict[int, MountMark] = {}
    cls = CavityError
    for m in cavity.mounts:
        if m.keepout in seen:
            raise cls(m.file, f"this keep-out is already a mount ({seen[m.keepout].file}: {seen[m.keepout].key})",
                      line=m.line, key=m.key)
        seen[m.keepout] = m
        s = screw(m.screw, m.file, m.key, m.line, cls)
        boss = cavity.keepouts[m.keepout]
        x, y = m.centre if m.centre is not None else (boss.centroid.x, boss.centroid.y)
        _check_size(boss, x, y, s, m, cls)
        out.append(Mount(x, y, s.name, s.hole_mm, s.ring_mm, s.head_height_mm, boss, m.keepout,
                         f"{m.file}: {m.key}"))
    return tuple(sorted(out, key=lambda mt: (mt.x_mm, mt.y_mm)))


def _check_size(boss, x: float, y: float, s: Screw, m: MountMark, cls: type[InputError]) -> None:
    """Refuse a boss too narrow for the hole or too wide for the screw (module notes)."""
    least = s.hole_mm + 2 * BOSS_WALL_MM
    inscribed = 2 * float(shapely.maximum_inscribed_circle(boss, tolerance=0.001).length)
    if inscribed < least - _flat_allowance(least):
        raise cls(m.file, f"the boss is {inscribed:.3g} mm across, too small for an {s.name} screw: its "
                  f"{s.hole_mm:g} mm clearance hole needs a boss of at least {least:g} mm "
                  f"({BOSS_WALL_MM:g} mm of boss face each side)", line=m.line, key=m.key)
    widest = 2 * float(shapely.hausdorff_distance(Point(x, y), boss.exterior))
    most = BOSS_MAX_PER_HEAD * s.head_mm
    if widest > most:
        raise cls(m.file, f"the keep-out is {widest:.3g} mm across about its centre, too big for a boss of an "
                  f"{s.name} screw (at most {most:g} mm, {BOSS_MAX_PER_HEAD:g} head diameters): pick the "
                  "boss itself, or the right screw size", line=m.line, key=m.key)


def _flat_allowance(d: float) -> float:
    """How much narrower a flattened drawn circle of diameter ``d`` may measure (0.02 mm chord
    tolerance each side, the cavity reader's default sagitta)."""
    return 0.04 + 1e-9 * d


def mount_keepout(mounts: Sequence[Mount]):
    """Where no courtyard may be: every head ring (covering the true circle) and every boss."""
    return shapely.union_all([g for m in mounts for g in (circle(m.x_mm, m.y_mm, m.ring_mm, outside=True), m.boss)])


def with_mount_holes(outline, mounts: Sequence[Mount], blocked: list[str]):
    """``outline`` with each mount's screw hole cut out; a hole the outline does not hold
    appends a sentence to ``blocked`` (the board is not screwed down there)."""
    from shapely.geometry.polygon import orient

    if outline is None or outline.is_empty or not mounts:
        return outline
    for m in mounts:
        hole = circle(m.x_mm, m.y_mm, m.hole_mm)
        if outline.covers(hole):
            outline = outline.difference(hole)
        else:
            blocked.append(f"The board outline does not cover the {m.screw} mounting boss at "
                           f"({m.x_mm:.4g}, {m.y_mm:.4g}) mm ({m.where}): the board cannot be screwed there; "
                           "use the region outline or a board that covers the boss.")
    return orient(outline, 1.0) if outline.geom_type == "Polygon" else outline


def head_room(m: Mount, zones) -> float:
    """The height above the board over the boss centre (the lowest zone holding it; inf without zones)."""
    p = Point(m.x_mm, m.y_mm)
    return min((z.max_height_mm for z in zones if z.polygon.buffer(1e-9).covers(p)), default=math.inf)


def raised_heads(mounts: Sequence[Mount], zones, gap: float) -> list[str]:
    """Sentences for the screw heads that no longer fit under the lid when the board is raised
    ``gap`` mm on bottom-side parts (``sides = 2``)."""
    out = []
    for m in mounts:
        room = head_room(m, zones) - gap
        if gap > 0 and m.head_height_mm > room + 1e-9:
            out.append(f"The {m.screw} screw head ({m.head_height_mm:g} mm) on the boss at ({m.x_mm:.4g}, "
                       f"{m.y_mm:.4g}) mm ({m.where}) does not fit under the lid with the board raised {gap:g} mm "
                       f"on bottom-side parts: only {room:.3g} mm is left there.")
    return out
