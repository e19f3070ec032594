"""Global routing on coarse tiles: a corridor for each net before detailed routing.

Entry point: :func:`plan_corridors`. Used by the router
(:mod:`pipeline.route.router`) on boards of more than ``COARSE_PARTS``
parts, so that each detailed A* search is bounded by its net's corridor
instead of the whole board.

Method
------
* **Tiles**: squares of ``TILE_PITCHES`` x ``TILE_PITCHES`` routing-grid
  nodes (1.6 mm at the default 0.4 mm pitch). The capacity of the border
  between two tiles is the number of grid edges crossing it that some net
  may use (not blocked, both ends usable) summed over the routing layers:
  the tracks of width + clearance the rules allow through it. Layers are
  not told apart here (2-D global routing with the layers' capacity summed;
  the detailed router assigns layers: common practice).
* **Negotiated congestion** on the tile graph (PathFinder: L. McMurchie
  and C. Ebeling, FPGA 1995, applied to global routing as in e.g. NCTU-GR
  and the ISPD 2007/2008 global routing contests): a border crossed by a
  net costs ``(1 + history) x (1 + present x over)`` where ``over`` is how
  far one more net would take it past its capacity; each net is a tree of
  A* searches (Hart, Nilsson and Raphael 1968) in Prim's order over the
  tiles of its pads. After each round the history of overfull borders
  grows and the nets crossing them are routed again, up to
  ``COARSE_ROUNDS``. Nets still crossing overfull borders then are dropped
  one at a time (most overflow first, then by name) and reported open,
  with the middles of the overfull borders as the congestion.
* **Corridor**: the tiles of a net's route and of its pads, grown by
  ``CORRIDOR_GROW`` tiles in every direction (corridor-restricted detailed
  routing: common practice in two-stage routers).

Deterministic: nets in name order, ties broken on insertion order. Cost per
round O(nets x T log T) for T tiles in a connection's search window.
"""

from __future__ import annotations

import heapq
import time
from dataclasses import dataclass

import numpy as np

__all__ = ["CoarsePlan", "plan_corridors", "COARSE_PARTS", "TILE_PITCHES", "CORRIDOR_GROW", "COARSE_ROUNDS",
           "COARSE_SHARE"]

COARSE_PARTS = 300       #: boards with more parts than this are routed globally first (our choice)
TILE_PITCHES = 4         #: tile side in routing-grid pitches (our choice: 1.6 mm at 0.4 mm pitch)
CORRIDOR_GROW = 2        #: tiles added around a net's global route to make its corridor (one left the
                         #: 60-part board with 3 nets open where the free search routes it; two, 2)
COARSE_ROUNDS = 30       #: negotiation rounds on the tile graph at most
COARSE_WINDOW = 6        #: tiles around a connection's box searched first
COARSE_SHARE = 0.25      #: share of the router's time budget global routing may use (our choice)
_BLOCKED = -2


@dataclass(frozen=True)
class CoarsePlan:
    """Corridors (net name -> tile indices ``b * ntx + a``), the nets left open and the crowded places (mm)."""

    tile: int
    ntx: int
    nty: int
    corridors: dict
    open: tuple[str, ...]
    congestion: tuple[tuple[float, float], ...]

    def mask(self, net: str, nx: int, ny: int) -> bytearray | None:
        """The corridor of ``net`` as one byte per grid node of a layer (1 = usable), or ``None``."""
        tiles = self.corridors.get(net)
        if tiles is None:
            return None
        keep = np.zeros(self.nty * self.ntx, dtype=np.uint8)
        keep[list(tiles)] = 1
        grown = keep.reshape(self.nty, self.ntx).repeat(self.tile, 0).repeat(self.tile, 1)[:ny, :nx]
        return bytearray(np.ascontiguousarray(grown).tobytes())


