"""The router's inner search (pipeline/route/search.py) against networkx's Dijkstra on the same graph."""

import math
import types

import networkx as nx
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import pipeline.route.search as search
from pipeline.route.grid import BLOCKED, FREE, Grid
from pipeline.route.search import EAST, ENTER, NORTH, SOUTH, VIA, WEST, astar, moves

K = 0  # the net searched for; owner 1 is another net


def _grid(nx_, ny, nl, node, ex, ey, via):
    return Grid(0.0, 0.0, 0.4, nx_, ny, tuple(f"L{q}" for q in range(nl)), node, ex, ey, via)


@st.composite
def _cases(draw):
    """A small random grid (owners FREE, BLOCKED, K or another net), costs, a window, maybe a corridor."""
    nx_, ny, nl = draw(st.integers(2, 7)), draw(st.integers(2, 6)), draw(st.integers(1, 2))
    size, plane = nx_ * ny * nl, nx_ * ny
    owners = st.sampled_from([FREE, FREE, FREE, FREE, BLOCKED, K, 1])
    node, ex, ey = (draw(st.lists(owners, min_size=size, max_size=size)) for _ in range(3))
    via = draw(st.lists(owners, min_size=plane, max_size=plane))
    g = _grid(nx_, ny, nl, node, ex, ey, via)
    small = st.integers(0, 3)
    costs = (draw(st.sampled_from([1.0, 1.3, 7.5])), draw(st.lists(st.floats(0, 3), min_size=size, max_size=size)),
             draw(st.lists(small, min_size=size, max_size=size)), draw(st.lists(small, min_size=size, max_size=size)),
             draw(st.lists(small, min_size=plane, max_size=plane)))
    steps = ([draw(st.sampled_from([1.0, 1.5])) for _ in range(nl)], [draw(st.sampled_from([1.0, 1.5])) for _ in range(nl)])
    i0, i1 = sorted(draw(st.lists(st.integers(0, nx_ - 1), min_size=2, max_size=2)))
    j0, j1 = sorted(draw(st.lists(st.integers(0, ny - 1), min_size=2, max_size=2)))
    mask = draw(st.none() | st.lists(st.sampled_from([0, 1, 1]), min_size=plane, max_size=plane).map(bytearray))
    sources = draw(st.sets(st.integers(0, size - 1), min_size=1, max_size=3))
    targets = draw(st.none() | st.sets(st.integers(0, size - 1), min_size=1, max_size=3))
    return g, costs, steps, (i0, j0, i1, j1), mask, sources, targets


def _ok(owner):
    return owner in (FREE, K)


def _reference(g, costs, steps, box, mask, via_cost):
    """The same search graph written out edge by edge from the owner lists, as a networkx DiGraph."""
    present, hist, claim, near, via_near = costs
    plane = g.nx * g.ny
    G = nx.DiGraph()

    def enter(m):
        return _ok(g.node[m]) and (mask is None or mask[m % plane])

    def cost(m, step):
        return step * (1.0 + hist[m]) * (1.0 + present * claim[m]) + present * near[m]

    i0, j0, i1, j1 = box
    for n in range(len(g.node)):
        li, r = divmod(n, plane)
        j, i = divmod(r, g.nx)
        if not (i0 <= i <= i1 and j0 <= j <= j1):
            continue
        for m, edge, inside, step in ((n + 1, g.ex[n], i < i1, steps[0][li]),
                                      (n - 1, g.ex[n - 1], i > i0, steps[0][li]),
                                      (n + g.nx, g.ey[n], j < j1, steps[1][li]),
                                      (n - g.nx, g.ey[n - g.nx], j > j0, steps[1][li])):
            if inside and _ok(edge) and enter(m):
                G.add_edge(n, m, weight=cost(m, step))
        for lj in range(len(g.layers)):
            m = lj * plane + r
            if lj != li and _ok(g.via[r]) and enter(m):
                G.add_edge(n, m, weight=cost(m, via_cost + present * via_near[r]))
    return G


