"""Pin escape: an any-angle track out of a pad the routing grid cannot reach from the rest of its net.

Entry points: :func:`island` (whether the grid leaves a pad on a small
island) and :func:`escape` (the track out of one such pad).

Why: the routing grid (:mod:`pipeline.route.grid`) has the pitch track
width + clearance, so a gap between two pads of other nets lets a grid
track through only when a grid line happens to fall in the gap's middle
band; a gap of width ``G`` holds a track (``G >= w + 2 s``) but a grid line
is certain to fall in it only when ``G >= w + 2 s + pitch``. Tightly packed
passives (courtyards touching, pads 0.5 mm apart) leave inner pads whose
only ways out are such off-grid gaps, often diagonal ones between two pad
corners; the grid search then finds no path at all and the net stays open
whatever the negotiation does.

Method: Lee's maze routing (C. Y. Lee, "An algorithm for path connections
and its applications", IRE Trans. EC-10(3), 1961) on a fine lattice (the
grid pitch / ``FINE``, aligned to the grid so that grid nodes are lattice
points) inside a window around the pad: a wavefront with eight neighbours,
one numpy dilation per step, from the lattice points in the pad to the
nearest usable grid node off the pad's island (a window of
``FIRST_REACH`` mm first, then ``ESCAPE_REACH``). A lattice point is
usable when it is at least ``w/2 + s`` (plus a small margin for the sag of
a short segment) from other nets' copper and ``w/2 +`` the edge rule
inside the board. The lattice path is then pulled tight (greedy: from each
corner the farthest later point in clear line of sight) and every segment
of the result is tested exactly with shapely, so the track returned keeps
the clearance exactly (the independent copper check re-tests it). Cost:
O(L d) vectorised for the L lattice points of the window (tens of
thousands) and a path of d steps, plus O(k^2) exact segment tests for a
path of k points.
"""

from __future__ import annotations

import numpy as np
import shapely
from shapely.geometry import LineString

__all__ = ["island", "escape", "FINE", "ESCAPE_REACH", "ISLAND"]

FINE = 16             #: lattice points per grid pitch (our choice: 0.025 mm at the default 0.4 mm pitch; 0.05 missed 0.65 mm gaps)
ESCAPE_REACH = 2.0    #: mm around the pad searched for a way out at most (our choice: two or three pad pitches;
                      #: the demo's R9.2 needed 2.0)
FIRST_REACH = 0.8     #: mm searched first (most ways out are short; a window a sixth of the area)
SAG = 0.001           #: mm kept beyond the clearance at lattice points (a 0.035 mm step sags by under 0.0006 at 0.3 mm)
ISLAND = 64           #: grid nodes: a pad whose flood stops below this is cut off (our choice; the trapped
                      #: 0402 and 0603 pads of the demo and the 60-part board held 2 to 16)
TRIES = 6             #: nodes on small islands skipped before an escape gives up (our choice)
ENCLOSED = LineString()   #: what escape_within returns for a pad walled in inside its window
EPS = 1e-7            #: mm tolerance of the exact tests (as in pipeline.route.grid)


def island(g, k: int, terms: list[int], others=frozenset(), limit: int = ISLAND) -> set[int] | None:
    """The grid nodes net ``k`` can reach from ``terms``, when they are fewer than ``limit`` and hold
    none of ``others`` (the nodes of the net's other pads); else ``None``.

    A flood fill over the nodes, grid edges and via sites the grid lets
    ``k`` use, stopped as soon as it holds ``limit`` nodes or reaches
    another pad: a pad whose flood stops early sits on an island the grid
    search cannot leave. Cost O(limit).
    """
    nx, plane = g.nx, g.nx * g.ny
    nl = len(g.node) // plane
    node, ex, ey, via = g.node, g.ex, g.ey, g.via
    seen = set(terms)
    if seen & others:
        return None
    todo = sorted(seen)
    while todo:
        n = todo.pop()
        li, r = divmod(n, plane)
        j, i = divmod(r, nx)
        moves = []
        if i < nx - 1 and ex[n] in (-1, k):
            moves.append(n + 1)
        if i > 0 and ex[n - 1] in (-1, k):
            moves.append(n - 1)
        if j < g.ny - 1 and ey[n] in (-1, k):
            moves.append(n + nx)
        if j > 0 and ey[n - nx] in (-1, k):
            moves.append(n - nx)
        if nl > 1 and via[r] in (-1, k):
            moves += [lj * plane + r for lj in range(nl) if lj != li]
        for m in moves:
            if m not in seen and node[m] in (-1, k):
                if m in others:
                    return None
                seen.add(m)
                todo.append(m)
                if len(seen) >= limit:
                    return None
    return seen


