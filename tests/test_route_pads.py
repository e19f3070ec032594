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


def test_turned_pads_computed_once_per_package_rotation_side(monkeypatch):
    # cost guard: 40 parts of one package in two orientations turn the land pattern twice, not 40 times
    # (lands.turned_pads keeps each turning: the package's pads are read once per kept key)
    import pipeline.library.lands as lands
    from pipeline.model import Package

    read = []
    real = Package.pads_at

    def counting(self, level):
        read.append(level)
        return real(self, level)

    monkeypatch.setattr(lands, "_TURNED", {})
    monkeypatch.setattr(Package, "pads_at", counting)
    pins = (PinDef("1", "1", "passive"), PinDef("2", "2", "passive"))
    parts = tuple(Part(f"R{i}", "resistor", "0603", pins) for i in range(40))
    pl = tuple(Placement(f"R{i}", 2.0 * i, 5, 90 * (i % 2), "top", None) for i in range(40))
    b = board_from_placement(box(0, 0, 100, 10), pl, Design("t", "", "", parts, ()), LIB, ("top", "bottom"))
    assert sorted((k[1], k[2]) for k in lands._TURNED) == [(0, "top"), (90, "top")]
    assert len(read) == 2 and len(b.pads) == 80


@pytest.mark.parametrize("pad", [
    Pad("1", 1.1, 2.3, "rect", 1.0, 0.5, rotation=90), Pad("2", -3.7, 0.2, "roundrect", 0.6, 0.9),
    Pad("3", 0.3, 0.7, "circle", 1.7, 1.7, drill_mm=1.0), Pad("4", 5.0, -1.0, "oblong", 2.0, 1.0, rotation=90),
    Pad("5", 0.0, 0.0, "oblong", 1.0, 1.0),
])
def test_bulk_outlines_equal_one_at_a_time(pad):
    # the bulk maker gives exactly the coordinates of shapely's own one-pad constructors
    # (shapely.geometry.box, Point.buffer, LineString.buffer: the reference library)
    from shapely.geometry import LineString, Point
    from pipeline.route.pads import pad_polygons
    w, h = (pad.height_mm, pad.width_mm) if pad.rotation == 90 else (pad.width_mm, pad.height_mm)
    x, y = pad.x_mm, pad.y_mm
    if pad.shape == "circle":
        want = Point(x, y).buffer(w / 2, quad_segs=4)
    elif pad.shape == "oblong" and w != h:
        r = min(w, h) / 2
        d = (w / 2 - r, 0.0) if w > h else (0.0, h / 2 - r)
        want = LineString([(x - d[0], y - d[1]), (x + d[0], y + d[1])]).buffer(r, quad_segs=4)
    else:
        want = box(x - w / 2, y - h / 2, x + w / 2, y + h / 2)
    got = pad_polygons([pad.shape] * 3, [x] * 3, [y] * 3, [pad.width_mm] * 3, [pad.height_mm] * 3,
                       [pad.rotation] * 3)
    assert all(list(g.exterior.coords) == list(want.exterior.coords) for g in got)


@pytest.mark.parametrize("package", ["0603", "pad-1.5mm", "header-1x2"])
def test_library_asked_once_per_package_name(package):
    # cost guard: 30 parts of one package ask the library once (a family member such as pad-1.5mm is
    # expanded anew by each ask, which also defeated turned_pads' per-package keeping); the pads
    # are the library's own placed pads (pads_on_board) one part at a time
    asked = []

    class Counting:
        def package(self, name):
            asked.append(name)
            return LIB.package(name)

    n_pins = len(LIB.package(package).pads_at("nominal"))
    pins = tuple(PinDef(str(k), str(k), "passive") for k in range(1, n_pins + 1))
    parts = tuple(Part(f"P{i}", "wire-pad", package, pins) for i in range(30))
    pl = tuple(Placement(f"P{i}", 3.0 * i, 5, 90 * (i % 2), "top", None) for i in range(30))
    b = board_from_placement(box(-5, 0, 100, 10), pl, Design("t", "", "", parts, ()), Counting(), ("top", "bottom"))
    assert asked == [package]
    want = sorted((p.ref, q.number, round(q.x_mm, 6), round(q.y_mm, 6)) for p in pl
                  for q in pads_on_board(LIB.package(package), p.x_mm, p.y_mm, p.rotation_deg, p.side))
    assert sorted((r.ref, r.pin, round(r.polygon.centroid.x, 6), round(r.polygon.centroid.y, 6))
                  for r in b.pads) == want
