"""route_fit: the spreading loop (first placement that routes wins; one time budget for all attempts)
and the pin-side inflation it tries first (pipeline/route/inflate.py).

The placer and the router are replaced by fakes in the loop's tests: what is tested is the loop's own
rule (its docstring), so the fakes only record what the loop asks of them.
"""

from dataclasses import dataclass

import pytest

import pipeline.model
import pipeline.place
import pipeline.route as route
from pipeline.library import load_library
from pipeline.model import PlaceItem
from pipeline.route import FIRST_SHARE, OPEN, PIN_STEPS, ROUTED, SPREAD_STEPS, CopperRules, RouteOutcome, RouteVerdict
from pipeline.route.inflate import inflate, pin_axes

#: every attempt of the loop: the compact fit, the pin-side steps, the uniform steps after 0
ATTEMPTS = 1 + len(PIN_STEPS) + len(SPREAD_STEPS) - 1


@dataclass(frozen=True)
class _Fit:
    placements: tuple = ()
    board_outline: object = None
    wirelength_mm: float = 0.0
    fits: bool = True


@dataclass(frozen=True)
class _Item:
    ref: str = "R1"
    length_mm: float = 1.0
    width_mm: float = 0.5
    package: str = "0603"     # two pads along x: pin-side inflation grows the length only
    pin_count: int = 2


def _run(monkeypatch, budget_s, open_counts, clock_step=0.0, places=lambda items: True, place_step=0.0,
         arrange=None, routed=None):
    """route_fit with a fake router returning ``open_counts[i]`` open nets on attempt i.

    ``places(grown items)`` says whether the fake placer places them; each placement "takes"
    ``place_step`` seconds of the fake clock. ``routed`` (a list) collects the placements each routing
    was given; ``arrange`` is passed on to route_fit.
    """
    calls, now = [], [0.0]

    def fake_place(items, *a, **k):
        now[0] += place_step
        return _Fit(fits=places(items))

    def fake_route(outline, placements, design, library, rules, *, time_budget_s=None, **kw):
        n = open_counts[len(calls)]
        calls.append(time_budget_s)
        if routed is not None:
            routed.append(placements)
        now[0] += clock_step                       # each routing "takes" clock_step seconds
        nets = tuple(f"N{i}" for i in range(n))
        return RouteOutcome(RouteVerdict(ROUTED if n == 0 else OPEN, nets), None, None, {})

    monkeypatch.setattr(route, "route_placed", fake_route)
    monkeypatch.setattr(pipeline.place, "place_and_fit", fake_place)
    monkeypatch.setattr(route, "_head_rings", lambda region: ())
    monkeypatch.setattr("time.monotonic", lambda: now[0])
    rules = CopperRules(time_budget_s=budget_s)
    _, out = route.route_fit(_Fit(), (_Item(),), None, type("O", (), {"density": "nominal"})(), None,
                             load_library(), rules, arrange=arrange)
    return calls, out


def test_first_placement_that_routes_wins(monkeypatch):
    calls, out = _run(monkeypatch, 60.0, [3, 2, 0, 0, 0, 0])
    assert len(calls) == 3 and out.verdict.status == ROUTED
    # the third attempt is the second uniform step: every courtyard grew by that many pitches (0.4 mm each)
    assert out.verdict.spread_mm == pytest.approx(SPREAD_STEPS[2] * CopperRules().pitch_mm)


def test_pin_side_steps_follow_the_uniform_ones(monkeypatch):
    counts = [9] * len(SPREAD_STEPS) + [0] + [9] * (len(PIN_STEPS) - 1)
    calls, out = _run(monkeypatch, 60.0, counts)
    assert len(calls) == len(SPREAD_STEPS) + 1 and out.verdict.status == ROUTED
    # the first pin-side step: the 0603 grew in length only (its pads lie along x), by one step of pitches
    assert out.verdict.spread_mm == pytest.approx(PIN_STEPS[0] * CopperRules().pitch_mm)


@pytest.mark.parametrize("arrange, given", [
    (None, ()),                                                          # the default run: routed as placed
    (lambda f: type(f)(placements=f.placements + ("turned",)), ("turned",)),  # every attempt arranged once
])
def test_every_attempt_is_arranged_before_it_is_routed(monkeypatch, arrange, given):
    # the smallest-board search passes its half turns as ``arrange``: the compact fit and each spread
    # placement alike are routed as arranged (route_fit's docstring)
    routed = []
    calls, out = _run(monkeypatch, 60.0, [3, 2, 1, 0], arrange=arrange, routed=routed)
    assert len(calls) == 4 and out.verdict.status == ROUTED
    assert routed == [given] * 4


def test_fewest_open_nets_kept_when_nothing_routes(monkeypatch):
    counts = [5, 2, 4, 3, 6, 7] + [9] * (ATTEMPTS - 6)
    calls, out = _run(monkeypatch, 60.0, counts)
    assert len(calls) == ATTEMPTS and out.verdict.open_nets == ("N0", "N1")


def test_a_sequence_stops_where_it_no_longer_places(monkeypatch):
    # the fake placer refuses every uniform growth (width grown): the loop goes on to the pin-side steps
    # (which grow a 0603 in length only) instead of giving up
    calls, out = _run(monkeypatch, 60.0, [4] * ATTEMPTS, places=lambda items: items[0].width_mm == 0.5)
    assert len(calls) == 1 + len(PIN_STEPS)
    assert out.verdict.spread_mm == 0.0     # the compact fit kept (ties keep the first)


