"""Outline mode "smallest": the board found places and routes (independent check clean); one step smaller does not."""

import json

from pipeline.copper import check_copper
from pipeline.route import smallest as smallest_mod
from pipeline.route.shapes import board_at
from test_contract import _resistors, invoke, make_project, rect_cavity


def _search_args(tmp_path, monkeypatch, resistors: int):
    """The arguments the run hands the search (``smallest_board`` stubbed), for ``resistors`` resistors."""
    seen = {}
    monkeypatch.setattr(smallest_mod, "smallest_board", lambda *a, **kw: seen.setdefault("args", a) and None)
    proj = make_project(tmp_path / "p", design=_resistors(resistors),
                        cavity=rect_cavity(tmp_path / "c.dxf", 20.0, 14.0), tables={"board": {"outline": "smallest"}})
    assert invoke("run", proj).exit_code == 0
    return seen["args"]


def test_smallest_board_routes_and_one_step_smaller_does_not(tmp_path, monkeypatch):
    seen = {}
    original = smallest_mod.smallest_board

    def spy(fit, items, region, options, design, library, rules, **kw):
        seen["args"] = (fit, items, region, options, design, library, rules)
        seen["found"] = original(fit, items, region, options, design, library, rules, **kw)
        return seen["found"]

    monkeypatch.setattr(smallest_mod, "smallest_board", spy)
    proj = make_project(tmp_path / "p", design=_resistors(4), cavity=rect_cavity(tmp_path / "c.dxf", 20.0, 14.0),
                        tables={"board": {"outline": "smallest"}})
    r = invoke("run", proj)
    assert r.exit_code == 0, r.output
    fit = json.loads((proj / "out" / "fit.json").read_text())
    small = fit["routing"]["smallest_board"]
    routes = json.loads((proj / "out" / "routes.json").read_text())
    assert routes["status"] == "routed" and check_copper(routes).clean       # the independent check
    assert small["ratio_to_courtyards"] >= 1.0                                # nothing under the courtyard sum
    assert small["ratio_to_courtyards"] * fit["courtyard_area_mm2"] < fit["region_area_mm2"]
    assert f"smallest board: {small['area_mm2']:.0f} mm2" in r.output and "rule of thumb" in r.output
    # the report's findings carry both ratios side by side
    note = (proj / "out" / "findings.json").read_text()
    assert "route.smallest" in note and f"{small['ratio_to_courtyards']:.2f} x the courtyard sum" in note
    assert f"rule of thumb {small['rule_of_thumb_ratio']:.2f} x" in note
    # the board written is the one found
    found = seen["found"]
    assert abs(found.board.area - small["area_mm2"]) < 1e-3
    # the last smaller area tried at the same shape: below the courtyard sum, or it does not place, or its
    # RUDY demand is past the screen, or it does not route
    from pipeline.place import place_and_fit
    from pipeline.route import ROUTED, route_fit
    from pipeline.route.demand import routing_demand
    from pipeline.route.pads import board_from_placement
    fit0, items, region, options, design, library, rules = seen["args"]
    assert small["shape"] == found.mode and small["rule_of_thumb_ratio"] > 1.0
    assert found.failed_area_mm2 < found.area_mm2
    if found.failed_area_mm2 >= fit0.courtyard_area_mm2:
        smaller, _ = board_at(region.board_region, found.shape, found.failed_area_mm2)
        assert smaller.area < found.board.area
        f = place_and_fit(items, region, options, user_board=smaller, improve=False)
        if f.fits:
            f = place_and_fit(items, region, options, user_board=smaller)
            if f.fits:
                s = smallest_mod._Search(fit0, items, region, options, design, library, rules, None)
                f = s.oriented(f)   # screen 3 judges the placement to be routed, turned as it is routed
                pads = board_from_placement(smaller, f.placements, design, library, rules.layer_names)
                if routing_demand(pads, rules).p90 <= smallest_mod.P90_MAX:
                    import dataclasses
                    share = dataclasses.replace(rules, time_budget_s=smallest_mod.ATTEMPT_SHARE * rules.time_budget_s)
                    _, out = route_fit(f, items, region, options, design, library, share, user_board=smaller,
                                       arrange=s.oriented)
                    assert out.verdict.status != ROUTED


