"""The copper in fit.svg and report.html: what is drawn equals routes.json, and every piece names its net."""

import math
import xml.etree.ElementTree as ET
from collections import Counter

import networkx as nx
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from shapely.geometry import box

from pipeline.export.copper_svg import spanning_pairs
from pipeline.export.routes import routes_dict
from pipeline.export.svg import fit_svg
from pipeline.model import AreaEstimate, Cavity, FitResult, Region
from pipeline.route.board import RouteBoard, RoutePad
from pipeline.route.demand import routing_demand
from pipeline.route.router import route_board
from pipeline.route.rules import CopperRules

SVG = "{http://www.w3.org/2000/svg}"


def _pad(ref, pin, net, x, y, w=0.6, h=0.6, layers=("top",)):
    return RoutePad(ref, pin, net, layers, box(x - w / 2, y - h / 2, x + w / 2, y + h / 2))


def _pocket():
    """Two nets whose pins alternate on the rim of a closed 8 x 8 pocket (one layer: one stays open)."""
    return RouteBoard(box(0, 0, 8, 8), (), (
        _pad("A1", "1", "A", 0.6, 4, 0.6, 3), _pad("A2", "1", "A", 7.4, 4, 0.6, 3),
        _pad("B1", "1", "B", 4, 7.4, 3, 0.6), _pad("B2", "1", "B", 4, 0.6, 3, 0.6)))


def _ground():
    return RouteBoard(box(0, 0, 10, 10), (), (
        _pad("C1", "1", "GND", 2, 2), _pad("C2", "1", "GND", 8, 8), _pad("C1", "2", "S", 4, 2),
        _pad("C2", "2", "S", 6, 8), _pad("J1", "1", "GND", 5, 5, 1.6, 1.6, ("top", "bottom"))))


CASES = {
    "pocket-two-layers": (_pocket, CopperRules(layers=2)),
    "pocket-one-layer": (_pocket, CopperRules(layers=1, time_budget_s=30)),
    "ground-area": (_ground, CopperRules(areas=(("GND", "bottom"),))),
}


def _draw(board, rules, with_demand=True):
    routing = route_board(board, rules)
    cav = Cavity("bay.dxf", box(-1, -1, 11, 11), (), (), None, 5.0, "mm", 1.0)
    reg = Region(box(-0.5, -0.5, 10.5, 10.5), (), 0.8)
    fit = FitResult(True, reg.area_mm2, 1.0, AreaEstimate(1, 2, 3, 4, "rule"), (), board.outline, ())
    demand = routing_demand(board, rules) if with_demand else None
    svg = fit_svg(cav, reg, fit, pads=board.pads, routing=routing, demand=demand)
    return routing, ET.fromstring(svg)


@pytest.fixture(scope="module", params=sorted(CASES))
def drawn(request):
    make, rules = CASES[request.param]
    board = make()
    routing, root = _draw(board, rules)
    doc = routes_dict(board, rules, routing)
    # each case shows what it is meant to: tracks and vias, an open net, a copper area
    assert {"pocket-two-layers": doc["vias"], "pocket-one-layer": doc["open"],
            "ground-area": doc["areas"]}[request.param]
    return doc, root, rules


def test_tracks_per_layer_vias_and_areas_equal_routes_json(drawn):
    doc, root, rules = drawn
    for layer in rules.layer_names:
        group = root.find(f".//{SVG}g[@data-layer-name='{layer}']")
        lines = group.findall(f"{SVG}polyline")
        assert len(lines) == sum(t["layer"] == layer for t in doc["tracks"])
        assert len(group.findall(f"{SVG}path")) == sum(a["layer"] == layer for a in doc["areas"])
        # stroke width = track width; the centre line's points are the track's points (y flipped, 1 um)
        got = sorted((float(p.get("stroke-width")), p.get("data-net"),
                      tuple((float(a), -float(b)) for a, b in (xy.split(",") for xy in p.get("points").split())))
                     for p in lines)
        want = sorted((t["width_mm"], t["net"], tuple(map(tuple, t["points"])))
                      for t in doc["tracks"] if t["layer"] == layer)
        assert [(w, n, len(q)) for w, n, q in got] == [(w, n, len(q)) for w, n, q in want]
        for (_, _, q1), (_, _, q2) in zip(got, want):
            assert all(math.dist(a, b) < 1e-3 for a, b in zip(q1, q2))
        assert all(p.get("stroke-linecap") == "round" and p.get("stroke-linejoin") == "round" for p in lines)
    vias = root.findall(f".//{SVG}g[@class='via']")
    assert len(vias) == len(doc["vias"])
    assert sorted(v.get("data-net") for v in vias) == sorted(v["net"] for v in doc["vias"])


def test_every_copper_element_names_its_net(drawn):
    doc, root, _ = drawn
    copper = [el for g in root.iter(f"{SVG}g") if "copper" in (g.get("class") or "").split() for el in g]
    assert copper or not (doc["tracks"] or doc["vias"] or doc["open"])
    nets = {p["net"] for p in doc["pads"]}
    assert all(el.get("data-net") in nets for el in copper)


def test_open_nets_are_dashed_straight_lines_along_a_spanning_tree(drawn):
    doc, root, _ = drawn
    lines = root.findall(f".//{SVG}line[@class='open-connection']")
    pads = Counter(p["net"] for p in doc["pads"])
    assert len(lines) == sum(pads[n] - 1 for n in doc["open"])     # a tree on k pads has k - 1 edges
    assert {line.get("data-net") for line in lines} == set(doc["open"])
    group = root.find(f".//{SVG}g[@class='copper open']")
    assert group.get("stroke-dasharray")


def test_congestion_map_is_hidden_by_default_and_shades_loaded_cells():
    board = _pocket()
    rules = CopperRules(layers=2)
    _, root = _draw(board, rules)
    group = root.find(f".//{SVG}g[@class='congestion']")
    assert group.get("display") == "none"
    d = routing_demand(board, rules)
    ratios = [float(r) for r in d.ratio.ravel() if math.isfinite(r) and r > 0]
    cells = group.findall(f"{SVG}rect")
    assert 0 < len(cells) <= len(ratios)
    opacity = [float(c.get("fill-opacity")) for c in cells]
    assert max(opacity) <= 0.55 and min(opacity) > 0
    _, bare = _draw(board, rules, with_demand=False)
    assert bare.find(f".//{SVG}g[@class='congestion']") is None


@settings(max_examples=40, deadline=None)
@given(st.lists(st.tuples(st.integers(0, 40), st.integers(0, 40)), min_size=1, max_size=12, unique=True))
def test_spanning_pairs_is_a_minimum_spanning_tree(points):
    # Reference: networkx's minimum spanning tree (Kruskal) of the complete Euclidean graph.
    pts = [(float(x), float(y)) for x, y in points]
    pairs = spanning_pairs(pts)
    assert len(pairs) == len(pts) - 1
    g = nx.Graph((a, b) for a, b in pairs)
    g.add_nodes_from(pts)
    assert nx.is_connected(g)
    ref = nx.Graph()
    ref.add_weighted_edges_from((a, b, math.dist(a, b)) for i, a in enumerate(pts) for b in pts[i + 1:])
    ref.add_nodes_from(pts)
    want = sum(w for _, _, w in nx.minimum_spanning_tree(ref).edges(data="weight"))
    assert sum(math.dist(a, b) for a, b in pairs) == pytest.approx(want)
