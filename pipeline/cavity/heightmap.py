"""The height map of a shell mesh: from the board plane up to the first solid above, per grid cell.

Method: a vectorised scan conversion. Going up from free space, the first
surface a ray meets is one where it enters solid, so only downward-facing
triangles (normal ``z < 0``) are kept. Each is rasterised onto the cells
whose centres its plan view covers (barycentric coordinates, the standard
point-in-triangle test), its height there interpolated linearly, and each
cell keeps the lowest height above the board plane (``numpy.minimum.at``).
The cells a triangle covers are expanded in chunks of at most
:data:`CHUNK` points so memory stays bounded. Cost: linear in the
triangles plus the cells they cover.

Zones: heights are rounded down to a multiple of the zone step, the largest
value is the default depth, every smaller one a depth zone built from runs
of equal cells per grid row (squares ``step`` wide, joined exactly).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np
import shapely
from shapely.geometry import Polygon

__all__ = ["HeightGrid", "height_map", "zones_from_heights", "CHUNK", "HEIGHT_TOL_MM"]

#: Heights within this of a zone step (mm) count as on it: a mesh stored in single precision
#: (binary STL, float32) carries coordinates to about 1e-5 of their size, so 1 micrometre
#: keeps a 20 mm depth from rounding down to 19.9.
HEIGHT_TOL_MM = 1e-3
#: Largest count of (triangle, cell) pairs expanded at once.
CHUNK = 2_000_000


@dataclass(frozen=True)
class HeightGrid:
    """Depths (mm, floor to first solid above) at cell centres ``x0 + (i + 0.5) step``.

    ``depth[iy, ix]`` is NaN outside the free area and ``inf`` where nothing is above.
    """

    x0: float
    y0: float
    step: float
    depth: np.ndarray


def height_map(mesh: Any, floor: float, plane: float, outline: Polygon, keepouts: list[Polygon],
               step: float) -> HeightGrid:
    """The :class:`HeightGrid` of ``mesh`` (mm, z up) over ``outline`` less ``keepouts``."""
    bx0, by0, bx1, by1 = outline.bounds
    x0, y0 = np.floor(bx0 / step) * step, np.floor(by0 / step) * step
    nx, ny = int(np.ceil((bx1 - x0) / step)), int(np.ceil((by1 - y0) / step))
    low = np.full(nx * ny, np.inf)
    tri = mesh.triangles[mesh.face_normals[:, 2] < -1e-9]
    tri = tri[tri[:, :, 2].max(axis=1) > plane]
    lo = np.ceil((tri[:, :, :2].min(axis=1) - (x0, y0)) / step - 0.5).astype(np.int64)
    hi = np.floor((tri[:, :, :2].max(axis=1) - (x0, y0)) / step - 0.5).astype(np.int64)
    lo = np.maximum(lo, 0)
    hi = np.minimum(hi, (nx - 1, ny - 1))
    w = np.maximum(hi[:, 0] - lo[:, 0] + 1, 0)
    count = w * np.maximum(hi[:, 1] - lo[:, 1] + 1, 0)
    keep = count > 0
    tri, lo, w, count = tri[keep], lo[keep], w[keep], count[keep]
    ends = np.cumsum(count)
    start = 0
    while start < len(tri):
        stop = max(int(np.searchsorted(ends, (ends[start - 1] if start else 0) + CHUNK, "right")), start + 1)
        _raster(tri[start:stop], lo[start:stop], w[start:stop], count[start:stop], x0, y0, step, nx, plane, low)
        start = stop
    xs = x0 + (np.arange(nx) + 0.5) * step
    ys = y0 + (np.arange(ny) + 0.5) * step
    gx, gy = np.meshgrid(xs, ys)
    free = shapely.difference(outline, shapely.union_all(keepouts)) if keepouts else outline
    depth = low.reshape(ny, nx) - floor
    depth[~shapely.contains_xy(free, gx, gy)] = np.nan
    return HeightGrid(float(x0), float(y0), float(step), depth)


def _raster(tri: np.ndarray, lo: np.ndarray, w: np.ndarray, count: np.ndarray, x0: float, y0: float,
            step: float, nx: int, plane: float, low: np.ndarray) -> None:
    """Lower ``low`` (flat cell array) to each triangle's height at the cell centres it covers."""
    rep = np.repeat(np.arange(len(tri)), count)
    k = np.arange(len(rep)) - np.repeat(np.cumsum(count) - count, count)
    ix = lo[rep, 0] + k % w[rep]
    iy = lo[rep, 1] + k // w[rep]
    px, py = x0 + (ix + 0.5) * step, y0 + (iy + 0.5) * step
    a, b, c = tri[rep, 0], tri[rep, 1], tri[rep, 2]
    det = (b[:, 1] - c[:, 1]) * (a[:, 0] - c[:, 0]) + (c[:, 0] - b[:, 0]) * (a[:, 1] - c[:, 1])
    ok = np.abs(det) > 1e-12
    det = np.where(ok, det, 1.0)
    l1 = ((b[:, 1] - c[:, 1]) * (px - c[:, 0]) + (c[:, 0] - b[:, 0]) * (py - c[:, 1])) / det
    l2 = ((c[:, 1] - a[:, 1]) * (px - c[:, 0]) + (a[:, 0] - c[:, 0]) * (py - c[:, 1])) / det
    l3 = 1.0 - l1 - l2
    eps = -1e-9
    inside = ok & (l1 >= eps) & (l2 >= eps) & (l3 >= eps)
    z = l1 * a[:, 2] + l2 * b[:, 2] + l3 * c[:, 2]
    inside &= z > plane
    np.minimum.at(low, (iy * nx + ix)[inside], z[inside])


def zones_from_heights(grid: HeightGrid, step: float, depth_mm: float
                       ) -> tuple[float, list[tuple[float, Polygon]]]:
    """The default depth and ``(depth, polygon)`` zones of ``grid``, depths rounded down to ``step``.

    Cells with nothing above take ``depth_mm``. Zones are sorted by depth.
    """
    d = grid.depth
    valid = ~np.isnan(d)
    q = np.where(np.isinf(d), depth_mm, np.floor((np.where(valid, d, 0) + HEIGHT_TOL_MM) / step) * step)
    q = np.round(q, 6)
    if not valid.any():
        return float(depth_mm), []
    default = float(q[valid].max())
    zones = []
    for value in np.unique(q[valid]):
        if value < default:
            zones.append((float(value), _cells_polygon(valid & (q == value), grid)))
    return default, zones


def _cells_polygon(mask: np.ndarray, grid: HeightGrid) -> Any:
    """The union of the cells of ``mask`` as one (multi)polygon, from runs along each row."""
    boxes = []
    s = grid.step
    for iy in np.flatnonzero(mask.any(axis=1)):
        row = np.concatenate(([0], mask[iy].astype(np.int8), [0]))
        edges = np.flatnonzero(np.diff(row))
        for a, b in zip(edges[::2], edges[1::2]):
            boxes.append(shapely.box(grid.x0 + a * s, grid.y0 + iy * s, grid.x0 + b * s, grid.y0 + (iy + 1) * s))
    return shapely.union_all(boxes).simplify(0)
