"""Board outline: the usable region made cuttable, the largest rectangle, grids.

Entry point: :func:`propose_outline`. Helpers other stages use:
:func:`largest_rectangle`, :func:`rounded_region` (inside corners opened to
a router radius), :func:`max_rectangle` (largest all-true rectangle of a
boolean grid), :func:`cells_inside` and :func:`centres_inside` (rasterise a
polygon onto a grid of square cells).

All lengths are millimetres in the drawing's frame; angles are degrees,
counter-clockwise.

The inside-radius model
-----------------------
A router cuts a board's outline with a round bit of radius ``r`` running
*outside* the board. It can follow any outside (convex) corner of the board,
but it cannot reach into an inside (concave) corner: there it leaves an
arc of radius ``r``. In morphological terms the material the bit removes
is a union of disks of radius ``r`` (an *r-open* set), so a board it can
cut is one whose complement is r-open, i.e. one equal to its own *closing*
``B.buffer(r).buffer(-r)``; the closing is the operation that rounds inside
corners, the opening ``buffer(-r).buffer(r)`` rounds outside ones.

Closing the usable region itself would add fillets *outside* it (into a wall
or a keep-out), so :func:`rounded_region` works the other way round: it
takes the outside ``Q`` of the region, keeps the part of ``Q`` a bit can
sweep without touching the region (its opening), and covers what is left
(the sharp slivers at the region's inside corners and slots narrower than
the bit) with more bit positions, each spilling little into the region:
a short slot along the corner's bisector for a corner,
disks centred along the sliver's middle for anything else (a slot narrower
than the bit is widened evenly to the bit's diameter), whichever of the two
spills less into the region. The board is the region
minus those bit positions: it never leaves the region, and its inside
corners have radius ``r`` or more (up to the polygon approximation of arcs,
well under 0.01 mm).

References
----------
J. Serra, *Image Analysis and Mathematical Morphology*, Academic Press,
1982 (cited from memory): opening and closing by a disk. The maximal rectangle DP: the
histogram method for the largest all-ones rectangle in a 0/1 matrix
(common textbook algorithm, O(rows x cols)).
"""

from __future__ import annotations

import math
from typing import Iterable, Sequence

import numpy as np
import shapely
from shapely import affinity
from shapely.geometry import Polygon, box
from shapely.geometry.base import BaseGeometry
from shapely.geometry.polygon import orient

from .model import BoardOptions, Placement, Region

__all__ = [
    "propose_outline",
    "largest_rectangle",
    "rounded_region",
    "max_rectangle",
    "cells_inside",
    "centres_inside",
    "polygons_of",
    "main_polygon",
]

#: Segments per quarter circle for every buffer made here.
QUAD_SEGS = 16
#: Simplification tolerance of a proposed outline, mm.
SIMPLIFY_MM = 0.01


# --------------------------------------------------------------------------
# small geometry helpers
# --------------------------------------------------------------------------
def polygons_of(geom: BaseGeometry | None) -> list[Polygon]:
    """The non-empty polygons of ``geom`` (Polygon, MultiPolygon or collection).

    Examples
    --------
    >>> from shapely.geometry import box, MultiPolygon
    >>> len(polygons_of(MultiPolygon([box(0, 0, 1, 1), box(2, 0, 3, 1)])))
    2
    """
    if geom is None or geom.is_empty:
        return []
    if geom.geom_type == "Polygon":
        return [geom]
    out: list[Polygon] = []
    for g in getattr(geom, "geoms", ()):
        out.extend(polygons_of(g))
    return out


def main_polygon(geom: BaseGeometry | None) -> Polygon:
    """The largest polygon of ``geom`` (ties: the first), or an empty Polygon."""
    polys = polygons_of(geom)
    if not polys:
        return Polygon()
    return max(polys, key=lambda p: p.area)


