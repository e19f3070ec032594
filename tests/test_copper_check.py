"""The independent copper checker on hand-made routes.json documents (positions worked by hand)."""

import ast
import copy
from pathlib import Path

import pytest

from pipeline.copper import check_copper


def _sq(x, y, s=0.6):
    h = s / 2
    return [[x - h, y - h], [x + h, y - h], [x + h, y + h], [x - h, y + h], [x - h, y - h]]


def _doc():
    """10 x 10 board; net A from (2, 2) to (8, 2), net B from (2, 8) to (8, 8), tracks on top."""
    return {
        "status": "routed",
        "board_outline": [[0, 0], [10, 0], [10, 10], [0, 10], [0, 0]],
        "holes": [],
        "layers": ["top", "bottom"],
        "pads": [
            {"ref": "R1", "pin": "1", "net": "A", "layers": ["top"], "polygon": _sq(2, 2)},
            {"ref": "R1", "pin": "2", "net": "A", "layers": ["top"], "polygon": _sq(8, 2)},
            {"ref": "R2", "pin": "1", "net": "B", "layers": ["top"], "polygon": _sq(2, 8)},
            {"ref": "R2", "pin": "2", "net": "B", "layers": ["top"], "polygon": _sq(8, 8)},
        ],
        "tracks": [
            {"net": "A", "layer": "top", "width_mm": 0.2, "points": [[2, 2], [8, 2]]},
            {"net": "B", "layer": "top", "width_mm": 0.2, "points": [[2, 8], [8, 8]]},
        ],
        "vias": [],
        "areas": [],
        "rules": {"clearance_mm": 0.2, "edge_clearance_mm": 0.25, "min_track_width_mm": 0.2,
                  "min_annular_ring_mm": 0.15, "min_drill_mm": 0.3},
        "open": [],
    }


def test_clean_board_is_clean():
    assert check_copper(_doc()).clean


def _only(doc, kind):
    probs = check_copper(doc).problems
    assert [p.kind for p in probs] == [kind], probs
    return probs[0]


def test_short_is_caught_where_the_tracks_cross():
    d = _doc()
    d["tracks"][1]["points"] = [[2, 8], [5, 8], [5, 1.5]]   # B runs down across A's track at (5, 2)
    p = check_copper(d).problems
    shorts = [q for q in p if q.kind == "short"]
    assert shorts and shorts[0].nets == ("A", "B") and shorts[0].layer == "top"
    assert (shorts[0].x, shorts[0].y) == pytest.approx((5, 2), abs=0.15)


def test_open_is_caught_at_the_pad_left_alone():
    d = _doc()
    d["tracks"][0]["points"] = [[2, 2], [5, 2]]   # stops half way: R1.2 at (8, 2) is not reached
    p = _only(d, "open")
    assert p.nets == ("A",) and (p.x, p.y) == pytest.approx((8, 2))


def test_clearance_violation_is_caught_between_the_tracks():
    d = _doc()
    # a third net C running 0.3 mm above A's centre line: gap 0.3 - 0.1 - 0.1 = 0.1 mm < 0.2
    d["pads"] += [{"ref": "R3", "pin": "1", "net": "C", "layers": ["top"], "polygon": _sq(3, 4)},
                  {"ref": "R3", "pin": "2", "net": "C", "layers": ["top"], "polygon": _sq(7, 4)}]
    d["tracks"].append({"net": "C", "layer": "top", "width_mm": 0.2, "points": [[3, 4], [3, 2.3], [7, 2.3], [7, 4]]})
    p = _only(d, "clearance")
    assert p.nets == ("A", "C") and p.y == pytest.approx(2.15) and 3 <= p.x <= 7
    assert "0.100 mm" in p.message


def test_gap_of_exactly_the_clearance_is_allowed():
    d = _doc()
    # centre lines 0.4 apart: copper gap 0.4 - 0.2 = 0.2 mm = the clearance (closed form)
    d["pads"] += [{"ref": "R3", "pin": "1", "net": "C", "layers": ["top"], "polygon": _sq(3, 4)},
                  {"ref": "R3", "pin": "2", "net": "C", "layers": ["top"], "polygon": _sq(7, 4)}]
    d["tracks"].append({"net": "C", "layer": "top", "width_mm": 0.2, "points": [[3, 4], [3, 2.4], [7, 2.4], [7, 4]]})
    assert check_copper(d).clean


def test_copper_over_the_edge_is_caught_there():
    d = _doc()
    d["tracks"][0]["points"] = [[2, 2], [9.9, 2], [8, 2]]   # reaches x = 9.9 + 0.1 = 10.0, the edge itself
    p = _only(d, "edge")
    assert p.nets == ("A",) and p.y == pytest.approx(2) and p.x == pytest.approx(9.95)


def test_copper_into_a_hole_is_caught_there():
    d = _doc()
    d["holes"] = [[[4.5, 1.5], [5.5, 1.5], [5.5, 1.8], [4.5, 1.8], [4.5, 1.5]]]   # its top edge 0.1 under A's copper
    p = _only(d, "hole")
    assert p.nets == ("A",) and p.x == pytest.approx(5, abs=0.5) and p.y == pytest.approx(1.9)


