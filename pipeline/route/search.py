"""The router's inner search: A* on the routing grid, over flat lists.

Entry points: :func:`moves` (which grid steps a net may take, built once
per net) and :func:`astar` (one least-cost search). The negotiation around
it (costs, history, rip-up) lives in :mod:`pipeline.route.router`.

Method: A* (P. E. Hart, N. J. Nilsson and B. Raphael, "A formal basis for
the heuristic determination of minimum cost paths", IEEE Trans. SSC 4(2),
1968), its heuristic weighted (``HEURISTIC_WEIGHT``: I. Pohl, 1970), with
a binary heap whose ties break on insertion order, and
Dijkstra's search (the same loop with a zero heuristic) for the nearest
usable via site. A grid step's legality (owner of the edge, of the node it
enters, the net's corridor) never changes while a net is routed, so it is
folded into one small integer per node (:func:`moves`) and one expansion
reads one number for its four plane steps instead of eight owner lists.

Cost: O(V log V) per search for the V nodes it reaches inside its window;
:func:`moves` O(nodes) numpy work once per net.
"""

from __future__ import annotations

import heapq
import math

import numpy as np

from .grid import FREE, Grid

__all__ = ["EAST", "WEST", "NORTH", "SOUTH", "VIA", "ENTER", "moves", "astar", "path_to"]

HEURISTIC_WEIGHT = 1.2   #: the heuristic's weight w: paths cost at most w x the least (Pohl 1970); our choice, measured
#: (bench/README.md): against w = 1 the 60-part board of bench/bench_route.py popped 200,046 heap entries instead
#: of 464,399 and the demo 164,767 instead of 186,922, both still routed (1.1: the demo popped more; 1.5 and 2:
#: its compact placement no longer routed within the rounds)

EAST, WEST, NORTH, SOUTH, VIA, ENTER = 1, 2, 4, 8, 16, 32
#: bits of :func:`moves`: steps to +x, -x, +y, -y; a usable via site; the node itself may be entered


def moves(g: Grid, k: int, mask=None) -> bytes:
    """For every node of ``g``, the steps net index ``k`` may take out of it, as bits (one byte a node).

    ``EAST`` when the grid edge to ``n + 1`` and that node are free or
    ``k``'s and its plane cell is in ``mask`` (a corridor: plane cells, 1 =
    usable; None = every cell); likewise ``WEST`` (``n - 1``), ``NORTH``
    (``n + nx``), ``SOUTH`` (``n - nx``); ``VIA`` when the node's via site
    is free or ``k``'s; ``ENTER`` when the node itself is free or ``k``'s
    and in ``mask`` (tested on the layer a via lands on).
    Steps off the grid are never set. Cost O(nodes), vectorised. One byte a
    node (the six bits fit; indexing ``bytes`` gives an ``int`` as fast as a
    list does), so the router can keep every net's table at an eighth of a
    list's memory.
    """
    nx, ny, nl = g.nx, g.ny, len(g.layers)

    def ok(arr) -> np.ndarray:
        a = np.asarray(arr, dtype=np.int64).reshape(nl, ny, nx)
        return (a == FREE) | (a == k)

    node, ex, ey = ok(g.node), ok(g.ex), ok(g.ey)
    if mask is not None:
        node &= np.frombuffer(bytes(mask), dtype=np.uint8).astype(bool).reshape(1, ny, nx)
    bits = np.zeros((nl, ny, nx), dtype=np.int64)
    bits[:, :, :-1] |= np.where(ex[:, :, :-1] & node[:, :, 1:], EAST, 0)
    bits[:, :, 1:] |= np.where(ex[:, :, :-1] & node[:, :, :-1], WEST, 0)
    bits[:, :-1, :] |= np.where(ey[:, :-1, :] & node[:, 1:, :], NORTH, 0)
    bits[:, 1:, :] |= np.where(ey[:, :-1, :] & node[:, :-1, :], SOUTH, 0)
    bits |= np.where(ok(g.via * nl), VIA, 0)
    bits |= np.where(node, ENTER, 0)
    return bits.astype(np.uint8).tobytes()


def astar(g: Grid, step_bits: bytes, sources, targets, box, costs, steps, via_cost: float,
          weight: float = HEURISTIC_WEIGHT):
    """Least-cost path from any of ``sources`` to any of ``targets`` (node sets); None if there is none.

    ``targets`` None: the nearest node whose via site is usable (``VIA``
    set), by Dijkstra's search. ``box`` ``(i0, j0, i1, j1)`` bounds the
    search (grid indices, inclusive). ``costs`` is ``(present, hist,
    claim_occ, near, via_near)``: entering node ``m`` by a step of base
    cost ``c`` (``steps``: per layer, ``(horizontal, vertical)`` base costs
    in grid steps; a via ``via_cost + present x via_near[site]``) costs
    ``c (1 + hist[m]) (1 + present claim_occ[m]) + present near[m]``. The
    heuristic is ``weight`` x the Manhattan distance in grid steps to the
    targets' box; that distance is admissible because every step costs at
    least 1, so with ``weight`` 1 the path is a least-cost one, and with
    ``weight`` w > 1 (weighted A*: I. Pohl, "Heuristic search viewed as path
    finding in a graph", Artificial Intelligence 1(3), 1970) it costs at
    most w x the least while far fewer nodes are expanded where congestion
    makes paths cost much more than their length (nodes may be expanded
    again when a cheaper way to them turns up). Returns the node list,
    sources first. Cost O(V log V) for the V nodes reached.
    """
    hx, hy = _heuristic(g, targets, weight)
    heap, best, parent = _seed(sources, hx, hy, g.nx, g.nx * g.ny, len(g.node))
    end = _expand(g, step_bits, heap, best, parent, targets, (hx, hy), box, costs, steps, via_cost)
    return None if end is None else path_to(parent, end)


