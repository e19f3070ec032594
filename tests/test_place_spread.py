"""Tests of pipeline.place_spread: the packed block spread over the board, legally.

Legality is checked from scratch with shapely (a reference library): each
courtyard rebuilt from the item's size, reported centre and rotation, inside
the placement area, in a height zone that allows it, overlapping no other.
"""

from __future__ import annotations

import math

import pytest
import shapely
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from shapely.geometry import box

import pipeline.place_rules as place_rules
import pipeline.place_spread as place_spread
from pipeline.model import BoardOptions, HeightZone, PlaceItem, Region
from pipeline.place import place_and_fit

TOL = 1e-6  # mm of floating-point slack in the containment checks


def _court(item: PlaceItem, p):
    dx, dy = (item.length_mm, item.width_mm) if p.rotation_deg in (0, 180) else (item.width_mm, item.length_mm)
    return box(p.x_mm - dx / 2, p.y_mm - dy / 2, p.x_mm + dx / 2, p.y_mm + dy / 2)


def _legal(items, region: Region, board: BoardOptions, fit) -> None:
    """Every courtyard inside the board less the edge clearance, in a zone tall enough, no overlaps."""
    by_ref = {it.ref: it for it in items}
    area = region.board_region.buffer(-board.edge_clearance_mm, join_style="mitre").buffer(TOL, join_style="mitre")
    courts = [_court(by_ref[p.ref], p) for p in fit.placements]
    for p, c in zip(fit.placements, courts):
        assert area.covers(c), p.ref
        tall = [z.polygon for z in region.zones if z.max_height_mm >= by_ref[p.ref].height_mm]
        assert shapely.union_all(tall).buffer(TOL, join_style="mitre").covers(c), p.ref
    for a in range(len(courts)):
        for b in range(a + 1, len(courts)):
            assert courts[a].intersection(courts[b]).area <= 1e-9, (fit.placements[a].ref, fit.placements[b].ref)


def _chain(n: int, size=(2.8, 1.3)) -> list[PlaceItem]:
    return [PlaceItem(f"R{i + 1}", size[0], size[1], 0.5, tuple(f"N{k}" for k in (i, i + 1))) for i in range(n)]


def _union_box(fit):
    return shapely.union_all([p.courtyard for p in fit.placements]).bounds


def test_block_spreads_over_a_roomy_board(monkeypatch):
    """A chain of 20 parts on a board of about 6 x their courtyards: packed, they take one compact
    block; spread, their bounding box grows to the target box, an area of SPREAD_MAX x the courtyard
    sum (the board's box is larger than that), within one part's size; legality unchanged."""
    items = _chain(20)
    region = Region(box(0, 0, 30, 15), (HeightZone(box(0, 0, 30, 15), 4.0),), 0.8)
    board = BoardOptions(edge_clearance_mm=0.5)
    spread = place_and_fit(items, region, board)
    _legal(items, region, board, spread)
    monkeypatch.setattr(place_spread, "spread_block", lambda *a: 0)
    packed = place_and_fit(items, region, board)
    court = 20 * 2.8 * 1.3  # 72.8 mm^2
    x0, y0, x1, y1 = _union_box(packed)
    assert (x1 - x0) * (y1 - y0) < 2.5 * court  # the compact block of the packing
    x0, y0, x1, y1 = _union_box(spread)
    # target box: the 29 x 14 mm placement area's box scaled by sqrt(4 x 72.8 / 406) = 0.8468 -> 24.56 x 11.86
    k = math.sqrt(place_spread.SPREAD_MAX * court / (29 * 14))
    assert x1 - x0 == pytest.approx(29 * k, abs=2.8) and y1 - y0 == pytest.approx(14 * k, abs=2.8)
    assert spread.wirelength_mm > packed.wirelength_mm  # room costs wire: the trade is real


def test_two_parts_spread_by_the_linear_map():
    """Worked example of the linear map (module notes): two 2 x 2 mm parts sharing a net on a
    20 x 10 mm board with no edge clearance. Packed bottom-left they stand side by side: a 4 x 2 mm
    block, centres 2 mm apart. The target box holds SPREAD_MAX x 8 mm^2 = 32 mm^2 at the board's
    aspect 2: 8 x 4 mm (by hand). The x axis scales by 8 / 4 = 2, so the centres end 4 mm apart on
    one row; the grid (0.05 mm) rounds each origin."""
    items = [PlaceItem("R1", 2.0, 2.0, 0.5, ("A",)), PlaceItem("R2", 2.0, 2.0, 0.5, ("A",))]
    region = Region(box(0, 0, 20, 10), (HeightZone(box(0, 0, 20, 10), 4.0),), 0.8)
    board = BoardOptions(edge_clearance_mm=0.0)
    assert place_spread.SPREAD_MAX == 4.0  # the figure the worked example uses
    fit = place_and_fit(items, region, board)
    _legal(items, region, board, fit)
    a, b = fit.placements
    assert abs(a.x_mm - b.x_mm) == pytest.approx(4.0, abs=0.1) and a.y_mm == pytest.approx(b.y_mm, abs=0.1)


