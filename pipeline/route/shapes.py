"""Candidate boards for the smallest-board search: a rectangle of a given shape and area in a region.

Entry point: :func:`board_at`. A *shape* is an orientation (degrees,
counter-clockwise) and an aspect ratio (long side / short side along the
turned axes, at least 1 after normalising; the angle runs over half a turn).

Method: the feasible centres of a ``w x h`` rectangle wholly inside a
region ``R`` are the erosion ``R (-) B`` by the centred box ``B`` (Minkowski
difference; J. Serra, "Image analysis and mathematical morphology", 1982).
With ``R`` turned by ``-angle`` the box is axis aligned, and a centre
``c`` in ``R`` is infeasible exactly when ``c + B`` meets the boundary of
``R``, i.e. when ``c`` lies in the boundary's Minkowski sum with ``B``: the
union over boundary edges of the convex hull of the edge's end points moved
to the box's four corners (exact for a convex ``B``). Of the feasible
centres the one nearest the region's centroid is taken. When no rectangle
of that shape and area fits wholly inside, the board is the region *cut* by
the rectangle centred on the centroid, grown (bisection on its scale) until
the cut holds the area asked for: the cut can be smaller than any rectangle
that fits inside (a region with a notch).

Cost: the erosion is O(E log E) in the region's boundary edges; the cut
O(CUT_STEPS) intersections.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import shapely
from shapely import affinity
from shapely.geometry import Point, Polygon, box
from shapely.ops import nearest_points

__all__ = ["Shape", "erode_box", "board_at", "INSIDE", "CUT", "CUT_STEPS"]

INSIDE, CUT = "rectangle", "region cut by a rectangle"
#: bisection halvings of the cut rectangle's scale (the scale to a part in 2^-24: geometry only).
CUT_STEPS = 24


@dataclass(frozen=True)
class Shape:
    """A rectangle's orientation (degrees, in [0, 180)) and aspect ratio (width / height along the turned axes)."""

    angle_deg: float
    aspect: float

    def sides(self, area: float) -> tuple[float, float]:
        """Width and height (mm) of the rectangle of this shape with ``area`` mm^2."""
        return math.sqrt(area * self.aspect), math.sqrt(area / self.aspect)


def erode_box(region, w: float, h: float):
    """Centres ``c`` with the axis-aligned ``w x h`` box at ``c`` wholly inside ``region`` (may be empty)."""
    rings = [r for part in shapely.get_parts(region) for r in shapely.get_rings(part)]
    if not rings:
        return Polygon()
    corners = np.array([(-w / 2, -h / 2), (w / 2, -h / 2), (w / 2, h / 2), (-w / 2, h / 2)])
    hulls = []
    for ring in rings:
        xy = np.asarray(ring.coords)[:, :2]
        a, b = xy[:-1], xy[1:]
        pts = np.concatenate([a[:, None, :] + corners, b[:, None, :] + corners], axis=1)  # (edges, 8, 2)
        idx = np.repeat(np.arange(len(a)), 8)
        hulls.append(shapely.convex_hull(shapely.multipoints(pts.reshape(-1, 2), indices=idx)))
    return region.difference(shapely.union_all(np.concatenate(hulls)))


def _largest(geom) -> Polygon:
    if isinstance(geom, Polygon):
        return geom
    parts = [g for g in getattr(geom, "geoms", []) if isinstance(g, Polygon)]
    return max(parts, key=lambda g: g.area, default=Polygon())


def board_at(region, shape: Shape, area: float) -> tuple[Polygon, str] | None:
    """The board of ``shape`` holding ``area`` mm^2 inside ``region``, and its mode (``INSIDE`` or ``CUT``).

    A rectangle wholly inside when one fits (centre nearest the region's
    centroid), else the region cut by the centred rectangle; None when the
    region itself is smaller than ``area``. The board always lies inside
    ``region`` (it is intersected with it).
    """
    if area > region.area:
        return None
    c = region.centroid
    turned = affinity.rotate(region, -shape.angle_deg, origin=c)
    w, h = shape.sides(area)
    feasible = erode_box(turned, w, h)
    if not feasible.is_empty:
        p = c if feasible.contains(c) else nearest_points(feasible, c)[0]
        rect = box(p.x - w / 2, p.y - h / 2, p.x + w / 2, p.y + h / 2)
        return _largest(affinity.rotate(rect, shape.angle_deg, origin=c).intersection(region)), INSIDE
    return _cut(region, turned, c, shape, w, h, area), CUT


def _cut(region, turned, c: Point, shape: Shape, w: float, h: float, area: float) -> Polygon:
    """The region cut by the centred rectangle ``s w x s h``, ``s`` the least scale whose cut holds ``area``."""
    minx, miny, maxx, maxy = turned.bounds
    reach = max(c.x - minx, maxx - c.x) * 2 / w, max(c.y - miny, maxy - c.y) * 2 / h
    lo, hi = 1.0, max(1.0, *reach)

    def board(s: float) -> Polygon:
        rect = box(c.x - s * w / 2, c.y - s * h / 2, c.x + s * w / 2, c.y + s * h / 2)
        return _largest(affinity.rotate(rect, shape.angle_deg, origin=c).intersection(region))

    best = board(hi)
    for _ in range(CUT_STEPS):
        mid = (lo + hi) / 2
        got = board(mid)
        if got.area >= area:
            hi, best = mid, got
        else:
            lo = mid
    return best
