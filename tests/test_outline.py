"""Tests of pipeline.outline: rasterising, largest rectangles, inside radius, proposed outlines."""

from __future__ import annotations


import numpy as np
import pytest
import shapely
from shapely import affinity
from shapely.geometry import MultiPolygon, Point, Polygon, box

from pipeline.model import BoardOptions, HeightZone, Placement, Region
from pipeline.outline import (
    cells_inside,
    centres_inside,
    largest_rectangle,
    max_rectangle,
    propose_outline,
    rounded_region,
)

L_SHAPE = box(0, 0, 20, 10).union(box(0, 0, 10, 20))
WITH_HOLE = box(0, 0, 30, 20).difference(box(12, 6, 16, 10))
SLOTTED = box(0, 0, 30, 20).difference(box(14, 8, 14.6, 20))  # a 0.6 mm slot from the top edge
POCKET = box(0, 0, 40, 25).buffer(-3).buffer(3).difference(Point(8, 8).buffer(2)).difference(box(20, 0, 23, 9))


def _region(geom):
    return Region(geom, (HeightZone(geom, 4.0),), 0.8)


# --------------------------------------------------------------------------
# rasterising, against shapely's own predicates (reference library)
# --------------------------------------------------------------------------
@pytest.mark.parametrize("geom", [L_SHAPE, WITH_HOLE, POCKET, affinity.rotate(box(0, 0, 12, 5), 23)])
def test_centres_inside_matches_shapely(geom):
    x0, y0, x1, y1 = geom.bounds
    cell = 0.37
    nx, ny = int((x1 - x0) / cell) + 2, int((y1 - y0) / cell) + 2
    got = centres_inside(geom, x0 - 0.1, y0 - 0.1, cell, nx, ny)
    xs = x0 - 0.1 + (np.arange(nx) + 0.5) * cell
    ys = y0 - 0.1 + (np.arange(ny) + 0.5) * cell
    X, Y = np.meshgrid(xs, ys)
    ref = shapely.contains_xy(geom, X, Y)  # shapely point-in-polygon
    assert np.array_equal(got, ref)


@pytest.mark.parametrize("geom", [L_SHAPE, WITH_HOLE, POCKET, affinity.rotate(box(0, 0, 12, 5), 23)])
def test_cells_inside_matches_shapely(geom):
    x0, y0, x1, y1 = geom.bounds
    cell = 0.5
    nx, ny = int((x1 - x0) / cell) + 2, int((y1 - y0) / cell) + 2
    got = cells_inside(geom, x0, y0, cell, nx, ny)
    j, i = np.meshgrid(np.arange(nx), np.arange(ny))
    cells = shapely.box(x0 + j * cell, y0 + i * cell, x0 + (j + 1) * cell, y0 + (i + 1) * cell)
    ref = shapely.covers(geom.buffer(1e-7, join_style="mitre"), cells)  # shapely: cell wholly inside
    assert np.array_equal(got, ref)
    # axis-aligned edges on cell boundaries: the boundary cells count (no lost row)
    assert cells_inside(box(0, 0, 10, 5), 0, 0, 0.5, 20, 10).all()


# --------------------------------------------------------------------------
# largest all-true rectangle against the reference library largestinteriorrectangle
# --------------------------------------------------------------------------
@pytest.fixture(scope="module")
def lir():
    return pytest.importorskip("largestinteriorrectangle")


def _lir_area(lir, grid):
    x, y, w, h = lir.lir(np.ascontiguousarray(grid, dtype=bool))
    return int(w) * int(h), (int(x), int(y), int(w), int(h))