def escape(pad_polygon, layer_index: int, g, k: int, cut: set[int], others: set[int], obstacles: list, edge,
           half: float, edge_half: float) -> LineString | None:
    """The shortest clear track out of ``pad_polygon`` within ``FIRST_REACH`` mm, else within
    ``ESCAPE_REACH`` mm (:func:`escape_within`); the larger window is not searched when the pad's
    clear lattice points are enclosed inside the first (walled in: no window holds a way out)."""
    for reach in (FIRST_REACH, ESCAPE_REACH):
        line = escape_within(reach, pad_polygon, layer_index, g, k, cut, others, obstacles, edge, half, edge_half)
        if line is not None:
            return None if line is ENCLOSED else line
    return None


def escape_within(reach: float, pad_polygon, layer_index: int, g, k: int, cut: set[int], others: set[int],
                  obstacles: list, edge, half: float, edge_half: float) -> LineString | None:
    """The shortest clear track from inside ``pad_polygon`` to a grid node of layer ``layer_index``
    that net ``k`` may use, that is not on the pad's island ``cut`` (grid node indices) and
    from which the grid reaches ``others`` (the nodes of the net's other pads) or far.

    ``obstacles`` are the other nets' copper on
    that layer (shapely geometries) that the track's centre line must keep
    ``half`` (w/2 + s, mm) from; ``edge`` is ``(outline polygon, holes)``
    kept ``edge_half`` (w/2 + the edge rule) from. Returns the centre line
    (its first point inside the pad, its last a grid node) or ``None``.
    """
    h = g.pitch / FINE
    x0, y0, x1, y1 = pad_polygon.bounds
    ia = max(0, int(np.floor((x0 - reach - g.x0) / h)))
    ja = max(0, int(np.floor((y0 - reach - g.y0) / h)))
    ib = min((g.nx - 1) * FINE, int(np.ceil((x1 + reach - g.x0) / h)))
    jb = min((g.ny - 1) * FINE, int(np.ceil((y1 + reach - g.y0) / h)))
    if ib < ia or jb < ja:
        return None
    ii, jj = np.meshgrid(np.arange(ia, ib + 1), np.arange(ja, jb + 1))
    xs, ys = (g.x0 + ii * h).ravel(), (g.y0 + jj * h).ravel()
    usable = _usable(xs, ys, (x0 - reach, y0 - reach, x1 + reach, y1 + reach), obstacles, edge, half, edge_half)
    start = usable & shapely.contains_xy(pad_polygon, xs, ys)
    on_grid = ((ii % FINE == 0) & (jj % FINE == 0)).ravel()
    node = (layer_index * g.nx * g.ny + (jj // FINE) * g.nx + ii // FINE).ravel()
    owner = np.full(node.shape, -2, dtype=np.int64)   # read the grid's owners only where the lattice meets it:
    at = np.flatnonzero(on_grid)                       # converting the whole grid cost O(board) per pad
    owner[at] = [g.node[q] for q in node[at].tolist()]
    target = usable & on_grid & ((owner == -1) | (owner == k)) & ~np.isin(node, sorted(cut))
    for _ in range(TRIES):   # the nearest node first; one on another small island is dropped with it
        if not start.any():
            return ENCLOSED
        path, reached = _lattice_path(usable, start, target, ii.shape)
        if path is None:
            return ENCLOSED if _enclosed(reached) else None
        end = int(node[path[-1]])
        small = island(g, k, [end], others)
        if small is None:
            clear = _Clear(obstacles, half, edge, edge_half)
            return _pull_tight([(float(xs[q]), float(ys[q])) for q in path], clear)
        target &= ~np.isin(node, sorted(small))
    return None


def _usable(xs, ys, window, obstacles: list, edge, half: float, edge_half: float) -> np.ndarray:
    """Which points ``(xs, ys)`` keep ``half + SAG`` from every obstacle and ``edge_half + SAG`` from the
    board edge and holes, inside the board and out of the holes.

    The obstacles and the edge's rings clipped to ``window`` (mm box) grown
    by the margin are buffered (16 segments a quarter circle) and the points
    tested against their union (prepared); the outline's containment is
    tested only when the window is not inside it. Clipping keeps the cost
    to the window's copper, not the board's 2,000-vertex outline. Cost
    O(P log E) for P points and E edges of the keep-out.
    """
    outline, holes = edge
    near = shapely.box(*window).buffer(edge_half + 2 * SAG, join_style="mitre")
    rings = [r for r in shapely.intersection([outline.exterior, *(h.exterior for h in holes)], near)
             if not r.is_empty]   # a point of the window nearer than that to a ring is so to its clipped piece
    keep_out = shapely.union_all([shapely.buffer(shapely.union_all(obstacles), half + SAG, quad_segs=16)]
                                 + [shapely.buffer(r, edge_half + SAG, quad_segs=16) for r in rings] + list(holes))
    shapely.prepare(keep_out)
    ok = ~shapely.intersects_xy(keep_out, xs, ys)
    if not outline.contains(shapely.box(*window)):
        shapely.prepare(outline)
        ok &= shapely.contains_xy(outline, xs, ys)
    return ok


class _Clear:
    """Exact test: which segments keep ``half`` from every obstacle and ``edge_half`` inside the board."""

    def __init__(self, obstacles, half: float, edge, edge_half: float):
        self.outline, holes = edge
        self.groups = [(shapely.STRtree(group), margin) for group, margin in
                       ((list(obstacles), half), ([self.outline.exterior, *holes], edge_half)) if group]
        self.holes = shapely.union_all(list(holes)) if holes else None

    def __call__(self, lines) -> np.ndarray:
        ok = shapely.within(lines, self.outline)
        for tree, margin in self.groups:
            hit, _ = tree.query(lines, predicate="dwithin", distance=margin - EPS)
            ok[hit] = False
        if self.holes is not None:
            ok &= ~shapely.intersects(lines, self.holes)
        return ok


def _enclosed(reached: np.ndarray) -> bool:
    """Whether the lattice points a failed wavefront ``reached`` (2-D booleans) stay off the window's rim.

    Then a larger window around the same pad adds no way out: the usable
    points are the same where the windows overlap (the obstacles are the
    same; the edge is clipped exactly). O(rim).
    """
    return not (reached[0].any() or reached[-1].any() or reached[:, 0].any() or reached[:, -1].any())


def _lattice_path(usable: np.ndarray, start: np.ndarray, target: np.ndarray,
                  shape) -> tuple[list[int] | None, np.ndarray]:
    """Lee's wavefront on the eight-neighbour lattice: flat indices from a start to the nearest target
    (``None`` when the front dies first), and the points it reached (2-D booleans).

    Each step grows the front by one lattice point in every direction (a
    numpy dilation); the path is traced back through points one step
    nearer, orthogonal neighbours first (a fixed order: deterministic).
    """
    usable, start, target = usable.reshape(shape), start.reshape(shape), target.reshape(shape)
    dist = np.full(shape, -1, dtype=np.int32)
    dist[start] = 0
    front, d = start.copy(), 0
    while not (front & target).any():
        grow = front.copy()
        grow[1:, :] |= front[:-1, :]
        grow[:-1, :] |= front[1:, :]
        g2 = grow.copy()
        g2[:, 1:] |= grow[:, :-1]
        g2[:, :-1] |= grow[:, 1:]
        front = g2 & usable & (dist < 0)
        if not front.any():
            return None, dist >= 0
        d += 1
        dist[front] = d
    ny, nx = shape
    j, i = divmod(int(np.flatnonzero(front & target)[0]), nx)
    out = [j * nx + i]
    for step in range(d - 1, -1, -1):
        for di, dj in ((1, 0), (-1, 0), (0, 1), (0, -1), (1, 1), (-1, 1), (1, -1), (-1, -1)):
            if 0 <= i + di < nx and 0 <= j + dj < ny and dist[j + dj, i + di] == step:
                i, j = i + di, j + dj
                break
        out.append(j * nx + i)
    return out[::-1], dist >= 0


def _pull_tight(coords, clear: _Clear) -> LineString | None:
    """Greedy string pulling: from each corner, the farthest later point in clear sight; exact tests."""
    out = [coords[0]]
    i = 0
    last = len(coords) - 1
    while i < last:
        cands = list(range(last, i, -1))
        ok = clear(shapely.linestrings([[coords[i], coords[j]] for j in cands]))
        hit = np.flatnonzero(ok)
        if hit.size == 0:
            return None
        i = cands[int(hit[0])]
        out.append(coords[i])
    if len(out) == 1:
        out.append(out[0])
    return LineString(out)
