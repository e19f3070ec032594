"""Where a board may be inside the cavity, and how tall its parts may be.

One entry function, :func:`usable_region`, turns a :class:`pipeline.model.Cavity`
(millimetres) and the board options into a :class:`pipeline.model.Region`: the
board region and a partition of it into height zones.

Board region
------------
The board edge must stay ``wall_clearance_mm`` (``c``) away from the cavity
wall and from every keep-out, so

    board region = (floor outline inset by c) - (union of keep-outs grown by c)
                   - (areas too shallow for the board, grown by c)

Insetting and growing use mitre joins: square corners stay square (a
rectangle ``w x h`` insets to exactly ``(w - 2c) x (h - 2c)``, a square
keep-out of side ``a`` grows to ``(a + 2c)^2``). At corners where a round
offset would be exact, a mitre keeps at least the clearance (it is never
closer than ``c``), so the region is exact or conservative everywhere.
Holes in the cavity outline grow by ``c`` like keep-outs. The result may be
several separate pieces (a narrow neck under ``2c`` splits it: an info
finding says so) or empty (a warning). Pieces of numerical size (under
1e-6 mm^2) are dropped.

Height model
------------
``depth`` is the floor-to-lid distance. Every point of the floor has the
default depth (``Cavity.depth_mm``, project.toml ``[cavity] depth_mm``)
unless depth zones cover it; where depth zones overlap, the smallest depth
holds (a lid rib over a deeper recess still lowers the lid). A zone's
depth also reaches ``c`` beyond its drawn edge (the step in the lid is a
wall to taller parts, drawn with the same uncertainty as the walls), so:

    depth(p)  = min { d_k : p lies within c of the area whose exact depth is d_k }
    max part height above the board at p = depth(p) - board thickness

The board sits on the floor with one side of parts (``sides = 1``). Where
``depth(p)`` is less than the board thickness no board fits at all: that
area is taken out of the board region and a warning names the layer. With
``sides = 2`` the bottom side's parts also need room under the board; that
is the placer's to subtract (it knows the parts). Zones are returned in
ascending order of allowed height and partition the board region.

User's board
------------
When the drawing has a ``BOARD`` outline, the region is that board as
drawn. It must lie inside the allowed area above; where it does not, an
error-severity finding (``region.board-outside``,
``region.board-over-keepout``, ``region.board-too-shallow``) locates the
worst spot in mm (and in drawing units): the board does not fit, which is
a fit verdict (exit 1), not a bad input, so the run still draws the
picture showing where.
"""

from __future__ import annotations

import math

import shapely
from shapely.geometry import MultiPolygon, Polygon
from shapely.geometry.base import BaseGeometry

from pipeline.errors import ProjectError
from pipeline.model import BoardOptions, Cavity, Finding, HeightZone, Region
from pipeline.mount import circle, head_room, resolve_mounts

__all__ = ["usable_region", "polygonal", "SLIVER_MM2"]

#: Polygon pieces smaller than this (mm^2) are numerical noise and dropped.
SLIVER_MM2 = 1e-6

_JOIN = "mitre"


def polygonal(geom: BaseGeometry | None) -> BaseGeometry:
    """The polygonal part of ``geom``: a Polygon, a MultiPolygon or an empty Polygon.

    Lines and points left over from overlay operations are dropped, as are
    pieces under :data:`SLIVER_MM2`.

    Examples
    --------
    >>> from shapely.geometry import box, GeometryCollection, LineString
    >>> polygonal(GeometryCollection([box(0, 0, 1, 1), LineString([(0, 0), (2, 2)])])).area
    1.0
    >>> polygonal(None).is_empty
    True
    """
    if geom is None or geom.is_empty:
        return Polygon()
    parts = [p for p in shapely.get_parts(geom) if isinstance(p, (Polygon, MultiPolygon))]
    flat: list[Polygon] = []
    for p in parts:
        flat.extend(shapely.get_parts(p) if isinstance(p, MultiPolygon) else [p])
    flat = [p for p in flat if p.area >= SLIVER_MM2]
    if not flat:
        return Polygon()
    if len(flat) == 1:
        return flat[0]
    flat.sort(key=lambda p: (p.bounds, -p.area))
    return MultiPolygon(flat)


def _grow(geom: BaseGeometry, c: float) -> BaseGeometry:
    if c <= 0 or geom.is_empty:
        return geom
    return geom.buffer(c, join_style=_JOIN)


def _check_options(board: BoardOptions) -> tuple[float, float]:
    c, t = board.wall_clearance_mm, board.thickness_mm
    for key, v, lo in (("board.wall_clearance_mm", c, 0.0), ("board.thickness_mm", t, None)):
        if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v) or \
                (v < 0 if lo is not None else v <= 0):
            need = "0 or more" if lo is not None else "more than 0"
            raise ProjectError("project.toml", f"must be a number of mm, {need}, got {v!r}", key=key)
    return float(c), float(t)


