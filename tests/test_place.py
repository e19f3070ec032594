"""Tests of pipeline.place: placement invariants checked independently with shapely.

The checks below rebuild every courtyard from the item's size, the reported
centre and rotation, and test it with shapely (a reference library) against
the region, the board outline, the height zones and the other courtyards;
they do not use the placer's own geometry or grid.
"""

from __future__ import annotations

import math
import re

import numpy as np
import pytest
import shapely
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from shapely.geometry import MultiPolygon, Polygon, box

from pipeline.errors import DesignError, ProjectError
from pipeline.model import BoardOptions, HeightZone, PlaceItem, Region
from pipeline.place import hpwl, place_and_fit

TOL = 1e-6  # mm: one nanometre of floating-point slack in every containment check


def _region(geom, zones=None, thickness=0.8):
    if zones is None:
        zones = ((geom, 4.0),)
    return Region(geom, tuple(HeightZone(g, h) for g, h in zones), thickness)


def _court(item: PlaceItem, p) -> Polygon:
    dx, dy = (item.length_mm, item.width_mm) if p.rotation_deg in (0, 180) else (item.width_mm, item.length_mm)
    return box(p.x_mm - dx / 2, p.y_mm - dy / 2, p.x_mm + dx / 2, p.y_mm + dy / 2)


def _named(fit) -> int:
    """How many unplaced parts blocked_by accounts for (named refs plus 'and N more')."""
    text = " ".join(fit.blocked_by)
    named = sum(1 for r in fit.unplaced if re.search(rf"(?<![\w.]){re.escape(r)}(?![\w])", text))
    more = sum(int(n) for n in re.findall(r"and (\d+) more", text))
    return named + more


def check_invariants(items, region, board, fit, user_board=None):
    """Every rule of the placement model, checked with shapely from scratch."""
    by_ref = {it.ref: it for it in items}
    refs = {it.ref for it in items}
    placed = [p.ref for p in fit.placements]
    assert len(placed) == len(set(placed))
    # every fitted part is placed or unplaced, never both, never lost
    assert set(placed) | set(fit.unplaced) == refs
    assert not set(placed) & set(fit.unplaced)
    assert fit.fits == (not fit.unplaced and not fit.blocked_by)
    # the placer's own exact self-check never had to reject a part (it would hide a defect)
    assert not [w for w in fit.warnings if w.check == "fit.self-check"]
    if fit.unplaced:
        assert not fit.fits and _named(fit) >= len(fit.unplaced)
    outline = fit.board_outline
    if user_board is not None:
        assert outline.equals(user_board)
    e = board.edge_clearance_mm
    courts = {}
    for p in fit.placements:
        it = by_ref[p.ref]
        assert p.rotation_deg in (0, 90, 180, 270)
        assert p.side in (("top",) if board.sides == 1 else ("top", "bottom"))
        c = _court(it, p)
        courts[p.ref] = c
        assert c.area == pytest.approx(it.length_mm * it.width_mm)
        # inside the usable region and the board outline, and at least the edge clearance from
        # the outline's and the region's edges (distance is exact in shapely)
        assert region.board_region.buffer(TOL, join_style="mitre").covers(c), p.ref
        assert outline.buffer(TOL, join_style="mitre").covers(c), p.ref
        assert shapely.distance(c, outline.boundary) >= e - TOL, p.ref
        assert shapely.distance(c, region.board_region.boundary) >= e - TOL, p.ref
    # no two courtyards on one side overlap (touching allowed): real overlap = area > 1e-9
    for side in ("top", "bottom"):
        cs = [(p.ref, courts[p.ref]) for p in fit.placements if p.side == side]
        geoms = [c for _, c in cs]
        if len(geoms) < 2:
            continue
        tree = shapely.STRtree(geoms)
        a, b = tree.query(geoms, predicate="intersects")
        for i, j in zip(a, b):
            if i < j:
                assert geoms[i].intersection(geoms[j]).area <= 1e-9, (cs[i][0], cs[j][0])
    # heights: the board rests on the tallest bottom-side part (gap g); top parts need h + g
    bottom = [by_ref[p.ref].height_mm for p in fit.placements if p.side == "bottom"]
    g = max(bottom, default=0.0)
    if region.zones:
        assert g <= min(z.max_height_mm for z in region.zones) + 1e-9
        for p in fit.placements:
            if p.side != "top":
                continue
            need = by_ref[p.ref].height_mm + g
            allowed = shapely.union_all([z.polygon for z in region.zones if z.max_height_mm >= need - 1e-9])
            assert not allowed.is_empty and allowed.buffer(TOL, join_style="mitre").covers(courts[p.ref]), p.ref
    # the reported wirelength is the half-perimeter wirelength of the centres (its definition)
    nets = {}
    for p in fit.placements:
        for n in by_ref[p.ref].nets:
            nets.setdefault(n, []).append(courts[p.ref].centroid)
    wl = sum(max(q.x for q in m) - min(q.x for q in m) + max(q.y for q in m) - min(q.y for q in m)
             for m in nets.values() if len(m) >= 2)
    assert fit.wirelength_mm == pytest.approx(wl, abs=1e-6)