def _segments(geom: BaseGeometry) -> np.ndarray:
    """Every ring edge of every polygon as rows ``x1, y1, x2, y2``."""
    rows = []
    for poly in polygons_of(geom):
        for ring in (poly.exterior, *poly.interiors):
            c = np.asarray(ring.coords, dtype=float)[:, :2]
            if len(c) >= 2:
                rows.append(np.hstack([c[:-1], c[1:]]))
    if not rows:
        return np.zeros((0, 4))
    return np.vstack(rows)


def centres_inside(geom: BaseGeometry, x0: float, y0: float, cell: float, nx: int, ny: int) -> np.ndarray:
    """Which cell centres of a grid lie inside ``geom`` (even-odd rule).

    Cell ``(i, j)`` spans ``[x0 + j*cell, x0 + (j+1)*cell] x [y0 + i*cell,
    y0 + (i+1)*cell]``; the result is a boolean array of shape ``(ny, nx)``,
    row 0 at the bottom.

    Method: a scanline per cell row; every ring edge crossing the row's
    centre line (half-open in y) toggles the parity of the cells to its
    right. Vectorised over all edges and rows; cost O(crossings + cells).

    Examples
    --------
    >>> from shapely.geometry import box
    >>> int(centres_inside(box(0, 0, 2, 1), 0, 0, 0.5, 6, 4).sum())
    8
    """
    out = np.zeros((ny, nx), dtype=bool)
    seg = _segments(geom)
    if len(seg) == 0 or nx <= 0 or ny <= 0:
        return out
    x1, y1, x2, y2 = seg.T
    keep = y1 != y2
    x1, y1, x2, y2 = x1[keep], y1[keep], x2[keep], y2[keep]
    ylo = np.minimum(y1, y2)
    yhi = np.maximum(y1, y2)
    i_lo = np.clip(np.ceil((ylo - y0) / cell - 0.5), 0, ny).astype(np.int64)
    i_hi = np.clip(np.ceil((yhi - y0) / cell - 0.5), 0, ny).astype(np.int64)
    counts = np.maximum(i_hi - i_lo, 0)
    total = int(counts.sum())
    if total == 0:
        return out
    edge = np.repeat(np.arange(len(counts)), counts)
    start = np.cumsum(counts) - counts
    rows = i_lo[edge] + (np.arange(total) - start[edge])
    yc = y0 + (rows + 0.5) * cell
    t = (yc - y1[edge]) / (y2[edge] - y1[edge])
    xc = x1[edge] + t * (x2[edge] - x1[edge])
    k = np.floor((xc - x0) / cell - 0.5).astype(np.int64) + 1
    k = np.clip(k, 0, nx)
    diff = np.zeros((ny, nx + 1), dtype=np.uint8)
    np.add.at(diff, (rows, k), 1)
    par = np.cumsum(diff, axis=1, dtype=np.uint8) & 1
    return par[:, :nx].astype(bool)


def _erode_square(geom: BaseGeometry, d: float) -> BaseGeometry:
    """Points whose axis-aligned square of half-side ``d`` lies in ``geom``.

    Exact Minkowski difference with a square: ``geom`` minus the union of the
    hexagons each boundary edge sweeps when the square slides along it.
    """
    seg = _segments(geom)
    if len(seg) == 0 or d <= 0:
        return geom
    off = np.array([[-d, -d], [-d, d], [d, -d], [d, d]])
    p = seg[:, None, 0:2] + off[None]
    q = seg[:, None, 2:4] + off[None]
    pts = np.concatenate([p, q], axis=1).reshape(-1, 2)
    idx = np.repeat(np.arange(len(seg)), 8)
    hulls = shapely.convex_hull(shapely.multipoints(pts, indices=idx))
    band = shapely.union_all(hulls)
    return geom.difference(band)