def test_full_board_is_left_as_packed():
    """Courtyards filling the board leave nothing to spread: the placement equals the packing."""
    items = _chain(12, (2.0, 2.0))
    region = Region(box(0, 0, 12.0, 8.0), (HeightZone(box(0, 0, 12.0, 8.0), 4.0),), 0.8)
    board = BoardOptions(edge_clearance_mm=0.0)
    fit = place_and_fit(items, region, board)
    assert fit.fits
    _legal(items, region, board, fit)


def test_cost_guard_counts_movers(monkeypatch):
    """More movable parts than SPREAD_PARTS: no spreading and one near pass, not two (cost guard by count;
    at 4,000 parts the near pass before a spreading that does not happen was most of the run)."""
    calls, near = [], []
    real, real_near = place_spread.spread_block, place_rules.near_pass

    def counting(*a):
        calls.append(real(*a))
        return calls[-1]

    monkeypatch.setattr(place_spread, "spread_block", counting)
    monkeypatch.setattr(place_rules, "near_pass", lambda *a: near.append(1) or real_near(*a))
    items = _chain(20)
    region = Region(box(0, 0, 30, 15), (HeightZone(box(0, 0, 30, 15), 4.0),), 0.8)
    place_and_fit(items, region, BoardOptions())
    assert calls and calls[-1] > 0 and len(near) == 2
    monkeypatch.setattr(place_spread, "SPREAD_PARTS", 19)
    place_and_fit(items, region, BoardOptions())
    assert len(calls) == 1 and len(near) == 3


@settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(w=st.floats(12, 40), h=st.floats(8, 30), n=st.integers(2, 30), tall=st.integers(0, 5),
       sizes=st.lists(st.sampled_from([(1.6, 0.9), (2.8, 1.3), (3.6, 1.9), (6.2, 4.0)]), min_size=30, max_size=30))
def test_spread_placements_are_legal_and_deterministic(w, h, n, tall, sizes):
    """Generated boards with a low zone on the left half: whatever spreads, every courtyard is legal
    (shapely, from scratch) and two runs give the same placement."""
    items = [PlaceItem(f"U{i + 1}", *sizes[i], 3.0 if i < tall else 0.8, (f"N{i % 5}", f"N{(i + 1) % 5}"))
             for i in range(n)]
    zones = (HeightZone(box(0, 0, w / 2, h), 1.0), HeightZone(box(w / 2, 0, w, h), 4.0))
    region = Region(box(0, 0, w, h), zones, 0.8)
    board = BoardOptions(edge_clearance_mm=0.5)
    fit = place_and_fit(items, region, board)
    _legal(items, region, board, fit)
    again = place_and_fit(items, region, board)
    assert [(p.ref, p.x_mm, p.y_mm, p.rotation_deg) for p in fit.placements] == \
        [(p.ref, p.x_mm, p.y_mm, p.rotation_deg) for p in again.placements]


def _chain_board():
    """20 chained 2.8 x 1.3 mm parts on a 30 x 15 mm board (0.5 mm edge clearance): a roomy board."""
    items = _chain(20)
    region = Region(box(0, 0, 30, 15), (HeightZone(box(0, 0, 30, 15), 4.0),), 0.8)
    return items, region, BoardOptions(edge_clearance_mm=0.5)


def test_spread_keeps_the_linear_maps_wirelength(monkeypatch):
    """Closed form: a map scaling x by sx and y by sy turns a net's half-perimeter w + h into
    sx w + sy h <= max(sx, sy) (w + h). The spread placement (legalised, without the swaps on the
    spread slots) stays within that bound of the packed one, plus two grid cells (0.05 mm) per net
    and axis for the rounding of the origins: the legalisation keeps the parts at their targets."""
    items, region, board = _chain_board()
    monkeypatch.setattr(place_spread, "spread_block", lambda *a: 0)
    packed = place_and_fit(items, region, board)
    monkeypatch.undo()
    import pipeline.place as place

    monkeypatch.setattr(place, "SPREAD_MIN_GAIN", 1.0)  # the swaps on the spread slots stop after one round
    monkeypatch.setattr(place, "improve_swaps", _only_first(place.improve_swaps))
    spread = place_and_fit(items, region, board)
    _legal(items, region, board, spread)
    x0, y0, x1, y1 = _union_box(packed)
    k = math.sqrt(place_spread.SPREAD_MAX * 20 * 2.8 * 1.3 / (29 * 14))  # the target box, as in the test above
    sx, sy = 29 * k / (x1 - x0), 14 * k / (y1 - y0)
    assert min(sx, sy) >= place_spread.SPREAD_MIN_SCALE  # both axes are spread
    nets = 21
    assert spread.wirelength_mm <= max(sx, sy) * packed.wirelength_mm + nets * 2 * 2 * 0.05