# --------------------------------------------------------------------------
# generated cases
# --------------------------------------------------------------------------
@st.composite
def cases(draw):
    w = draw(st.floats(8, 40))
    h = draw(st.floats(8, 30))
    x0 = draw(st.floats(-50, 50))
    y0 = draw(st.floats(-50, 50))
    geom = box(x0, y0, x0 + w, y0 + h)
    if draw(st.booleans()):  # a keep-out hole
        hw, hh = draw(st.floats(1, w / 3)), draw(st.floats(1, h / 3))
        hx, hy = draw(st.floats(0.5, w - hw - 0.5)), draw(st.floats(0.5, h - hh - 0.5))
        geom = geom.difference(box(x0 + hx, y0 + hy, x0 + hx + hw, y0 + hy + hh))
    if draw(st.booleans()):  # a notch: an L-shaped cavity
        geom = geom.difference(box(x0 + w * 0.6, y0 + h * 0.6, x0 + w + 1, y0 + h + 1))
    if draw(st.booleans()):  # a slanted wall
        geom = geom.difference(Polygon([(x0 - 1, y0 - 1), (x0 + w * 0.3, y0 - 1), (x0 - 1, y0 + h * 0.3)]))
    split = x0 + w * draw(st.floats(0.2, 0.8))
    left = geom.intersection(box(x0 - 1, y0 - 1, split, y0 + h + 1))
    right = geom.difference(box(x0 - 1, y0 - 1, split, y0 + h + 1))
    h_left = draw(st.sampled_from([0.6, 1.0, 1.5, 3.0]))
    h_right = draw(st.sampled_from([1.0, 2.0, 4.0]))
    zones = [(z, hz) for z, hz in ((left, h_left), (right, h_right)) if not z.is_empty]
    region = _region(geom, zones)
    n = draw(st.integers(1, 22))
    nets = [f"N{k}" for k in range(6)]
    items = []
    for i in range(n):
        grid = draw(st.booleans())
        a = draw(st.floats(0.4, 9.0))
        b = draw(st.floats(0.4, 6.0))
        if grid:  # on the IPC 0.05 mm courtyard grid
            a, b = round(a / 0.05) * 0.05, round(b / 0.05) * 0.05
        height = draw(st.sampled_from([0.35, 0.55, 0.9, 1.2, 1.75, 2.5, 5.0]))
        its = tuple(sorted(set(draw(st.lists(st.sampled_from(nets), max_size=3)))))
        items.append(PlaceItem(f"P{i + 1}", a, b, height, its, draw(st.integers(2, 8))))
    board = BoardOptions(
        edge_clearance_mm=draw(st.sampled_from([0.0, 0.25, 0.5, 1.0])),
        sides=draw(st.sampled_from([1, 2])),
        min_inside_radius_mm=draw(st.sampled_from([0.0, 0.5, 1.0])),
        outline=draw(st.sampled_from(["region", "region", "rectangle"])),
    )
    return items, region, board


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(cases())
def test_invariants_generated(case):
    items, region, board = case
    fit = place_and_fit(items, region, board)
    check_invariants(items, region, board, fit)


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(st.floats(10, 40), st.floats(10, 40), st.integers(1, 40), st.randoms(use_true_random=False))
def test_roomy_cavity_always_fits(w, h, n, rnd):
    """Known answer: courtyards filling under a fifth of the cavity, each under a fifth of its
    short side, always fit. A packing exists: next-fit decreasing height needs a strip height of at
    most 2 A / W + h_max (Coffman, Garey, Johnson, Tarjan 1980; from memory) = 0.4 H + 0.2 H < H,
    with room to spare for the placer's 0.05 mm grid rounding; the placer must find one."""
    geom = box(0, 0, w, h)
    s = min(w, h) / 5
    items = [PlaceItem(f"R{i + 1}", rnd.uniform(0.3, s), rnd.uniform(0.3, s), 1.0, ()) for i in range(n)]
    while sum(i.length_mm * i.width_mm for i in items) > 0.2 * w * h:
        items.pop()
    board = BoardOptions(edge_clearance_mm=0.0, min_inside_radius_mm=0.0)
    fit = place_and_fit(items, _region(geom), board)
    assert fit.fits and not fit.blocked_by
    check_invariants(items, _region(geom), board, fit)