def cells_inside(geom: BaseGeometry, x0: float, y0: float, cell: float, nx: int, ny: int) -> np.ndarray:
    """Which grid cells lie wholly inside ``geom`` (boundary contact allowed).

    A cell is inside when its centre lies in ``geom`` eroded by the cell's
    half-square (:func:`_erode_square`); the erosion is made 1e-9 mm smaller
    so that cells whose sides lie on an axis-parallel edge count as inside.
    Same grid convention as :func:`centres_inside`.

    Examples
    --------
    >>> from shapely.geometry import box
    >>> int(cells_inside(box(0, 0, 2, 1), 0, 0, 0.5, 6, 4).sum())
    8
    >>> int(cells_inside(box(0, 0, 1.9, 1), 0, 0, 0.5, 6, 4).sum())
    6
    """
    if geom is None or geom.is_empty:
        return np.zeros((ny, nx), dtype=bool)
    return centres_inside(_erode_square(geom, cell / 2 - 1e-9), x0, y0, cell, nx, ny)


# --------------------------------------------------------------------------
# largest rectangle
# --------------------------------------------------------------------------
def max_rectangle(grid: np.ndarray) -> tuple[int, int, int, int]:
    """Largest all-true axis-aligned rectangle of a boolean grid.

    Parameters
    ----------
    grid : (rows, cols) array of bool

    Returns
    -------
    (row, col, height, width) in cells; ``(0, 0, 0, 0)`` when no cell is
    true. Ties keep the first rectangle found scanning rows upwards.

    Notes
    -----
    Method: the histogram dynamic programme. For each row keep, per column,
    the height of the run of true cells ending there and the widest
    left/right extent a rectangle of that height can have; the best area
    over all cells is the answer. Each row is one set of vectorised numpy
    operations: cost O(rows x cols) time, O(cols) memory.

    Examples
    --------
    >>> import numpy as np
    >>> g = np.zeros((4, 5), bool); g[1:3, 1:5] = True; g[0, 0] = True
    >>> max_rectangle(g)
    (1, 1, 2, 4)
    """
    g = np.asarray(grid, dtype=bool)
    if g.ndim != 2 or g.size == 0:
        return (0, 0, 0, 0)
    ny, nx = g.shape
    idx = np.arange(nx)
    height = np.zeros(nx, dtype=np.int64)
    left = np.zeros(nx, dtype=np.int64)
    right = np.full(nx, nx, dtype=np.int64)
    best = (0, 0, 0, 0, 0)
    for i in range(ny):
        row = g[i]
        height = np.where(row, height + 1, 0)
        last_false = np.maximum.accumulate(np.where(row, 0, idx + 1))
        left = np.where(row, np.maximum(left, last_false), 0)
        first_false = np.minimum.accumulate(np.where(row, nx, idx)[::-1])[::-1]
        right = np.where(row, np.minimum(right, first_false), nx)
        area = (right - left) * height
        j = int(np.argmax(area))
        a = int(area[j])
        if a > best[0]:
            h = int(height[j])
            best = (a, i - h + 1, int(left[j]), h, int(right[j] - left[j]))
    return best[1:]


def _default_angles(poly: Polygon) -> np.ndarray:
    """Whole degrees 0..89 plus the directions of the longer outline edges (mod 90)."""
    angles = list(np.arange(0.0, 90.0, 1.0))
    c = np.asarray(poly.exterior.coords)
    d = np.diff(c, axis=0)
    length = np.hypot(d[:, 0], d[:, 1])
    per = float(length.sum()) or 1.0
    for (dx, dy), ln in zip(d, length):
        if ln >= 0.02 * per:
            angles.append(math.degrees(math.atan2(dy, dx)) % 90.0)
    a = np.unique(np.round(np.asarray(angles) % 90.0, 6))
    return a


