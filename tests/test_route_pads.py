"""The pads adapter: today's package data to pad outlines (until real pads land)."""

import pytest
from shapely.geometry import box

from pipeline.library import load_library
from pipeline.model import Design, Net, Part, PinDef, PinRef, Placement
from pipeline.route.pads import board_from_placement, land_pads

LIB = load_library()


@pytest.mark.parametrize("name, pitch, count", [
    ("SOIC-8", 1.27, 8),      # JEDEC MS-012: 1.27 mm pitch (REFERENCES.md section 2)
    ("TSSOP-14", 0.65, 14),   # JEDEC MO-153: 0.65 mm
    ("SOT-23-5", 0.95, 5),    # JEDEC MO-178: 0.95 mm
    ("DIP-8", 2.54, 8),       # JEDEC MS-001: 2.54 mm
])
def test_pin_rows_keep_the_published_pitch_and_count(name, pitch, count):
    pads = land_pads(LIB.package(name))
    assert [n for n, _, _ in pads] == list(range(1, count + 1))
    c = {n: p.centroid for n, p, _ in pads}
    assert c[2].x - c[1].x == pytest.approx(pitch)                   # along the lower row
    assert c[1].y < 0 < c[count].y and c[count].x == pytest.approx(c[1].x)   # last pin opposite pin 1
    # no two pads overlap, and all lie inside the package's land extent (footprints/packages.csv)
    pk = LIB.package(name)
    extent = box(-pk.land_length_mm / 2 - 1e-9, -pk.land_width_mm / 2 - 1e-9,
                 pk.land_length_mm / 2 + 1e-9, pk.land_width_mm / 2 + 1e-9)
    assert all(extent.contains(p) for _, p, _ in pads)
    assert all(a.distance(b) > 0 for i, (_, a, _) in enumerate(pads) for _, b, _ in pads[i + 1:])


def test_sot23_has_pins_1_and_2_below_and_3_above():
    # JEDEC TO-236 numbering: 1 and 2 on one side, 3 alone opposite (REFERENCES.md section 2)
    c = {n: p.centroid for n, p, _ in land_pads(LIB.package("SOT-23"))}
    assert c[1].y == c[2].y < 0 < c[3].y and c[3].x == pytest.approx(0)


def test_through_hole_only_for_dip_and_headers():
    assert all(t for _, _, t in land_pads(LIB.package("header-1x3")))
    assert not any(t for _, _, t in land_pads(LIB.package("0603")))


def _design():
    pins = (PinDef("1", "1", "passive"), PinDef("2", "2", "passive"))
    parts = (Part("R1", "resistor", "0603", pins), Part("R2", "resistor", "0603", pins))
    nets = (Net("A", (PinRef("R1", "1"), PinRef("R2", "2"))),)
    return Design("t", "", "", parts, nets)


def test_placement_turns_mirrors_and_names_nets():
    pl = (Placement("R1", 5, 5, 90, "top", None), Placement("R2", 10, 5, 0, "bottom", None))
    b = board_from_placement(box(0, 0, 20, 10), pl, _design(), LIB, ("top", "bottom"))
    by = {(p.ref, p.pin): p for p in b.pads}
    # R1 turned 90 degrees counter-clockwise: pin 1 (at -x) goes to -y
    assert by[("R1", "1")].polygon.centroid.y < 5 and by[("R1", "1")].polygon.centroid.x == pytest.approx(5)
    # R2 on the bottom: mirrored in x, pin 1 at +x, on the bottom layer
    assert by[("R2", "1")].polygon.centroid.x > 10 and by[("R2", "1")].layers == ("bottom",)
    assert by[("R1", "1")].net == "A" and by[("R2", "2")].net == "A" and by[("R1", "2")].net is None