@settings(max_examples=40, deadline=None)
@given(st.floats(5, 30), st.floats(5, 30), st.integers(1, 30), st.randoms(use_true_random=False),
       st.sampled_from([0.0, 0.5]))
def test_courtyards_exceeding_region_never_fit(w, h, n, rnd, e):
    """Known answer: when the courtyards' total area is above the board's area, no placement
    exists (area argument: non-overlapping courtyards inside the board sum to at most its area)."""
    geom = box(0, 0, w, h)
    items = [PlaceItem(f"C{i + 1}", rnd.uniform(0.5, 6), rnd.uniform(0.5, 6), 0.5, ()) for i in range(n)]
    total = sum(i.length_mm * i.width_mm for i in items)
    scale = math.sqrt(1.05 * w * h / total)  # blow the parts up to 105 % of the cavity area
    items = [PlaceItem(i.ref, i.length_mm * scale, i.width_mm * scale, 0.5, ()) for i in items]
    board = BoardOptions(edge_clearance_mm=e, sides=1)
    fit = place_and_fit(items, _region(geom), board)
    assert not fit.fits and fit.unplaced
    check_invariants(items, _region(geom), board, fit)


# --------------------------------------------------------------------------
# known answers
# --------------------------------------------------------------------------
def test_part_larger_than_region_both_ways():
    items = [PlaceItem("J1", 12.0, 3.0, 1.0, ()), PlaceItem("R1", 1.7, 0.8, 0.5, ())]
    fit = place_and_fit(items, _region(box(0, 0, 10, 10)), BoardOptions(edge_clearance_mm=0.5))
    assert not fit.fits and fit.unplaced == ("J1",)
    assert any("J1" in b and "both orientations" in b for b in fit.blocked_by)
    assert [p.ref for p in fit.placements] == ["R1"]


def test_rotation_needed():
    # a 4 x 19 mm usable strip (5 x 20 less 0.5 mm each side); a 15 x 3 part fits only turned
    region = _region(box(0, 0, 5, 20))
    items = [PlaceItem("U1", 15.0, 3.0, 1.0, ())]
    fit = place_and_fit(items, region, BoardOptions(edge_clearance_mm=0.5, min_inside_radius_mm=0))
    assert fit.fits and fit.placements[0].rotation_deg in (90, 270)
    check_invariants(items, region, BoardOptions(edge_clearance_mm=0.5), fit)


def test_too_tall_for_any_zone():
    geom = box(0, 0, 30, 20)
    region = _region(geom, [(box(0, 0, 15, 20), 1.0), (box(15, 0, 30, 20), 1.5)])
    items = [PlaceItem("U1", 5.4, 7.4, 1.75, ()), PlaceItem("R1", 2.8, 1.3, 0.9, ())]
    fit = place_and_fit(items, region, BoardOptions())
    assert not fit.fits and fit.unplaced == ("U1",)
    msg = [b for b in fit.blocked_by if b.startswith("U1")]
    assert msg and "1.75 mm tall" in msg[0] and "1.5 mm" in msg[0]


def test_tall_part_only_in_deep_zone():
    geom = box(0, 0, 30, 10)
    deep = box(20, 0, 30, 10)
    region = _region(geom, [(box(0, 0, 20, 10), 1.0), (deep, 3.0)])
    items = [PlaceItem("U1", 5.4, 7.4, 1.75, ())] + [PlaceItem(f"R{i}", 1.7, 0.8, 0.55, ()) for i in range(1, 9)]
    board = BoardOptions(edge_clearance_mm=0.3)
    fit = place_and_fit(items, region, board)
    assert fit.fits
    u1 = next(p for p in fit.placements if p.ref == "U1")
    assert deep.buffer(TOL).covers(u1.courtyard)
    check_invariants(items, region, board, fit)


def test_deep_zone_too_small():
    geom = box(0, 0, 30, 10)
    region = _region(geom, [(box(0, 0, 26, 10), 1.0), (box(26, 0, 30, 10), 3.0)])
    fit = place_and_fit([PlaceItem("U1", 5.4, 7.4, 1.75, ())], region, BoardOptions(edge_clearance_mm=0.0))
    assert not fit.fits
    assert any("U1" in b and "at least 1.75 mm" in b for b in fit.blocked_by)