def _expand(g, bits, heap, best, parent, targets, heuristic, box, costs, steps, via_cost):
    """The A* loop; the node reached (a target, or a node with a usable via site) or None.

    One expansion: a heap pop, one read of ``bits`` for the legal steps, and
    per step a few list reads and at most one heap push. Ties in the heap
    break on push order (a running count), so the path is deterministic.
    The four plane steps are written out one by one rather than gathered in
    a list and looped over: this loop is most of a routed run's time, and
    the written-out form does a third less work per expansion (same pushes,
    same order, same floating-point expressions, so the same paths).
    """
    nx, plane, nl = g.nx, g.nx * g.ny, len(g.layers)
    present, hist, claim_occ, near, via_near = costs
    hstep, vstep = steps
    i0, j0, i1, j1 = box
    hx, hy = heuristic
    aim = targets is not None
    vias = nl > 1 and aim
    heappush, heappop = heapq.heappush, heapq.heappop
    cnt = len(heap)
    while heap:
        _, _, n, gn = heappop(heap)
        if gn > best[n] + 1e-12:
            continue
        b = bits[n]
        if aim:
            if n in targets:
                return n
        elif b & VIA:
            return n
        li, r = divmod(n, plane)
        j, i = divmod(r, nx)
        if b & EAST and i < i1:
            m = n + 1
            gm = gn + (hstep[li] * (1.0 + hist[m]) * (1.0 + present * claim_occ[m]) + present * near[m])
            if gm < best[m] - 1e-12:
                best[m] = gm
                parent[m] = n
                cnt += 1
                heappush(heap, (gm + (hx[i + 1] + hy[j]), cnt, m, gm))
        if b & WEST and i > i0:
            m = n - 1
            gm = gn + (hstep[li] * (1.0 + hist[m]) * (1.0 + present * claim_occ[m]) + present * near[m])
            if gm < best[m] - 1e-12:
                best[m] = gm
                parent[m] = n
                cnt += 1
                heappush(heap, (gm + (hx[i - 1] + hy[j]), cnt, m, gm))
        if b & NORTH and j < j1:
            m = n + nx
            gm = gn + (vstep[li] * (1.0 + hist[m]) * (1.0 + present * claim_occ[m]) + present * near[m])
            if gm < best[m] - 1e-12:
                best[m] = gm
                parent[m] = n
                cnt += 1
                heappush(heap, (gm + (hx[i] + hy[j + 1]), cnt, m, gm))
        if b & SOUTH and j > j0:
            m = n - nx
            gm = gn + (vstep[li] * (1.0 + hist[m]) * (1.0 + present * claim_occ[m]) + present * near[m])
            if gm < best[m] - 1e-12:
                best[m] = gm
                parent[m] = n
                cnt += 1
                heappush(heap, (gm + (hx[i] + hy[j - 1]), cnt, m, gm))
        if vias and b & VIA:
            step = via_cost + present * via_near[r]
            hv = hx[i] + hy[j]
            for lj in range(nl):
                m = lj * plane + r
                if lj != li and bits[m] & ENTER:
                    gm = gn + (step * (1.0 + hist[m]) * (1.0 + present * claim_occ[m]) + present * near[m])
                    if gm < best[m] - 1e-12:
                        best[m] = gm
                        parent[m] = n
                        cnt += 1
                        heappush(heap, (gm + hv, cnt, m, gm))
    return None


def path_to(parent: list[int], n: int) -> list[int]:
    """The nodes from a source (parent -1) to ``n``, in that order."""
    out = [n]
    while parent[out[-1]] != -1:
        out.append(parent[out[-1]])
    return out[::-1]


def _heuristic(g: Grid, targets, weight: float = 1.0) -> tuple[list[float], list[float]]:
    """``(hx, hy)``: ``weight`` x grid steps from each column and each row to the targets' box (zeros
    for none).

    A node's heuristic is ``hx[i] + hy[j]``, with ``weight`` 1 the Manhattan
    distance in steps to the box around ``targets``: admissible and
    consistent, since every step costs at least 1 and changes it by at most
    1. Cost O(nx + ny + targets).
    """
    if targets is None:
        return [0] * g.nx, [0] * g.ny
    plane = g.nx * g.ny
    ti = [t % g.nx for t in targets]
    tj = [(t % plane) // g.nx for t in targets]
    ti0, ti1, tj0, tj1 = min(ti), max(ti), min(tj), max(tj)
    return ([weight * (ti0 - i if i < ti0 else max(i - ti1, 0)) for i in range(g.nx)],
            [weight * (tj0 - j if j < tj0 else max(j - tj1, 0)) for j in range(g.ny)])


def _seed(sources, hx: list[float], hy: list[float], nx: int, plane: int, size: int):
    """The heap, best costs and parents (lists over all ``size`` nodes) with every source at cost 0,
    pushed in sorted order (deterministic)."""
    best = [math.inf] * size
    parent = [-1] * size
    heap: list = []
    for cnt, s in enumerate(sorted(sources)):
        best[s] = 0.0
        r = s % plane
        heap.append((float(hx[r % nx] + hy[r // nx]), cnt, s, 0.0))
    heapq.heapify(heap)
    return heap, best, parent
