"""Global routing on coarse tiles and corridor-restricted detailed routing, on small known cases."""

import numpy as np
import pytest
from shapely.geometry import box

from pipeline.copper import check_copper
from pipeline.export.routes import routes_dict
from pipeline.route.board import RouteBoard, RoutePad
from pipeline.route.coarse import CORRIDOR_GROW, capacities, plan_corridors
from pipeline.route.router import route_board
from pipeline.route.rules import CopperRules

FREE, BLOCKED = -1, -2
SCHEDULE = (0.5, 1.6, 0.4)


def _pad(ref, net, x, y, s=0.6):
    return RoutePad(ref, "1", net, ("top",), box(x - s / 2, y - s / 2, x + s / 2, y + s / 2))


# ---------------------------------------------------------------- tile capacities
@pytest.mark.parametrize("layers, blocked, expected", [(1, [], 4), (1, [(0, 1, 4)], 3), (2, [], 8),
                                                       (2, [(1, 0, 3), (0, 2, 4)], 6)])
def test_border_capacity_counts_the_grid_edges_that_cross_it(layers, blocked, expected):
    # By hand: an 8 x 4 grid in 4 x 4 tiles is two tiles side by side; the border between them is
    # crossed by one grid edge per row (from i = 3 to i = 4) per layer: 4 rows x layers, less one
    # for each row whose edge has a blocked end.
    nx, ny = 8, 4
    node = [FREE] * (layers * nx * ny)
    for li, j, i in blocked:
        node[(li * ny + j) * nx + i] = BLOCKED
    edges = [FREE] * len(node)
    caph, capv = capacities(node, edges, edges, nx, ny, layers, 4)
    assert caph.tolist() == [[expected]] and capv.shape == (0, 2)


# ---------------------------------------------------------------- capacity on the tile graph
@pytest.mark.parametrize("k", [2, 3, 4])
def test_k_nets_through_a_gap_of_k_minus_1_leave_one_open_and_name_it(k):
    # 3 x 3 tiles; the middle column is a wall except its middle tile, whose borders carry k - 1 tracks.
    # Every net runs from the left-middle tile (3) to the right-middle tile (5): the only way is through
    # tile 4, so k - 1 nets pass and one stays open (the last by name: equal overflow, ties by name).
    ntx = nty = 3
    caph = np.zeros((3, 2), dtype=int)
    caph[1, :] = k - 1                    # borders 3|4 and 4|5 (row 1)
    capv = np.zeros((2, 3), dtype=int)
    nets = {f"N{i}": [3, 5] for i in range(k)}
    plan = plan_corridors(nets, caph, capv, ntx, nty, 4, 0.4, (0.0, 0.0), SCHEDULE, float("inf"))
    assert plan.open == (f"N{k - 1}",)
    assert set(plan.corridors) == {f"N{i}" for i in range(k - 1)}
    # the overfull border 3|4: a tile is 1.6 mm; its middle at x = 1.6 - 0.2 (node centres sit at
    # multiples of the pitch from the origin, a tile's edge half a pitch before its first node), y = 2.4 - 0.2
    assert plan.congestion[0] == pytest.approx((1.4, 2.2))


def test_no_gap_at_all_leaves_the_net_open_at_once():
    caph = np.zeros((1, 1), dtype=int)
    plan = plan_corridors({"A": [0, 1]}, caph, np.zeros((0, 2), dtype=int), 2, 1, 4, 0.4, (0.0, 0.0), SCHEDULE,
                          float("inf"))
    assert plan.open == ("A",) and not plan.corridors


def test_corridor_is_the_route_grown_by_corridor_grow_tiles():
    # 8 x 1 tiles, a net from tile 0 to tile 2: route tiles 0..2, grown by CORRIDOR_GROW (2): 0..4
    assert CORRIDOR_GROW == 2
    caph = np.full((1, 7), 5)
    plan = plan_corridors({"A": [0, 2]}, caph, np.zeros((0, 8), dtype=int), 8, 1, 4, 0.4, (0.0, 0.0), SCHEDULE,
                          float("inf"))
    assert plan.corridors["A"] == frozenset({0, 1, 2, 3, 4})
    mask = plan.mask("A", 30, 2)      # 30 nodes across: tiles 0-4 cover nodes 0-19
    assert list(mask[:30]) == [1] * 20 + [0] * 10


# ---------------------------------------------------------------- detailed routing in the corridor
def _open_board():
    pads = (_pad("A1", "A", 2.0, 2.0), _pad("A2", "A", 14.0, 8.0), _pad("B1", "B", 2.0, 8.0),
            _pad("B2", "B", 14.0, 2.0))
    return RouteBoard(box(0, 0, 16, 10), (), pads)


def test_corridor_routing_finds_the_same_paths_on_an_open_board():
    rules = CopperRules(layers=2, time_budget_s=60)
    board = _open_board()
    free = route_board(board, rules, coarse=False)
    kept = route_board(board, rules, coarse=True)
    assert free.status == kept.status == "routed"
    assert kept.tracks == free.tracks and kept.vias == free.vias
    assert check_copper(routes_dict(board, rules, kept)).clean


def test_corridor_keeps_the_search_inside_it(monkeypatch):
    # cost guard (counts, not seconds): with corridors, no search pushes a node outside its net's corridor
    import pipeline.route.router as router

    seen = []
    real = router._Router._search

    def spy(self, net, sources, targets, present, box, mask=None):
        seen.append(mask is not None)
        return real(self, net, sources, targets, present, box, mask)

    monkeypatch.setattr(router._Router, "_search", spy)
    route_board(_open_board(), CopperRules(layers=2, time_budget_s=60), coarse=True)
    assert seen and all(seen)


@pytest.mark.parametrize("coarse", [False, True])
def test_nets_the_time_budget_never_reached_are_named_open(coarse):
    # a budget of zero: no net is routed, so every net is open and named (never a silent "routed")
    board = _open_board()
    rules = CopperRules(layers=2, time_budget_s=60)
    routing = route_board(board, rules, time_budget_s=0.0, coarse=coarse)
    assert routing.status == "open" and routing.open == ("A", "B") and not routing.tracks
    assert not check_copper(routes_dict(board, rules, routing)).except_open(routing.open)


def test_global_routing_is_deterministic_and_reports_progress():
    from pipeline.export.routes import routes_json

    board, rules = _open_board(), CopperRules(layers=2, time_budget_s=60)
    seen = []
    one = route_board(board, rules, coarse=True, progress=lambda msg, frac: seen.append(msg))
    two = route_board(board, rules, coarse=True)
    assert routes_json(board, rules, one) == routes_json(board, rules, two)
    assert any(m.startswith("global routing") for m in seen) and any(m.startswith("routing") for m in seen)