def _grow(rect: list[float], shape: BaseGeometry, limit: float) -> list[float]:
    """Push each side of ``rect = [x1, y1, x2, y2]`` outwards while inside ``shape``."""
    shapely.prepare(shape)
    for _ in range(2):
        for side in range(4):
            lo, hi = 0.0, limit
            for _ in range(30):
                mid = (lo + hi) / 2
                r = list(rect)
                if side < 2:
                    r[side] -= mid
                else:
                    r[side] += mid
                if shape.covers(box(*r)):
                    lo = mid
                else:
                    hi = mid
            step = max(lo - 1e-9, 0.0)
            if side < 2:
                rect[side] -= step
            else:
                rect[side] += step
    return rect


def _rectangle_candidates(geom: BaseGeometry, angles: Iterable[float] | None = None,
                          cells: int = 100, refine: int = 5) -> list[tuple[float, float, Polygon]]:
    """Candidate largest rectangles, best first: ``(area, angle, polygon)``."""
    out: list[tuple[float, float, Polygon]] = []
    for poly in sorted(polygons_of(geom), key=lambda p: -p.area):
        if out and poly.area <= out[0][0]:
            continue
        angs = np.unique(np.round(np.asarray(list(angles), dtype=float) % 90.0, 6)) if angles is not None \
            else _default_angles(poly)
        cell = math.sqrt(poly.area) / cells
        origin = poly.centroid
        ox, oy = origin.x, origin.y
        eroded = poly.buffer(-cell * 0.7072, quad_segs=QUAD_SEGS)
        if eroded.is_empty:
            eroded = poly.buffer(-cell * 0.5, quad_segs=QUAD_SEGS)
        coarse = []
        for a in angs:
            rot = affinity.rotate(eroded, -float(a), origin=(ox, oy))
            if rot.is_empty:
                continue
            x0, y0, x1, y1 = rot.bounds
            x0 -= cell
            y0 -= cell
            nx = int(math.ceil((x1 - x0) / cell)) + 1
            ny = int(math.ceil((y1 - y0) / cell)) + 1
            r, c, h, w = max_rectangle(centres_inside(rot, x0, y0, cell, nx, ny))
            coarse.append((h * w, float(a), [x0 + c * cell, y0 + r * cell, x0 + (c + w) * cell, y0 + (r + h) * cell]))
        coarse.sort(key=lambda t: (-t[0], t[1]))
        for n, a, rect in coarse[:refine]:
            if n == 0:
                continue
            shape = affinity.rotate(poly, -a, origin=(ox, oy))
            rect = _grow(list(rect), shape, 3 * cell)
            area = (rect[2] - rect[0]) * (rect[3] - rect[1])
            out.append((area, a, affinity.rotate(box(*rect), a, origin=(ox, oy))))
        out.sort(key=lambda t: (-round(t[0], 9), t[1]))
    return out


def _rectangle_around(geom: BaseGeometry, need: BaseGeometry,
                      angles: Iterable[float] | None = None) -> Polygon | None:
    """A large rectangle inside ``geom`` holding ``need``: for each angle, the
    bounding box of ``need`` grown side by side as far as ``geom`` allows
    (a maximal, not always the maximum, such rectangle); None when no
    orientation's bounding box of ``need`` fits."""
    best = None
    for poly in polygons_of(geom):
        if not poly.buffer(1e-6).covers(need):
            continue
        angs = np.asarray(list(angles), dtype=float) if angles is not None else _default_angles(poly)
        origin = poly.centroid
        reach = 2 * math.hypot(poly.bounds[2] - poly.bounds[0], poly.bounds[3] - poly.bounds[1])
        for a in angs:
            shape = affinity.rotate(poly, -float(a), origin=origin)
            rect = list(affinity.rotate(need, -float(a), origin=origin).bounds)
            if not shape.covers(box(*rect)):
                continue
            rect = _grow(rect, shape, reach)
            area = (rect[2] - rect[0]) * (rect[3] - rect[1])
            if best is None or area > best[0] + 1e-9:
                best = (area, affinity.rotate(box(*rect), float(a), origin=origin))
    return None if best is None else best[1]


