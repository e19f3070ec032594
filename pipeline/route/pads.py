"""Pads of a placed design, for the router: the one place pads enter routing.

Entry point: :func:`board_from_placement`. Each placed part's pads come
from the library (:func:`pipeline.library.pads_on_board`: the package's
land pattern at the density level, turned and mirrored as placed, the part
origin at the placement's centre) and become :class:`RoutePad` values with
their copper outline:

* ``rect`` and ``roundrect`` pads: the rectangle (a rounded rectangle's
  corner radius is not in the pad data; the full rectangle is the
  conservative outline for clearance);
* ``circle``: a circle of the pad width; ``oblong``: a stadium (a segment
  along the longer side grown by half the shorter);
* a pad with a drill is through-hole: copper on every layer.

A pad numbered ``k`` connects to the part's pin ``"k"`` (an exposed pad
``"EP"`` to whatever the design puts on a pin of that number). Cost
O(pins).
"""

from __future__ import annotations

from typing import Iterable

import numpy as np
import shapely
from shapely.geometry import LineString, Polygon

from ..library.lands import board_xy, turned_pads
from ..model import Design, Pad, Placement
from .board import RouteBoard, RoutePad

__all__ = ["board_from_placement", "pad_polygon", "pad_polygons"]

#: circle segments per quarter for round pads.
_QUAD_SEGS = 4


def pad_polygon(pad: Pad) -> Polygon:
    """The copper outline of a placed pad (mm, board frame).

    >>> pad_polygon(Pad("1", 1.0, 2.0, "rect", 0.8, 0.4, 0.0, 90)).bounds
    (0.8, 1.6, 1.2, 2.4)
    """
    return pad_polygons([pad.shape], [pad.x_mm], [pad.y_mm], [pad.width_mm], [pad.height_mm],
                        [pad.rotation])[0]


def pad_polygons(shapes, xs, ys, widths, heights, rotations) -> list[Polygon]:
    """The copper outlines of many placed pads, one per entry of the equal-length columns.

    Rectangles and circles are made in bulk (one shapely call each, the
    same coordinates as one pad at a time); oblongs one by one. Cost
    O(pads), a few shapely calls.
    """
    x, y = np.asarray(xs, dtype=float), np.asarray(ys, dtype=float)
    turned = np.asarray(rotations) == 90
    w = np.where(turned, heights, widths).astype(float)
    h = np.where(turned, widths, heights).astype(float)
    shape = np.asarray(shapes, dtype=object)
    circle = shape == "circle"
    oblong = (shape == "oblong") & (np.abs(w - h) > 1e-9)
    rect = ~(circle | oblong)
    out = np.empty(len(x), dtype=object)
    x0, x1, y0, y1 = x - w / 2, x + w / 2, y - h / 2, y + h / 2
    corners = np.stack([np.stack([x1, y0], 1), np.stack([x1, y1], 1), np.stack([x0, y1], 1),
                        np.stack([x0, y0], 1)], 1)
    out[rect] = shapely.polygons(corners[rect])
    out[circle] = shapely.buffer(shapely.points(x[circle], y[circle]), w[circle] / 2, quad_segs=_QUAD_SEGS)
    for i in np.flatnonzero(oblong):
        r = min(w[i], h[i]) / 2
        dx, dy = (w[i] / 2 - r, 0.0) if w[i] > h[i] else (0.0, h[i] / 2 - r)
        out[i] = LineString([(x[i] - dx, y[i] - dy), (x[i] + dx, y[i] + dy)]).buffer(r, quad_segs=_QUAD_SEGS)
    return list(out)


def board_from_placement(outline, placements: Iterable[Placement], design: Design, library,
                         layers: tuple[str, ...], holes: Iterable[Polygon] = (),
                         level: str = "nominal") -> RouteBoard:
    """The routing input of a placed design.

    ``outline`` is the board (a Polygon, or the largest part of a
    MultiPolygon; its interiors become holes), ``library`` anything with
    ``package(name)``, ``layers`` the copper layer names top first,
    ``level`` the IPC-7351B density level of the lands. Each package's
    turned pads (:func:`pipeline.library.lands.turned_pads`, kept per
    package, rotation and side) are moved per part; the outlines are made
    in bulk (:func:`pad_polygons`).
    """
    net_of = {(pr.ref, pr.pin): n.name for n in design.nets for pr in n.pins}
    by_ref = design.by_ref
    packages: dict[str, object] = {}  # package name -> package: one library look-up per name
    rows, cols = [], ([], [], [], [], [], [])
    shapes, xs, ys, widths, heights, rots = cols
    for pl in placements:
        name = by_ref[pl.ref].package
        package = packages.get(name)
        if package is None:
            package = packages[name] = library.package(name)
        top = (layers[0],) if pl.side == "top" else (layers[-1],)
        x0, y0 = pl.x_mm, pl.y_mm
        for pad, dx, dy, rot in turned_pads(package, pl.rotation_deg, pl.side, level):
            rows.append((pl.ref, pad.number, net_of.get((pl.ref, pad.number)), layers if pad.drill_mm > 0 else top))
            x, y = board_xy(x0, y0, dx, dy)
            shapes.append(pad.shape)
            xs.append(x)
            ys.append(y)
            widths.append(pad.width_mm)
            heights.append(pad.height_mm)
            rots.append(rot)
    polygons = pad_polygons(*cols) if rows else []
    pads = [RoutePad(*row, poly) for row, poly in zip(rows, polygons)]
    if getattr(outline, "geom_type", "") == "MultiPolygon":
        outline = max(outline.geoms, key=lambda g: g.area)
    holes = tuple(Polygon(r) for r in getattr(outline, "interiors", ())) + tuple(holes)
    exterior = Polygon(outline.exterior) if hasattr(outline, "exterior") else outline
    pads.sort(key=lambda p: (p.ref, p.pin))
    return RouteBoard(exterior, holes, tuple(pads))