def test_two_sides_when_one_is_not_enough():
    # 30 courtyards of 2 x 2 mm = 120 mm^2 on a 10 x 10 mm board: too much for one side
    region = _region(box(0, 0, 10, 10), [(box(0, 0, 10, 10), 3.0)])
    items = [PlaceItem(f"C{i + 1}", 2.0, 2.0, 0.5, ("A",)) for i in range(30)]
    one = place_and_fit(items, region, BoardOptions(edge_clearance_mm=0, sides=1, min_inside_radius_mm=0))
    assert not one.fits and any("sides = 2" in b for b in one.blocked_by)
    board = BoardOptions(edge_clearance_mm=0, sides=2, min_inside_radius_mm=0)
    two = place_and_fit(items, region, board)
    assert two.fits
    assert sum(p.side == "bottom" for p in two.placements) >= 5
    assert any(w.check == "fit.bottom-side" for w in two.warnings)
    check_invariants(items, region, board, two)


def test_two_sides_gap_limits_top():
    # the 2.6 mm part fits on top only with the board on the floor (zone allows 3.0 above the board);
    # the low parts may go below only if the gap leaves 2.6 for it: 3.0 - 0.5 >= 2.6 is false
    region = _region(box(0, 0, 10, 10), [(box(0, 0, 10, 10), 3.0)])
    items = [PlaceItem("U1", 6.0, 6.0, 2.6, ())] + [PlaceItem(f"C{i + 1}", 2.0, 2.0, 0.5, ()) for i in range(20)]
    board = BoardOptions(edge_clearance_mm=0, sides=2, min_inside_radius_mm=0)
    fit = place_and_fit(items, region, board)
    check_invariants(items, region, board, fit)
    assert not fit.fits  # 36 + 80 = 116 mm^2 > 100 on top; using the bottom pushes U1 over the lid


def test_user_board_checked():
    geom = box(0, 0, 30, 20)
    region = _region(geom)
    items = [PlaceItem(f"R{i + 1}", 2.8, 1.3, 0.5, ()) for i in range(10)]
    inside = box(2, 2, 20, 12)
    board = BoardOptions(edge_clearance_mm=0.5)
    fit = place_and_fit(items, region, board, user_board=inside)
    assert fit.fits
    check_invariants(items, region, board, fit, user_board=inside)
    poking = box(20, 5, 35, 15)
    bad = place_and_fit(items, region, board, user_board=poking)
    assert not bad.fits and any("outside the usable region" in b for b in bad.blocked_by)
    check_invariants(items, region, board, bad, user_board=poking)


def test_empty_after_clearance():
    fit = place_and_fit([PlaceItem("R1", 1, 1, 0.5, ())], _region(box(0, 0, 1.5, 1.5)),
                        BoardOptions(edge_clearance_mm=1.0, min_inside_radius_mm=0))
    assert not fit.fits and fit.unplaced == ("R1",) and "no room" in fit.blocked_by[0]


def test_no_items():
    fit = place_and_fit([], _region(box(0, 0, 10, 10)), BoardOptions())
    assert fit.fits and fit.placements == () and fit.courtyard_area_mm2 == 0


def test_split_region_warns():
    geom = MultiPolygon([box(0, 0, 10, 10), box(20, 0, 45, 10)])
    fit = place_and_fit([PlaceItem("R1", 2, 1, 0.5, ())], _region(geom), BoardOptions())
    assert fit.fits and any(w.check == "fit.region-split" for w in fit.warnings)
    assert box(20, 0, 45, 10).covers(fit.placements[0].courtyard)


def test_rectangle_outline_holds_placements():
    geom = box(0, 0, 40, 25).buffer(-3).buffer(3)
    board = BoardOptions(outline="rectangle", edge_clearance_mm=0.5)
    items = [PlaceItem(f"R{i + 1}", 2.8, 1.3, 0.5, ("A",)) for i in range(40)]
    fit = place_and_fit(items, _region(geom), board)
    assert fit.fits and len(fit.board_outline.exterior.coords) == 5
    check_invariants(items, _region(geom), board, fit)


@pytest.mark.parametrize(
    "board, items, error",
    [
        (BoardOptions(sides=3), [], ProjectError),
        (BoardOptions(edge_clearance_mm=-1), [], ProjectError),
        (BoardOptions(), [PlaceItem("R1", 0.0, 1.0, 0.5, ())], DesignError),
        (BoardOptions(), [PlaceItem("R1", float("nan"), 1.0, 0.5, ())], DesignError),
        (BoardOptions(), [PlaceItem("R1", 1.0, 1.0, 0.5, ()), PlaceItem("R1", 1.0, 1.0, 0.5, ())], DesignError),
    ],
)
def test_bad_input(board, items, error):
    with pytest.raises(error):
        place_and_fit(items, _region(box(0, 0, 10, 10)), board)


