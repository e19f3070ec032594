"""Tests of pipeline.region: board region and height zones.

Every numeric check names its outside source in a comment beside it
(closed-form geometry of offsets of polygons, or shapely distance queries
as an independent check of the clearances).
"""

from __future__ import annotations

import math
from pathlib import Path

import pytest
import shapely
from hypothesis import given, settings, strategies as st
from shapely.geometry import MultiPolygon, Point, Polygon, box

from pipeline.cavity import read_cavity
from pipeline.errors import ProjectError
from pipeline.model import BoardOptions, Cavity, DepthZone
from pipeline.region import polygonal, usable_region

OUTLINES = Path(__file__).resolve().parents[1] / "outlines"


def cavity(outline, keepouts=(), zones=(), board=None, depth=5.0, k=1.0):
    return Cavity("bay.dxf", outline, tuple(keepouts), tuple(zones), board, depth, "mm", k)


def opts(c=0.3, t=0.8):
    return BoardOptions(wall_clearance_mm=c, thickness_mm=t)


def ngon(cx, cy, r, n):
    return Polygon([(cx + r * math.cos(2 * math.pi * i / n), cy + r * math.sin(2 * math.pi * i / n))
                    for i in range(n)])


def assert_partition(region):
    """Zones cover the board region exactly and do not overlap."""
    total = sum(z.polygon.area for z in region.zones)
    assert total == pytest.approx(region.area_mm2, rel=1e-9, abs=1e-9)
    union = shapely.union_all([z.polygon for z in region.zones])
    assert shapely.symmetric_difference(union, region.board_region).area < 1e-7
    for i, a in enumerate(region.zones):
        for b in region.zones[i + 1:]:
            assert a.polygon.intersection(b.polygon).area < 1e-9


# --------------------------------------------------------------------------
# clearances against closed forms
# --------------------------------------------------------------------------
@pytest.mark.parametrize("w,h,c", [(46, 30, 0.3), (10, 4, 1.0), (100, 60, 2.5), (20, 10, 0.0)])
def test_rectangle_inset(w, h, c):
    region, findings = usable_region(cavity(box(0, 0, w, h)), opts(c))
    # a rectangle inset by c on every side (mitre keeps the corners square)
    assert region.area_mm2 == pytest.approx((w - 2 * c) * (h - 2 * c), rel=1e-12)
    assert region.board_region.bounds == pytest.approx((c, c, w - c, h - c), abs=1e-12)
    assert findings == []


def test_l_shape_inset_keeps_clearance_at_the_inside_corner():
    w, h, a, b, c = 50.0, 36.0, 20.0, 18.0, 0.5
    L = Polygon([(0, 0), (w, 0), (w, b), (a, b), (a, h), (0, h)])
    region, _ = usable_region(cavity(L), opts(c))
    # mitre offset of both arms: (w - 2c)(b - 2c) + (a - 2c)(h - b)
    assert region.area_mm2 == pytest.approx((w - 2 * c) * (b - 2 * c) + (a - 2 * c) * (h - b),
                                            rel=1e-12)
    # independent check with shapely distances: no point of the region is
    # nearer than c to the wall (boundary vertices carry the minimum)
    for x, y in region.board_region.exterior.coords:
        assert L.exterior.distance(Point(x, y)) >= c - 1e-9


def test_square_keepout_grows_by_clearance():
    c, a = 0.3, 4.0
    region, _ = usable_region(cavity(box(0, 0, 40, 20), keepouts=[box(10, 8, 10 + a, 8 + a)]),
                              opts(c))
    # inset rectangle less the keep-out square grown to (a + 2c)^2 (mitre)
    assert region.area_mm2 == pytest.approx((40 - 2 * c) * (20 - 2 * c) - (a + 2 * c) ** 2,
                                            rel=1e-12)
    assert len(region.board_region.interiors) == 1


def test_round_keepout_grows_by_clearance():
    c, r, n = 0.3, 2.5, 24
    boss = ngon(20, 10, r, n)
    region, _ = usable_region(cavity(box(0, 0, 40, 20), keepouts=[boss]), opts(c))
    # a regular n-gon of circumradius r has inradius r cos(pi/n); offsetting every
    # edge by c gives the n-gon of inradius r cos(pi/n) + c, area n rho^2 tan(pi/n)
    rho = r * math.cos(math.pi / n) + c
    grown = n * rho * rho * math.tan(math.pi / n)
    assert region.area_mm2 == pytest.approx((40 - 2 * c) * (20 - 2 * c) - grown, rel=1e-12)


