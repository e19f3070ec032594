"""The routing grid: where each net's track centres and vias may go.

Entry point: :func:`build_grid`. Nodes sit on a square grid of pitch
``track width + clearance`` on every copper layer, so two tracks of
different nets on distinct nodes (joined only along grid lines) are always
at least the clearance apart. For each node, each grid edge and each via
site the grid records an owner: ``FREE`` (any net), ``BLOCKED`` (no net) or
a net index (only that net: it lies within clearance of that net's pad).

Tests are exact, not sampled: a node is usable by net ``k`` when its
distance (shapely) to every pad of another net is at least ``w/2 + s``, to
the board edge at least the copper-to-edge rule plus ``w/2`` (and it lies
inside), to every hole as much; a grid edge is tested the same way as a
segment; a via site with the via radius in place of ``w/2`` (and, when
vias may not sit in pads, at least the via radius from every surface pad).
Cost: O(nodes) vectorised shapely calls plus O(pads x nearby nodes).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
import shapely
from shapely.geometry import MultiPolygon, Polygon

from .board import RouteBoard
from .rules import CopperRules

__all__ = ["Grid", "build_grid", "add_copper", "edge_rule", "FREE", "BLOCKED"]

FREE = -1
BLOCKED = -2
#: tolerance (mm) on exact distance tests: a gap of (rule - EPS) still counts as the rule.
EPS = 1e-7


@dataclass
class Grid:
    """Grid geometry and owner arrays (flat Python lists for the router's speed).

    Node ``n = (layer * ny + j) * nx + i`` at ``(x0 + i p, y0 + j p)``;
    ``ex[n]`` owns the edge from ``n`` to ``n + 1``, ``ey[n]`` to ``n + nx``;
    ``via[j * nx + i]`` a via site. ``layers`` are the routing layer names.
    """

    x0: float
    y0: float
    pitch: float
    nx: int
    ny: int
    layers: tuple[str, ...]
    node: list[int]
    ex: list[int]
    ey: list[int]
    via: list[int]
    nets: tuple[str, ...] = ()
    extra_copper: dict = field(default_factory=dict)

    def xy(self, n: int) -> tuple[float, float]:
        i = n % self.nx
        j = (n // self.nx) % self.ny
        return (self.x0 + i * self.pitch, self.y0 + j * self.pitch)

    def layer_of(self, n: int) -> int:
        return n // (self.nx * self.ny)


def _own(arr: np.ndarray, idx: np.ndarray, net) -> None:
    """Mark ``idx`` as owned by ``net`` (one net index, or one per entry of ``idx``): a place stays
    (or becomes) a net's only when that net alone comes near it and it was free or that net's,
    else it is BLOCKED.

    Applying it once to all pairs equals applying it pair by pair in any
    order (each step keeps a net's mark only while no other net comes),
    so the marks of many pads are merged in one vectorised pass. Cost
    O(h log h) for h pairs.
    """
    idx = np.asarray(idx, dtype=np.int64)
    nets = np.broadcast_to(np.asarray(net, dtype=np.int64), idx.shape)
    if idx.size == 0:
        return
    order = np.lexsort((nets, idx))
    idx, nets = idx[order], nets[order]
    cells, start = np.unique(idx, return_index=True)
    first = nets[start]
    mixed = np.logical_or.reduceat(nets != np.repeat(first, np.diff(np.append(start, idx.size))), start)
    cur = arr[cells]
    arr[cells] = np.where(~mixed & ((cur == FREE) | (cur == first)), first, BLOCKED)


def _mark(arr: np.ndarray, tree, geoms: np.ndarray, cells: np.ndarray, copper: list, half: float) -> None:
    """Own in ``arr`` the ``cells`` of the ``geoms`` (indexed in ``tree``) closer than ``half`` (less
    ``EPS``) to a piece of ``copper`` (``[(net index, geometry), ...]``), by :func:`_own`.

    One envelope query of the STRtree for all pieces (each piece's box
    grown by ``half``: every geometry that close has its box meeting it),
    then one vectorised exact distance test. Cost O((g + c) log g + h).
    """
    if not copper:
        return
    nets = np.array([net for net, _ in copper], dtype=np.int64)
    pieces = np.array([geo for _, geo in copper], dtype=object)
    lo, hi = shapely.bounds(pieces)[:, :2] - half, shapely.bounds(pieces)[:, 2:] + half
    q, t = tree.query(shapely.box(lo[:, 0], lo[:, 1], hi[:, 0], hi[:, 1]))
    close = shapely.distance(geoms[t], pieces[q]) < half - EPS
    _own(arr, cells[t[close]], nets[q[close]])


def build_grid(board: RouteBoard, rules: CopperRules, width: float, layers: tuple[str, ...],
               nets: tuple[str, ...], extra: dict[str, list] | None = None) -> Grid:
    """Owner arrays for tracks of ``width`` (mm) on ``layers``.

    ``nets`` fixes the net indices; ``extra`` maps a net name to more of its
    copper (pin-access stubs) to keep other nets away from, as shapely
    geometries with a layer each: ``[(layer, geometry), ...]``.
    """
    p = rules.pitch_mm
    xmin, ymin, xmax, ymax = board.outline.bounds
    nx = int(math.floor((xmax - xmin) / p)) + 1
    ny = int(math.floor((ymax - ymin) / p)) + 1
    xs = xmin + p * np.arange(nx)
    ys = ymin + p * np.arange(ny)
    gx, gy = np.meshgrid(xs, ys)
    pts = shapely.points(gx.ravel(), gy.ravel())
    index = {n: k for k, n in enumerate(nets)}
    node = np.full(len(layers) * nx * ny, FREE, dtype=np.int64)
    ex = np.full_like(node, BLOCKED)
    ey = np.full_like(node, BLOCKED)
    half = width / 2 + rules.clearance_mm
    copper = _copper_by_layer(board, layers, index, extra or {})
    tree = shapely.STRtree(pts)
    inside: dict[float, np.ndarray] = {}   # _inside by margin: layers with the same edge rule share it
    for li, name in enumerate(layers):
        off = li * nx * ny
        margin = edge_rule(rules, name, len(layers)) + width / 2
        if margin not in inside:
            inside[margin] = _inside(board, pts, margin)
        sl = node[off:off + nx * ny]
        sl[~inside[margin]] = BLOCKED
        _mark(sl, tree, pts, np.arange(len(pts)), copper[name], half)
        ex[off:off + nx * ny], ey[off:off + nx * ny] = _edges(board, sl, gx, gy, p, copper[name], half, margin)
    via = _vias(board, rules, pts, tree, layers, copper, len(layers))
    return Grid(float(xmin), float(ymin), p, nx, ny, tuple(layers), node.tolist(), ex.tolist(), ey.tolist(),
                via.tolist(), tuple(nets))


def add_copper(g: Grid, rules: CopperRules, width: float, net: int, layer: str, geo) -> None:
    """Mark in ``g`` (in place) the nodes, grid edges and via sites too near ``geo``, new copper of
    net index ``net`` on ``layer``, as :func:`build_grid` would have marked them.

    For pin escapes added after the grid was built: the same exact tests
    (shapely distances against ``w/2 + s`` for nodes and edges of that
    layer, ``via radius + s`` for via sites), only over the grid points
    near ``geo``. Cost O(points in its box).
    """
    half = width / 2 + rules.clearance_mm
    hv = rules.via_diameter_mm / 2 + rules.clearance_mm
    reach = max(half, hv)
    x0, y0, x1, y1 = geo.bounds
    i0, i1 = max(0, math.floor((x0 - reach - g.x0) / g.pitch)), min(g.nx - 1, math.ceil((x1 + reach - g.x0) / g.pitch))
    j0, j1 = max(0, math.floor((y0 - reach - g.y0) / g.pitch)), min(g.ny - 1, math.ceil((y1 + reach - g.y0) / g.pitch))
    jj, ii = np.mgrid[j0:j1 + 1, i0:i1 + 1]
    ii, jj = ii.ravel(), jj.ravel()
    xs, ys = g.x0 + ii * g.pitch, g.y0 + jj * g.pitch
    off = g.layers.index(layer) * g.nx * g.ny
    cell = jj * g.nx + ii
    d = shapely.distance(shapely.points(xs, ys), geo)
    for arr, base, limit in ((g.node, off, half), (g.via, 0, hv)):
        for c in cell[d < limit - EPS]:
            arr[base + c] = _owner(arr[base + c], net)
    for arr, di, dj in ((g.ex, 1, 0), (g.ey, 0, 1)):
        ok = (ii + di < g.nx) & (jj + dj < g.ny)
        segs = shapely.linestrings(np.stack([np.stack([xs, ys], -1), np.stack([xs + di * g.pitch, ys + dj * g.pitch], -1)], 1)[ok])
        near = shapely.distance(segs, geo) < half - EPS
        for c in cell[ok][near]:
            arr[off + c] = _owner(arr[off + c], net)


def _owner(cur: int, net: int) -> int:
    """The owner of a place that was ``cur`` once ``net``'s copper is near (BLOCKED if another net's is)."""
    return net if cur in (FREE, net) else BLOCKED


def edge_rule(rules: CopperRules, layer: str, count: int) -> float:
    inner = layer not in ("top", "bottom")
    return rules.inner_edge_clearance_mm if inner else rules.edge_clearance_mm


def _copper_by_layer(board: RouteBoard, layers, index, extra) -> dict[str, list]:
    out: dict[str, list] = {name: [] for name in layers}
    for pad in board.pads:
        net = index.get(pad.net, BLOCKED) if pad.net is not None else BLOCKED
        for name in pad.layers:
            if name in out:
                out[name].append((net, pad.polygon))
    for netname in sorted(extra):
        for name, geo in extra[netname]:
            out[name].append((index[netname], geo))
    return out


def _holes(board: RouteBoard):
    return shapely.union_all(list(board.holes)) if board.holes else None


def _rings(polygons) -> list:
    """The boundary rings of ``polygons`` (exteriors and interiors)."""
    return [r for poly in polygons for r in (poly.exterior, *poly.interiors)]


def _closer(rings, geoms: np.ndarray, margin: float) -> np.ndarray:
    """Which of ``geoms`` lie closer than ``margin`` (less ``EPS``) to any of ``rings``' lines.

    The rings are cut into their segments in an STRtree, so the cost is
    O((n + v) log v) for n geometries and v vertices instead of O(n v):
    the 2,000-vertex outlines of large boards made the plain distance test
    the slowest step of the grid.
    """
    segs = []
    for ring in rings:
        xy = np.asarray(ring.coords)
        segs.append(np.stack([xy[:-1], xy[1:]], 1))
    lines = shapely.linestrings(np.concatenate(segs))
    hit_geom, hit_seg = shapely.STRtree(lines).query(geoms, predicate="dwithin", distance=margin)
    near = shapely.distance(geoms[hit_geom], lines[hit_seg]) < margin - EPS
    out = np.zeros(len(geoms), dtype=bool)
    out[hit_geom[near]] = True
    return out


def _inside(board: RouteBoard, pts: np.ndarray, margin: float) -> np.ndarray:
    """Points inside the outline, at least ``margin`` from its edge and from every hole."""
    outline = shapely.Polygon(board.outline.exterior)
    shapely.prepare(outline)
    ok = shapely.contains_xy(outline, shapely.get_x(pts), shapely.get_y(pts))
    ok &= ~_closer([board.outline.exterior], pts, margin)
    holes = _holes(board)
    if holes is not None:
        shapely.prepare(holes)
        ok &= ~shapely.contains_xy(holes, shapely.get_x(pts), shapely.get_y(pts))
        ok &= ~_closer(_rings(board.holes), pts, margin)
    return ok


def _edges(board, sl, gx, gy, p, copper, half, margin):
    """Owners of the +x and +y grid edges of one layer."""
    ny, nx = gx.shape
    a = sl.reshape(ny, nx)
    ex = np.full((ny, nx), BLOCKED, dtype=np.int64)
    ey = np.full((ny, nx), BLOCKED, dtype=np.int64)
    for arr, (b, sx, sy) in ((ex, (a[:, 1:], slice(None), slice(0, nx - 1))),
                             (ey, (a[1:, :], slice(0, ny - 1), slice(None)))):
        u = a[sx, sy]
        arr[sx, sy] = np.where((u == BLOCKED) | (b == BLOCKED), BLOCKED,
                               np.where(u == FREE, b, np.where((b == FREE) | (b == u), u, BLOCKED)))
    # exact segment tests near copper and near the board edge
    for arr, di, dj in ((ex, 1, 0), (ey, 0, 1)):
        js, is_ = np.nonzero(arr != BLOCKED)
        if js.size == 0:
            continue
        x1, y1 = gx[js, is_], gy[js, is_]
        lines = shapely.linestrings(np.stack([np.stack([x1, y1], -1),
                                              np.stack([x1 + di * p, y1 + dj * p], -1)], 1))
        bad = _closer([board.outline.exterior], lines, margin)
        if board.holes:   # an edge wholly inside a hole has blocked ends already
            bad |= _closer(_rings(board.holes), lines, margin)
        arr[js[bad], is_[bad]] = BLOCKED
        _mark(arr.reshape(-1), shapely.STRtree(lines), lines, js * nx + is_, copper, half)
    return ex.ravel(), ey.ravel()


def _vias(board, rules, pts, tree, layers, copper, count) -> np.ndarray:
    """Owners of via sites (one per grid point, through every layer); ``tree`` an STRtree of ``pts``."""
    rv = rules.via_diameter_mm / 2
    edge = max(edge_rule(rules, name, count) for name in layers)
    via = np.where(_inside(board, pts, edge + rv), FREE, BLOCKED).astype(np.int64)
    half = rv + rules.clearance_mm
    _mark(via, tree, pts, np.arange(len(pts)), [piece for name in layers for piece in copper[name]], half)
    if not rules.vias_in_pads:
        for pad in board.pads:
            if len(pad.layers) == 1:
                hit = tree.query(pad.polygon, predicate="dwithin", distance=rv)
                via[hit[shapely.distance(pts[hit], pad.polygon) < rv - EPS]] = BLOCKED
    return via


def as_polygons(geo) -> list[Polygon]:
    """The polygons of a shapely geometry (empty list for none)."""
    if geo is None or geo.is_empty:
        return []
    if isinstance(geo, Polygon):
        return [geo]
    if isinstance(geo, MultiPolygon):
        return list(geo.geoms)
    return [g for g in getattr(geo, "geoms", []) if isinstance(g, Polygon)]