# --------------------------------------------------------------------------
# determinism and wirelength
# --------------------------------------------------------------------------
def _chain_design(n=60, seed=3):
    rng = np.random.default_rng(seed)
    sizes = [(1.7, 0.8), (2.8, 1.3), (3.2, 1.75), (5.4, 7.4)]
    items = []
    for i in range(n):
        a, b = sizes[int(rng.integers(0, len(sizes)))]
        nets = (f"N{i}", f"N{i + 1}")  # part i and i+1 share net N(i+1): a chain
        items.append(PlaceItem(f"P{i + 1}", a, b, 1.0, nets, 2))
    return items


def test_deterministic():
    items = _chain_design()
    region = _region(box(0, 0, 40, 30).difference(box(15, 10, 20, 14)), [(box(0, 0, 40, 30), 3.0)])
    board = BoardOptions(sides=2)
    a = place_and_fit(items, region, board)
    b = place_and_fit(items, region, board)
    assert [p.to_dict() for p in a.placements] == [p.to_dict() for p in b.placements]
    assert a.wirelength_mm == b.wirelength_mm and a.blocked_by == b.blocked_by
    assert a.board_outline.equals_exact(b.board_outline, 0.0)


def test_connected_parts_kept_close():
    """The placement's wirelength beats random assignments of the same slots (a baseline)."""
    items = _chain_design(80)
    region = _region(box(0, 0, 60, 40))
    fit = place_and_fit(items, region, BoardOptions())
    assert fit.fits
    by_ref = {it.ref: it for it in items}
    index = {it.ref: k for k, it in enumerate(items)}
    nets = {}
    for it in items:
        for n in it.nets:
            nets.setdefault(n, []).append(index[it.ref])
    members = [m for m in nets.values() if len(m) >= 2]
    xs = [0.0] * len(items)
    ys = [0.0] * len(items)
    for p in fit.placements:
        xs[index[p.ref]], ys[index[p.ref]] = p.x_mm, p.y_mm
    ours = hpwl(members, xs, ys)
    assert ours == pytest.approx(fit.wirelength_mm)
    rng = np.random.default_rng(7)
    size_of = {p.ref: (by_ref[p.ref].length_mm, by_ref[p.ref].width_mm) for p in fit.placements}
    groups = {}
    for p in fit.placements:
        groups.setdefault(size_of[p.ref], []).append(p)
    rand = []
    for _ in range(20):  # shuffle parts among equal-size slots
        rx, ry = list(xs), list(ys)
        for ps in groups.values():
            perm = rng.permutation(len(ps))
            for p, q in zip(ps, [ps[k] for k in perm]):
                rx[index[p.ref]], ry[index[p.ref]] = q.x_mm, q.y_mm
        rand.append(hpwl(members, rx, ry))
    assert ours < 0.8 * float(np.mean(rand))


def test_hpwl_closed_form():
    # two nets: a 3-4-5 right triangle's corners (HPWL 3 + 4) and a single-pin net (0)
    assert hpwl([[0, 1, 2], [2]], [0.0, 3.0, 0.0], [0.0, 0.0, 4.0]) == 7.0
    assert hpwl([], [], []) == 0.0


def test_swaps_lower_wirelength(monkeypatch):
    """The swap pass only takes swaps that lower the wirelength (module notes, step 3): with it the
    total is well below the constructive placement's; legality is unchanged. (Spreading, step 4, is
    switched off here: it trades wirelength for room and has its own tests, tests/test_place_spread.py.)"""
    import pipeline.place_spread as place_spread

    monkeypatch.setattr(place_spread, "spread_block", lambda *a: 0)

    rng = np.random.default_rng(5)
    items = [PlaceItem(f"R{i + 1}", 2.8, 1.3, 0.5, tuple(sorted({f"N{rng.integers(0, 60)}" for _ in range(2)})))
             for i in range(150)]
    region = _region(box(0, 0, 40, 30))
    board = BoardOptions()
    with_swaps = place_and_fit(items, region, board)
    check_invariants(items, region, board, with_swaps)
    without = place_and_fit(items, region, board, improve=False)
    assert with_swaps.fits and without.fits
    assert with_swaps.wirelength_mm < 0.9 * without.wirelength_mm


def test_compact_block_in_roomy_cavity(monkeypatch):
    """A roomy cavity gets the parts as one compact block (module notes, step 2), not a strip
    along the bottom edge: its bounding box is near square and the wirelength is lower."""
    import pipeline.place as place

    items = _chain_design(40)
    region = _region(box(0, 0, 120, 60))
    board = BoardOptions()
    fit = place_and_fit(items, region, board)
    check_invariants(items, region, board, fit)
    b = shapely.union_all([p.courtyard for p in fit.placements]).bounds
    w, h = b[2] - b[0], b[3] - b[1]
    court = sum(i.length_mm * i.width_mm for i in items)
    assert w <= 2.0 * math.sqrt(place.ROOMY * court) and w * h <= 2.0 * place.ROOMY * court
    monkeypatch.setattr(place, "ROOMY", 1e9)  # no block: the strip along the bottom
    strip = place_and_fit(items, region, board)
    assert fit.wirelength_mm < strip.wirelength_mm


