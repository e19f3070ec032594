"""Tests of the smallest-board search (pipeline.route.smallest) and its candidate boards (pipeline.route.shapes)."""

from __future__ import annotations

import math
from types import SimpleNamespace

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from shapely import affinity
from shapely.geometry import LineString, box

from pipeline.model import HeightZone, Region
from pipeline.route import smallest
from pipeline.route.shapes import CUT, INSIDE, Shape, board_at, erode_box


def _region(geom) -> Region:
    return Region(geom, (HeightZone(geom, 4.0),), 0.8)


class _Oracle(smallest._Search):
    """The search with a closed-form test in place of placing and routing: ``ok(board)``; every route
    attempt counted (and charged ``cost_s`` seconds of routing) as the real screen counts it."""

    def __init__(self, geom, floor, ok, cost_s=0.0):
        self.region, self.floor, self.ok = _region(geom), floor, ok
        self.progress, self.tries, self.counts = None, 0, {"route attempts": 0}
        self.rules, self.routing_s, self.cost_s = SimpleNamespace(time_budget_s=180.0), 0.0, cost_s
        self.slowest_ok_s = 0.0

    def places(self, shape, area):
        self.tries += 1
        got = board_at(self.region.board_region, shape, area) if area >= self.floor else None
        return (got, None) if got is not None and self.ok(got[0]) else None

    def demand(self, shape, area):
        got = board_at(self.region.board_region, shape, area) if area >= self.floor else None
        return (0.0, got[0].wkt) if got is not None else (math.inf, None)

    def routes(self, shape, area):
        self.counts["route attempts"] += 1
        self.routing_s += self.cost_s
        return self.answer(shape, area)

    def answer(self, shape, area):
        placed = self.places(shape, area)
        return None if placed is None else (None, None, placed[0][0], placed[0][1])


# ---------------------------------------------------------------- the erosion (closed forms)
def test_erosion_of_a_rectangle_by_a_box_is_the_rectangle_shrunk_by_half_the_box():
    # Minkowski difference of axis-aligned boxes: [a, b] (-) [-w/2, w/2] = [a + w/2, b - w/2] (closed form)
    got = erode_box(box(0, 0, 10, 6), 4.0, 2.0)
    assert got.symmetric_difference(box(2, 1, 8, 5)).area < 1e-9


def test_erosion_grows_a_hole_by_half_the_box():
    # a 2 x 2 box centred within 1 of a hole's edge overlaps the hole: the hole grows by 1 each way (closed form)
    region = box(0, 0, 10, 10).difference(box(4, 4, 6, 6))
    got = erode_box(region, 2.0, 2.0)
    assert got.symmetric_difference(box(1, 1, 9, 9).difference(box(3, 3, 7, 7))).area < 1e-9
    assert got.area == pytest.approx(64 - 16)


def test_no_centre_when_the_box_is_wider_than_the_region():
    assert erode_box(box(0, 0, 10, 6), 4.0, 7.0).is_empty


# ---------------------------------------------------------------- candidate boards
@settings(max_examples=60, deadline=None)
@given(angle=st.sampled_from([0.0, 15.0, 30.0, 45.0, 60.0, 75.0, 90.0, 135.0]), aspect=st.floats(1.0, 6.0),
       share=st.floats(0.05, 1.0))
def test_every_candidate_board_lies_inside_the_region_and_holds_the_area(angle, aspect, share):
    region = box(0, 0, 20, 20).difference(box(10, 10, 20, 20)).union(box(2, 20, 6, 24))  # an L with a tab
    got = board_at(region, Shape(angle, aspect), share * region.area)
    assert got is not None
    board, mode = got
    assert region.buffer(1e-7).contains(board)                      # shapely containment
    assert board.area >= share * region.area * (1 - 1e-6)           # the cut is grown until it holds the area
    if mode == INSIDE:  # a whole rectangle: area and sides as asked (closed form w = sqrt(A a), h = sqrt(A / a))
        assert board.area == pytest.approx(share * region.area, rel=1e-6)
        rect = affinity.rotate(board, -angle, origin=board.centroid)
        minx, miny, maxx, maxy = rect.bounds
        assert (maxx - minx) == pytest.approx(math.sqrt(board.area * aspect), rel=1e-6)


def test_no_board_larger_than_the_region():
    assert board_at(box(0, 0, 10, 10), Shape(0.0, 1.0), 100.5) is None


