"""Half-perimeter wirelength against closed forms and a general-purpose reference library.

External checks, each named beside it:
- closed form: the half perimeter of an a x b rectangle's corners is a + b (plane geometry);
- shapely's ``MultiPoint.bounds`` (GEOS envelope, a reference library) gives the box whose
  half perimeter the formula must return, for any points (hypothesis);
- the rectilinear Steiner tree of three points spans their bounding box, so its length is the
  half perimeter (M. Hanan, SIAM J. Appl. Math. 14(2), 1966; from memory): checked by brute force
  over the Hanan grid's centre point, the only Steiner point three points need.
"""

from __future__ import annotations

import math

import pytest
import shapely
from hypothesis import given, settings
from hypothesis import strategies as st

from pipeline.wirelength import half_perimeter, hpwl

coord = st.floats(min_value=-500.0, max_value=500.0, allow_nan=False, allow_infinity=False)


@pytest.mark.parametrize("a, b", [(1.0, 1.0), (3.0, 0.5), (12.5, 40.0), (0.0, 7.0)])
def test_rectangle_corners_give_a_plus_b(a, b):
    # closed form: half the perimeter 2 (a + b) of the rectangle
    assert half_perimeter([0.0, a, a, 0.0], [0.0, 0.0, b, b]) == pytest.approx(a + b)


@pytest.mark.parametrize("xs, ys", [([], []), ([4.0], [2.0])])
def test_fewer_than_two_points_have_no_length(xs, ys):
    assert half_perimeter(xs, ys) == 0.0


@settings(max_examples=200, deadline=None)
@given(st.lists(st.tuples(coord, coord), min_size=2, max_size=30))
def test_matches_the_envelope_from_shapely(points):
    # reference library: GEOS's envelope of the same points
    x0, y0, x1, y1 = shapely.MultiPoint(points).bounds
    xs, ys = [p[0] for p in points], [p[1] for p in points]
    assert half_perimeter(xs, ys) == pytest.approx((x1 - x0) + (y1 - y0), abs=1e-9)


@settings(max_examples=100, deadline=None)
@given(st.lists(st.tuples(coord, coord), min_size=3, max_size=3))
def test_three_points_equal_their_rectilinear_steiner_tree(points):
    # Hanan 1966: one Steiner point at the coordinate-wise median joins three points at least cost
    xs, ys = [p[0] for p in points], [p[1] for p in points]
    mx, my = sorted(xs)[1], sorted(ys)[1]
    steiner = sum(abs(x - mx) + abs(y - my) for x, y in points)
    assert half_perimeter(xs, ys) == pytest.approx(steiner, abs=1e-9)


def test_total_skips_single_member_nets_and_sums_the_rest():
    xs, ys = [0.0, 3.0, 1.0, 10.0], [0.0, 1.0, 4.0, 10.0]
    # by hand: net {0,1,2} spans 3 x 4 -> 7; net {3} adds nothing; net {0,3} spans 10 x 10 -> 20
    assert hpwl([[0, 1, 2], [3], [0, 3]], xs, ys) == pytest.approx(27.0)
    assert math.isclose(hpwl([], xs, ys), 0.0)