def test_placer_warnings_reach_findings_and_terminal(tmp_path):
    """Issue 11: a tight fit's fit.tight warning is in findings.json and on the terminal like every
    other finding (it used to reach fit.json only). Six 0603 courtyards (2.95 x 1.45 mm from the
    IPC-7351B land equations at the nominal level, tests/test_lands.py) fill an 8.0 x 5.0 mm bay
    less the 0.3 mm wall clearance (7.4 x 4.4 mm): they fit in 2 x 3 (5.9 x 4.35 mm), but the
    board's 32.6 mm2 is below the routing rule of thumb's 1.5 x 25.7 mm2 courtyard sum. Routing
    is off: this test is about the placer's warning, not about copper."""
    import json

    import ezdxf
    from click.testing import CliRunner

    from pipeline.cli import main

    parts = "\n".join(f'[parts.R{i}]\nkind = "resistor"\nvalue = "10k"\npackage = "0603"\n' for i in range(1, 7))
    nets = "[nets]\nA = [\"R1.1\", \"R6.2\"]\n" + "\n".join(f'N{i} = ["R{i}.2", "R{i + 1}.1"]' for i in range(1, 6))
    (tmp_path / "design.toml").write_text('[design]\nname = "t"\nrevision = "A"\n\n' + parts + nets + "\n")
    doc = ezdxf.new(units=ezdxf.units.MM)
    doc.modelspace().add_lwpolyline([(0, 0), (8.0, 0), (8.0, 5.0), (0, 5.0)], close=True,
                                     dxfattribs={"layer": "CAVITY"})
    doc.saveas(tmp_path / "bay.dxf")
    (tmp_path / "project.toml").write_text('[project]\nname = "t"\ndesign = "design.toml"\ncavity = "bay.dxf"\n'
                                           '[board]\nedge_clearance_mm = 0\n[copper]\nroute = false\n')
    r = CliRunner().invoke(main, ["run", str(tmp_path)])
    assert r.exit_code == 0, r.output
    findings = json.loads((tmp_path / "out" / "findings.json").read_text())
    fit = json.loads((tmp_path / "out" / "fit.json").read_text())
    codes = [f["check"] for f in findings]
    assert "fit.tight" in codes and "fit.tight" in [w["check"] for w in fit["warnings"]]
    assert "1 warning(s)" in r.output and "routing may be hard" in r.output


# --------------------------------------------------------------------------
# fixed parts (issue 8 item 6)
# --------------------------------------------------------------------------
@settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(st.data())
def test_fixed_parts_stay_exactly_where_asked(data):
    """Parts fixed with at/rotation keep their centre and rotation to the last bit, the others pack
    around them, and every rule is re-checked with shapely (check_invariants), not by the placer."""
    from pipeline.model import Fixed

    w = data.draw(st.floats(16, 40), label="w")
    h = data.draw(st.floats(10, 30), label="h")
    region = _region(box(0, 0, w, h))
    board = BoardOptions(edge_clearance_mm=0.5, outline="region")
    fixed: list[PlaceItem] = []
    taken: list[Polygon] = []
    for k in range(data.draw(st.integers(1, 3), label="n fixed")):
        rot = data.draw(st.sampled_from((0, 90, 180, 270)), label="rot")
        dx, dy = (5.4, 7.4) if rot in (0, 180) else (7.4, 5.4)  # SOIC-8 courtyard, IPC-7351B nominal
        x = data.draw(st.floats(0.5 + dx / 2 + 0.1, w - 0.5 - dx / 2 - 0.1), label="x")
        y = data.draw(st.floats(0.5 + dy / 2 + 0.1, h - 0.5 - dy / 2 - 0.1), label="y")
        c = box(x - dx / 2, y - dy / 2, x + dx / 2, y + dy / 2)
        if any(c.intersection(t).area > 0 for t in taken):
            continue
        taken.append(c)
        fixed.append(PlaceItem(f"U{k + 1}", 5.4, 7.4, 1.75, ("A",), fixed=Fixed(x, y, rot, "top", "d.toml", 3)))
    free = [PlaceItem(f"R{i + 1}", 2.8, 1.3, 0.5, ("A",)) for i in range(data.draw(st.integers(0, 12), label="n"))]
    items = fixed + free
    fit = place_and_fit(items, region, board)
    check_invariants(items, region, board, fit)
    at = {p.ref: p for p in fit.placements}
    for it in fixed:
        p = at[it.ref]  # fixed parts inside the region with the edge clearance are always placed
        assert (p.x_mm, p.y_mm, p.rotation_deg, p.side) == (it.fixed.x_mm, it.fixed.y_mm, it.fixed.rotation_deg,
                                                             "top")