# ---------------------------------------------------------------- the search on closed-form cases
def test_the_search_finds_the_rotation_of_a_long_thin_region():
    # a 40 x 4 strip turned by 30 deg; a board works when it holds the strip's 30 mm centre segment.
    # The least rectangle holding a segment of length L along its long side, aspect a, has area L^2 / a
    # (closed form); at 0 deg the segment needs 26 x 15 mm, more than the strip gives.
    strip = affinity.rotate(box(0, 0, 40, 4), 30.0, origin=(0, 0))
    c = strip.centroid
    seg = affinity.rotate(LineString([(c.x - 15, c.y), (c.x + 15, c.y)]), 30.0, origin=c)
    s = _Oracle(strip, 40.0, lambda b: b.buffer(1e-6).contains(seg))
    shape, area, (_, _, board, mode), _failed = smallest.search(s)
    assert abs((shape.angle_deg - 30.0 + 90) % 180 - 90) <= smallest.REFINE_DEG[0]
    assert board.buffer(1e-6).contains(seg) and strip.buffer(1e-7).contains(board)
    own = 10.0  # the strip's own aspect at 30 deg: 40 / 4
    assert board.area <= 1.1 * 30.0 ** 2 / own  # at most the bisections' resolution above the closed form
    assert board.area >= 30.0 ** 2 / (own * smallest.REFINE_ASPECT[0]) * (1 - 1e-6)


def test_the_cut_beats_every_inscribed_rectangle_in_a_notched_region():
    # an L: 20 x 20 less a 10 x 10 corner notch, 300 mm2; its largest axis-aligned inscribed rectangle is
    # 20 x 10 = 200 mm2 (closed form). A board works when its area is at least 240 mm2: no rectangle inside does.
    ell = box(0, 0, 20, 20).difference(box(10, 10, 20, 20))
    s = _Oracle(ell, 240.0, lambda b: True)
    shape, area, (_, _, board, mode), _failed = smallest.search(s)
    assert mode == CUT and ell.buffer(1e-7).contains(board)
    assert 240.0 * (1 - 1e-6) <= board.area <= 240.0 * 1.1
    for sh in smallest.shapes_to_try(ell):  # no rectangle of any shape tried holds 240 mm2 inside the L
        w, h = sh.sides(240.0)
        assert erode_box(affinity.rotate(ell, -sh.angle_deg, origin=ell.centroid), w, h).is_empty


def test_the_search_is_deterministic():
    ell = box(0, 0, 20, 20).difference(box(10, 10, 20, 20))
    runs = [smallest.search(_Oracle(ell, 150.0, lambda b: b.area >= 150.0)) for _ in range(2)]
    assert runs[0][0] == runs[1][0] and runs[0][2][2].equals(runs[1][2][2])


def test_nothing_found_when_nothing_works():
    assert smallest.search(_Oracle(box(0, 0, 10, 10), 50.0, lambda b: False)) is None


class _Routes(_Oracle):
    """Places from ``floor`` up; routes only from ``need`` mm2 up (a closed-form stand-in for the router)."""

    def __init__(self, geom, floor, need):
        super().__init__(geom, floor, lambda b: True)
        self.need = need

    def answer(self, shape, area):
        return super().answer(shape, area) if area >= self.need else None


@pytest.mark.parametrize("need", [130.0, 151.0, 177.0])
def test_the_descent_brings_the_area_within_tight_of_the_least_that_routes(need):
    # a 20 x 20 square, courtyards 100 mm2: every board from `need` mm2 up routes, none below (closed form),
    # so the answer lies in [need, need x (1 + TIGHT)]
    s = _Routes(box(0, 0, 20, 20), 100.0, need)
    shape, area, (_, _, board, mode), failed = smallest.search(s)
    assert need * (1 - 1e-9) <= board.area <= need * (1 + smallest.TIGHT)
    assert failed < need and failed * (1 + smallest.TIGHT) >= area * (1 - 1e-9)


class _Island(_Routes):
    """Routes from ``need`` mm2 up and on the island ``[lo, hi]`` below it (routing not monotone in area)."""

    def __init__(self, geom, floor, need, lo, hi):
        super().__init__(geom, floor, need)
        self.lo, self.hi, self.calls = lo, hi, []

    def answer(self, shape, area):
        self.calls.append(area)
        if self.lo <= area <= self.hi:
            return _Oracle.answer(self, shape, area)
        return super().answer(shape, area)


def test_the_ladder_finds_a_routed_island_below_the_bisection():
    # a 20 x 20 square, courtyards 100 mm2: boards route from 200 mm2 up and also on [185, 190] mm2;
    # the bisection stops near 200 (it never looks under a failure), the ladder from 10 % below finds
    # the island (its rungs 1.5 % apart are finer than the island's 2.7 %)
    s = _Island(box(0, 0, 20, 20), 100.0, 200.0, 185.0, 190.0)
    shape, area, (_, _, board, mode), failed = smallest.search(s)
    assert 185.0 * (1 - 1e-9) <= board.area <= 190.0 * (1 + 1e-9)
    assert failed < 185.0 and failed * (1 + smallest.LADDER) >= area * (1 - 1e-9)  # the rung just below failed