def _where(geom: BaseGeometry, cavity: Cavity) -> str:
    p = geom.representative_point()
    text = f"({p.x:.4g}, {p.y:.4g}) mm"
    if cavity.mm_per_unit != 1.0:
        k = cavity.mm_per_unit
        text += f" = ({p.x / k:.6g}, {p.y / k:.6g}) in drawing units"
    return text


def _largest(geom: BaseGeometry) -> BaseGeometry:
    parts = list(shapely.get_parts(geom))
    return max(parts, key=lambda g: (g.area, g.bounds)) if parts else geom


def _depth_partition(cavity: Cavity, floor: BaseGeometry) -> list[tuple[float, BaseGeometry, tuple[str, ...]]]:
    """Exact depth areas of the floor (min rule), one per distinct depth, ascending."""
    by_depth: dict[float, list[BaseGeometry]] = {}
    layers: dict[float, set[str]] = {}
    for z in cavity.depth_zones:
        by_depth.setdefault(float(z.depth_mm), []).append(z.polygon)
        layers.setdefault(float(z.depth_mm), set()).add(z.layer)
    covered = Polygon()
    out: list[tuple[float, BaseGeometry, tuple[str, ...]]] = []
    zone_union = shapely.union_all([z.polygon for z in cavity.depth_zones]) \
        if cavity.depth_zones else Polygon()
    default = floor.difference(zone_union) if cavity.depth_zones else floor
    depths = sorted(set(by_depth) | {float(cavity.depth_mm)})
    for d in depths:
        area = shapely.union_all(by_depth.get(d, [])).intersection(floor) if d in by_depth \
            else Polygon()
        if d == float(cavity.depth_mm):
            area = shapely.union_all([area, default])
        area = polygonal(area.difference(covered))
        covered = shapely.union_all([covered, area])
        if not area.is_empty:
            out.append((d, area, tuple(sorted(layers.get(d, ())))))
    return out


def usable_region(cavity: Cavity, board: BoardOptions) -> tuple[Region, list[Finding]]:
    """Board region and height zones for a cavity (mm).

    Parameters
    ----------
    cavity : Cavity
        From :func:`pipeline.cavity.read_cavity`.
    board : BoardOptions
        Uses ``wall_clearance_mm`` and ``thickness_mm``.

    Returns
    -------
    (Region, list of Finding)
        ``Region.zones`` partition ``Region.board_region``; see the module
        docstring for the height model.

    Raises
    ------
    ProjectError
        A negative clearance or a non-positive thickness.

    Notes
    -----
    Method: shapely (GEOS) buffers with mitre joins and overlays; cost
    ``O(n log n)`` in the vertex count per overlay, with one overlay per
    distinct depth.

    Examples
    --------
    >>> from shapely.geometry import box
    >>> cav = Cavity("bay.dxf", box(0, 0, 40, 20), (), (), None, 5.0, "mm", 1.0)
    >>> region, findings = usable_region(cav, BoardOptions(wall_clearance_mm=0.5))
    >>> round(region.area_mm2, 9), [(z.max_height_mm, round(z.polygon.area, 9)) for z in region.zones]
    (741.0, [(4.2, 741.0)])
    """
    c, t = _check_options(board)
    name = cavity.source
    floor_full = Polygon(cavity.outline.exterior.coords) if isinstance(cavity.outline, Polygon) \
        else shapely.union_all([Polygon(p.exterior.coords) for p in shapely.get_parts(cavity.outline)])
    inset = polygonal(cavity.outline.buffer(-c, join_style=_JOIN) if c > 0 else cavity.outline)
    mounts = resolve_mounts(cavity)
    on = {m.keepout for m in mounts}  # mounting bosses: the board covers them (pipeline/mount.py)
    others = [k for i, k in enumerate(cavity.keepouts) if i not in on]
    keep = _grow(shapely.union_all(others), c) if others else Polygon()
    # exact depth areas, then each grown by c; ascending depth wins
    grown = [(d, _grow(a, c), lay) for d, a, lay in _depth_partition(cavity, floor_full)]
    shallow, findings = _too_shallow(grown, t, name)
    if cavity.board is not None:
        region_geom = polygonal(cavity.board)
        findings += _user_board_findings(region_geom, inset, keep, shallow, c, t, cavity)
    else:
        region_geom = polygonal(inset.difference(keep).difference(shallow))
    findings += _shape_findings(region_geom, c, cavity)
    zones = _height_zones(region_geom, grown, t, float(cavity.depth_mm))
    entry = shapely.union_all(list(cavity.wire_entries)) if cavity.wire_entries else None
    findings += _mount_findings(mounts, region_geom, zones, cavity)
    return Region(board_region=region_geom, zones=zones, thickness_mm=t, mounts=mounts,
                  wire_entry=entry), findings