def largest_rectangle(geom: BaseGeometry, angles: Iterable[float] | None = None,
                      cells: int = 100) -> tuple[Polygon, float]:
    """The largest rectangle inside ``geom`` in any orientation.

    Parameters
    ----------
    geom : Polygon, MultiPolygon or Region (its ``board_region``), mm
    angles : iterable of float, optional
        Orientations to try, degrees (taken mod 90: a rectangle turned by
        90 degrees is the same set of rectangles). Default: every whole
        degree 0..89 plus the direction of every outline edge longer than
        2 % of the perimeter.
    cells : int
        Grid resolution of the coarse search: about ``cells`` cells across.

    Returns
    -------
    (polygon, angle) : the rectangle (empty Polygon when none) and its
    orientation in degrees, 0 <= angle < 90.

    Notes
    -----
    Method: for each angle, rotate the region by -angle, rasterise it onto a
    coarse grid (cells whose centre lies in the region eroded by half a
    cell diagonal, so every true cell is inside) and take the largest
    all-true rectangle (:func:`max_rectangle`); refine the five best angles
    by pushing each side outwards by bisection while the rectangle stays
    inside the exact region. Cost: O(angles x cells^2). The result is a
    lower bound on the true optimum, within about one coarse cell per side
    of it at the angles searched.

    Examples
    --------
    >>> from shapely.geometry import box
    >>> rect, angle = largest_rectangle(box(0, 0, 40, 20))
    >>> round(rect.area, 3), angle
    (800.0, 0.0)
    """
    geom = getattr(geom, "board_region", geom)  # a Region is accepted too
    cands = _rectangle_candidates(geom, angles, cells)
    if not cands:
        return Polygon(), 0.0
    _, a, poly = cands[0]
    return poly, a


# --------------------------------------------------------------------------
# inside radius
# --------------------------------------------------------------------------
def _reflex_vertices(poly: Polygon) -> list[tuple[float, float, float, float, float]]:
    """Inside (reflex) corners: ``(x, y, ux, uy, phi)`` with ``u`` the unit
    bisector pointing out of the polygon and ``phi`` the outside angle (rad)."""
    out = []
    p = orient(poly, 1.0)
    for ring in (p.exterior, *p.interiors):
        c = np.asarray(ring.coords)[:-1, :2]
        n = len(c)
        if n < 3:
            continue
        a = np.roll(c, 1, axis=0)
        b = np.roll(c, -1, axis=0)
        e_in = c - a
        e_out = b - c
        cross = e_in[:, 0] * e_out[:, 1] - e_in[:, 1] * e_out[:, 0]
        for k in np.flatnonzero(cross < 0):
            v = c[k]
            e1 = a[k] - v
            e2 = b[k] - v
            n1 = math.hypot(*e1)
            n2 = math.hypot(*e2)
            if n1 == 0 or n2 == 0:
                continue
            e1 = e1 / n1
            e2 = e2 / n2
            u = e1 + e2
            nu = math.hypot(*u)
            if nu < 1e-12:
                continue
            phi = math.acos(max(-1.0, min(1.0, float(e1 @ e2))))
            out.append((float(v[0]), float(v[1]), float(u[0] / nu), float(u[1] / nu), phi))
    return out


def _clean(geom: BaseGeometry, tol: float) -> BaseGeometry:
    """Drop parts of ``geom`` thinner than ``tol``."""
    if geom.is_empty:
        return geom
    g = geom.buffer(-tol / 2, quad_segs=4).buffer(tol / 2, quad_segs=4)
    return g.intersection(geom) if not g.is_empty else g