def test_overlapping_keepouts_counted_once():
    c = 0.2
    ks = [box(5, 5, 15, 10), box(10, 5, 20, 10)]  # overlap 5 x 5
    region, _ = usable_region(cavity(box(0, 0, 40, 20), keepouts=ks), opts(c))
    # union 15 x 5 grown by c: (15 + 2c)(5 + 2c)
    assert region.area_mm2 == pytest.approx(39.6 * 19.6 - 15.4 * 5.4, rel=1e-12)


def test_cavity_hole_grows_like_a_keepout():
    c = 0.3
    outline = Polygon(box(0, 0, 40, 20).exterior.coords, [box(18, 8, 22, 12).exterior.coords])
    region, _ = usable_region(cavity(outline), opts(c))
    # hole 4 x 4 grown by c on each side
    assert region.area_mm2 == pytest.approx(39.4 * 19.4 - 4.6 * 4.6, rel=1e-12)


def test_keepout_partly_outside_cavity():
    c = 0.3
    region, _ = usable_region(cavity(box(0, 0, 40, 20), keepouts=[box(-5, 5, 5, 10)]), opts(c))
    # the keep-out reaches x = 5 + c inside; the inset already starts at x = c
    assert region.area_mm2 == pytest.approx(39.4 * 19.4 - (5.3 - 0.3) * (5.6), rel=1e-12)


# --------------------------------------------------------------------------
# heights
# --------------------------------------------------------------------------
def test_overlapping_depth_zones_take_the_smaller_depth_no_clearance():
    zones = [DepthZone(box(0, -1, 20, 21), 3.0, "DEPTH-3"),
             DepthZone(box(10, -1, 30, 21), 1.5, "DEPTH-1.5")]
    region, _ = usable_region(cavity(box(0, 0, 40, 20), zones=zones, depth=6.0), opts(0.0, 0.8))
    got = [(round(z.max_height_mm, 9), round(z.polygon.area, 9)) for z in region.zones]
    # heights = depth - thickness; areas of the strips clipped by the min rule:
    # 1.5 over x 10..30, 3 over x 0..10, default 6 over x 30..40 (20 mm tall)
    assert got == [(0.7, 400.0), (2.2, 200.0), (5.2, 200.0)]
    assert_partition(region)


def test_overlapping_depth_zones_with_clearance():
    c = 0.3
    zones = [DepthZone(box(0, -1, 20, 21), 3.0, "DEPTH-3"),
             DepthZone(box(10, -1, 30, 21), 1.5, "DEPTH-1.5")]
    region, _ = usable_region(cavity(box(0, 0, 40, 20), zones=zones, depth=6.0), opts(c, 0.8))
    got = [(round(z.max_height_mm, 9), round(z.polygon.area, 9)) for z in region.zones]
    # each depth reaches c beyond its edge, shallower first; inset region 39.4 x 19.4
    # 1.5: x 9.7..30.3; 3: x 0.3..9.7; 6: x 30.3..39.7
    assert got == [(0.7, round(20.6 * 19.4, 9)), (2.2, round(9.4 * 19.4, 9)),
                   (5.2, round(9.4 * 19.4, 9))]
    assert_partition(region)


def test_deeper_recess_counts_only_clear_of_its_edge():
    c = 0.3
    zones = [DepthZone(box(10, 5, 30, 15), 8.0, "DEPTH-8")]
    region, _ = usable_region(cavity(box(0, 0, 40, 20), zones=zones, depth=5.0), opts(c, 1.0))
    (low, high) = region.zones
    # recess 20 x 10 shrunk by c on every side for the deeper height
    assert (low.max_height_mm, high.max_height_mm) == (4.0, 7.0)
    assert high.polygon.area == pytest.approx((20 - 2 * c) * (10 - 2 * c), rel=1e-12)
    assert_partition(region)