@settings(max_examples=300, deadline=None)
@given(_cases(), st.sampled_from([1.0, search.HEURISTIC_WEIGHT, 2.0]))
def test_path_cost_is_the_least_cost_networkx_finds(case, weight):
    # reference: networkx.multi_source_dijkstra_path_length (Dijkstra 1959) on the same graph, edge by edge;
    # weight 1: the least cost itself; weight w > 1: at most w x the least (weighted A*'s bound, Pohl 1970)
    g, costs, steps, box, mask, sources, targets = case
    i0, j0, i1, j1 = box
    plane = g.nx * g.ny
    inside = {n for n in range(len(g.node)) if i0 <= n % g.nx <= i1 and j0 <= (n % plane) // g.nx <= j1}
    sources = sources & inside or {min(inside)}
    G = _reference(g, costs, steps, box, mask, 4.0 if targets is not None else 0.0)
    if targets is None:   # nearest usable via site, on the starting layer (no via is taken on the way)
        G.remove_edges_from([(a, b) for a, b in list(G.edges) if a // plane != b // plane])
        goal = {n for n in range(len(g.node)) if _ok(g.via[n % plane])}
    else:
        goal = targets
    G.add_nodes_from(sources)
    dist = nx.multi_source_dijkstra_path_length(G, sources)
    want = min((dist[t] for t in goal if t in dist), default=None)
    path = astar(g, moves(g, K, mask), sources, targets, box, costs, steps, 4.0, weight)
    if want is None:
        assert path is None
        return
    assert path is not None and path[0] in sources and path[-1] in goal
    got = sum(G[a][b]["weight"] for a, b in zip(path, path[1:]))   # every step is an edge of G
    if weight == 1.0 or targets is None:   # the via-site search has no heuristic to weight
        assert math.isclose(got, want, rel_tol=1e-9, abs_tol=1e-9)
    else:
        assert want - 1e-9 <= got <= weight * want + 1e-9


@pytest.mark.parametrize("owner, bit", [(FREE, True), (K, True), (1, False), (BLOCKED, False)])
def test_moves_bits_follow_the_owners(owner, bit):
    # a 3 x 1 one-layer strip; the middle node's east edge (or the east node) owned by ``owner``
    for where in ("edge", "node", "via"):
        node, ex, via = [FREE] * 3, [FREE, FREE, BLOCKED], [FREE] * 3
        {"edge": ex, "node": node, "via": via}[where][1 if where != "node" else 2] = owner
        b = moves(_grid(3, 1, 1, node, ex, [BLOCKED] * 3, via), K)
        if where == "via":
            assert bool(b[1] & VIA) is bit and b[1] & (EAST | WEST) == EAST | WEST
        else:
            assert bool(b[1] & EAST) is bit and b[1] & WEST
        assert not b[0] & WEST and not b[2] & EAST                  # never off the grid
        assert not any(x & (NORTH | SOUTH) for x in b)              # one row: no vertical steps
        assert bool(b[2] & ENTER) is (where != "node" or bit)


def test_a_corridor_closes_the_cells_outside_it():
    g = _grid(3, 1, 1, [FREE] * 3, [FREE, FREE, BLOCKED], [BLOCKED] * 3, [FREE] * 3)
    b = moves(g, K, bytearray([1, 1, 0]))
    assert b[1] & WEST and not b[1] & EAST and not b[2] & ENTER


def _counted(monkeypatch):
    """Count heap pops of the search (the expansions, stale ones included)."""
    pops = [0]
    real = search.heapq

    def heappop(h):
        pops[0] += 1
        return real.heappop(h)

    monkeypatch.setattr(search, "heapq", types.SimpleNamespace(heappush=real.heappush, heappop=heappop,
                                                               heapify=real.heapify))
    return pops


@pytest.mark.parametrize("length", [1, 5, 20])
def test_cost_guard_a_straight_run_on_an_open_grid_pops_only_its_own_nodes(monkeypatch, length):
    # cost guard (counts, not seconds): with the Manhattan heuristic every node off the straight line
    # has f above the path's cost, so A* pops the length + 1 nodes of the line and nothing else of the
    # 30 x 30 window (Hart, Nilsson and Raphael 1968: A* expands no node with f > C*)
    n = 30
    g = _grid(n, n, 1, [FREE] * n * n, [FREE] * n * n, [FREE] * n * n, [FREE] * n * n)
    zeros = [0] * n * n
    pops = _counted(monkeypatch)
    s = 15 * n + 5
    path = astar(g, moves(g, K), {s}, {s + length}, (0, 0, n - 1, n - 1), (1.0, [0.0] * n * n, zeros, zeros, zeros),
                 ([1.0], [1.0]), 4.0)
    assert path == list(range(s, s + length + 1))
    assert pops[0] == length + 1


def test_cost_guard_the_router_builds_each_nets_moves_once(monkeypatch):
    # cost guard (counts): the step table is built once per net, however many searches the net makes
    from shapely.geometry import box as rect

    import pipeline.route.router as router
    from pipeline.route.board import RouteBoard, RoutePad
    from pipeline.route.rules import CopperRules

    built, searched = [], [0]
    real_moves, real_astar = router.moves, router.search_astar
    monkeypatch.setattr(router, "moves", lambda g, k, mask=None: built.append(k) or real_moves(g, k, mask))

    def counting(*a):
        searched[0] += 1
        return real_astar(*a)

    monkeypatch.setattr(router, "search_astar", counting)
    pads = tuple(RoutePad(f"P{q}", "1", net, ("top",), rect(x - 0.3, y - 0.3, x + 0.3, y + 0.3))
                 for q, (net, x, y) in enumerate([("A", 1, 1), ("A", 8, 1), ("A", 8, 8), ("B", 1, 8), ("B", 4, 4)]))
    routing = router.route_board(RouteBoard(rect(0, 0, 9, 9), (), pads), CopperRules(layers=2, time_budget_s=60))
    assert routing.status == "routed"
    assert sorted(built) == [0, 1] and searched[0] >= 3


def test_cost_guard_the_weighted_heuristic_pops_fewer_behind_a_costly_wall(monkeypatch):
    # cost guard (counts): a wall of costly nodes (history 99: entering one costs 100 steps) across a
    # 30 x 30 window between source (5, 5) and target (25, 5), open at rows 27 to 29. Closed form of the
    # least cost: around the wall, 20 steps across and 2 x 22 up and down = 64 (through it: 19 + 100).
    # Unweighted A* (Hart et al. 1968) finds it after popping every node with f below 64; with
    # HEURISTIC_WEIGHT it pops fewer, and its path costs at most that factor x 64 (Pohl 1970)
    n = 30
    g = _grid(n, n, 1, [FREE] * n * n, [FREE] * n * n, [FREE] * n * n, [FREE] * n * n)
    zeros = [0] * n * n
    hist = [99.0 if i == 15 and j < 27 else 0.0 for j in range(n) for i in range(n)]
    s, t = 5 * n + 5, 5 * n + 25
    runs = {}
    for w in (1.0, search.HEURISTIC_WEIGHT):
        pops = _counted(monkeypatch)
        path = astar(g, moves(g, K), {s}, {t}, (0, 0, n - 1, n - 1), (1.0, hist, zeros, zeros, zeros),
                     ([1.0], [1.0]), 4.0, w)
        runs[w] = (pops[0], sum(1.0 + hist[m] for m in path[1:]))
        monkeypatch.undo()
    (p1, c1), (pw, cw) = runs[1.0], runs[search.HEURISTIC_WEIGHT]
    assert c1 == 64.0
    assert c1 <= cw <= search.HEURISTIC_WEIGHT * c1
    assert pw < p1