def _cover_from_middle(geom: BaseGeometry, r: float, r_cover: float) -> BaseGeometry:
    """Bit positions covering ``geom``, centred as deep inside it as possible.

    Each piece is shrunk to (nearly) its medial core, by 0.9 x the radius
    of its largest inscribed circle; if every point of the piece is then
    within ``r`` of the core, the core grown by the bit covers it with the
    least spill (a slot narrower than the bit is widened evenly to the bit's
    diameter); otherwise the piece itself is grown by the bit.
    """
    out = []
    for p in polygons_of(geom):
        t = float(shapely.maximum_inscribed_circle(p, max(p.length * 1e-4, 1e-6)).length)
        core = p.buffer(-0.9 * t, quad_segs=QUAD_SEGS) if t > 0 else Polygon()
        if core.is_empty:
            core = p.representative_point()
        if shapely.hausdorff_distance(p, core, densify=0.05) <= r:
            out.append(core.buffer(r_cover, quad_segs=QUAD_SEGS))
        else:
            out.append(p.buffer(r_cover, quad_segs=QUAD_SEGS))
    return shapely.union_all(out) if out else Polygon()


def rounded_region(geom: BaseGeometry, radius: float, tol: float = SIMPLIFY_MM) -> Polygon:
    """The largest polygon of ``geom``, simplified, with inside corners a bit of ``radius`` can cut.

    Parameters
    ----------
    geom : Polygon or MultiPolygon, mm
        Where the board may be.
    radius : float
        Router bit radius, mm (``BoardOptions.min_inside_radius_mm``).
        0 keeps sharp corners.
    tol : float
        Simplification tolerance and the size below which slivers are
        ignored, mm.

    Returns
    -------
    Polygon inside ``geom`` equal to its own closing by ``radius`` (module
    notes) up to ``tol``; empty when nothing is left. Cost: a few buffer
    operations on the region, then one per sliver the bit cannot reach.

    Examples
    --------
    >>> from shapely.geometry import box
    >>> L = box(0, 0, 20, 10).union(box(0, 0, 10, 20))
    >>> B = rounded_region(L, 1.0)
    >>> B.difference(L).area < 1e-9
    True
    >>> round(B.hausdorff_distance(B.buffer(1.0).buffer(-1.0)), 2) <= 0.02
    True
    """
    simple = _simplified(geom, tol)
    if simple.is_empty or radius <= 0:
        return simple
    r = float(radius)
    sliver = _unreachable(simple, r, tol)
    if sliver.is_empty or sliver.area < tol * tol:
        return simple
    corners = _reflex_vertices(simple)
    cuts = [_sliver_cut(comp, simple, corners, r, tol) for comp in polygons_of(sliver) if comp.area >= tol * tol]
    if not cuts:
        return simple
    return main_polygon(simple.difference(shapely.union_all(cuts)))


def _simplified(geom: BaseGeometry, tol: float) -> Polygon:
    """The largest polygon of ``geom``, shrunk by ``tol / 2`` and simplified within ``tol / 2``, inside ``geom``."""
    poly = main_polygon(geom)
    if poly.is_empty:
        return Polygon()
    simple = poly.buffer(-tol / 2, join_style="mitre").simplify(tol / 2, preserve_topology=True)
    return main_polygon(simple.intersection(poly))


def _unreachable(simple: Polygon, r: float, tol: float) -> BaseGeometry:
    """What a bit of radius ``r`` running outside ``simple`` cannot reach: the inside corners' slivers.

    The opening (erosion then dilation by ``r``) of the outside, taken from the outside, slivers
    thinner than ``tol / 2`` dropped.
    """
    frame = box(*simple.bounds).buffer(4 * r + 1.0, join_style="mitre")
    outside = frame.difference(simple)
    reach = outside.buffer(-r, quad_segs=QUAD_SEGS).buffer(r, quad_segs=QUAD_SEGS)
    return _clean(outside.difference(reach), tol / 2)