@pytest.mark.parametrize("fixes,key,words", [
    ([(1.0, 5.0, 0, "top")], "parts.U1.at", "outside the usable region"),       # off the cavity
    ([(10.0, 5.0, 0, "top"), (12.0, 5.0, 90, "top")], "parts.U2.at", "overlaps U1"),
    ([(10.0, 5.0, 0, "bottom")], "parts.U1.side", "one side"),
])
def test_fixed_parts_bad_input(fixes, key, words):
    """A fixed part off the usable region, two fixed parts overlapping, a bottom part on a one-sided
    board: bad input naming the file, the line and the key."""
    from pipeline.model import Fixed

    items = [PlaceItem(f"U{k + 1}", 5.4, 7.4, 1.75, (), fixed=Fixed(x, y, r, s, "d.toml", 7 + k))
             for k, (x, y, r, s) in enumerate(fixes)]
    with pytest.raises(DesignError) as e:
        place_and_fit(items, _region(box(0, 0, 30, 12)), BoardOptions())
    assert "d.toml" in str(e.value) and key in str(e.value) and words in str(e.value)


def test_fixed_part_in_the_edge_clearance_is_a_named_constraint():
    """Inside the cavity but within the board's edge clearance: not bad input, but the fit fails and
    blocked_by names the part and the constraint."""
    from pipeline.model import Fixed

    items = [PlaceItem("U1", 5.4, 7.4, 1.75, (), fixed=Fixed(2.9, 5.0, 0, "top", "d.toml", 7)),
             PlaceItem("R1", 2.8, 1.3, 0.5, ())]
    fit = place_and_fit(items, _region(box(0, 0, 30, 12)), BoardOptions(edge_clearance_mm=0.5))
    assert not fit.fits and fit.unplaced == ("U1",)
    assert any(b.startswith("U1 is fixed at (2.9, 5) mm") and "edge clearance" in b for b in fit.blocked_by)


def test_fixed_keys_read_from_the_design_file(tmp_path):
    """at / rotation / side in a design file reach the placement (through the CLI) and bad values
    exit 2 naming the file and the key, writing nothing."""
    import json

    import ezdxf
    from click.testing import CliRunner

    from pipeline.cli import main

    def project(extra):
        (tmp_path / "design.toml").write_text(
            '[design]\nname = "t"\nrevision = "A"\n\n[parts.R1]\nkind = "resistor"\nvalue = "10k"\n'
            f'package = "0603"\n{extra}\n[parts.R2]\nkind = "resistor"\nvalue = "10k"\npackage = "0603"\n\n'
            '[nets]\nA = ["R1.1", "R2.1"]\nB = ["R1.2", "R2.2"]\n')
        doc = ezdxf.new(units=ezdxf.units.MM)
        doc.modelspace().add_lwpolyline([(0, 0), (20, 0), (20, 12), (0, 12)], close=True,
                                         dxfattribs={"layer": "CAVITY"})
        doc.saveas(tmp_path / "bay.dxf")
        (tmp_path / "project.toml").write_text('[project]\nname = "t"\ndesign = "design.toml"\ncavity = "bay.dxf"\n')
        return CliRunner().invoke(main, ["run", str(tmp_path)])

    r = project("at = [12.5, 6]\nrotation = 270")
    assert r.exit_code == 0, r.output
    fit = json.loads((tmp_path / "out" / "fit.json").read_text())
    p = next(p for p in fit["placements"] if p["ref"] == "R1")
    assert (p["x_mm"], p["y_mm"], p["rotation_deg"], p["side"]) == (12.5, 6, 270, "top")
    for extra, key in (("at = [1, 2, 3]", "parts.R1.at"), ("at = [5, 5]\nrotation = 45", "parts.R1.rotation"),
                       ("at = [5, 5]\nside = \"under\"", "parts.R1.side"), ("rotation = 90", "parts.R1.rotation"),
                       ("at = [0.2, 6]", "parts.R1.at")):
        import shutil
        shutil.rmtree(tmp_path / "out", ignore_errors=True)
        r = project(extra)
        assert r.exit_code == 2 and "design.toml" in r.output and key in r.output, (extra, r.output)
        assert "Traceback" not in r.output and not (tmp_path / "out").exists()