@pytest.mark.parametrize("geom", [L_SHAPE, WITH_HOLE, POCKET])
def test_max_rectangle_against_lir_on_region(lir, geom):
    # the rasterised region, about 60 cells across
    x0, y0, x1, y1 = geom.bounds
    cell = max(x1 - x0, y1 - y0) / 60
    grid = cells_inside(geom, x0, y0, cell, int((x1 - x0) / cell) + 1, int((y1 - y0) / cell) + 1)
    r, c, h, w = max_rectangle(grid)
    ref_area, _ = _lir_area(lir, grid)
    assert h * w == ref_area  # reference: largestinteriorrectangle.lir
    assert grid[r:r + h, c:c + w].all()


@pytest.mark.parametrize("seed", [1, 2, 3])
def test_max_rectangle_against_lir_random(lir, seed):
    rng = np.random.default_rng(seed)
    grid = np.ones((40, 50), dtype=bool)
    for _ in range(25):  # knock out random blocks
        r, c = rng.integers(0, 40), rng.integers(0, 50)
        grid[r:r + rng.integers(1, 6), c:c + rng.integers(1, 6)] = False
    r, c, h, w = max_rectangle(grid)
    ref_area, (lx, ly, lw, lh) = _lir_area(lir, grid)
    assert h * w == ref_area
    assert grid[r:r + h, c:c + w].all() and grid[ly:ly + lh, lx:lx + lw].all()


def test_max_rectangle_empty():
    assert max_rectangle(np.zeros((3, 4), bool)) == (0, 0, 0, 0)
    assert max_rectangle(np.ones((3, 4), bool)) == (0, 0, 3, 4)


# --------------------------------------------------------------------------
# largest rectangle in any orientation: closed-form answers
# --------------------------------------------------------------------------
def _is_rectangle(p: Polygon) -> bool:
    c = np.asarray(p.exterior.coords)[:-1]
    if len(c) != 4:
        return False
    d = np.roll(c, -1, axis=0) - c
    dots = [abs(float(d[k] @ d[(k + 1) % 4])) for k in range(4)]
    return max(dots) < 1e-6 * max(float((d ** 2).sum(axis=1).max()), 1.0)


@pytest.mark.parametrize(
    "geom, area, angle",
    [
        (box(0, 0, 40, 20), 800.0, 0.0),  # the rectangle itself
        (affinity.rotate(box(0, 0, 40, 20), 30, origin=(0, 0)), 800.0, 30.0),  # found at its edge angle
        (affinity.rotate(box(0, 0, 40, 20), 17.5, origin=(0, 0)), 800.0, 17.5),
        (L_SHAPE, 200.0, 0.0),  # either arm: 20 x 10 (closed form)
    ],
)
def test_largest_rectangle_closed_form(geom, area, angle):
    rect, a = largest_rectangle(geom)
    assert rect.area == pytest.approx(area, rel=1e-6)
    assert a == pytest.approx(angle, abs=1e-6)
    assert _is_rectangle(rect)
    assert geom.buffer(1e-6).covers(rect)


def test_largest_rectangle_in_circle():
    # the largest rectangle in a circle of radius R is the square of area 2 R^2 (closed form);
    # the polygon has 256 vertices on the circle, so allow its 0.01 % smaller area and our grid search
    R = 10.0
    disk = Point(0, 0).buffer(R, quad_segs=64)
    rect, _ = largest_rectangle(disk)
    assert 2 * R * R * 0.995 <= rect.area <= 2 * R * R
    assert disk.buffer(1e-6).covers(rect)


def test_largest_rectangle_empty():
    rect, a = largest_rectangle(Polygon())
    assert rect.is_empty and a == 0.0


# --------------------------------------------------------------------------
# inside radius: the outline equals its own closing (morphology; module notes)
# --------------------------------------------------------------------------
def _closing_gap(geom, r):
    return geom.hausdorff_distance(geom.buffer(r, quad_segs=16).buffer(-r, quad_segs=16))