def capacities(node, ex, ey, nx: int, ny: int, layers: int, tile: int) -> tuple[np.ndarray, np.ndarray]:
    """Tracks across each tile border: ``(caph[b, a]`` between tiles a and a+1, ``capv[b, a]`` b and b+1).

    ``node``, ``ex``, ``ey`` are the grid's owner lists (layer-major, as
    :class:`pipeline.route.grid.Grid` keeps them).
    """
    nd = np.asarray(node).reshape(layers, ny, nx) != _BLOCKED
    okh = (np.asarray(ex).reshape(layers, ny, nx)[:, :, :-1] != _BLOCKED) & nd[:, :, :-1] & nd[:, :, 1:]
    okv = (np.asarray(ey).reshape(layers, ny, nx)[:, :-1, :] != _BLOCKED) & nd[:, :-1, :] & nd[:, 1:, :]
    okh, okv = okh.sum(0), okv.sum(0)          # (ny, nx-1), (ny-1, nx)
    ntx, nty = -(-nx // tile), -(-ny // tile)
    cols = [(a + 1) * tile - 1 for a in range(ntx - 1)]
    rows = [(b + 1) * tile - 1 for b in range(nty - 1)]
    h = np.zeros((nty * tile, len(cols)), dtype=np.int64)
    h[:ny] = okh[:, cols] if cols else h[:ny]
    v = np.zeros((len(rows), ntx * tile), dtype=np.int64)
    v[:, :nx] = okv[rows, :] if rows else v[:, :nx]
    return h.reshape(nty, tile, -1).sum(1), v.reshape(-1, ntx, tile).sum(2)


class _Coarse:
    def __init__(self, caph, capv, ntx, nty):
        self.ntx, self.nty = ntx, nty
        self.cap = np.concatenate([caph.ravel(), capv.ravel()]).tolist()
        self.nh = caph.size
        self.use = [0] * len(self.cap)
        self.hist = [0.0] * len(self.cap)

    def edge(self, t: int, u: int) -> int:
        """The border between neighbouring tiles ``t`` and ``u``."""
        lo, hi = min(t, u), max(t, u)
        if hi == lo + 1:
            b, a = divmod(lo, self.ntx)
            return b * (self.ntx - 1) + a
        return self.nh + lo

    def search(self, sources, targets, present, box):
        ntx = self.ntx
        a0, b0, a1, b1 = box
        ta = [t % ntx for t in targets]
        tb = [t // ntx for t in targets]
        x0, x1, y0, y1 = min(ta), max(ta), min(tb), max(tb)
        cap, use, hist, edge = self.cap, self.use, self.hist, self.edge
        best = {s: 0.0 for s in sources}
        parent = {s: -1 for s in sources}
        heap = []
        cnt = 0
        for s in sorted(sources):
            a, b = s % ntx, s // ntx
            heap.append((max(x0 - a, 0, a - x1) + max(y0 - b, 0, b - y1), cnt, s, 0.0))
            cnt += 1
        heapq.heapify(heap)
        while heap:
            _, _, t, gt = heapq.heappop(heap)
            if gt > best[t] + 1e-12:
                continue
            if t in targets:
                out = [t]
                while parent[out[-1]] != -1:
                    out.append(parent[out[-1]])
                return out[::-1]
            a, b = t % ntx, t // ntx
            for u, ok in ((t + 1, a < a1), (t - 1, a > a0), (t + ntx, b < b1), (t - ntx, b > b0)):
                if not ok:
                    continue
                e = edge(t, u)
                if cap[e] <= 0:
                    continue
                over = max(0, use[e] + 1 - cap[e])
                gu = gt + (1.0 + hist[e]) * (1.0 + present * over)
                if gu < best.get(u, float("inf")) - 1e-12:
                    best[u] = gu
                    parent[u] = t
                    cnt += 1
                    ua, ub = u % ntx, u // ntx
                    heapq.heappush(heap, (gu + max(x0 - ua, 0, ua - x1) + max(y0 - ub, 0, ub - y1), cnt, u, gu))
        return None

    def route(self, tiles: list[int], present: float) -> list[int] | None:
        """Border indices of a tree over ``tiles`` (first tile first), or ``None`` when there is no path."""
        tree = {tiles[0]}
        edges: list[int] = []
        left = sorted(set(tiles) - tree)
        ntx = self.ntx
        while left:
            nxt = min(left, key=lambda q: (min(abs(q % ntx - d % ntx) + abs(q // ntx - d // ntx) for d in tree), q))
            box = _box(tree | {nxt}, ntx, self.nty, COARSE_WINDOW)
            path = self.search(tree, {nxt}, present, box)
            if path is None:
                path = self.search(tree, {nxt}, present, (0, 0, ntx - 1, self.nty - 1))
            if path is None:
                return None
            edges += [self.edge(p, q) for p, q in zip(path, path[1:])]
            tree.update(path)
            left.remove(nxt)
        return sorted(set(edges))

    def over(self) -> set[int]:
        return {e for e, (u, c) in enumerate(zip(self.use, self.cap)) if u > c}


def plan_corridors(net_tiles: dict[str, list[int]], caph, capv, ntx: int, nty: int, tile: int, pitch: float,
                   origin: tuple[float, float], schedule: tuple[float, float, float], deadline: float,
                   progress=None, clock=time.monotonic) -> CoarsePlan:
    """Route every net of ``net_tiles`` (name -> tiles of its pads, name order) on the tile graph.

    ``schedule`` is PathFinder's (first present factor, its growth per
    round, history step); ``deadline`` a ``clock`` time (seconds; read once
    before each net and at the end of each round) after
    which negotiation stops: the nets routed keep their (perhaps crowded)
    corridors, nets not reached get none, and nothing is dropped, since
    the detailed router still negotiates.
    """
    g = _Coarse(caph, capv, ntx, nty)
    present, growth, step = schedule
    routes: dict[str, list[int]] = {}
    dead: set[str] = set()
    todo = list(net_tiles)
    for rnd in range(1, COARSE_ROUNDS + 1):
        for idx, name in enumerate(todo):
            if clock() > deadline:
                break
            for e in routes.pop(name, []):
                g.use[e] -= 1
            path = g.route(net_tiles[name], present)
            if path is None:
                dead.add(name)
                continue
            routes[name] = path
            for e in path:
                g.use[e] += 1
            if progress and idx % 50 == 0:
                progress(f"global routing: round {rnd}, {name}", min(0.3, 0.3 * (rnd - 1 + idx / len(todo)) / 8))
        over = g.over()
        if not over or clock() > deadline:
            break
        for e in over:
            g.hist[e] += step
        present *= growth
        todo = [n for n in net_tiles if n in routes and over.intersection(routes[n])]
    over = g.over()
    places = [_middle(e, g, tile, pitch, origin) for e in sorted(over, key=lambda e: (-(g.use[e] - g.cap[e]), e))]
    open_ = set(dead)
    if clock() > deadline:
        over = set()   # cut short: the detailed router negotiates what is left (unreached nets: no corridor)
    while over:
        worst = max((n for n in routes if over.intersection(routes[n])),
                    key=lambda n: (len(over.intersection(routes[n])), n))
        for e in routes.pop(worst):
            g.use[e] -= 1
        open_.add(worst)
        over = g.over()
    corridors = {n: _grow(net_tiles[n], routes[n], g) for n in routes}
    return CoarsePlan(tile, ntx, nty, corridors, tuple(sorted(open_)), tuple(places[:10]))


def _grow(tiles: list[int], edges: list[int], g: _Coarse) -> frozenset[int]:
    ntx, nty = g.ntx, g.nty
    used = set(tiles)
    for e in edges:
        if e < g.nh:
            b, a = divmod(e, ntx - 1)
            used.update((b * ntx + a, b * ntx + a + 1))
        else:
            used.update((e - g.nh, e - g.nh + ntx))
    out = set()
    for t in used:
        a, b = t % ntx, t // ntx
        for db in range(-CORRIDOR_GROW, CORRIDOR_GROW + 1):
            for da in range(-CORRIDOR_GROW, CORRIDOR_GROW + 1):
                if 0 <= a + da < ntx and 0 <= b + db < nty:
                    out.add((b + db) * ntx + a + da)
    return frozenset(out)


def _middle(e: int, g: _Coarse, tile: int, pitch: float, origin) -> tuple[float, float]:
    """The middle of border ``e`` in millimetres."""
    side = tile * pitch
    if e < g.nh:
        b, a = divmod(e, g.ntx - 1)
        x, y = (a + 1) * side - pitch / 2, (b + 0.5) * side - pitch / 2
    else:
        b, a = divmod(e - g.nh, g.ntx)
        x, y = (a + 0.5) * side - pitch / 2, (b + 1) * side - pitch / 2
    return (round(origin[0] + x, 4), round(origin[1] + y, 4))


def _box(tiles, ntx: int, nty: int, margin: int) -> tuple[int, int, int, int]:
    a = [t % ntx for t in tiles]
    b = [t // ntx for t in tiles]
    return (max(0, min(a) - margin), max(0, min(b) - margin), min(ntx - 1, max(a) + margin), min(nty - 1, max(b) + margin))