def _only_first(real):
    """``improve_swaps`` that swaps only on its first call (the pass before the spreading)."""
    calls = []

    def wrapped(groups, xy, nets, fanout, progress=None, **kw):
        calls.append(kw)
        if len(calls) == 1:
            return real(groups, xy, nets, fanout, progress, **kw)
        import numpy as np

        return np.arange(len(xy))
    return wrapped


def test_spread_slots_get_one_more_swap_pass(monkeypatch):
    """Cost guard by count: a spread board gets one more swap pass over every part (after the
    spreading, with SPREAD_MIN_GAIN); a board left as packed gets none."""
    import pipeline.place as place

    passes = []
    real = place.improve_swaps

    def counting(groups, xy, nets, fanout, progress=None, **kw):
        passes.append((kw.get("movers") is None, kw.get("min_gain")))
        return real(groups, xy, nets, fanout, progress, **kw)

    monkeypatch.setattr(place, "improve_swaps", counting)
    items, region, board = _chain_board()
    place_and_fit(items, region, board)
    assert [p for p in passes if p[0]] == [(True, place.MIN_GAIN), (True, place.SPREAD_MIN_GAIN)]
    passes.clear()
    monkeypatch.setattr(place_spread, "SPREAD_PARTS", 19)
    place_and_fit(items, region, board)
    assert [p for p in passes if p[0]] == [(True, place.MIN_GAIN)]


def test_no_room_left_keeps_the_block_as_packed(monkeypatch):
    """When a part finds no free origin the spreading puts every part back: the placement is the
    packed one, exactly (every goal made unusable, so each part looks for a free origin)."""
    items, region, board = _chain_board()
    monkeypatch.setattr(place_spread, "spread_block", lambda *a: 0)
    packed = place_and_fit(items, region, board)
    monkeypatch.undo()
    monkeypatch.setattr(place_spread, "_at_goal", lambda packer, slot, i, goal: (slot[0], slot[1], -1, -1))
    monkeypatch.setattr(place_spread, "_nearest_origin", lambda *a: None)
    fit = place_and_fit(items, region, board)
    assert [(p.ref, p.x_mm, p.y_mm) for p in fit.placements] == [(p.ref, p.x_mm, p.y_mm) for p in packed.placements]


def test_nearest_origin_alone_is_legal(monkeypatch):
    """Every goal made unusable: each part goes to the free origin nearest its target (the doubling
    window); the result is still legal (shapely, from scratch) and moved off the packing."""
    items, region, board = _chain_board()
    monkeypatch.setattr(place_spread, "_at_goal", lambda packer, slot, i, goal: (slot[0], slot[1], -1, -1))
    fit = place_and_fit(items, region, board)
    _legal(items, region, board, fit)
    x0, y0, x1, y1 = _union_box(fit)
    assert (x1 - x0) * (y1 - y0) > 2.5 * 20 * 2.8 * 1.3  # spread beyond the packed block's size


def test_free_targets_are_kept(monkeypatch):
    """Worked example of the linear map (module notes) on the chain board: the block's box maps onto
    the target box (29 x 14 mm placement area scaled by k, centred on the block, inside the area);
    both scales are above 1, so the targets do not overlap and each part ends at its own target
    within one grid cell (0.05 mm) per axis (before the swaps on the spread slots)."""
    import pipeline.place as place

    items, region, board = _chain_board()
    monkeypatch.setattr(place_spread, "spread_block", lambda *a: 0)
    packed = place_and_fit(items, region, board)
    monkeypatch.undo()
    monkeypatch.setattr(place, "improve_swaps", _only_first(place.improve_swaps))
    spread = place_and_fit(items, region, board)
    bx0, by0, bx1, by1 = _union_box(packed)
    k = math.sqrt(place_spread.SPREAD_MAX * 20 * 2.8 * 1.3 / (29 * 14))
    tw, th = 29 * k, 14 * k
    tx0 = min(max((bx0 + bx1 - tw) / 2, 0.5), 29.5 - tw)
    ty0 = min(max((by0 + by1 - th) / 2, 0.5), 14.5 - th)
    at = {p.ref: (p.x_mm, p.y_mm) for p in spread.placements}
    for p in packed.placements:
        x = tx0 + (p.x_mm - bx0) * tw / (bx1 - bx0)
        y = ty0 + (p.y_mm - by0) * th / (by1 - by0)
        assert at[p.ref][0] == pytest.approx(x, abs=0.05 + 1e-9) and at[p.ref][1] == pytest.approx(y, abs=0.05 + 1e-9)