def test_smallest_is_a_known_outline_mode(tmp_path):
    proj = make_project(tmp_path / "q", design=_resistors(2), cavity=rect_cavity(tmp_path / "c.dxf"),
                        tables={"board": {"outline": "tiniest"}})
    r = invoke("run", proj)
    assert r.exit_code == 2 and "board.outline" in r.output and "Traceback" not in r.output


def test_the_route_screen_routes_the_oriented_placement(tmp_path, monkeypatch):
    # screen 4 hands route_fit the placer's fit with its movable parts turned where that shortens their
    # nets (pipeline/place_orient.py), never a longer one; the rest of the fit is the placer's
    import pipeline.route as route_mod
    from pipeline.place import place_and_fit
    from pipeline.place_orient import orient_parts, pad_hpwl
    from pipeline.route.shapes import Shape

    fit, items, region, options, design, library, rules = _search_args(tmp_path, monkeypatch, 6)
    import pipeline.route.demand as demand_mod

    given, judged = [], []
    real = route_mod.route_fit
    monkeypatch.setattr(route_mod, "route_fit", lambda f, *a, **kw: given.append((f, a[5])) or real(f, *a, **kw))
    real_demand = demand_mod.routing_demand
    monkeypatch.setattr(demand_mod, "routing_demand", lambda b, *a, **kw: judged.append(b) or real_demand(b, *a, **kw))
    s = smallest_mod._Search(fit, items, region, options, design, library, rules, None)
    s.routes(Shape(0.0, 1.0), region.board_region.area)
    board = board_at(region.board_region, Shape(0.0, 1.0), region.board_region.area)[0]
    placed = place_and_fit(items, region, options, user_board=board, improve=True)
    ((f, used),) = given
    turned = orient_parts(placed.placements, design, library, level=options.density)
    assert pad_hpwl(turned, design, library) <= pad_hpwl(placed.placements, design, library) + 1e-9
    # the half turns, then shifts by whole routing pitches (open_gaps), which turn nothing
    assert [(p.ref, p.rotation_deg) for p in f.placements] == [(p.ref, p.rotation_deg) for p in turned]
    for a, b in zip(placed.placements, f.placements):
        for d in (b.x_mm - a.x_mm, b.y_mm - a.y_mm):
            assert abs(d / rules.pitch_mm - round(d / rules.pitch_mm)) < 1e-6
    # one candidate's routing spends at most ATTEMPT_SHARE of the rules' budget
    assert used.time_budget_s == smallest_mod.ATTEMPT_SHARE * rules.time_budget_s
    # screen 3 judged the very placement handed to the router (its pads where the routed fit puts them),
    # not the compact one of screen 2
    from pipeline.route.pads import board_from_placement
    pads = board_from_placement(board, f.placements, design, library, rules.layer_names).pads
    assert [(p.ref, p.pin, p.polygon.wkt) for p in judged[0].pads] == [(p.ref, p.pin, p.polygon.wkt) for p in pads]


def test_equal_boards_are_placed_and_routed_once(tmp_path, monkeypatch):
    # every shape's board at the region's own area is the region itself (pipeline/route/shapes.py), so two
    # shapes there are one candidate: one compact placement, one improved placement, one routing
    import pipeline.place as place_mod
    import pipeline.route as route_mod
    from pipeline.route.shapes import Shape

    fit, items, region, options, design, library, rules = _search_args(tmp_path, monkeypatch, 4)
    placed, routed = [], []
    real_place, real_route = place_mod.place_and_fit, route_mod.route_fit
    monkeypatch.setattr(place_mod, "place_and_fit",
                        lambda *a, **kw: placed.append(kw.get("improve")) or real_place(*a, **kw))
    monkeypatch.setattr(route_mod, "route_fit", lambda *a, **kw: routed.append(1) or real_route(*a, **kw))
    s = smallest_mod._Search(fit, items, region, options, design, library, rules, None)
    top = region.board_region.area
    first = s.routes(Shape(0.0, 1.0), top)
    again = s.routes(Shape(90.0, 2.0), top)
    assert first is not None and again is first
    assert placed == [False, True] and routed == [1]
    assert s.counts["route attempts"] == 1 and s.counts["same board"] == 1
    assert s.places(Shape(45.0, 3.0), top) is not None and placed == [False, True]   # screen 2 cached too