def test_zone_too_shallow_for_the_board_is_removed():
    c, t = 0.3, 0.8
    zones = [DepthZone(box(18, -1, 22, 21), 0.5, "DEPTH-0.5")]
    region, findings = usable_region(cavity(box(0, 0, 40, 20), zones=zones), opts(c, t))
    assert isinstance(region.board_region, MultiPolygon)
    # two pieces x 0.3..17.7 and x 22.3..39.7, 19.4 tall
    assert region.area_mm2 == pytest.approx(2 * 17.4 * 19.4, rel=1e-12)
    codes = [f.check for f in findings]
    assert "region.too-shallow" in codes and "region.split" in codes
    assert [z.max_height_mm for z in region.zones] == [pytest.approx(4.2)]


@pytest.mark.parametrize("t", [0.4, 0.8, 1.6])
def test_height_is_depth_less_board_thickness(t):
    region, _ = usable_region(cavity(box(0, 0, 30, 30), depth=6.0), opts(0.3, t))
    (z,) = region.zones
    assert z.max_height_mm == pytest.approx(6.0 - t)
    assert region.thickness_mm == t


def test_depth_equal_to_thickness_keeps_the_board_with_zero_height():
    zones = [DepthZone(box(10, -1, 20, 21), 0.8, "DEPTH-0.8")]
    region, findings = usable_region(cavity(box(0, 0, 40, 20), zones=zones), opts(0.0, 0.8))
    assert region.area_mm2 == pytest.approx(800.0)
    assert [z.max_height_mm for z in region.zones] == [0.0, 4.2]
    assert findings == []


# --------------------------------------------------------------------------
# awkward shapes
# --------------------------------------------------------------------------
def test_narrow_neck_splits_region():
    dumbbell = shapely.union_all([box(0, 0, 10, 10), box(10, 4.8, 20, 5.2), box(20, 0, 30, 10)])
    region, findings = usable_region(cavity(dumbbell), opts(0.3))
    assert isinstance(region.board_region, MultiPolygon)
    assert len(region.board_region.geoms) == 2
    # each square inset by 0.3: 9.4^2
    assert region.area_mm2 == pytest.approx(2 * 9.4 ** 2, rel=1e-12)
    assert [f.check for f in findings] == ["region.split"]
    assert_partition(region)


def test_cavity_narrower_than_clearance_gives_empty_region():
    region, findings = usable_region(cavity(box(0, 0, 30, 0.5)), opts(0.3))
    assert region.board_region.is_empty and region.area_mm2 == 0 and region.zones == ()
    assert [f.check for f in findings] == ["region.empty"]


def test_polygonal_drops_lines_and_slivers():
    g = shapely.GeometryCollection([box(0, 0, 1, 1), shapely.LineString([(0, 0), (5, 5)]),
                                    box(3, 3, 3 + 1e-4, 3 + 1e-4)])
    assert polygonal(g).equals(box(0, 0, 1, 1))


# --------------------------------------------------------------------------
# the user's own board
# --------------------------------------------------------------------------
def test_user_board_inside_is_the_region():
    board = box(2, 2, 30, 15)
    zones = [DepthZone(box(10, -1, 14, 21), 2.0, "DEPTH-2")]
    region, findings = usable_region(cavity(box(0, 0, 40, 20), zones=zones, board=board, depth=6),
                                     opts(0.3))
    assert region.board_region.equals(board)
    assert not [f for f in findings if f.severity == "error"]
    # the rib 4 mm wide plus c each side, over the board's 13 mm height
    assert region.zones[0].polygon.area == pytest.approx(4.6 * 13, rel=1e-12)
    assert_partition(region)


@pytest.mark.parametrize("board,code,where", [
    (box(-1, 2, 30, 15), "region.board-outside", "(-0.35,"),
    (box(0.1, 2, 30, 15), "region.board-outside", "(0.2,"),
    (box(2, 2, 30, 15), "region.board-over-keepout", "(5.5,"),
])
def test_user_board_that_does_not_fit_is_an_error_finding(board, code, where):
    cav = cavity(box(0, 0, 40, 20), keepouts=[box(5, 3, 6, 4)] if "keepout" in code else [],
                 board=board)
    region, findings = usable_region(cav, opts(0.3))
    errors = [f for f in findings if f.severity == "error"]
    assert [f.check for f in errors] == [code]
    assert where in errors[0].message and "does not fit" in errors[0].message
    assert region.board_region.equals(board)


def test_user_board_under_too_shallow_zone():
    zones = [DepthZone(box(10, -1, 14, 21), 0.5, "DEPTH-0.5")]
    cav = cavity(box(0, 0, 40, 20), zones=zones, board=box(2, 2, 30, 15))
    _, findings = usable_region(cav, opts(0.3, 0.8))
    assert "region.board-too-shallow" in [f.check for f in findings if f.severity == "error"]


