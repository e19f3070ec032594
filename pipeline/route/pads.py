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

from shapely.geometry import LineString, Point, Polygon, box

from ..library import pads_on_board
from ..model import Design, Pad, Placement
from .board import RouteBoard, RoutePad

__all__ = ["board_from_placement", "pad_polygon"]

#: circle segments per quarter for round pads.
_QUAD_SEGS = 4


def pad_polygon(pad: Pad) -> Polygon:
    """The copper outline of a placed pad (mm, board frame).

    >>> pad_polygon(Pad("1", 1.0, 2.0, "rect", 0.8, 0.4, 0.0, 90)).bounds
    (0.8, 1.6, 1.2, 2.4)
    """
    w, h = (pad.height_mm, pad.width_mm) if pad.rotation == 90 else (pad.width_mm, pad.height_mm)
    x, y = pad.x_mm, pad.y_mm
    if pad.shape == "circle":
        return Point(x, y).buffer(w / 2, quad_segs=_QUAD_SEGS)
    if pad.shape == "oblong" and abs(w - h) > 1e-9:
        r = min(w, h) / 2
        dx, dy = (w / 2 - r, 0.0) if w > h else (0.0, h / 2 - r)
        return LineString([(x - dx, y - dy), (x + dx, y + dy)]).buffer(r, quad_segs=_QUAD_SEGS)
    return box(x - w / 2, y - h / 2, x + w / 2, y + h / 2)


def board_from_placement(outline, placements: Iterable[Placement], design: Design, library,
                         layers: tuple[str, ...], holes: Iterable[Polygon] = (),
                         level: str = "nominal") -> RouteBoard:
    """The routing input of a placed design.

    ``outline`` is the board (a Polygon, or the largest part of a
    MultiPolygon; its interiors become holes), ``library`` anything with
    ``package(name)``, ``layers`` the copper layer names top first,
    ``level`` the IPC-7351B density level of the lands.
    """
    net_of = {(pr.ref, pr.pin): n.name for n in design.nets for pr in n.pins}
    pads: list[RoutePad] = []
    for pl in placements:
        part = design.part(pl.ref)
        for pad in pads_on_board(library.package(part.package), pl.x_mm, pl.y_mm, pl.rotation_deg, pl.side, level):
            if pad.drill_mm > 0:
                on = layers
            else:
                on = (layers[0],) if pl.side == "top" else (layers[-1],)
            pads.append(RoutePad(pl.ref, pad.number, net_of.get((pl.ref, pad.number)), on, pad_polygon(pad)))
    if getattr(outline, "geom_type", "") == "MultiPolygon":
        outline = max(outline.geoms, key=lambda g: g.area)
    holes = tuple(Polygon(r) for r in getattr(outline, "interiors", ())) + tuple(holes)
    exterior = Polygon(outline.exterior) if hasattr(outline, "exterior") else outline
    pads.sort(key=lambda p: (p.ref, p.pin))
    return RouteBoard(exterior, holes, tuple(pads))