@pytest.mark.parametrize("geom", [L_SHAPE, WITH_HOLE, SLOTTED, POCKET])
@pytest.mark.parametrize("r", [0.5, 1.0])
def test_rounded_region_inside_radius(geom, r):
    # the raw shapes have sharp inside corners: closing moves them by about 0.41 r (90 degrees),
    # so this check can fail (Serra 1982: a set equals its closing iff every inside corner has radius >= r)
    assert _closing_gap(geom, r) > 0.3 * r
    out = rounded_region(geom, r)
    assert out.geom_type == "Polygon" and out.is_valid and not out.is_empty
    assert out.difference(geom).area < 1e-9  # never leaves the region
    assert _closing_gap(out, r) < 0.02  # every inside corner is cut-able with radius r
    # loses little: simplification (0.005 mm along the outline) plus at most about r^2 per inside
    # corner, plus, for the 0.6 mm slot, widening it to the bit's diameter 2r along its 12 mm
    corners = len(geom.exterior.coords) + sum(len(i.coords) for i in geom.interiors)
    slot = (2 * r - 0.6 + 0.1) * 12.5 if geom is SLOTTED else 0.0
    assert geom.area - out.area <= 0.005 * geom.length + corners * r * r + slot + 1e-6


def test_rounded_region_narrow_slot_widened():
    # a 0.6 mm slot is narrower than a 1.0 mm bit: the board must open it to at least 1.0 mm
    out = rounded_region(SLOTTED, 0.5)
    probe = box(14.3 - 0.49, 12, 14.3 + 0.49, 19.5)  # 0.98 mm wide strip along the slot (below its mouth)
    assert out.intersection(probe).area < 1e-6


def test_rounded_region_convex_unchanged():
    disk = Point(5, 5).buffer(10)
    out = rounded_region(disk, 1.0)
    assert out.area == pytest.approx(disk.area, rel=2e-3)
    assert rounded_region(L_SHAPE, 0).difference(L_SHAPE).area < 1e-9


# --------------------------------------------------------------------------
# propose_outline
# --------------------------------------------------------------------------
def test_propose_region_outline():
    out = propose_outline(_region(POCKET), (), BoardOptions(min_inside_radius_mm=0.8))
    assert out.difference(POCKET).area < 1e-9
    assert _closing_gap(out, 0.8) < 0.02
    assert out.area > 0.97 * POCKET.area


def test_propose_rectangle_outline():
    out = propose_outline(_region(POCKET), (), BoardOptions(outline="rectangle"))
    assert _is_rectangle(out)
    assert POCKET.buffer(1e-6).covers(out)
    # no better rectangle among the axis-aligned grid answer (lower bound of the true optimum)
    ref, _ = largest_rectangle(POCKET, angles=[0.0])
    assert out.area >= ref.area - 1e-6


def test_propose_rectangle_holding_placements():
    geom = box(0, 0, 30, 10).union(box(0, 0, 8, 25))  # a long arm and a tall arm
    reg = _region(geom)
    best, _ = largest_rectangle(geom)
    assert best.bounds[3] <= 10 + 1e-6  # the long arm wins (300 > 200)
    part = box(2, 20, 4, 22)  # a part in the tall arm
    pl = Placement("U1", 3, 21, 0, "top", part)
    out = propose_outline(reg, (pl,), BoardOptions(outline="rectangle", edge_clearance_mm=0.5))
    assert out.buffer(1e-6).covers(part.buffer(0.5, join_style="mitre"))
    assert geom.buffer(1e-6).covers(out)


def test_propose_split_region_takes_largest():
    geom = MultiPolygon([box(0, 0, 10, 10), box(20, 0, 45, 10)])
    out = propose_outline(_region(geom), (), BoardOptions())
    assert out.geom_type == "Polygon"
    # 25 x 10, less the 0.005 mm simplification inset (0.005 x perimeter 70 = 0.35 mm^2)
    assert out.area == pytest.approx(250 - 0.35, abs=0.01)


def test_propose_empty_region():
    assert propose_outline(_region(Polygon()), (), BoardOptions()).is_empty
