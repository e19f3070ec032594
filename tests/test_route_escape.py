"""Pin escape (pipeline/route/escape.py): pads the routing grid cannot reach get an any-angle track out."""

import pytest
from shapely.geometry import box
from shapely.ops import unary_union

from pipeline.copper import check_copper
from pipeline.export.routes import routes_dict
from pipeline.route.board import RouteBoard, RoutePad
from pipeline.route.escape import island
from pipeline.route.grid import build_grid
from pipeline.route.router import route_board
from pipeline.route.rules import CopperRules

RULES = CopperRules(layers=1, time_budget_s=60)   # w = s = 0.2 mm: the routing pitch is 0.4 mm


def _walled(gap: float) -> RouteBoard:
    """Pad A1 (0.9 mm square at the origin) walled in by unconnected pads 0.45 mm away (a track needs
    w + 2 s = 0.6 mm), but for a horizontal slot of width ``gap`` centred on y = 0 to its right.

    The grid's rows lie at y = -3 + 0.4 j (..., -0.2, 0.2, ...): a track centre in the slot must keep
    w/2 + s = 0.3 mm from both slot sides, |y| <= gap/2 - 0.3, which no grid row meets for a slot
    narrower than 1.0 mm (0.6 + 0.4: a band as wide as the pitch always holds a row).
    """
    wall = [box(-2.5, -2.5, -0.9, 2.5), box(-2.5, 0.9, 1.6, 2.5), box(-2.5, -2.5, 1.6, -0.9),
            box(0.9, gap / 2, 1.6, 0.9), box(0.9, -0.9, 1.6, -gap / 2)]
    pads = [RoutePad("A", "1", "A", ("top",), box(-0.45, -0.45, 0.45, 0.45)),
            RoutePad("A", "2", "A", ("top",), box(4.55, -0.45, 5.45, 0.45))]
    pads.append(RoutePad("W", "1", None, ("top",), unary_union(wall)))   # one unconnected copper wall
    return RouteBoard(box(-3, -3, 7, 3), (), tuple(pads))


def test_the_walled_pad_is_on_a_small_grid_island():
    board = _walled(0.62)
    g = build_grid(board, RULES, 0.2, ("top",), ("A",))
    cut = island(g, 0, [n for n in range(g.nx * g.ny) if g.node[n] == 0 and g.xy(n)[0] < 1])
    assert cut is not None and len(cut) < 20           # the grid alone cannot leave it


@pytest.mark.parametrize("gap, routed", [(0.62, True), (0.70, True), (0.58, False)])
def test_a_walled_pad_escapes_through_a_slot_exactly_when_a_track_fits(gap, routed):
    # Closed form: a track of width w keeps clearance s from both sides of a slot of width G exactly
    # when G >= w + 2 s (= 0.6 mm here); the slot is off the 0.4 mm grid, so only an escape gets out.
    board = _walled(gap)
    r = route_board(board, RULES)
    assert (r.status == "routed") is routed
    check = check_copper(routes_dict(board, RULES, r))
    if routed:
        assert check.clean                              # the independent checker agrees
    else:
        assert r.open == ("A",) and not check.except_open(r.open)


def test_fine_pitch_row_all_pins_escape():
    # A row of n = 8 pads at 0.65 mm pitch (0.35 x 1.5 mm, as a TSSOP's), each to its own pad 6 mm
    # away (1 mm apart): the row's pads are 0.3 mm apart, so no track passes between them (0.3 < w + 2 s), and every pin
    # leaves along its own column: all n nets route (n tracks at 0.65 mm pitch need n w + (n - 1) s
    # = 3.0 mm <= the row's 4.9 mm, the channel-capacity closed form).
    n = 8
    pads = []
    for k in range(n):
        x = 1.13 + 0.65 * k                        # off the grid: columns at 0.4 i
        pads.append(RoutePad("U", str(k + 1), f"N{k}", ("top",), box(x - 0.175, 1.0, x + 0.175, 2.5)))
        pads.append(RoutePad(f"R{k}", "1", f"N{k}", ("top",), box(1.0 * k + 0.8, 7.7, 1.0 * k + 1.2, 8.1)))
    board = RouteBoard(box(0, 0, 9.5, 9), (), tuple(pads))
    r = route_board(board, RULES)
    assert r.status == "routed" and len({t.net for t in r.tracks}) == n
    assert check_copper(routes_dict(board, RULES, r)).clean


@pytest.mark.parametrize("line", [[(1.0, 0.0), (2.3, 0.35)], [(-0.2, -0.1), (0.3, 0.6), (2.0, 0.6)]])
def test_escape_marked_in_place_equals_a_grid_built_with_it(line):
    # add_copper (in place, near the new copper only) against build_grid given the same copper as
    # `extra`: every node, edge and via-site owner alike.
    from shapely.geometry import LineString

    from pipeline.route.grid import add_copper

    board = _walled(0.7)
    rules = CopperRules(layers=2)
    geo = LineString(line).buffer(0.1)
    g = build_grid(board, rules, 0.2, ("top", "bottom"), ("A",))
    add_copper(g, rules, 0.2, 0, "top", geo)
    ref = build_grid(board, rules, 0.2, ("top", "bottom"), ("A",), {"A": [("top", geo)]})
    assert (g.node, g.ex, g.ey, g.via) == (ref.node, ref.ex, ref.ey, ref.via)


@pytest.mark.parametrize("gap, windows", [(0.58, (0.8,)), (0.62, (0.8, 2.0))])
def test_a_walled_in_pad_is_not_searched_again_in_the_larger_window(monkeypatch, gap, windows):
    # Cost guard (calls, not seconds): with a 0.58 mm slot (< w + 2 s = 0.6 mm) the pad's clear lattice
    # points are enclosed in the first 0.8 mm window, so the 2 mm window is not searched (it would find
    # the same enclosure); with 0.62 mm the way out (past x = 1.6 + 0.3) lies beyond the first window.
    import pipeline.route.escape as esc

    seen = []
    real = esc.escape_within

    def spy(reach, *a):
        seen.append(reach)
        return real(reach, *a)

    monkeypatch.setattr(esc, "escape_within", spy)
    route_board(_walled(gap), RULES)
    assert (esc.FIRST_REACH, esc.ESCAPE_REACH) == (0.8, 2.0) and tuple(seen) == windows