def test_the_ladder_is_bounded():
    # nothing routes below 200 mm2: the ladder's attempts are at most its stated cap and none below the
    # start 10 % under the answer
    s = _Island(box(0, 0, 20, 20), 100.0, 200.0, 0.0, -1.0)
    shape, area, found, failed = smallest.search(s)
    before = len(s.calls)
    s2 = _Island(box(0, 0, 20, 20), 100.0, 200.0, 0.0, -1.0)
    s2.calls = []
    rungs = math.ceil(math.log((1 - smallest.TIGHT) / (1 - smallest.LADDER_SPAN)) / math.log(1 + smallest.LADDER))
    best = (shape, area, found, failed)
    smallest._ladder(s2, [(100.0, shape), (100.0, Shape(90.0, 2.0))], best)
    assert 0 < len(s2.calls) <= smallest.LADDER_SHAPES * rungs
    assert min(s2.calls) >= area * (1 - smallest.LADDER_SPAN) * (1 - 1e-9) and max(s2.calls) < area
    assert before > len(s2.calls)


# ---------------------------------------------------------------- the search's bounds
@pytest.mark.parametrize("attempts", [1, 4, 9])
def test_the_search_makes_at_most_route_attempts(monkeypatch, attempts):
    # a 20 x 20 square, courtyards 100 mm2, boards route from 151 mm2 up: the search left alone makes more
    # attempts than these caps (counted below), and with a cap it stops at exactly the cap
    free = _Routes(box(0, 0, 20, 20), 100.0, 151.0)
    assert smallest.search(free) is not None and free.counts["route attempts"] > 9
    monkeypatch.setattr(smallest, "ROUTE_ATTEMPTS", attempts)
    s = _Routes(box(0, 0, 20, 20), 100.0, 151.0)
    best = smallest.search(s)
    assert s.counts["route attempts"] == attempts
    assert best is not None and best[2][2].area >= 151.0 * (1 - 1e-9)   # the whole region routed first


@pytest.mark.parametrize("cost_s", [50.0, 100.0, 300.0])
def test_the_search_starts_no_attempt_past_its_routing_time(cost_s):
    # each attempt charged cost_s seconds: attempts start while the sum is under SEARCH_SHARE x 180 s, so
    # the search makes ceil(SEARCH_SHARE x 180 / cost_s) of them (closed form), when it wants more
    s = _Routes(box(0, 0, 20, 20), 100.0, 151.0)
    s.cost_s = cost_s
    smallest.search(s)
    assert s.counts["route attempts"] == math.ceil(smallest.SEARCH_SHARE * 180.0 / cost_s)


def test_the_descent_starts_from_the_whole_region_and_fails_once_above_the_bracket():
    # boards route from 151 mm2 up in a 20 x 20 square (400 mm2): the descent tries 400, 360, 324, ...
    # (DESCENT steps) down to the first failure, then bisects; every step above the bracket routed
    s = _Island(box(0, 0, 20, 20), 100.0, 151.0, 0.0, -1.0)
    smallest.search(s)
    steps = math.floor(math.log(151.0 / 400.0) / math.log(smallest.DESCENT)) + 1   # 400 x DESCENT^k >= 151
    first = s.calls[:steps + 1]
    assert first == pytest.approx([400.0 * smallest.DESCENT ** k for k in range(steps + 1)])
    assert all(a >= 151.0 for a in first[:-1]) and first[-1] < 151.0


def test_later_shapes_are_routed_in_order_of_their_demand():
    # every shape places from 100 mm2; a stand-in demand rises with the aspect ratio: after the first shape,
    # the later shapes are tried least demand first (so least aspect first), and at most SHAPES_ROUTED of them
    class Ranked(_Routes):
        def demand(self, shape, area):
            p90, key = super().demand(shape, area)
            return 0.1 * shape.aspect, key

    s = Ranked(box(0, 0, 20, 20), 100.0, 151.0)
    seen = []
    real = s.answer
    s.answer = lambda shape, area: seen.append(shape) or real(shape, area)
    first_shape, *_ = smallest.search(s) or (None,)
    later = list(dict.fromkeys(sh for sh in seen if sh != seen[0]))[:smallest.SHAPES_ROUTED]
    aspects = [sh.aspect for sh in later]
    assert aspects == sorted(aspects)


@pytest.mark.parametrize("slowest, cap", [(0.0, 90.0), (1.0, 40.0), (30.0, 60.0), (44.0, 88.0), (1000.0, 90.0)])
def test_the_attempt_cap_follows_the_slowest_routed_attempt(monkeypatch, slowest, cap):
    # the first attempt may take ATTEMPT_SHARE of the budget; later ones CAP_FACTOR x the slowest that routed,
    # at least CAP_MIN_S, at most that share: worked by hand for a 180 s budget, share 0.5, factor 2, 40 s
    for name, value in [("ATTEMPT_SHARE", 0.5), ("CAP_FACTOR", 2.0), ("CAP_MIN_S", 40.0)]:
        monkeypatch.setattr(smallest, name, value)
    s = _Oracle(box(0, 0, 10, 10), 10.0, lambda b: True)
    s.slowest_ok_s = slowest
    assert s.attempt_cap_s() == pytest.approx(cap)
