"""The router's input: a board outline, its holes and the pads to connect.

Plain frozen values of the routing package's own, so that the router does
not depend on how pads are made (:mod:`pipeline.route.pads` builds them
from a placement). Millimetres, the drawing's frame.
"""

from __future__ import annotations

from dataclasses import dataclass

from shapely.geometry import Polygon

__all__ = ["RoutePad", "RouteBoard"]


@dataclass(frozen=True)
class RoutePad:
    """One copper pad: its part and pin, net (``None`` when unconnected),
    copper layers (``("top",)`` for a surface pad on top, every layer for a
    through-hole pad) and copper outline (a shapely Polygon)."""

    ref: str
    pin: str
    net: str | None
    layers: tuple[str, ...]
    polygon: Polygon


@dataclass(frozen=True)
class RouteBoard:
    """A board to route: outline (no holes), holes and keep-outs (copper must
    stay out of both), and pads."""

    outline: Polygon
    holes: tuple[Polygon, ...]
    pads: tuple[RoutePad, ...]

    def nets(self) -> dict[str, list[RoutePad]]:
        """Pads by net name, nets in name order, unconnected pads left out."""
        out: dict[str, list[RoutePad]] = {}
        for p in sorted(self.pads, key=lambda p: (p.net or "", p.ref, p.pin)):
            if p.net is not None:
                out.setdefault(p.net, []).append(p)
        return out
