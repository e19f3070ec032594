"""The routing grid's owners (pipeline/route/grid.py) against shapely distances taken one place at a time."""

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from shapely.geometry import LineString, Point, box

from pipeline.route.board import RouteBoard, RoutePad
from pipeline.route.grid import BLOCKED, EPS, FREE, _own, _owner, build_grid, edge_rule
from pipeline.route.rules import CopperRules

NETS = ("A", "B", "C")


@st.composite
def _boards(draw):
    """A 6 x 4 mm board (maybe with a hole) with up to eight pads of nets A, B, C or none."""
    pads = []
    for q in range(draw(st.integers(0, 8))):
        x, y = draw(st.floats(-0.5, 6.5)), draw(st.floats(-0.5, 4.5))
        w, h = draw(st.floats(0.2, 1.4)), draw(st.floats(0.2, 1.4))
        net = draw(st.sampled_from([*NETS, None]))
        layers = draw(st.sampled_from([("top",), ("bottom",), ("top", "bottom")]))
        pads.append(RoutePad(f"P{q}", "1", net, layers, box(x - w / 2, y - h / 2, x + w / 2, y + h / 2)))
    holes = ()
    if draw(st.booleans()):
        holes = (Point(draw(st.floats(1, 5)), draw(st.floats(1, 3))).buffer(draw(st.floats(0.2, 0.8))),)
    return RouteBoard(box(0, 0, 6, 4), holes, tuple(pads))


def _merge(owners):
    """The owner of a place that the nets in ``owners`` (in any order) come near, from FREE: the rule
    written out (one net alone keeps it; two different nets block it)."""
    out = FREE
    for net in owners:
        out = net if out in (FREE, net) else BLOCKED
    return out


def _reference(board, rules, width, layers):
    """Every owner from shapely distances taken one place at a time (the module docstring's tests)."""
    p, s = rules.pitch_mm, rules.clearance_mm
    xmin, ymin, xmax, ymax = board.outline.bounds
    nx, ny = int(math.floor((xmax - xmin) / p)) + 1, int(math.floor((ymax - ymin) / p)) + 1
    index = {n: k for k, n in enumerate(NETS)}
    rings = [board.outline.exterior] + [r for h in board.holes for r in (h.exterior, *h.interiors)]

    def clear_of_edge(geo, margin):
        inside = board.outline.contains(geo) or board.outline.boundary.intersects(geo)
        in_hole = any(h.intersects(geo) and not h.boundary.contains(geo) for h in board.holes)
        return inside and not in_hole and all(r.distance(geo) >= margin - EPS for r in rings)

    def near(geo, lay, half):
        return [index.get(q.net, BLOCKED) if q.net else BLOCKED
                for q in board.pads if lay in q.layers and q.polygon.distance(geo) < half - EPS]

    half = width / 2 + s
    node, ex, ey = [], [], []
    for lay in layers:
        margin = edge_rule(rules, lay, len(layers)) + width / 2
        pts = {(i, j): Point(xmin + i * p, ymin + j * p) for j in range(ny) for i in range(nx)}
        own = {}
        for (i, j), pt in pts.items():
            own[i, j] = _merge(near(pt, lay, half)) if clear_of_edge(pt, margin) else BLOCKED
        node += [own[i, j] for j in range(ny) for i in range(nx)]
        for arr, di, dj in ((ex, 1, 0), (ey, 0, 1)):
            for j in range(ny):
                for i in range(nx):
                    if i + di >= nx or j + dj >= ny or BLOCKED in (own[i, j], own[i + di, j + dj]):
                        arr.append(BLOCKED)
                        continue
                    line = LineString([pts[i, j], pts[i + di, j + dj]])
                    ends = [o for o in (own[i, j], own[i + di, j + dj]) if o != FREE]
                    if any(r.distance(line) < margin - EPS for r in rings):
                        arr.append(BLOCKED)
                    else:
                        arr.append(_merge(ends + near(line, lay, half)))
    rv = rules.via_diameter_mm / 2
    vmargin = max(edge_rule(rules, lay, len(layers)) for lay in layers) + rv
    via = []
    for j in range(ny):
        for i in range(nx):
            pt = Point(xmin + i * p, ymin + j * p)
            o = _merge([n for lay in layers for n in near(pt, lay, rv + s)]) if clear_of_edge(pt, vmargin) else BLOCKED
            if not rules.vias_in_pads and any(len(q.layers) == 1 and q.polygon.distance(pt) < rv - EPS
                                              for q in board.pads):
                o = BLOCKED
            via.append(o)
    return node, ex, ey, via


@settings(max_examples=25, deadline=None)
@given(_boards(), st.sampled_from([1, 2]), st.booleans(), st.sampled_from([0.2, 0.3]))
def test_owners_equal_shapely_distances_place_by_place(board, n_layers, in_pads, width):
    # reference: shapely's exact distance (GEOS) of each node, grid edge and via site to each pad,
    # ring and hole, one at a time, with the owner rule applied pad by pad
    rules = CopperRules(layers=n_layers, vias_in_pads=in_pads)
    g = build_grid(board, rules, width, rules.layer_names, NETS)
    assert (g.node, g.ex, g.ey, g.via) == _reference(board, rules, width, rules.layer_names)


@settings(max_examples=200, deadline=None)
@given(st.lists(st.tuples(st.integers(0, 5), st.sampled_from([0, 1, 2, BLOCKED])), max_size=30),
       st.lists(st.sampled_from([FREE, BLOCKED, 0, 1]), min_size=6, max_size=6))
def test_owning_many_at_once_equals_one_at_a_time(pairs, start):
    # _own over all (place, net) pairs at once against _owner applied pair by pair in the given order
    arr = np.array(start, dtype=np.int64)
    _own(arr, np.array([c for c, _ in pairs], dtype=np.int64), np.array([n for _, n in pairs], dtype=np.int64))
    one = list(start)
    for c, n in pairs:
        one[c] = _owner(one[c], n)
    assert arr.tolist() == one


@pytest.mark.parametrize("net, start, expected", [(0, FREE, 0), (0, 0, 0), (0, 1, BLOCKED), (0, BLOCKED, BLOCKED),
                                                  (BLOCKED, FREE, BLOCKED)])
def test_owning_with_one_net(net, start, expected):
    arr = np.array([start, FREE], dtype=np.int64)
    _own(arr, np.array([0]), net)
    assert arr.tolist() == [expected, FREE]


def test_a_node_near_two_nets_pads_is_blocked():
    # worked example: pads of A (x 0.6 to 1.4) and B (x 1.8 to 2.6); with w = s = 0.2 a node is a net's
    # within w/2 + s = 0.3 mm of its pad. The node at x = 1.6 is 0.2 mm from both: BLOCKED; x = 1.2
    # lies on A and 0.6 mm from B: A's; x = 2.0 likewise B's; x = 3.2 is 0.6 mm from B: FREE
    pads = (RoutePad("A", "1", "A", ("top",), box(0.6, 1.7, 1.4, 2.3)),
            RoutePad("B", "1", "B", ("top",), box(1.8, 1.7, 2.6, 2.3)))
    rules = CopperRules(layers=1)
    g = build_grid(RouteBoard(box(0, 0, 4, 4), (), pads), rules, 0.2, ("top",), NETS)
    at = {tuple(round(c, 6) for c in g.xy(n)): o for n, o in enumerate(g.node)}
    assert [at[x, 2.0] for x in (1.2, 1.6, 2.0, 3.2)] == [0, BLOCKED, 1, FREE]