def _sliver_cut(comp: Polygon, simple: Polygon, corners: list, r: float, tol: float) -> BaseGeometry:
    """What to cut from the board so the bit can reach the sliver ``comp``: of two ways, the one taking least board.

    (a) a bit slot along the bisector of each inside corner touching the sliver, the rest of the sliver
    covered from its middle; (b) the whole sliver covered from its middle (best for slots narrower than
    the bit).
    """
    r_cover = r / math.cos(math.pi / (4 * QUAD_SEGS))  # polygon circumscribing the bit
    options = []
    caps = _corner_slots(comp, corners, r, r_cover, tol)
    if caps:
        covered = shapely.union_all(caps)
        rest = _clean(comp.difference(covered.buffer(tol / 2)), tol / 2)
        parts = [covered] + ([_cover_from_middle(rest, r, r_cover)] if rest.area >= tol * tol else [])
        options.append(shapely.union_all(parts))
    options.append(_cover_from_middle(comp, r, r_cover))
    return min(options, key=lambda c: c.intersection(simple).area)


def _corner_slots(comp: Polygon, corners: list, r: float, r_cover: float, tol: float) -> list:
    """A bit slot along the bisector of each inside corner within ``tol`` of ``comp``.

    The slot runs from ``r`` to ``r / sin(phi / 2)`` (capped at 1 m) along the bisector, where the bit
    touches both sides of the corner of angle ``phi``; drawn with the bit's circumscribing radius ``r_cover``.
    """
    if not corners:
        return []
    pts = shapely.points([(x, y) for x, y, *_ in corners])
    caps = []
    for (x, y, ux, uy, phi), hit in zip(corners, shapely.distance(comp, pts) <= tol):
        if hit:
            d0 = min(r / max(math.sin(phi / 2), 1e-6), 1e3)
            a = (x + ux * r, y + uy * r)
            b = (x + ux * d0, y + uy * d0)
            seg = shapely.LineString([a, b]) if d0 > r + 1e-9 else shapely.Point(a)
            caps.append(seg.buffer(r_cover, quad_segs=QUAD_SEGS))
    return caps


# --------------------------------------------------------------------------
# entry point
# --------------------------------------------------------------------------
def propose_outline(region: Region, placements: Sequence[Placement] = (),
                    board: BoardOptions = BoardOptions()) -> Polygon:
    """Propose a board outline for the usable region.

    Parameters
    ----------
    region : Region
        ``region.board_region`` is where a board may be (cavity inset by
        the wall clearance, minus keep-outs grown by it), mm.
    placements : sequence of Placement
        Optional. With ``board.outline == "rectangle"`` the largest
        candidate rectangle that holds every given courtyard (grown by
        ``board.edge_clearance_mm``) is chosen; the region outline ignores
        them (the placer places inside the outline it is given).
    board : BoardOptions
        ``outline``: ``"region"`` (the usable region, simplified by 0.01 mm
        and with inside corners of at least ``min_inside_radius_mm``, see
        :func:`rounded_region`) or ``"rectangle"`` (the largest rectangle in
        any orientation, :func:`largest_rectangle`).

    Returns
    -------
    Polygon : one piece (the largest, when the region is split), inside
    ``region.board_region``; empty when the region is empty.

    Examples
    --------
    >>> from shapely.geometry import box
    >>> from pipeline.model import HeightZone
    >>> reg = Region(box(0, 0, 30, 20), (HeightZone(box(0, 0, 30, 20), 4.0),), 0.8)
    >>> round(propose_outline(reg, (), BoardOptions()).area, 1)
    599.5
    """
    geom = region.board_region
    if geom is None or geom.is_empty:
        return Polygon()
    if board.outline == "rectangle":
        cands = _rectangle_candidates(geom)
        if not cands:
            return Polygon()
        if placements:
            need = shapely.union_all([p.courtyard for p in placements]).buffer(
                board.edge_clearance_mm, join_style="mitre")
            for _, _, poly in cands:
                if poly.buffer(1e-6, join_style="mitre").covers(need):
                    return poly
            around = _rectangle_around(geom, need)
            if around is not None:
                return around
        return cands[0][2]
    return rounded_region(geom, board.min_inside_radius_mm)
