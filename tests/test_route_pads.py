"""The pads adapter: the library's placed pads become the router's pad outlines."""

import pytest
from shapely.geometry import box

from pipeline.library import load_library, pads_on_board
from pipeline.model import Design, Net, Pad, Part, PinDef, PinRef, Placement
from pipeline.route.pads import board_from_placement, pad_polygon

LIB = load_library()


@pytest.mark.parametrize("pad, bounds", [
    (Pad("1", 0, 0, "rect", 1.0, 0.5), (-0.5, -0.25, 0.5, 0.25)),
    (Pad("1", 0, 0, "rect", 1.0, 0.5, rotation=90), (-0.25, -0.5, 0.25, 0.5)),   # turned: extents swap
    (Pad("1", 0, 0, "circle", 1.7, 1.7, drill_mm=1.0), (-0.85, -0.85, 0.85, 0.85)),
    (Pad("1", 0, 0, "oblong", 2.0, 1.0), (-1.0, -0.5, 1.0, 0.5)),
])
def test_pad_outline_has_the_pad_extent(pad, bounds):
    assert pad_polygon(pad).bounds == pytest.approx(bounds, abs=1e-9)


def test_oblong_is_a_stadium():
    # area of a stadium: (w - h) h + pi (h / 2)^2 (closed form); the buffer's chords lose a little
    import math
    a = pad_polygon(Pad("1", 0, 0, "oblong", 2.0, 1.0)).area
    assert a == pytest.approx(1.0 + math.pi / 4, rel=0.03) and a < 1.0 + math.pi / 4


def _design():
    pins = (PinDef("1", "1", "passive"), PinDef("2", "2", "passive"))
    parts = (Part("R1", "resistor", "0603", pins), Part("R2", "resistor", "0603", pins),
             Part("J1", "header", "header-1x2", pins))
    nets = (Net("A", (PinRef("R1", "1"), PinRef("R2", "2"), PinRef("J1", "1"))),)
    return Design("t", "", "", parts, nets)


def test_placed_pads_follow_the_library_and_name_nets():
    pl = (Placement("R1", 5, 5, 90, "top", None), Placement("R2", 10, 5, 0, "bottom", None),
          Placement("J1", 15, 5, 0, "top", None))
    b = board_from_placement(box(0, 0, 20, 10), pl, _design(), LIB, ("top", "bottom"))
    by = {(p.ref, p.pin): p for p in b.pads}
    for p in pl:
        for lib_pad in pads_on_board(LIB.package(_design().part(p.ref).package), p.x_mm, p.y_mm,
                                     p.rotation_deg, p.side):
            c = by[(p.ref, lib_pad.number)].polygon.centroid
            assert (c.x, c.y) == pytest.approx((lib_pad.x_mm, lib_pad.y_mm), abs=1e-9)
    assert by[("R2", "1")].layers == ("bottom",) and by[("R1", "1")].layers == ("top",)
    assert by[("J1", "1")].layers == ("top", "bottom")          # drilled: through-hole
    assert by[("R1", "1")].net == "A" and by[("J1", "2")].net is None


@pytest.mark.parametrize("package, side, rot", [
    ("pins(rows=2, n=3, pitch=2.0, mount=smd, entry=side)", "bottom", 90),
    ("pins(n=4, pitch=1.27)", "top", 270),
    ("TO-252", "bottom", 180),
])
def test_true_pad_shapes_placed_independently(package, side, rot):
    # the package-frame pads moved by hand: a bottom part is mirrored in x (seen through the
    # board), then turned anticlockwise (rotation matrix, closed form); every outline keeps its
    # true area: w x h for rectangles, pi r^2 for round lands (less the buffer's chord loss)
    import math
    pkg = LIB.package(package)
    pins = tuple(PinDef(str(i), str(i), "terminal") for i in range(1, pkg.pin_count + 1))
    design = Design("t", "", "", (Part("J1", "header", package, pins),), ())
    b = board_from_placement(box(0, 0, 40, 40), (Placement("J1", 20, 20, rot, side, None),),
                             design, LIB, ("top", "bottom"))
    by = {p.pin: p for p in b.pads}
    c, s = round(math.cos(math.radians(rot))), round(math.sin(math.radians(rot)))
    for pad in pkg.pads_at("nominal"):
        x = -pad.x_mm if side == "bottom" else pad.x_mm
        want = (20 + c * x - s * pad.y_mm, 20 + s * x + c * pad.y_mm)
        got = by[pad.number].polygon
        assert (got.centroid.x, got.centroid.y) == pytest.approx(want, abs=1e-9)
        if pad.shape == "circle":
            assert got.area == pytest.approx(math.pi * pad.width_mm ** 2 / 4, rel=0.03)
        else:
            assert got.area == pytest.approx(pad.width_mm * pad.height_mm, rel=1e-9)
        drilled = pad.drill_mm > 0
        assert by[pad.number].layers == (("top", "bottom") if drilled else (side,))
