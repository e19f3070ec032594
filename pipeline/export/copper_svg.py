"""The copper layers of the fit picture (issue 9): tracks, vias, copper areas, open connections, congestion.

Entry points: :func:`copper_svg` (the copper groups) and
:func:`congestion_svg` (the routing-demand shading), both called by
:func:`pipeline.export.svg.fit_svg`; :data:`LAYER_COLOURS` names each copper
layer's colour (our own choice: amber, teal, olive, plum; not the
conventional colours of any layout program).

What is drawn, in the drawing's frame (SVG ``(x, -y)``, one unit = 1 mm):

* each track as its centre line, stroke width = the track's width, round
  caps and joins (so the stroke is exactly the track's copper as
  ``routes.json`` defines it), grouped per layer (``g.copper-<layer>``);
* each copper area as a filled path (outline and holes, even-odd);
* each via as a disc of its diameter with its drill hole in paper colour;
* each net left open as straight dashed lines joining its pads' centres
  along a minimum spanning tree (Prim's / Kruskal's tree, here by
  :func:`scipy.sparse.csgraph.minimum_spanning_tree`): the connections
  still to make, not a route.

Every copper element carries ``data-net`` so the report's net picker lights
it. Elements are written in the routing's order (already sorted), so equal
inputs give equal bytes.
"""

from __future__ import annotations

import math
from typing import Sequence

import numpy as np

__all__ = ["copper_svg", "congestion_svg", "LAYER_COLOURS", "OPEN_COLOUR", "VIA_COLOUR", "CONGESTION_COLOUR"]

#: Copper layer colours in stack order (our own).
LAYER_COLOURS = ("#c98a1e", "#2d8a86", "#7d8a2a", "#8a4f73")
VIA_COLOUR = "#4a3f35"
OPEN_COLOUR = "#c0182f"
CONGESTION_COLOUR = "#d0481e"
#: Congestion shading: opacity grows with demand/capacity up to this ratio (then saturates).
_CONGESTION_FULL = 1.5
_CONGESTION_MAX_OPACITY = 0.55
_AREA_OPACITY = "0.30"
_TRACK_OPACITY = "0.80"


def layer_colour(layers: Sequence[str], layer: str) -> str:
    """The colour of ``layer`` by its place in the stack ``layers``."""
    i = list(layers).index(layer) if layer in layers else len(layers)
    return LAYER_COLOURS[i % len(LAYER_COLOURS)]


def copper_svg(routing, u: float) -> list[str]:
    """SVG groups for the copper of ``routing`` (:class:`pipeline.route.router.Routing`).

    ``u`` is drawing mm per paper mm (dash lengths). One group per copper
    layer (areas under tracks), then vias, then open connections.
    """
    from .svg import _esc, _f, _path_d

    layers = list(routing.rules.layer_names)
    out: list[str] = []
    for layer in layers:
        colour = layer_colour(layers, layer)
        out.append(f'<g class="copper copper-{_esc(layer)}" data-layer-name="{_esc(layer)}">')
        for a in (a for a in routing.areas if a.layer == layer):
            d = _path_d(a.polygon)
            if d:
                out.append(f'<path class="area" d="{d}" fill="{colour}" fill-opacity="{_AREA_OPACITY}" '
                           f'fill-rule="evenodd" stroke="none" data-net="{_esc(a.net)}"/>')
        for t in (t for t in routing.tracks if t.layer == layer):
            pts = " ".join(f"{_f(x)},{_f(-y)}" for x, y in t.points)
            out.append(f'<polyline class="track" points="{pts}" fill="none" stroke="{colour}" '
                       f'stroke-opacity="{_TRACK_OPACITY}" stroke-width="{_f(t.width_mm)}" '
                       f'stroke-linecap="round" stroke-linejoin="round" data-net="{_esc(t.net)}"/>')
        out.append("</g>")
    out.append('<g class="copper vias">')
    for v in routing.vias:
        out.append(f'<g class="via" data-net="{_esc(v.net)}">'
                   f'<circle cx="{_f(v.x)}" cy="{_f(-v.y)}" r="{_f(v.diameter_mm / 2)}" fill="{VIA_COLOUR}"/>'
                   f'<circle cx="{_f(v.x)}" cy="{_f(-v.y)}" r="{_f(v.drill_mm / 2)}" fill="#ffffff"/></g>')
    out.append("</g>")
    out.append(_open_svg(routing, u))
    return out


def _open_svg(routing, u: float) -> str:
    """Each open net's pads joined by straight dashed lines along a minimum spanning tree."""
    from .svg import _esc, _f

    out = [f'<g class="copper open" stroke="{OPEN_COLOUR}" stroke-width="{_f(0.3 * u)}" '
           f'stroke-dasharray="{_f(1.0 * u)} {_f(0.6 * u)}" fill="none">']
    for net in routing.open:
        centres = sorted({(round(p.polygon.centroid.x, 4), round(p.polygon.centroid.y, 4))
                          for p in routing.board.pads if p.net == net})
        for (x1, y1), (x2, y2) in spanning_pairs(centres):
            out.append(f'<line class="open-connection" x1="{_f(x1)}" y1="{_f(-y1)}" x2="{_f(x2)}" '
                       f'y2="{_f(-y2)}" data-net="{_esc(net)}"/>')
    out.append("</g>")
    return "".join(out)


def spanning_pairs(points: Sequence[tuple[float, float]]) -> list[tuple[tuple[float, float], tuple[float, float]]]:
    """Edges of the Euclidean minimum spanning tree of ``points`` (len - 1 pairs), in a fixed order.

    Cost O(n^2) memory and time for n points (one net's pads).
    """
    from scipy.sparse.csgraph import minimum_spanning_tree
    from scipy.spatial.distance import cdist

    if len(points) < 2:
        return []
    p = np.asarray(points, dtype=float)
    dist = cdist(p, p)
    dist[dist == 0] = 1e-12  # coincident pads stay joined (zero would read as "no edge")
    np.fill_diagonal(dist, 0.0)
    tree = minimum_spanning_tree(dist).tocoo()
    pairs = sorted((min(i, j), max(i, j)) for i, j in zip(tree.row.tolist(), tree.col.tolist()))
    return [(points[i], points[j]) for i, j in pairs]


def congestion_svg(demand, u: float) -> str:
    """RUDY demand / capacity per cell as translucent shading (``g.congestion``, hidden by default).

    ``demand`` is :class:`pipeline.route.demand.Demand`; a cell's opacity is
    ``ratio / 1.5`` of the maximum (saturating at 1.5), so a cell at its
    capacity is clearly shaded and one far over it is the darkest. The group
    carries ``display="none"``: the report's layer switch shows it.
    """
    from .svg import _f

    out = [f'<g class="congestion" display="none" fill="{CONGESTION_COLOUR}" stroke="none">']
    c = demand.cell_mm
    ny, nx = demand.ratio.shape
    for j in range(ny):
        for i in range(nx):
            r = float(demand.ratio[j, i])
            if not math.isfinite(r) or r <= 0:
                continue
            op = _CONGESTION_MAX_OPACITY * min(r, _CONGESTION_FULL) / _CONGESTION_FULL
            if op < 0.005:
                continue
            x, y = demand.x0 + i * c, demand.y0 + (j + 1) * c
            out.append(f'<rect x="{_f(x)}" y="{_f(-y)}" width="{_f(c)}" height="{_f(c)}" '
                       f'fill-opacity="{op:.3f}"><title>demand/capacity {r:.2f}</title></rect>')
    out.append("</g>")
    return "".join(out)