@pytest.mark.parametrize("budget, step, attempts", [
    (0.0, 1.0, 1),     # no time at all: the compact placement is still routed once, with a zero budget
    (25.0, 10.0, 3),   # 10 s per routing: attempts start at 0, 10 and 20 s; the fourth would start at 30
    (1000.0, 1.0, ATTEMPTS),  # room for every spread step
])
def test_one_budget_covers_all_attempts(monkeypatch, budget, step, attempts):
    calls, _ = _run(monkeypatch, budget, [1] * ATTEMPTS, clock_step=step)
    assert len(calls) == attempts
    # the compact fit's routing gets FIRST_SHARE of the budget, each later one what the earlier ones left:
    # budget - elapsed (closed form of the fake clock)
    assert calls == pytest.approx([budget * FIRST_SHARE] + [budget - i * step for i in range(1, attempts)])


def test_a_re_placement_that_spends_the_budget_is_not_routed(monkeypatch):
    # budget 100 s, the compact routing takes 10 s, each re-placement 50 s: the first spread placement
    # ends at 60 s and is routed with 40 s; the second ends at 120 s, past the budget, and is not routed
    calls, _ = _run(monkeypatch, 100.0, [1] * ATTEMPTS, clock_step=10.0, place_step=50.0)
    assert calls == pytest.approx([100.0 * FIRST_SHARE, 40.0])


def _item(ref, package, length, width, pins):
    return PlaceItem(ref, length, width, 1.0, (), pin_count=pins, package=package)


# the pin axis of each package from its pad rows (footprints/packages.csv, lands from IPC-7351B): a 0603's two
# terminals lie along its length; a SOIC-8's and a SOT-23-5's two rows lie at +-y (JEDEC MS-012, TO-236 from
# memory), so their tracks leave across the width; a QFN has pins on four sides; a single pad needs no room
@pytest.mark.parametrize("package, axes", [
    ("0603", (1, 0)), ("SOIC-8", (0, 1)), ("SOT-23-5", (0, 1)), ("QFN-16-3x3", (1, 1)), ("pad-1mm", (0, 0)),
])
def test_pin_axis_follows_the_pad_rows(package, axes):
    assert pin_axes((_item("X1", package, 3.0, 3.0, 2),), load_library()) == (axes,)


def test_a_two_pin_part_grows_less_than_an_eight_pin_part_and_stays_centred():
    from shapely.geometry import box

    items = (_item("R1", "0603", 2.95, 1.45, 2), _item("U1", "SOIC-8", 5.4, 7.45, 8), _item("TP1", "pad-1mm", 1.5, 1.5, 1))
    pitch = CopperRules().pitch_mm
    grown = inflate(items, pin_axes(items, load_library()), 2, pitch)
    added = [(g.length_mm - it.length_mm, g.width_mm - it.width_mm) for g, it in zip(grown, items)]
    # 2 pitches of 0.4 mm across each part's pin rows, nothing along them (hand-worked)
    assert added == [pytest.approx((0.8, 0.0)), pytest.approx((0.0, 0.8)), (0.0, 0.0)]
    # the room grown around the passive is at most that around the IC: area added 0.8 x 1.45 < 0.8 x 5.4
    assert (grown[0].length_mm * grown[0].width_mm - 2.95 * 1.45) < (grown[1].length_mm * grown[1].width_mm - 5.4 * 7.45)
    # a grown courtyard placed anywhere, at any quarter turn, holds the true one at its centre
    for rot in (0, 90):
        placed = tuple(pipeline.model.Placement(g.ref, 10.0, 5.0, rot, "top", box(0, 0, 1, 1)) for g in grown)
        for g, p in zip(grown, route._true_courtyards(placed, items)):
            a, b = (g.length_mm, g.width_mm) if rot == 0 else (g.width_mm, g.length_mm)
            outer = box(10.0 - a / 2, 5.0 - b / 2, 10.0 + a / 2, 5.0 + b / 2)
            assert outer.contains(p.courtyard) and p.courtyard.centroid.equals_exact(outer.centroid, 1e-9)


def test_pads_and_demand_count_against_the_routing_budget(monkeypatch):
    # fake clock: building the pads takes 7 s and the demand 5 s of a 30 s budget, so the router gets 18 s
    import pipeline.route.demand as demand
    import pipeline.route.pads as pads
    import pipeline.route.router as router

    now, seen = [0.0], []

    def step(seconds, value):
        def f(*a, **k):
            now[0] += seconds
            return value
        return f

    class Stop(Exception):
        pass

    def fake_router(board, rules, *, time_budget_s=None, **kw):
        seen.append(time_budget_s)
        raise Stop

    monkeypatch.setattr("time.monotonic", lambda: now[0])
    monkeypatch.setattr(pads, "board_from_placement", step(7.0, "board"))
    monkeypatch.setattr(demand, "routing_demand", step(5.0, "demand"))
    monkeypatch.setattr(router, "route_board", fake_router)
    with pytest.raises(Stop):
        route.route_placed(None, (), None, None, CopperRules(time_budget_s=30.0))
    assert seen == [pytest.approx(18.0)]