def test_board_error_location_in_drawing_units_too():
    k = 25.4  # drawing in inches
    cav = Cavity("bay.dxf", box(0, 0, 2 * k, k), (), (), box(-0.1 * k, 0.2 * k, k, 0.8 * k),
                 5.0, "inch", k)
    _, findings = usable_region(cav, opts(0.3))
    (f,) = [f for f in findings if f.severity == "error"]
    assert "in drawing units" in f.message


# --------------------------------------------------------------------------
# options
# --------------------------------------------------------------------------
@pytest.mark.parametrize("c,t,key", [(-0.1, 0.8, "board.wall_clearance_mm"),
                                     (float("nan"), 0.8, "board.wall_clearance_mm"),
                                     (0.3, 0.0, "board.thickness_mm"),
                                     (0.3, -1.0, "board.thickness_mm")])
def test_bad_options(c, t, key):
    with pytest.raises(ProjectError) as ei:
        usable_region(cavity(box(0, 0, 10, 10)), opts(c, t))
    assert str(ei.value).startswith(f"project.toml: {key}: must be a number of mm")


def test_deterministic():
    zones = [DepthZone(box(0, -1, 20, 21), 3.0, "A"), DepthZone(box(10, -1, 30, 21), 1.5, "B")]
    cav = cavity(box(0, 0, 40, 20), keepouts=[ngon(35, 10, 2, 16)], zones=zones)
    r1, f1 = usable_region(cav, opts())
    r2, f2 = usable_region(cav, opts())
    assert r1.board_region.wkb == r2.board_region.wkb and f1 == f2
    assert [z.polygon.wkb for z in r1.zones] == [z.polygon.wkb for z in r2.zones]


# --------------------------------------------------------------------------
# generated cases: clearances checked with shapely distances
# --------------------------------------------------------------------------
@settings(max_examples=50, deadline=None)
@given(w=st.floats(5, 80), h=st.floats(5, 80), c=st.floats(0.05, 1.5),
       boss=st.tuples(st.floats(0.1, 0.9), st.floats(0.1, 0.9), st.floats(0.3, 3)))
def test_generated_region_keeps_clearances(w, h, c, boss):
    fx, fy, r = boss
    k = ngon(fx * w, fy * h, r, 20)
    cav = cavity(box(0, 0, w, h), keepouts=[k])
    region, _ = usable_region(cav, opts(c))
    reg = region.board_region
    walls = box(0, 0, w, h).exterior
    assert reg.difference(box(0, 0, w, h)).area < 1e-9
    for part in shapely.get_parts(reg):
        for ring in [part.exterior, *part.interiors]:
            for x, y in ring.coords:
                p = Point(x, y)
                # shapely distance: every vertex keeps c from the walls and the boss
                assert walls.distance(p) >= c - 1e-7
                assert k.distance(p) >= c - 1e-7
    if not reg.is_empty:
        assert_partition(region)


# --------------------------------------------------------------------------
# the demo bay drawing
# --------------------------------------------------------------------------
def test_controller_bay_region():
    cav, _ = read_cavity(OUTLINES / "controller-bay.dxf", depth_mm=6.0)
    c, t = 0.3, 0.8
    region, findings = usable_region(cav, opts(c, t))
    assert findings == []
    (rib, rest) = region.zones
    assert (rib.max_height_mm, rest.max_height_mm) == (pytest.approx(1.2), pytest.approx(5.2))
    # the 3.5 mm rib strip grown by c each side, across the inset pocket's 17 - 2c
    assert rib.polygon.area == pytest.approx((3.5 + 2 * c) * (17 - 2 * c), rel=1e-12)
    # rounded rectangle inset by c: (w - 2c)(h - 2c) - (4 - pi)(r - c)^2, less two
    # bosses grown to radius 2.5 + c; the chords (0.02 mm) shift this by under
    # perimeter x tolerance
    expect = (28 - 2 * c) * (17 - 2 * c) - (4 - math.pi) * (3 - c) ** 2 - 2 * math.pi * (2.0 + c) ** 2
    allowance = (2 * math.pi * 3 + 2 * 2 * math.pi * 2.3) * 0.02
    assert abs(region.area_mm2 - expect) <= allowance
    assert_partition(region)