def _mount_findings(mounts, region_geom: BaseGeometry, zones, cavity: Cavity) -> list[Finding]:
    """Per mounting boss: a note of hole and ring, or an error when the hole leaves the board region
    or the screw head is taller than the room under the lid over the boss centre."""
    out = []
    for m in mounts:
        at = f"({m.x_mm:.4g}, {m.y_mm:.4g}) mm ({m.where})"
        if not region_geom.covers(circle(m.x_mm, m.y_mm, m.hole_mm)):
            out.append(Finding("error", "region.mount-outside", (cavity.source,),
                               f"The {m.screw} screw hole of the mounting boss at {at} is not inside the usable "
                               "board region (wall clearance or another keep-out cuts it): no board can be "
                               "screwed there."))
            continue
        room = head_room(m, zones)
        if m.head_height_mm > room + 1e-9:
            out.append(Finding("error", "region.mount-head", (cavity.source,),
                               f"The {m.screw} pan head ({m.head_height_mm:g} mm tall) on the mounting boss at "
                               f"{at} does not fit under the lid: only {room:g} mm above the board there."))
            continue
        out.append(Finding("info", "region.mount", (cavity.source,),
                           f"The board covers the boss at {at} and is screwed to it: an {m.screw} clearance "
                           f"hole of {m.hole_mm:g} mm, a {m.ring_mm:g} mm head ring kept free of parts and "
                           f"copper, a {m.head_height_mm:g} mm head under {room:g} mm of room."))
    return out


def _too_shallow(grown: list[tuple[float, BaseGeometry, tuple[str, ...]]], t: float,
                 name: str) -> tuple[BaseGeometry, list[Finding]]:
    """The union of the (grown) depth areas shallower than the board, and a warning for each."""
    shallow_parts = [(d, g, lay) for d, g, lay in grown if d < t]
    shallow = shapely.union_all([g for _, g, _ in shallow_parts]) if shallow_parts else Polygon()
    findings = []
    for d, _g, lay in shallow_parts:
        where = f"on layer(s) {', '.join(lay)}" if lay else "(the default depth)"
        findings.append(Finding(
            "warning", "region.too-shallow", tuple(lay) or (name,),
            f"The depth of {d:g} mm {where} is less than the {t:g} mm board: no board can be "
            "there, so that area (and its wall clearance) is left out of the board region."))
    return shallow, findings


def _user_board_findings(user: BaseGeometry, inset: BaseGeometry, keep: BaseGeometry,
                         shallow: BaseGeometry, c: float, t: float, cavity: Cavity) -> list[Finding]:
    """Error findings where the drawn BOARD outline leaves the allowed area, at its worst spot."""
    checks = (
        ("region.board-outside", user.difference(inset),
         f"comes closer than the {c:g} mm wall clearance to the cavity wall, or crosses it"),
        ("region.board-over-keepout", user.intersection(keep),
         f"overlaps a keep-out or comes closer than {c:g} mm to one"),
        ("region.board-too-shallow", user.intersection(shallow),
         f"passes where the depth is less than the {t:g} mm board"),
    )
    findings = []
    for code, bad, what in checks:
        bad = polygonal(bad)
        if bad.is_empty:
            continue
        worst = _largest(bad)
        findings.append(Finding(
            "error", code, (cavity.source,),
            f"The drawn BOARD outline {what}: {bad.area:.3g} mm^2 of it, the largest piece "
            f"near {_where(worst, cavity)}; the board does not fit as drawn."))
    return findings


def _shape_findings(region_geom: BaseGeometry, c: float, cavity: Cavity) -> list[Finding]:
    """A warning for an empty region, a note for one split into pieces."""
    if region_geom.is_empty:
        return [Finding(
            "warning", "region.empty", (cavity.source,),
            f"No board fits: the cavity inset by the {c:g} mm wall clearance, minus the keep-outs "
            "and the too-shallow areas, leaves no area.")]
    if isinstance(region_geom, MultiPolygon) and cavity.board is None:
        return [Finding(
            "info", "region.split", (cavity.source,),
            f"The usable region falls into {len(region_geom.geoms)} separate pieces (passages "
            f"narrower than twice the {c:g} mm wall clearance, or keep-outs, cut it); a board "
            "takes one piece.")]
    return []


def _height_zones(region_geom: BaseGeometry, grown: list[tuple[float, BaseGeometry, tuple[str, ...]]],
                  t: float, default_depth: float) -> tuple[HeightZone, ...]:
    """The region cut by the grown depth areas, shallowest first; equal heights merged."""
    zones: list[HeightZone] = []
    remaining = region_geom
    for d, g, _lay in grown:
        if remaining.is_empty:
            break
        piece = polygonal(remaining.intersection(g))
        if piece.is_empty:
            continue
        remaining = polygonal(remaining.difference(g))
        zones.append(HeightZone(piece, d - t))
    if not remaining.is_empty:
        # only reachable for a user's board that leaves the floor: default depth there
        zones.append(HeightZone(remaining, default_depth - t))
    merged: dict[float, list[BaseGeometry]] = {}
    for z in zones:
        merged.setdefault(round(z.max_height_mm, 9), []).append(z.polygon)
    return tuple(HeightZone(polygonal(shapely.union_all(ps)), h) for h, ps in sorted(merged.items()))