def test_stray_via_is_caught_where_it_stands():
    d = _doc()
    d["vias"] = [{"net": "A", "x": 5, "y": 5, "diameter_mm": 0.6, "drill_mm": 0.3}]
    p = _only(d, "stray")
    assert p.nets == ("A",) and (p.x, p.y) == (5, 5)


def test_via_joins_layers_and_without_it_the_net_is_open():
    d = _doc()
    d["tracks"][0] = {"net": "A", "layer": "top", "width_mm": 0.2, "points": [[2, 2], [5, 2]]}
    d["tracks"].append({"net": "A", "layer": "bottom", "width_mm": 0.2, "points": [[5, 2], [8, 2]]})
    d["pads"][1]["layers"] = ["top", "bottom"]     # R1.2 through-hole: joined on the bottom
    assert _only(d, "open").nets == ("A",)          # nothing joins top and bottom at (5, 2)
    d["vias"] = [{"net": "A", "x": 5, "y": 2, "diameter_mm": 0.6, "drill_mm": 0.3}]
    assert check_copper(d).clean


def test_small_via_and_thin_track_break_the_size_rules():
    d = _doc()
    d["tracks"][0]["width_mm"] = 0.15
    d["vias"] = [{"net": "A", "x": 5, "y": 2, "diameter_mm": 0.5, "drill_mm": 0.3}]   # ring 0.1 < 0.15
    kinds = sorted(p.kind for p in check_copper(d).problems)
    assert kinds == ["size", "size"]


def test_copper_area_counts_as_copper():
    d = _doc()
    # net B fills the bottom half's lower strip on the bottom layer; A's pads are surface pads on top
    d["areas"] = [{"net": "A", "layer": "top", "polygon": [[1, 1], [9, 1], [9, 3], [1, 3], [1, 1]], "holes": []}]
    assert check_copper(d).clean
    d["areas"][0]["net"] = "B"        # the area now overlaps A's pads and track: shorts
    assert {p.kind for p in check_copper(d).problems} >= {"short"}


def test_unreadable_document_is_a_format_problem():
    assert _only({"status": "routed"}, "format").x == 0.0


def test_checker_shares_no_code_with_the_router():
    # The issue asks for an independent check: no import of pipeline.route (or of anything in pipeline).
    for f in Path("pipeline/copper").glob("*.py"):
        tree = ast.parse(f.read_text())
        for node in ast.walk(tree):
            if isinstance(node, ast.ImportFrom):
                assert node.level <= 1 and not (node.module or "").startswith(("pipeline", "route", "..")), f
            if isinstance(node, ast.Import):
                assert not any(a.name.startswith("pipeline") for a in node.names), f


def test_same_document_same_verdict():
    d = _doc()
    assert check_copper(copy.deepcopy(d)) == check_copper(d)


def _four_layers(inner_rule):
    """The clean board on four layers; net B gets a track on inner1 whose copper ends 0.3 mm from x = 10."""
    d = _doc()
    d["layers"] = ["top", "inner1", "inner2", "bottom"]
    d["tracks"].append({"net": "B", "layer": "inner1", "width_mm": 0.2, "points": [[2, 8], [9.6, 8], [8, 8]]})
    d["pads"][2]["layers"] = d["pads"][3]["layers"] = ["top", "inner1", "inner2", "bottom"]
    if inner_rule is not None:
        d["rules"]["inner_edge_clearance_mm"] = inner_rule
    return d


@pytest.mark.parametrize("inner_rule, caught", [(0.4, True), (0.25, False), (None, False)])
def test_inner_layer_copper_keeps_the_inner_edge_clearance(inner_rule, caught):
    # By hand: the track's centre line ends at x = 9.6, its copper at 9.6 + 0.1 = 9.7, 0.3 mm from the
    # edge x = 10: over an inner rule of 0.4, within an outer rule of 0.25 (used when no inner key).
    d = _four_layers(inner_rule)
    problems = [p for p in check_copper(d).problems if p.kind == "edge"]
    if not caught:
        assert not problems
        return
    (p,) = problems
    assert (p.nets, p.layer) == (("B",), "inner1")
    # the position is the middle of the shortest line from the centre line's end (9.6) to the edge (10)
    assert p.x == pytest.approx(9.8) and p.y == pytest.approx(8)


def test_inner_rule_does_not_move_the_outer_layers():
    # the top track of A ends 0.3 mm from the edge too (copper to x = 9.7): fine under the outer 0.25 mm
    d = _four_layers(0.4)
    d["tracks"] = [t for t in d["tracks"] if t["layer"] != "inner1"]
    d["tracks"][0]["points"] = [[2, 2], [9.6, 2], [8, 2]]
    assert check_copper(d).clean


def test_through_hole_pad_keeps_the_larger_rule_of_its_layers():
    # a through-hole pad of B whose copper edge is 0.3 mm from x = 10 (centre 9.4, half side 0.3):
    # within the outer 0.25 but over the inner 0.4, so it is caught on its inner layers
    d = _four_layers(0.4)
    d["tracks"] = d["tracks"][:2]
    d["pads"][3]["polygon"] = _sq(9.4, 8)
    d["tracks"][1]["points"] = [[2, 8], [9.4, 8]]
    (p,) = [p for p in check_copper(d).problems if p.kind == "edge"]
    assert p.nets == ("B",) and p.x == pytest.approx(9.85)
