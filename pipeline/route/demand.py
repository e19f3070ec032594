"""Routing demand before routing: RUDY against each cell's track capacity.

Entry points: :func:`rudy_map` (the estimate on a grid) and
:func:`routing_demand` (a board: demand, capacity, their ratio, the peak
and 90th-percentile ratio).

Method: RUDY, "rectangular uniform wire density" (P. Spindler and F. M.
Johannes, "Fast and accurate routing demand estimation for efficient
routability-driven placement", DATE 2007; REFERENCES.md section 9). A net
whose pins span a bounding box ``w x h`` needs about ``w + h`` of wire
(its half-perimeter); RUDY spreads that wire uniformly over the box, a
density of ``(w + h) / (w h)`` millimetres of wire per square millimetre.
A cell's demand is the sum over nets of that density times the fraction
of the cell the box covers. Degenerate boxes are widened to one track
pitch so that a straight two-pin net keeps a finite density.

Capacity: a routing layer carries one track per pitch (track width plus
clearance), i.e. ``1 / pitch`` mm of wire per mm^2; a cell's capacity is
that times the routing layers, less the share of each layer its pads
(grown by the clearance) cover. The ratio demand / capacity is reported
over the cells whose centre lies on the board; above 1 the cell is
expected to be short of tracks. Capacity is floored at ``MIN_FREE`` of the
full value so that a cell covered by pads gives a large, finite ratio.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Sequence

import numpy as np
import shapely
from shapely.geometry import box

from .board import RouteBoard
from .rules import CopperRules

__all__ = ["Demand", "rudy_map", "routing_demand", "MIN_FREE"]

#: the least free share of a cell's routing capacity (keeps ratios finite).
MIN_FREE = 0.05


@dataclass(frozen=True)
class Demand:
    """Routing demand on a grid (``ny x nx`` arrays, row 0 at ``y0``).

    ``demand`` and ``capacity`` are mm of wire per mm^2; ``ratio`` their
    quotient (NaN off the board); ``peak`` and ``p90`` its maximum and 90th
    percentile over the board's cells.
    """

    x0: float
    y0: float
    cell_mm: float
    demand: np.ndarray
    capacity: np.ndarray
    ratio: np.ndarray
    peak: float
    p90: float

    def hotspot(self) -> tuple[float, float]:
        """Centre (mm) of the cell with the highest ratio."""
        j, i = np.unravel_index(int(np.nanargmax(self.ratio)), self.ratio.shape)
        return (self.x0 + (i + 0.5) * self.cell_mm, self.y0 + (j + 0.5) * self.cell_mm)

    def to_dict(self) -> dict:
        return {"method": "RUDY (Spindler and Johannes, DATE 2007)", "cell_mm": round(self.cell_mm, 4),
                "peak_ratio": round(self.peak, 4), "p90_ratio": round(self.p90, 4)}


def rudy_map(boxes: Sequence[tuple[float, float, float, float]], x0: float, y0: float, nx: int, ny: int,
             cell: float, min_side: float) -> np.ndarray:
    """RUDY demand (mm of wire per mm^2) per cell of an ``ny x nx`` grid.

    ``boxes`` are the nets' bounding boxes ``(xmin, ymin, xmax, ymax)``;
    sides shorter than ``min_side`` are widened about their centre. Cost
    O(nets x cells) in numpy.

    >>> float(rudy_map([(0, 0, 4, 2)], 0, 0, 4, 2, 1.0, 0.1)[0, 0])   # (4 + 2) / (4 x 2)
    0.75
    """
    out = np.zeros((ny, nx))
    xe = x0 + cell * np.arange(nx + 1)
    ye = y0 + cell * np.arange(ny + 1)
    for xmin, ymin, xmax, ymax in boxes:
        xmin, xmax = _widen(xmin, xmax, min_side)
        ymin, ymax = _widen(ymin, ymax, min_side)
        w, h = xmax - xmin, ymax - ymin
        ox = np.clip(np.minimum(xe[1:], xmax) - np.maximum(xe[:-1], xmin), 0, None) / cell
        oy = np.clip(np.minimum(ye[1:], ymax) - np.maximum(ye[:-1], ymin), 0, None) / cell
        out += (w + h) / (w * h) * np.outer(oy, ox)
    return out


def _widen(lo: float, hi: float, least: float) -> tuple[float, float]:
    if hi - lo >= least:
        return lo, hi
    c = (lo + hi) / 2
    return c - least / 2, c + least / 2


def routing_demand(board: RouteBoard, rules: CopperRules, cell_mm: float | None = None) -> Demand:
    """RUDY demand against capacity for ``board`` under ``rules``.

    ``cell_mm`` defaults to 5 track pitches. Layers given to a net as a
    copper area carry none of the track demand; that net is left out of
    the demand (it reaches its area by a via). Cost O(nets x cells + pads).
    """
    pitch = rules.pitch_mm
    cell = cell_mm or 5 * pitch
    xmin, ymin, xmax, ymax = board.outline.bounds
    nx, ny = max(1, int(np.ceil((xmax - xmin) / cell))), max(1, int(np.ceil((ymax - ymin) / cell)))
    boxes = [_bounds(pads) for net, pads in board.nets().items()
             if len(pads) > 1 and rules.area_layer(net) is None]
    demand = rudy_map(boxes, xmin, ymin, nx, ny, cell, pitch)
    routing = [n for n in rules.layer_names if n not in {layer for _, layer in rules.areas}]
    free = np.zeros((ny, nx))
    for layer in routing:
        free += 1.0 - _covered(board, layer, xmin, ymin, nx, ny, cell, rules.clearance_mm)
    capacity = np.maximum(free, MIN_FREE * len(routing)) / pitch if routing else np.zeros((ny, nx))
    xs = xmin + (np.arange(nx) + 0.5) * cell
    ys = ymin + (np.arange(ny) + 0.5) * cell
    gx, gy = np.meshgrid(xs, ys)
    on = shapely.contains_xy(board.outline, gx, gy)
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = np.where(on, demand / capacity, np.nan) if routing else np.where(on, np.inf, np.nan)
    vals = ratio[on]
    peak = float(vals.max()) if vals.size else 0.0
    p90 = float(np.percentile(vals, 90)) if vals.size else 0.0
    return Demand(xmin, ymin, cell, demand, capacity, ratio, peak, p90)


def _bounds(pads) -> tuple[float, float, float, float]:
    pts = np.array([(p.polygon.centroid.x, p.polygon.centroid.y) for p in pads])
    return (float(pts[:, 0].min()), float(pts[:, 1].min()), float(pts[:, 0].max()), float(pts[:, 1].max()))


def _covered(board: RouteBoard, layer: str, x0: float, y0: float, nx: int, ny: int, cell: float,
             grow: float) -> np.ndarray:
    """Share of each cell covered by the pads on ``layer`` grown by ``grow``."""
    shapes = [p.polygon.buffer(grow) for p in board.pads if layer in p.layers]
    out = np.zeros((ny, nx))
    if not shapes:
        return out
    union = shapely.union_all(shapes)
    cells = [box(x0 + i * cell, y0 + j * cell, x0 + (i + 1) * cell, y0 + (j + 1) * cell)
             for j in range(ny) for i in range(nx)]
    tree = shapely.STRtree(cells)
    for k in tree.query(union, predicate="intersects"):
        j, i = divmod(int(k), nx)
        out[j, i] = min(1.0, cells[k].intersection(union).area / (cell * cell))
    return out
