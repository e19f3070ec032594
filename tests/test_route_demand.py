"""RUDY routing demand against its definition (Spindler and Johannes, DATE 2007), worked by hand."""

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from shapely.geometry import box

from pipeline.route.board import RouteBoard, RoutePad
from pipeline.route.demand import routing_demand, rudy_map
from pipeline.route.rules import CopperRules


def test_one_box_spreads_half_perimeter_over_its_area():
    # Definition: density (w + h) / (w h) inside the box. w = 4, h = 2 -> 6 / 8 = 0.75 per mm^2.
    m = rudy_map([(0, 0, 4, 2)], 0, 0, 6, 3, 1.0, 0.1)
    assert np.allclose(m[:2, :4], 0.75)
    assert np.allclose(m[2, :], 0) and np.allclose(m[:, 4:], 0)


def test_partly_covered_cells_get_their_share():
    # Box 2 x 1 from x = 0.5: density 3 / 2 = 1.5; cells [0,1] and [2,3] are half covered -> 0.75.
    m = rudy_map([(0.5, 0, 2.5, 1)], 0, 0, 3, 1, 1.0, 0.1)
    assert m[0].tolist() == pytest.approx([0.75, 1.5, 0.75])


def test_boxes_add_and_thin_boxes_are_widened_to_the_pitch():
    # (0,0)-(2,0) is widened to 2 x 0.5 about y = 0: density 2.5 / 1.0 = 2.5 on y in [-0.25, 0.25];
    # a cell of 1 x 1 from y = -0.5 holds half of it -> 1.25; plus a 1 x 1 box over cell 0: 2 / 1 = 2.
    m = rudy_map([(0, 0, 2, 0), (0, -0.5, 1, 0.5)], 0, -0.5, 2, 1, 1.0, 0.5)
    assert m[0].tolist() == pytest.approx([1.25 + 2.0, 1.25])


@settings(max_examples=60, deadline=None)
@given(st.lists(st.tuples(st.floats(0, 8), st.floats(0, 8), st.floats(0.2, 4), st.floats(0.2, 4)),
                min_size=1, max_size=5))
def test_total_wire_is_the_sum_of_half_perimeters(rects):
    # Consequence of the definition: integrating the density over the box gives w + h exactly.
    boxes = [(x, y, x + w, y + h) for x, y, w, h in rects]
    m = rudy_map(boxes, 0, 0, 13, 13, 1.0, 0.1)
    assert m.sum() * 1.0 == pytest.approx(sum(w + h for *_, w, h in rects), rel=1e-9)


def _pad(ref, pin, net, x, y, size=0.2, layers=("top",)):
    return RoutePad(ref, pin, net, layers, box(x - size / 2, y - size / 2, x + size / 2, y + size / 2))


def test_capacity_is_tracks_per_pitch_less_what_pads_cover():
    # 2 layers at pitch 0.4: 2 / 0.4 = 5 mm of track per mm^2. A 1.6 x 1.6 mm surface pad grown by the
    # clearance 0.2 (round corners) covers the cell (2..4, 2..4) on top but for four corners of
    # 0.2^2 (1 - pi / 4): share 1 - 0.04 (4 - pi) / 4 = 0.991416; capacity (2 - 0.991416) / 0.4.
    rules = CopperRules()
    board = RouteBoard(box(0, 0, 8, 8), (), (
        RoutePad("U1", "1", "A", ("top",), box(2.2, 2.2, 3.8, 3.8)),
        _pad("R1", "1", "A", 7, 7), _pad("R1", "2", "B", 1, 7), _pad("R2", "1", "B", 1, 1)))
    d = routing_demand(board, rules, cell_mm=2.0)
    assert d.capacity[0, 2] == pytest.approx(5.0)
    assert d.capacity[1, 1] == pytest.approx((2 - 0.991416) / 0.4, rel=1e-3)  # buffer arcs are chords
    # net A: pads at (3, 3) and (7, 7): 4 x 4 box, density 8 / 16 = 0.5; cell (4..6, 4..6) is inside
    assert d.demand[2, 2] == pytest.approx(0.5)
    # net B: (1, 1)-(1, 7) widened to 0.4 x 6: density 6.4 / 2.4; the cell (0..2, 2..4) holds
    # 0.4 x 2 of it, a fifth of the cell -> 0.5333 (no pad there: capacity 5)
    assert d.demand[1, 0] == pytest.approx(6.4 / 2.4 * 0.2)
    assert d.ratio[1, 0] == pytest.approx(d.demand[1, 0] / 5.0)
    assert d.peak == pytest.approx(np.nanmax(d.ratio))
    assert d.p90 <= d.peak


def test_a_net_on_a_copper_area_has_no_track_demand():
    rules = CopperRules(areas=(("GND", "bottom"),))
    board = RouteBoard(box(0, 0, 4, 4), (), (_pad("C1", "1", "GND", 1, 1), _pad("C2", "1", "GND", 3, 3)))
    d = routing_demand(board, rules, cell_mm=1.0)
    assert d.peak == 0.0
    assert d.capacity[0, 3] == pytest.approx(1 / 0.4)  # one routing layer left