# ---------------------------------------------------------------------------- swaps around the near rule
def _generated(n: int):
    """Items of the scale benchmark's generated design (op-amp blocks, a decoupling cap per IC:
    bench/generate.py) and a rectangle holding them at about 55 % courtyard fill."""
    import sys
    from pathlib import Path

    from pipeline.area import items_from_design
    from pipeline.design import read_design_text
    from pipeline.library import load_library

    sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "bench"))
    import generate

    lib = load_library()
    design, _ = read_design_text(generate.design_toml(n).toml, lib)
    items = items_from_design(design, lib, "nominal")
    side = math.sqrt(sum(it.length_mm * it.width_mm for it in items) / 0.55)
    return items, _region(box(0, 0, 1.3 * side, side / 1.3))


def _centres(packer, run) -> tuple[list[float], list[float]]:
    xs, ys = [0.0] * len(packer.items), [0.0] * len(packer.items)
    for i, slot in run.slots.items():
        x1, y1, x2, y2 = packer.rect(i, slot)
        xs[i], ys[i] = (x1 + x2) / 2, (y1 + y2) / 2
    return xs, ys


def _ptp_wirelength(nets, xs, ys) -> float:
    """Half-perimeter wirelength by its definition (numpy's peak-to-peak of each net's centres)."""
    x, y = np.asarray(xs), np.asarray(ys)
    return sum(float(np.ptp(x[m]) + np.ptp(y[m])) for m in nets if len(m) >= 2)


@pytest.mark.parametrize("n", [60, 150])
def test_repair_swaps_keep_near_parts_and_shorten_the_nets(monkeypatch, n):
    """Module notes, step 3: the swaps first pull each near part toward its target, the near pass
    runs, and the swaps after it (only parts it traded away look) never move a near part or a
    target and never lengthen the wirelength (by its definition, computed here)."""
    import pipeline.place as place

    items, region = _generated(n)
    nets = place._nets(items)
    pairs = {(i, items.index(next(t for t in items if t.ref == it.near.target)))
             for i, it in enumerate(items) if it.near is not None}
    locked_want = {k for p in pairs for k in p}
    calls: list[dict] = []
    real = place._improve

    def spy(packer, run, nets_, progress, **kw):
        before = dict(run.slots)
        wl0 = _ptp_wirelength(nets_, *_centres(packer, run))
        real(packer, run, nets_, progress, **kw)
        calls.append(kw)
        if kw.get("locked"):
            assert set(kw["locked"]) == locked_want
            assert all(run.slots[k] == before[k] for k in locked_want if k in before)
            assert _ptp_wirelength(nets_, *_centres(packer, run)) <= wl0 + 1e-6

    monkeypatch.setattr(place, "_improve", spy)
    fit = place_and_fit(items, region, BoardOptions())
    assert fit.fits and pairs
    assert calls[0] == {"pull": True}
    assert any(c.get("locked") for c in calls)  # the near pass traded something here, and it was repaired
    assert fit.wirelength_mm == pytest.approx(_ptp_wirelength(nets, *zip(*[
        next((p.x_mm, p.y_mm) for p in fit.placements if p.ref == it.ref) for it in items])))


@given(st.lists(st.tuples(st.floats(-2, 22), st.floats(-2, 12), st.floats(0.2, 5), st.floats(0.2, 5)),
                min_size=1, max_size=25))
@settings(max_examples=50, deadline=None)
def test_self_check_rejects_what_plain_shapely_rejects(rects):
    # reference: shapely.covers and shapely.intersection on unprepared geometry, rule by rule: a
    # courtyard leaving the area (a disc with a notch) or the zone allowing its height, or
    # overlapping an earlier one by area, is rejected
    import types

    from pipeline.place import TOL, _self_check

    area = shapely.difference(shapely.Point(10, 5).buffer(9, quad_segs=8), box(9, 0, 11, 3))
    zone = box(0, 0, 14, 10)
    packer = types.SimpleNamespace(area=area, zones=[(2.0, zone)], items=[PlaceItem(f"R{k}", 1, 1, 1.0, ())
                                                                          for k in range(len(rects))],
                                   level=lambda h: 0 if h <= 2.0 else None,
                                   zone_union=lambda k: zone)
    got_rects = {k: (x, y, x + w, y + h) for k, (x, y, w, h) in enumerate(rects)}
    got = _self_check(packer, {k: "top" for k in got_rects}, got_rects, 0.0)
    plain_area, plain_zone = area.buffer(TOL, join_style="mitre"), zone.buffer(TOL, join_style="mitre")
    courts = [box(*r) for r in got_rects.values()]
    want = {k for k, c in enumerate(courts) if not plain_area.covers(c) or not plain_zone.covers(c)}
    want |= {b for a in range(len(courts)) for b in range(a + 1, len(courts))
             if courts[a].intersection(courts[b]).area > 1e-9}
    assert got == want
