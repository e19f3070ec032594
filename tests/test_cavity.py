"""Tests of pipeline.cavity: DXF cavity drawings to millimetre polygons.

Every numeric check names its outside source in a comment beside it:
closed-form geometry, exact unit definitions, or a reference library
(shapely's affine transforms, ezdxf's own path flattening).
"""

from __future__ import annotations

import importlib.util
import math
import random
from pathlib import Path

import ezdxf
import numpy as np
import pytest
import shapely
from ezdxf import units
from shapely import affinity
from shapely.geometry import Polygon

import pipeline.cavity as cavity_mod
from pipeline.cavity import MM_PER_UNIT, parse_layer_map, read_cavity, unit_code
from pipeline.errors import CavityError

REPO = Path(__file__).resolve().parents[1]
OUTLINES = REPO / "outlines"
CORPUS = Path(__file__).resolve().parents[1].parent / "shared" / "dxf-corpus"
Q = math.tan(math.pi / 8)  # bulge of a 90 degree arc: tan(theta / 4) (DXF reference)


# --------------------------------------------------------------------------
# helpers
# --------------------------------------------------------------------------
def new_doc(unit: int | None = units.MM, version: str = "R2010"):
    doc = ezdxf.new(version, units=unit if unit is not None else 0)
    return doc, doc.modelspace()


def save(doc, tmp_path: Path, name: str = "bay.dxf") -> Path:
    p = tmp_path / name
    doc.saveas(p)
    return p


def read(path: Path, **kw):
    return read_cavity(path, display_name=path.name, **kw)


def rounded_rect(x0, y0, w, h, r):
    x1, y1 = x0 + w, y0 + h
    return [(x0 + r, y0, 0), (x1 - r, y0, Q), (x1, y0 + r, 0), (x1, y1 - r, Q),
            (x1 - r, y1, 0), (x0 + r, y1, Q), (x0, y1 - r, 0), (x0, y0 + r, Q)]


def rounded_rect_chain(msp, x0, y0, w, h, r, layer="CAVITY"):
    """The same rounded rectangle as loose LINEs and ARCs."""
    a = {"layer": layer}
    x1, y1 = x0 + w, y0 + h
    msp.add_line((x0 + r, y0), (x1 - r, y0), dxfattribs=a)
    msp.add_arc((x1 - r, y0 + r), r, 270, 360, dxfattribs=a)
    msp.add_line((x1, y0 + r), (x1, y1 - r), dxfattribs=a)
    msp.add_arc((x1 - r, y1 - r), r, 0, 90, dxfattribs=a)
    msp.add_line((x1 - r, y1), (x0 + r, y1), dxfattribs=a)
    msp.add_arc((x0 + r, y1 - r), r, 90, 180, dxfattribs=a)
    msp.add_line((x0, y1 - r), (x0, y0 + r), dxfattribs=a)
    msp.add_arc((x0 + r, y0 + r), r, 180, 270, dxfattribs=a)


def rect(x0, y0, x1, y1):
    return [(x0, y0), (x1, y0), (x1, y1), (x0, y1)]


def checks(findings):
    return [f.check for f in findings]


# --------------------------------------------------------------------------
# closed-form areas
# --------------------------------------------------------------------------
@pytest.mark.parametrize("w,h,r", [(46, 30, 4), (20, 10, 1), (60, 40, 10)])
def test_rounded_rectangle_area(tmp_path, w, h, r):
    doc, msp = new_doc()
    msp.add_lwpolyline(rounded_rect(0, 0, w, h, r), format="xyb", close=True,
                       dxfattribs={"layer": "CAVITY"})
    tol = 0.001
    cav, findings = read(save(doc, tmp_path), chord_tol_mm=tol)
    # closed form: rectangle minus four r x r corner squares plus four quarter discs
    exact = w * h - (4 - math.pi) * r * r
    deficit = exact - cav.outline.area
    # chords lie inside the arcs: each chord cuts off at most chord x sagitta,
    # so the total is at most (arc length) x tol = 2 pi r tol (sagitta bound)
    assert 0 <= deficit <= 2 * math.pi * r * tol
    assert findings == []
    assert cav.unit_name == "mm" and cav.mm_per_unit == 1.0


@pytest.mark.parametrize("r,tol", [(10.0, 0.05), (2.5, 0.02), (100.0, 0.02), (0.5, 0.01)])
def test_circle_chord_error_matches_sagitta_formula(tmp_path, r, tol):
    doc, msp = new_doc()
    msp.add_circle((3, 4), r, dxfattribs={"layer": "CAVITY"})
    cav, _ = read(save(doc, tmp_path), chord_tol_mm=tol)
    pts = np.array(cav.outline.exterior.coords)[:-1]
    n = len(pts)
    # every vertex lies on the true circle
    assert np.allclose(np.hypot(pts[:, 0] - 3, pts[:, 1] - 4), r, rtol=0, atol=1e-9)
    mids = (pts + np.roll(pts, -1, axis=0)) / 2
    deviation = r - np.hypot(mids[:, 0] - 3, mids[:, 1] - 4)
    # sagitta of a chord subtending theta = 2 pi / n: s = r (1 - cos(theta / 2))
    sagitta = r * (1 - math.cos(math.pi / n))
    assert np.allclose(deviation, sagitta, rtol=1e-9, atol=1e-12)
    assert sagitta <= tol
    # ... and n is the fewest chords that keep to the tolerance
    assert r * (1 - math.cos(math.pi / (n - 1))) > tol
    # area of a regular n-gon inscribed in radius r: (n / 2) r^2 sin(2 pi / n)
    assert cav.outline.area == pytest.approx(n / 2 * r * r * math.sin(2 * math.pi / n), rel=1e-12)


def test_annulus_inner_loop_is_a_hole(tmp_path):
    doc, msp = new_doc()
    msp.add_circle((0, 0), 20, dxfattribs={"layer": "CAVITY"})
    msp.add_circle((2, 1), 5, dxfattribs={"layer": "CAVITY"})
    tol = 0.002
    cav, _ = read(save(doc, tmp_path), chord_tol_mm=tol)
    assert len(cav.outline.interiors) == 1
    # annulus area pi (R^2 - r^2); chord deficit at most 2 pi R tol outside,
    # and the hole shrinks by at most 2 pi r tol (sagitta bound)
    exact = math.pi * (20 ** 2 - 5 ** 2)
    assert abs(cav.outline.area - exact) <= 2 * math.pi * (20 + 5) * tol


def test_l_shape_loose_lines_in_any_order(tmp_path):
    w, h, a, b = 50.0, 36.0, 20.0, 18.0
    corners = [(0, 0), (w, 0), (w, b), (a, b), (a, h), (0, h)]
    segs = [(corners[i], corners[(i + 1) % 6]) for i in range(6)]
    rnd = random.Random(7)
    rnd.shuffle(segs)
    doc, msp = new_doc()
    for i, (p, q) in enumerate(segs):
        if i % 2:
            p, q = q, p
        msp.add_line(p, q, dxfattribs={"layer": "CAVITY"})
    cav, findings = read(save(doc, tmp_path))
    # closed form: bounding rectangle minus the missing corner rectangle
    assert cav.outline.area == pytest.approx(w * h - (w - a) * (h - b), rel=1e-12)
    assert findings == []


def test_obround_as_r12_polyline_with_bulges_unitless(tmp_path):
    doc, msp = new_doc(None, "R12")
    msp.add_polyline2d([(12, 0, 0), (48, 0, 1), (48, 24, 0), (12, 24, 1)], format="xyb",
                       close=True, dxfattribs={"layer": "CAVITY"})
    tol = 0.001
    cav, findings = read(save(doc, tmp_path), chord_tol_mm=tol)
    # obround: rectangle 36 x 24 plus a disc of radius 12 (two half discs)
    exact = 36 * 24 + math.pi * 12 ** 2
    assert 0 <= exact - cav.outline.area <= 2 * math.pi * 12 * tol
    assert "cavity.units" in checks(findings)


def test_spline_edge_area_against_bezier_integral(tmp_path):
    doc, msp = new_doc()
    a = {"layer": "CAVITY"}
    msp.add_line((0, 0), (40, 0), dxfattribs=a)
    msp.add_line((40, 0), (40, 20), dxfattribs=a)
    # a clamped cubic B-spline with four control points is one cubic Bezier
    msp.add_open_spline([(40, 20), (30, 30), (10, 30), (0, 20)], degree=3, dxfattribs=a)
    msp.add_line((0, 20), (0, 0), dxfattribs=a)
    cav, _ = read(save(doc, tmp_path), chord_tol_mm=0.001)
    # y(t) - 20 = 30 t (1 - t), -x'(t) = 30 (1-t)^2 + 120 t (1-t) + 30 t^2 for the
    # Bezier; area under it = int (y - 20)(-x') dt with Beta integrals
    # B(2,4) = 1/20, B(3,3) = 1/30, B(4,2) = 1/20: 900/20 + 3600/30 + 900/20 = 210
    exact = 40 * 20 + 210.0
    assert 0 <= exact - cav.outline.area <= 60 * 0.001


def test_ellipse_keepout_area(tmp_path):
    doc, msp = new_doc()
    msp.add_lwpolyline(rect(0, 0, 40, 20), close=True, dxfattribs={"layer": "CAVITY"})
    msp.add_ellipse((20, 10), major_axis=(0, 6), ratio=0.5, dxfattribs={"layer": "KEEPOUT"})
    cav, _ = read(save(doc, tmp_path), chord_tol_mm=0.001)
    (k,) = cav.keepouts
    # ellipse area pi a b; perimeter under 2 pi a
    assert 0 <= math.pi * 6 * 3 - k.area <= 2 * math.pi * 6 * 0.001
    assert k.bounds == pytest.approx((17, 4, 23, 16), abs=1e-9)


def test_elliptical_arc_and_clockwise_arc_in_a_chain(tmp_path):
    # half ellipse on top of a 20 x 10 rectangle, drawn as ELLIPSE arc + 3 LINEs
    doc, msp = new_doc()
    a = {"layer": "CAVITY"}
    msp.add_line((0, 0), (20, 0), dxfattribs=a)
    msp.add_line((20, 0), (20, 10), dxfattribs=a)
    msp.add_ellipse((10, 10), major_axis=(10, 0), ratio=0.4, start_param=0, end_param=math.pi,
                    dxfattribs=a)
    msp.add_line((0, 10), (0, 0), dxfattribs=a)
    cav, _ = read(save(doc, tmp_path), chord_tol_mm=0.001)
    # rectangle plus half an ellipse of semi-axes 10 and 4: 200 + pi 10 4 / 2
    assert 0 <= 200 + math.pi * 20 - cav.outline.area <= math.pi * 10 * 0.001


# --------------------------------------------------------------------------
# same cavity drawn different ways -> same region
# --------------------------------------------------------------------------
def _sym_diff(a, b) -> float:
    return shapely.symmetric_difference(a, b).area


def test_mm_and_inch_drawings_agree(tmp_path):
    w, h, r = 46.0, 30.0, 4.0
    d1, m1 = new_doc(units.MM)
    m1.add_lwpolyline(rounded_rect(0, 0, w, h, r), format="xyb", close=True,
                      dxfattribs={"layer": "CAVITY"})
    d2, m2 = new_doc(units.IN)
    k = 1 / 25.4  # international inch: exactly 25.4 mm
    m2.add_lwpolyline(rounded_rect(0, 0, w * k, h * k, r * k), format="xyb", close=True,
                      dxfattribs={"layer": "CAVITY"})
    c1, _ = read(save(d1, tmp_path, "mm.dxf"))
    c2, _ = read(save(d2, tmp_path, "in.dxf"))
    assert c2.unit_name == "inch" and c2.mm_per_unit == 25.4
    # the chord tolerance is converted to inches, so the same vertices result
    assert _sym_diff(c1.outline, c2.outline) < 1e-9 * c1.outline.area


def test_polyline_and_chain_drawings_agree(tmp_path):
    d1, m1 = new_doc()
    m1.add_lwpolyline(rounded_rect(5, 5, 46, 30, 4), format="xyb", close=True,
                      dxfattribs={"layer": "CAVITY"})
    d2, m2 = new_doc()
    rounded_rect_chain(m2, 5, 5, 46, 30, 4)
    c1, _ = read(save(d1, tmp_path, "poly.dxf"))
    c2, _ = read(save(d2, tmp_path, "chain.dxf"))
    assert _sym_diff(c1.outline, c2.outline) < 1e-9 * c1.outline.area
    from pipeline.model import BoardOptions
    from pipeline.region import usable_region
    r1, _ = usable_region(c1, BoardOptions())
    r2, _ = usable_region(c2, BoardOptions())
    assert _sym_diff(r1.board_region, r2.board_region) < 1e-9 * r1.area_mm2


# --------------------------------------------------------------------------
# blocks, mirroring
# --------------------------------------------------------------------------
def test_insert_with_scale_and_rotation(tmp_path):
    doc, msp = new_doc()
    blk = doc.blocks.new("POCKET")
    base = [(0, 0), (30, 0), (30, 10), (12, 10), (12, 20), (0, 20)]
    blk.add_lwpolyline(base, close=True)  # layer 0: takes the INSERT's layer
    msp.add_blockref("POCKET", (100, 50), dxfattribs={
        "xscale": 2, "yscale": 2, "rotation": 30, "layer": "CAVITY"})
    cav, _ = read(save(doc, tmp_path))
    # reference: shapely's affine transforms, scale then rotate about the block
    # base point, then move to the insertion point
    expect = affinity.translate(
        affinity.rotate(affinity.scale(Polygon(base), 2, 2, origin=(0, 0)), 30, origin=(0, 0)),
        100, 50)
    assert _sym_diff(cav.outline, expect) < 1e-9 * expect.area


def test_nested_rotated_block_in_non_uniformly_scaled_block(tmp_path):
    doc, msp = new_doc()
    inner = doc.blocks.new("INNER")
    inner.add_lwpolyline(rect(0, 0, 4, 2), close=True, dxfattribs={"layer": "KEEPOUT"})
    inner.add_circle((0, 0), 1.0, dxfattribs={"layer": "KEEPOUT"})
    outer = doc.blocks.new("OUTER")
    outer.add_lwpolyline(rect(-10, -10, 20, 20), close=True)
    outer.add_blockref("INNER", (5, 0), dxfattribs={"rotation": 45})
    msp.add_blockref("OUTER", (10, 20), dxfattribs={"xscale": 2, "yscale": 3,
                                                     "layer": "CAVITY"})
    cav, _ = read(save(doc, tmp_path), chord_tol_mm=0.001)

    def place_outer(g):
        # reference (shapely affinity): the outer block's scale, then its offset
        return affinity.translate(affinity.scale(g, 2, 3, origin=(0, 0)), 10, 20)

    def place(g):
        # the inner block's rotation and offset first, then the outer placement
        return place_outer(affinity.translate(affinity.rotate(g, 45, origin=(0, 0)), 5, 0))

    assert _sym_diff(cav.outline, place_outer(Polygon(rect(-10, -10, 20, 20)))) < 1e-9
    rect_k = min(cav.keepouts, key=lambda g: len(g.exterior.coords))
    circ_k = max(cav.keepouts, key=lambda g: len(g.exterior.coords))
    assert _sym_diff(rect_k, place(Polygon(rect(0, 0, 4, 2)))) < 1e-9
    # an affine map scales every area by its determinant (2 x 3 = 6): the circle
    # becomes an ellipse of area 6 pi r^2, less the chord deficit
    assert 0 <= 6 * math.pi - circ_k.area <= 2 * math.pi * 3 * 0.001 * 1.01


def test_block_contents_keep_their_own_layer(tmp_path):
    doc, msp = new_doc()
    blk = doc.blocks.new("B")
    blk.add_lwpolyline(rect(0, 0, 10, 10), close=True, dxfattribs={"layer": "Notes"})
    msp.add_blockref("B", (0, 0), dxfattribs={"layer": "CAVITY"})
    msp.add_lwpolyline(rect(-1, -1, 20, 20), close=True, dxfattribs={"layer": "CAVITY"})
    cav, findings = read(save(doc, tmp_path))
    assert cav.outline.area == pytest.approx(21 * 21)  # rectangle area
    (f,) = [f for f in findings if f.check == "cavity.ignored-layers"]
    assert f.subject == ("Notes",)


def test_minsert_grid_of_keepouts(tmp_path):
    doc, msp = new_doc()
    blk = doc.blocks.new("POST")
    blk.add_lwpolyline(rect(0, 0, 1, 1), close=True)
    msp.add_lwpolyline(rect(0, 0, 50, 50), close=True, dxfattribs={"layer": "CAVITY"})
    ins = msp.add_blockref("POST", (5, 5), dxfattribs={"layer": "KEEPOUT"})
    ins.grid(size=(2, 3), spacing=(10, 8))  # 2 rows, 3 columns
    cav, _ = read(save(doc, tmp_path))
    origins = sorted((round(k.bounds[0], 9), round(k.bounds[1], 9)) for k in cav.keepouts)
    assert origins == sorted((5 + 8 * c, 5 + 10 * r) for r in range(2) for c in range(3))


def test_self_referencing_block_is_not_followed(tmp_path):
    doc, msp = new_doc()
    blk = doc.blocks.new("LOOP")
    blk.add_lwpolyline(rect(0, 0, 10, 10), close=True)
    blk.add_blockref("LOOP", (1, 1))
    msp.add_blockref("LOOP", (0, 0), dxfattribs={"layer": "CAVITY"})
    cav, findings = read(save(doc, tmp_path))
    assert cav.outline.area == pytest.approx(100.0)
    assert "cavity.blocks" in checks(findings)


def test_mirrored_extrusion_polyline_and_arc(tmp_path):
    # the same rounded rectangle drawn normally and with extrusion (0, 0, -1):
    # its object coordinate system has x along WCS -x (DXF arbitrary axis
    # algorithm), so the mirrored copy is the normal one reflected in x = 0
    d1, m1 = new_doc()
    m1.add_lwpolyline(rounded_rect(5, 5, 30, 20, 3), format="xyb", close=True,
                      dxfattribs={"layer": "CAVITY"})
    m1.add_arc((15, 15), 2, 0, 180, dxfattribs={"layer": "KEEPOUT"})
    m1.add_line((13, 15), (17, 15), dxfattribs={"layer": "KEEPOUT"})
    d2, m2 = new_doc()
    m2.add_lwpolyline(rounded_rect(5, 5, 30, 20, 3), format="xyb", close=True,
                      dxfattribs={"layer": "CAVITY", "extrusion": (0, 0, -1)})
    m2.add_arc((15, 15), 2, 0, 180, dxfattribs={"layer": "KEEPOUT", "extrusion": (0, 0, -1)})
    m2.add_line((-13, 15), (-17, 15), dxfattribs={"layer": "KEEPOUT"})
    c1, _ = read(save(d1, tmp_path, "a.dxf"))
    c2, f2 = read(save(d2, tmp_path, "b.dxf"))
    mirror = affinity.scale(c1.outline, -1, 1, origin=(0, 0))
    assert _sym_diff(c2.outline, mirror) < 1e-9 * mirror.area
    assert _sym_diff(c2.keepouts[0], affinity.scale(c1.keepouts[0], -1, 1, origin=(0, 0))) < 1e-9
    assert f2 == []


def test_mirrored_insert(tmp_path):
    doc, msp = new_doc()
    blk = doc.blocks.new("P")
    blk.add_lwpolyline([(0, 0), (10, 0), (3, 6)], close=True)
    msp.add_blockref("P", (0, 0), dxfattribs={"xscale": -1, "layer": "CAVITY"})
    cav, _ = read(save(doc, tmp_path))
    assert _sym_diff(cav.outline, Polygon([(0, 0), (-10, 0), (-3, 6)])) < 1e-12


# --------------------------------------------------------------------------
# units
# --------------------------------------------------------------------------
# exact definitions: international inch 25.4 mm (1959), foot 12 in, mil 0.001 in,
# SI prefixes for cm, m, micron
@pytest.mark.parametrize("code,mm", [(1, 25.4), (2, 304.8), (4, 1.0), (5, 10.0), (6, 1000.0),
                                     (9, 0.0254), (13, 0.001), (14, 100.0)])
def test_insunits_scale(tmp_path, code, mm):
    doc, msp = new_doc(code)
    # a 40 x 30 mm pocket written in the drawing's units
    msp.add_lwpolyline(rect(0, 0, 40 / mm, 30 / mm), close=True, dxfattribs={"layer": "CAVITY"})
    cav, findings = read(save(doc, tmp_path))
    assert cav.mm_per_unit == pytest.approx(mm, rel=1e-12)
    assert cav.outline.area == pytest.approx(1200.0, rel=1e-12)
    assert cav.outline.bounds == pytest.approx((0, 0, 40, 30), rel=1e-12)
    assert findings == []


@pytest.mark.parametrize("code", [1, 2, 5, 6, 10, 14])
def test_unit_table_against_ezdxf(code):
    # reference library: ezdxf.units.conversion_factor (8-9 significant digits)
    assert MM_PER_UNIT[code] == pytest.approx(units.conversion_factor(code, units.MM), rel=1e-8)


@pytest.mark.parametrize("default,mm", [("mm", 1.0), ("inch", 25.4), ("in", 25.4), ("cm", 10.0),
                                        ("mil", 0.0254), ("micron", 0.001), ("Foot", 304.8)])
def test_unitless_drawing_takes_default_units(tmp_path, default, mm):
    doc, msp = new_doc(None)
    msp.add_lwpolyline(rect(0, 0, 40, 20), close=True, dxfattribs={"layer": "CAVITY"})
    cav, findings = read(save(doc, tmp_path), default_units=default)
    assert cav.mm_per_unit == pytest.approx(mm, rel=1e-12)  # unit definitions as above
    assert cav.outline.area == pytest.approx(800 * mm * mm, rel=1e-12)
    (f,) = [f for f in findings if f.check == "cavity.units"]
    assert f.severity == "info" and "no units" in f.message


def test_unit_code_names():
    assert [unit_code(t) for t in ("mm", "MM", "inch", "ft", "mil", "µm")] == [4, 4, 1, 2, 9, 13]
    with pytest.raises(CavityError, match=r"^project.toml: cavity.units: unknown units 'furlong'"):
        unit_code("furlong")


def test_bad_default_units_names_the_setting(tmp_path):
    doc, msp = new_doc(None)
    msp.add_lwpolyline(rect(0, 0, 40, 20), close=True, dxfattribs={"layer": "CAVITY"})
    with pytest.raises(CavityError) as ei:
        read(save(doc, tmp_path), default_units="furlong")
    assert str(ei.value).startswith("project.toml: cavity.units: unknown units 'furlong'")


# --------------------------------------------------------------------------
# refusals located in the drawing
# --------------------------------------------------------------------------
def _gap(msp):
    a = {"layer": "CAVITY"}
    msp.add_line((0, 0), (40, 0), dxfattribs=a)
    msp.add_line((40, 0), (40, 20), dxfattribs=a)
    msp.add_line((40, 20), (0, 20), dxfattribs=a)
    msp.add_line((0, 20), (0, 0.5), dxfattribs=a)  # stops 0.5 short


def _bowtie(msp):
    msp.add_lwpolyline([(0, 0), (10, 10), (10, 0), (0, 10)], close=True,
                       dxfattribs={"layer": "CAVITY"})


def _two_outlines(msp):
    msp.add_lwpolyline(rect(0, 0, 10, 10), close=True, dxfattribs={"layer": "CAVITY"})
    msp.add_circle((30, 5), 4, dxfattribs={"layer": "CAVITY"})


def _overlapping_outlines(msp):
    msp.add_lwpolyline(rect(0, 0, 10, 10), close=True, dxfattribs={"layer": "CAVITY"})
    msp.add_lwpolyline(rect(5, 5, 12, 8), close=True, dxfattribs={"layer": "CAVITY"})


def _nested_holes(msp):
    msp.add_circle((0, 0), 20, dxfattribs={"layer": "CAVITY"})
    msp.add_circle((0, 0), 10, dxfattribs={"layer": "CAVITY"})
    msp.add_circle((0, 0), 3, dxfattribs={"layer": "CAVITY"})


def _open_keepout(msp):
    msp.add_lwpolyline(rect(0, 0, 40, 20), close=True, dxfattribs={"layer": "CAVITY"})
    msp.add_lwpolyline(rect(5, 5, 10, 10), close=False, dxfattribs={"layer": "KEEPOUT"})


def _open_depth(msp):
    msp.add_lwpolyline(rect(0, 0, 40, 20), close=True, dxfattribs={"layer": "CAVITY"})
    msp.add_line((5, 5), (10, 5), dxfattribs={"layer": "DEPTH-1.5"})
    msp.add_line((10, 5), (10, 10), dxfattribs={"layer": "DEPTH-1.5"})


def _zero_circle(msp):
    msp.add_lwpolyline(rect(0, 0, 40, 20), close=True, dxfattribs={"layer": "CAVITY"})
    msp.add_circle((7, 8), 0, dxfattribs={"layer": "KEEPOUT"})


def _branch(msp):
    a = {"layer": "CAVITY"}
    for p, q in [((0, 0), (40, 0)), ((40, 0), (40, 20)), ((40, 20), (0, 20)), ((0, 20), (0, 0)),
                 ((0, 0), (40, 20)), ((40, 20), (0, 0))]:
        msp.add_line(p, q, dxfattribs=a)


def _dangling(msp):
    a = {"layer": "CAVITY"}
    for p, q in [((0, 0), (40, 0)), ((40, 0), (40, 20)), ((40, 20), (0, 20)), ((0, 20), (0, 0)),
                 ((40, 20), (50, 25))]:
        msp.add_line(p, q, dxfattribs=a)


def _figure_eight_chain(msp):
    a = {"layer": "CAVITY"}
    pts = [(0, 0), (20, 10), (20, 0), (0, 10)]
    for i in range(4):
        msp.add_line(pts[i], pts[(i + 1) % 4], dxfattribs=a)


def _bad_spline(msp):
    msp.add_lwpolyline(rect(0, 0, 40, 20), close=True, dxfattribs={"layer": "CAVITY"})
    msp.add_spline([(5, 5), (5, 5), (5, 5), (15, 5)], dxfattribs={"layer": "KEEPOUT"})


def _spline_closed_flag_lies(msp):
    sp = msp.add_open_spline([(0, 0), (10, 10), (20, 10), (30, 0)], dxfattribs={"layer": "CAVITY"})
    sp.closed = True


def _bad_depth_layer(msp):
    msp.add_lwpolyline(rect(0, 0, 40, 20), close=True, dxfattribs={"layer": "CAVITY"})
    msp.add_lwpolyline(rect(1, 1, 5, 5), close=True, dxfattribs={"layer": "DEPTH-abc"})


REFUSALS = {
    # name: (builder, entity text, at (drawing units) or None, reason text)
    "gap": (_gap, "LINE #", (0.0, 0.0), "its ends do not meet; the nearest free end, of LINE #"),
    "self-intersecting": (_bowtie, "LWPOLYLINE #", (5.0, 5.0), "crosses or touches itself"),
    "two outlines": (_two_outlines, "on layer CAVITY", None, "second, separate cavity outline"),
    "overlapping outlines": (_overlapping_outlines, "LWPOLYLINE #", (5.0, 5.0),
                             "crosses or touches the cavity outline"),
    "nested holes": (_nested_holes, "CIRCLE #", None, "holes may not overlap or nest"),
    "open keep-out": (_open_keepout, "LWPOLYLINE #", (5.0, 5.0),
                      "keep-out on layer KEEPOUT is not closed"),
    "open depth zone": (_open_depth, "LINE #", (5.0, 5.0),
                        "depth zone on layer DEPTH-1.5 is not closed"),
    "zero circle": (_zero_circle, "CIRCLE #", (7.0, 8.0), "needs a positive radius"),
    "branching lines": (_branch, "LINE #", (0.0, 0.0), "meet at one point"),
    "dangling line": (_dangling, "LINE #", (50.0, 25.0), "meets nothing"),
    "figure eight chain": (_figure_eight_chain, "joined to it", (10.0, 5.0),
                           "crosses or touches itself"),
    "failing spline": (_bad_spline, "SPLINE #", None, "cannot be converted (ZeroDivisionError"),
    "spline closed flag": (_spline_closed_flag_lies, "SPLINE #", (0.0, 0.0),
                           "its own other end"),
}


@pytest.mark.parametrize("case", sorted(REFUSALS))
def test_refusals_name_file_entity_and_position(tmp_path, case):
    build, entity, at, reason = REFUSALS[case]
    doc, msp = new_doc()
    build(msp)
    path = save(doc, tmp_path, "my-bay.dxf")
    with pytest.raises(CavityError) as ei:
        read(path)
    err = ei.value
    text = str(err)
    assert text.startswith("my-bay.dxf: "), text
    assert entity in (err.entity or ""), text
    assert reason in text, text
    if at is not None:
        assert err.at == pytest.approx(at, abs=1e-6), text
        assert " at (" in text
    else:
        assert err.at is not None and " at (" in text


def test_gap_names_both_ends(tmp_path):
    doc, msp = new_doc()
    _gap(msp)
    with pytest.raises(CavityError) as ei:
        read(save(doc, tmp_path))
    assert ei.value.at == (0.0, 0.0) and "is at (0, 0.5), a gap of 0.5 drawing units" in str(ei.value)


def test_gap_message_gives_gap_in_drawing_units_and_mm(tmp_path):
    doc, msp = new_doc(units.IN)
    _gap(msp)
    with pytest.raises(CavityError) as ei:
        read(save(doc, tmp_path))
    # 0.5 inch gap = 12.7 mm (1 in = 25.4 mm)
    assert "a gap of 0.5 drawing units (12.7 mm)" in str(ei.value)
    assert "(0, 0)" in str(ei.value)  # where the other free end is


def test_no_cavity_outline(tmp_path):
    doc, msp = new_doc()
    msp.add_lwpolyline(rect(0, 0, 40, 20), close=True, dxfattribs={"layer": "Walls"})
    with pytest.raises(CavityError) as ei:
        read(save(doc, tmp_path))
    assert str(ei.value).startswith("bay.dxf: no closed outline on layer CAVITY")
    assert "Walls" in str(ei.value)


def test_bad_depth_layer_name(tmp_path):
    doc, msp = new_doc()
    _bad_depth_layer(msp)
    with pytest.raises(CavityError) as ei:
        read(save(doc, tmp_path))
    assert str(ei.value).startswith("bay.dxf: layer DEPTH-abc: layer name 'DEPTH-abc' gives no depth")


@pytest.mark.parametrize("layer_map,key,reason", [
    ({"DEPTH": {"Lid rib": -1}}, "cavity.layers.DEPTH.Lid rib", "0 or more"),
    ({"DEPTH": {"Lid rib": "deep"}}, "cavity.layers.DEPTH.Lid rib", "must be a number"),
    ({"DEPTH": {"Lid rib": True}}, "cavity.layers.DEPTH.Lid rib", "must be a number"),
    ({"DEPTH": {"Lid rib": float("nan")}}, "cavity.layers.DEPTH.Lid rib", "finite"),
    ({"DEPTH": "Lid rib"}, "cavity.layers.DEPTH", "table of layer name = depth"),
    ({"CAVITY": []}, "cavity.layers.CAVITY", "a layer name or a list"),
    ({"CAVITY": ""}, "cavity.layers.CAVITY", "non-empty"),
    ({"CAVITY": "A", "KEEPOUT": ["a"]}, "cavity.layers.", "both CAVITY and KEEPOUT"),
    ({"WALL": "A"}, "cavity.layers.WALL", "unknown layer role"),
    (["CAVITY"], "cavity.layers", "must be a table"),
])
def test_bad_layer_map(tmp_path, layer_map, key, reason):
    doc, msp = new_doc()
    msp.add_lwpolyline(rect(0, 0, 40, 20), close=True, dxfattribs={"layer": "CAVITY"})
    with pytest.raises(CavityError) as ei:
        read(save(doc, tmp_path), layer_map=layer_map)
    text = str(ei.value)
    assert text.startswith("project.toml: " + key), text
    assert reason in text, text


def test_bad_depth_setting(tmp_path):
    doc, msp = new_doc()
    msp.add_lwpolyline(rect(0, 0, 40, 20), close=True, dxfattribs={"layer": "CAVITY"})
    with pytest.raises(CavityError, match=r"^project.toml: cavity.depth_mm: "):
        read(save(doc, tmp_path), depth_mm=-2)


# --------------------------------------------------------------------------
# files that are not (good) DXF
# --------------------------------------------------------------------------
def test_missing_file(tmp_path):
    with pytest.raises(CavityError, match=r"^nowhere.dxf: file not found$"):
        read_cavity(tmp_path / "nowhere.dxf", display_name="nowhere.dxf")


@pytest.mark.parametrize("content,reason", [
    (b"hello\nthis is a note\n", "is not a DXF drawing"),
    (b"", "is empty"),
    (bytes(range(256)) * 20, "is not a DXF drawing"),
    (b"AC1032" + bytes(200), "is a DWG drawing"),
    (b"  0\nSECTION\n  2\nHEADER\n  9\n$ACADVER\n  1\n" + bytes(range(1, 256)) * 8,
     "read with the recovering loader"),
])
def test_not_dxf(tmp_path, content, reason):
    p = tmp_path / "thing.dxf"
    p.write_bytes(content)
    with pytest.raises(CavityError) as ei:
        read(p)
    assert str(ei.value).startswith("thing.dxf: ") and reason in str(ei.value), str(ei.value)


def test_directory_is_refused(tmp_path):
    with pytest.raises(CavityError, match="is not a file"):
        read(tmp_path)


def test_huge_file_refused_before_loading(tmp_path):
    doc, msp = new_doc()
    msp.add_lwpolyline(rect(0, 0, 40, 20), close=True, dxfattribs={"layer": "CAVITY"})
    p = save(doc, tmp_path)
    with pytest.raises(CavityError, match="more than the 0 MiB snugboard reads"):
        read(p, limits=cavity_mod.Limits(dxf_bytes=1000))


def test_too_many_entities_refused(tmp_path):
    doc, msp = new_doc()
    for i in range(30):
        msp.add_line((i, 0), (i, 1), dxfattribs={"layer": "Hatching"})
    with pytest.raises(CavityError, match="more than 20 entities"):
        read(save(doc, tmp_path), limits=cavity_mod.Limits(dxf_entities=20))


def test_huge_minsert_is_refused_without_expanding(tmp_path):
    doc, msp = new_doc()
    blk = doc.blocks.new("DOT")
    blk.add_circle((0, 0), 0.1)
    msp.add_lwpolyline(rect(0, 0, 40, 20), close=True, dxfattribs={"layer": "CAVITY"})
    ins = msp.add_blockref("DOT", (0, 0), dxfattribs={"layer": "KEEPOUT"})
    ins.grid(size=(10_000, 10_000), spacing=(1, 1))
    with pytest.raises(CavityError, match="entities"):
        read(save(doc, tmp_path))


def test_unrecoverable_file(tmp_path, monkeypatch):
    from ezdxf import recover

    def broken(*a, **k):
        raise ezdxf.DXFStructureError("no sections")

    monkeypatch.setattr(recover, "readfile", broken)
    p = tmp_path / "bad.dxf"
    p.write_text("  0\nSECTION\n  2\nHEADER\n  0\nEOF\n")
    with pytest.raises(CavityError, match=r"^bad.dxf: is damaged beyond what the recovering loader"):
        read(p)


def test_damaged_file_read_with_recovering_loader(tmp_path):
    doc, msp = new_doc()
    msp.add_lwpolyline(rect(0, 0, 40, 20), close=True, dxfattribs={"layer": "CAVITY"})
    p = save(doc, tmp_path)
    text = p.read_text()
    i = text.index("ENDSEC")  # drop the HEADER section's end marker
    p.write_text(text[: i - 4] + text[i + 7:])
    with pytest.raises(Exception):
        ezdxf.readfile(p)  # the strict loader refuses it ...
    cav, findings = read(p)  # ... the recovering one reads it, with warnings
    assert cav.outline.area == pytest.approx(800.0)
    repaired = [f for f in findings if f.check == "cavity.repaired"]
    assert repaired and all(f.severity == "warning" for f in repaired)
    assert any("recovering loader" in f.message for f in repaired)


# --------------------------------------------------------------------------
# warnings
# --------------------------------------------------------------------------
def test_ignored_layers_named_in_one_warning(tmp_path):
    doc, msp = new_doc()
    msp.add_lwpolyline(rect(0, 0, 40, 20), close=True, dxfattribs={"layer": "CAVITY"})
    msp.add_text("lid", dxfattribs={"layer": "Notes"})
    msp.add_line((0, 0), (1, 1), dxfattribs={"layer": "dims"})
    msp.add_line((0, 0), (1, 2), dxfattribs={"layer": "dims"})
    _, findings = read(save(doc, tmp_path))
    (f,) = [f for f in findings if f.check == "cavity.ignored-layers"]
    assert f.severity == "warning" and f.subject == ("dims", "Notes")
    assert "dims, Notes" in f.message


def test_unread_entity_types_on_role_layers(tmp_path):
    doc, msp = new_doc()
    msp.add_lwpolyline(rect(0, 0, 40, 20), close=True, dxfattribs={"layer": "CAVITY"})
    msp.add_text("bay", dxfattribs={"layer": "CAVITY"})
    _, findings = read(save(doc, tmp_path))
    (f,) = [f for f in findings if f.check == "cavity.ignored-entities"]
    assert "TEXT x1 on layer CAVITY" in f.message


@pytest.mark.parametrize("layer", ["KEEPOUT", "DEPTH-2"])
def test_shape_outside_the_cavity_warns(tmp_path, layer):
    doc, msp = new_doc()
    msp.add_lwpolyline(rect(0, 0, 40, 20), close=True, dxfattribs={"layer": "CAVITY"})
    msp.add_circle((100, 100), 3, dxfattribs={"layer": layer})
    msp.add_circle((10, 10), 3, dxfattribs={"layer": layer})
    _, findings = read(save(doc, tmp_path))
    out = [f for f in findings if f.check == "cavity.outside"]
    assert len(out) == 1 and "(103, 100)" in out[0].message


@pytest.mark.parametrize("unit,size", [(units.M, 46), (units.MM, 3), (units.IN, 50)])
def test_implausible_size_blames_units(tmp_path, unit, size):
    doc, msp = new_doc(unit)
    msp.add_lwpolyline(rect(0, 0, size, size * 0.6), close=True, dxfattribs={"layer": "CAVITY"})
    _, findings = read(save(doc, tmp_path))
    (f,) = [f for f in findings if f.check == "cavity.implausible-size"]
    assert f.severity == "warning" and "wrong units" in f.message


def test_plausible_size_does_not_warn(tmp_path):
    doc, msp = new_doc(units.CM)
    msp.add_lwpolyline(rect(0, 0, 4.6, 3.0), close=True, dxfattribs={"layer": "CAVITY"})
    _, findings = read(save(doc, tmp_path))
    assert findings == []


def test_zero_length_line_is_skipped_with_a_warning(tmp_path):
    doc, msp = new_doc()
    msp.add_lwpolyline(rect(0, 0, 40, 20), close=True, dxfattribs={"layer": "CAVITY"})
    msp.add_line((3, 3), (3, 3), dxfattribs={"layer": "KEEPOUT"})
    cav, findings = read(save(doc, tmp_path))
    assert cav.keepouts == () and "cavity.degenerate" in checks(findings)


def test_tilted_entity_is_projected_with_a_warning(tmp_path):
    doc, msp = new_doc()
    a = {"layer": "CAVITY"}
    msp.add_line((0, 0, 0), (40, 0, 5), dxfattribs=a)
    msp.add_line((40, 0, 5), (40, 20, 5), dxfattribs=a)
    msp.add_line((40, 20, 5), (0, 20, 0), dxfattribs=a)
    msp.add_line((0, 20, 0), (0, 0, 0), dxfattribs=a)
    cav, findings = read(save(doc, tmp_path))
    assert cav.outline.area == pytest.approx(800.0)  # the plan view: 40 x 20
    assert "cavity.not-flat" in checks(findings)


def test_ends_within_join_tolerance_are_joined(tmp_path):
    doc, msp = new_doc()
    a = {"layer": "CAVITY"}
    e = cavity_mod.JOIN_TOL_MM * 0.5
    msp.add_line((0, 0), (40, 0), dxfattribs=a)
    msp.add_line((40 + e, 0), (40, 20), dxfattribs=a)
    msp.add_line((40, 20), (0, 20 - e), dxfattribs=a)
    msp.add_line((0, 20), (0, e), dxfattribs=a)
    cav, _ = read(save(doc, tmp_path))
    assert cav.outline.area == pytest.approx(800.0, abs=1.0)


def test_many_loose_lines_chain_quickly(tmp_path):
    # a 5000-gon of loose LINEs in shuffled order: the chain walk is linear
    n, r = 5000, 30.0
    pts = [(r * math.cos(2 * math.pi * i / n), r * math.sin(2 * math.pi * i / n)) for i in range(n)]
    segs = [(pts[i], pts[(i + 1) % n]) for i in range(n)]
    random.Random(3).shuffle(segs)
    doc, msp = new_doc()
    for p, q in segs:
        msp.add_line(p, q, dxfattribs={"layer": "CAVITY"})
    cav, _ = read(save(doc, tmp_path))
    # regular n-gon area (n / 2) r^2 sin(2 pi / n)
    assert cav.outline.area == pytest.approx(n / 2 * r * r * math.sin(2 * math.pi / n), rel=1e-9)


def test_progress_is_reported(tmp_path):
    doc, msp = new_doc()
    msp.add_lwpolyline(rect(0, 0, 40, 20), close=True, dxfattribs={"layer": "CAVITY"})
    seen = []
    read(save(doc, tmp_path), progress=lambda m, f: seen.append((m, f)))
    fr = [f for _, f in seen]
    assert fr[0] == 0.0 and fr[-1] == 1.0 and fr == sorted(fr)


# --------------------------------------------------------------------------
# layer roles and the layer map
# --------------------------------------------------------------------------
def test_layer_names_match_without_case_and_depth_names_parse(tmp_path):
    doc, msp = new_doc()
    msp.add_lwpolyline(rect(0, 0, 40, 20), close=True, dxfattribs={"layer": "cavity"})
    msp.add_circle((5, 5), 1, dxfattribs={"layer": "KeepOut"})
    msp.add_lwpolyline(rect(1, 1, 4, 4), close=True, dxfattribs={"layer": "depth-1,5"})
    msp.add_lwpolyline(rect(10, 1, 14, 4), close=True, dxfattribs={"layer": "Depth-2mm"})
    msp.add_lwpolyline(rect(20, 1, 24, 4), close=True, dxfattribs={"layer": "DEPTH-0"})
    cav, _ = read(save(doc, tmp_path))
    assert len(cav.keepouts) == 1
    assert sorted((z.layer, z.depth_mm) for z in cav.depth_zones) == [
        ("DEPTH-0", 0.0), ("Depth-2mm", 2.0), ("depth-1,5", 1.5)]


def test_mapped_role_takes_only_its_named_layers(tmp_path):
    doc, msp = new_doc()
    msp.add_lwpolyline(rect(0, 0, 40, 20), close=True, dxfattribs={"layer": "Outline"})
    msp.add_lwpolyline(rect(0, 0, 90, 90), close=True, dxfattribs={"layer": "CAVITY"})
    msp.add_circle((5, 5), 1, dxfattribs={"layer": "Bosses"})
    msp.add_lwpolyline(rect(10, 2, 12, 8), close=True, dxfattribs={"layer": "ribs"})
    msp.add_circle((30, 10), 1, dxfattribs={"layer": "KEEPOUT"})  # KEEPOUT is mapped: ignored
    msp.add_lwpolyline(rect(20, 0, 22, 20), close=True, dxfattribs={"layer": "Lid rib"})
    msp.add_lwpolyline(rect(25, 0, 27, 20), close=True, dxfattribs={"layer": "DEPTH-3"})
    msp.add_lwpolyline(rect(30, 5, 35, 15), close=True, dxfattribs={"layer": "BOARD"})
    layer_map = {"CAVITY": "Outline", "KEEPOUT": ["Bosses", "Ribs"], "DEPTH": {"Lid rib": 1.5}}
    cav, findings = read(save(doc, tmp_path), layer_map=layer_map)
    assert cav.outline.area == pytest.approx(800.0)
    assert len(cav.keepouts) == 2
    assert [(z.layer, z.depth_mm) for z in cav.depth_zones] == [("Lid rib", 1.5)]
    # BOARD is not mapped, so it keeps its default name
    assert cav.board is not None and cav.board.area == pytest.approx(50.0)
    (f,) = [f for f in findings if f.check == "cavity.ignored-layers"]
    assert f.subject == ("CAVITY", "DEPTH-3", "KEEPOUT")


def test_parse_layer_map_roles():
    r = parse_layer_map({"cavity": "Outline", "Keepout": ["A", "B"], "DEPTH": {"Rib": 2}})
    assert r.role_of("OUTLINE") == ("CAVITY", None)
    assert r.role_of("b") == ("KEEPOUT", None)
    assert r.role_of("rib") == ("DEPTH", 2.0)
    assert r.role_of("DEPTH-1") is None and r.role_of("BOARD") == ("BOARD", None)


def test_board_outline_is_read(tmp_path):
    doc, msp = new_doc(units.IN)
    msp.add_lwpolyline(rect(0, 0, 2, 1), close=True, dxfattribs={"layer": "CAVITY"})
    msp.add_lwpolyline(rect(0.1, 0.1, 1.5, 0.9), close=True, dxfattribs={"layer": "BOARD"})
    cav, _ = read(save(doc, tmp_path))
    # 1.4 x 0.8 inch at 25.4 mm per inch
    assert cav.board.area == pytest.approx(1.4 * 0.8 * 25.4 ** 2, rel=1e-12)


# --------------------------------------------------------------------------
# the example drawings in outlines/
# --------------------------------------------------------------------------
USER_MAP = {"CAVITY": "Outline", "KEEPOUT": ["Bosses", "Ribs"], "DEPTH": {"Lid rib": 1.5}}
T = 0.02  # default chord tolerance, mm

# name: (layer map, default units, cavity area, keep-out areas, depth zones (depth, area),
#        chord allowance on the outline = arc length x tolerance)
OUTLINE_FILES = {
    # rounded rectangle w h - (4 - pi) r^2; bosses pi r^2; rib strip 3.5 x 17 inside
    "controller-bay.dxf": (None, "mm", 28 * 17 - (4 - math.pi) * 9, [math.pi * 2.0 ** 2] * 2,
                           [(2.0, 3.5 * 19)], 2 * math.pi * 3 * T),  # drawn 3.5 x 19
    # L-shape 1260 plus the concave fillet's corner square minus quarter disc: 16 - 4 pi
    "chain-pocket.dxf": (None, "mm", 50 * 18 + 20 * 18 + 16 - 4 * math.pi, [3 * 8], [],
                         math.pi / 2 * 4 * T),
    # obround 36 x 24 + pi 12^2; two-bulge circle of radius 3; 10 x 16 zone
    "bulge-pocket-r12.dxf": (None, "mm", 36 * 24 + math.pi * 144, [math.pi * 9],
                             [(4.0, 10 * 16)], 2 * math.pi * 12 * T),
    # 40 x 20 plus 210 under the Bezier edge; ellipse pi a b
    "spline-grip.dxf": (None, "mm", 1010.0, [math.pi * 6 * 3], [], 50 * T),
    # inches: (1.8 x 1.2 - (4 - pi) 0.15^2) in^2 x 25.4^2; boss pi 0.1^2; zone 0.5 x 1.4 in
    "inch-pocket.dxf": (None, "mm", (1.8 * 1.2 - (4 - math.pi) * 0.15 ** 2) * 25.4 ** 2,
                        [math.pi * 0.1 ** 2 * 25.4 ** 2], [(3.0, 0.5 * 1.4 * 25.4 ** 2)],
                        2 * math.pi * 0.15 * 25.4 * T),
    # block scaled 1.5: (30 x 20 - (4 - pi) 3^2) 1.5^2; boss radius 1 x 2 x 1.5 = 3; square 4 x 4
    "block-bay.dxf": (None, "mm", (600 - (4 - math.pi) * 9) * 2.25, [math.pi * 9, 16.0], [],
                      2 * math.pi * 4.5 * T),
    # 30 x 40 rectangle plus half disc of radius 20; two bosses r 2; rib 2 x 10; zone 4 x 30 + half
    "user-layers.dxf": (USER_MAP, "mm", 1200 + 200 * math.pi, [math.pi * 4, math.pi * 4, 20.0],
                        [(1.5, 54 * 4)], math.pi * 20 * T),
}


@pytest.mark.parametrize("name", sorted(OUTLINE_FILES))
def test_example_drawings(name):
    layer_map, default, area, keep_areas, zones, allowance = OUTLINE_FILES[name]
    cav, findings = read_cavity(OUTLINES / name, display_name=name, layer_map=layer_map,
                                default_units=default)
    # chords cut convex arcs short and concave ones long: |error| <= arc length x tol
    assert abs(area - cav.outline.area) <= allowance
    got = sorted(k.area for k in cav.keepouts)
    for g, e in zip(got, sorted(keep_areas)):
        # inscribed polygons: at most circumference x tolerance short
        assert 0 <= e - g <= 2 * math.sqrt(math.pi * e) * T + 1e-9
    assert len(got) == len(keep_areas)
    assert len(cav.depth_zones) == len(zones)
    for z, (d, a) in zip(cav.depth_zones, zones):
        assert z.depth_mm == d
        if a is not None:
            assert z.polygon.area == pytest.approx(a, rel=1e-9)  # rectangle as drawn
    assert not [f for f in findings if f.severity == "warning" and f.check != "cavity.ignored-layers"]


def test_user_layers_zone_is_clipped_by_region():
    cav, findings = read_cavity(OUTLINES / "user-layers.dxf", layer_map=USER_MAP)
    (z,) = cav.depth_zones
    assert z.polygon.area == pytest.approx(54 * 4)  # as drawn: 54 x 4 strip
    assert [f.subject for f in findings if f.check == "cavity.ignored-layers"] == [("Notes",)]


def _load_draw_module():
    spec = importlib.util.spec_from_file_location("outlines_draw", OUTLINES / "draw.py")
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    return mod


def test_draw_script_is_deterministic_and_files_are_current():
    mod = _load_draw_module()
    first, second = mod.draw_all(), mod.draw_all()
    assert first == second
    assert sorted(first) == sorted(p.name for p in OUTLINES.glob("*.dxf"))
    for name, data in first.items():
        assert (OUTLINES / name).read_bytes() == data, f"{name} is stale: run outlines/draw.py"


# --------------------------------------------------------------------------
# the real-world corpus
# --------------------------------------------------------------------------
def _independent_area(path: Path, layer: str) -> tuple[float, float]:
    """Area of the outline on ``layer`` by a separate route: ezdxf expands the
    blocks (disassemble), ezdxf.path flattens each closed entity finely, and the
    largest loop less the loops inside it gives the area. Returns (area, perimeter)."""
    from ezdxf import disassemble, path as ezpath, recover

    try:
        doc = ezdxf.readfile(path)
    except Exception:
        doc, _ = recover.readfile(path)
    polys = []
    for e in disassemble.recursive_decompose(doc.modelspace()):
        if e.dxf.get("layer", "0").casefold() != layer.casefold():
            continue
        if e.dxftype() not in ("LWPOLYLINE", "CIRCLE", "POLYLINE", "ELLIPSE"):
            continue
        p = ezpath.make_path(e, segments=64)
        pts = [(v.x, v.y) for v in p.flattening(1e-5)]
        polys.append(Polygon(pts))
    polys.sort(key=lambda g: -g.area)
    outer = polys[0]
    inner = [g for g in polys[1:] if outer.contains(g)]
    return outer.area - sum(g.area for g in inner), outer.length + sum(g.length for g in inner)


# name: ("read", layer whose outline is checked) or ("refused", stable reason text)
CORPUS_OUTCOMES = {
    "1_polylines.dxf": ("refused", "the cavity outline is not closed: its ends do not meet"),
    "3dface.dxf": ("refused", "crosses or touches the cavity outline"),
    "6_closed_loop_with_arcs.dxf": ("refused", "the cavity outline crosses or touches itself"),
    "Minimal_DXF_AC1006.dxf": ("refused", "no closed outline on layer(s) 0"),
    "Minimal_DXF_AC1009.dxf": ("refused", "no closed outline on layer(s) 0"),
    "Minimal_DXF_AC1021.dxf": ("refused", "no closed outline on layer(s) 0"),
    "circle_radius_le_0.dxf": ("refused", "needs a positive radius"),
    "custom_blocks.dxf": ("refused", "second, separate cavity outline"),
    "forms.dxf": ("refused", "no closed outline on layer(s) 0"),
    "hatches_1.dxf": ("refused", "second, separate cavity outline"),
    "insert_bricscad_level_1.dxf": ("refused", "the cavity outline is not closed"),
    "issue_1359_1.dxf": ("read", "0"),
    "recover01.dxf": ("refused", "the cavity outline is not closed"),
    "recover02.dxf": ("refused", "no closed outline on layer(s) 0"),
    "text_negative_extrusion.dxf": ("refused", "the cavity outline is not closed"),
    "uncommon.dxf": ("refused", "the cavity outline is not closed"),
    "xclip.dxf": ("refused", "the cavity outline is not closed"),
}
# a few files again with their own layer names mapped, to read more of them
CORPUS_EXTRA = {
    ("recover02.dxf", "Vport"): ("read", "Vport"),
    ("forms.dxf", "FORMS"): ("refused", "second, separate cavity outline"),
}

needs_corpus = pytest.mark.skipif(not CORPUS.is_dir(),
                                  reason=f"shared DXF corpus not found at {CORPUS}")


@needs_corpus
def test_corpus_outcomes_cover_every_file():
    assert sorted(CORPUS_OUTCOMES) == sorted(p.name for p in CORPUS.glob("*.dxf"))


@needs_corpus
@pytest.mark.parametrize("name,layer", sorted([(n, "0") for n in CORPUS_OUTCOMES]
                                              + list(CORPUS_EXTRA)))
def test_corpus_file_read_or_refused_cleanly(name, layer):
    outcome, detail = CORPUS_EXTRA.get((name, layer)) or CORPUS_OUTCOMES[name]
    path = CORPUS / name
    try:
        cav, findings = read_cavity(path, display_name=name, layer_map={"CAVITY": layer})
    except CavityError as err:
        assert outcome == "refused", f"{name} was refused: {err}"
        assert str(err).startswith(f"{name}: ")
        assert detail in str(err), str(err)
        return
    assert outcome == "read", f"{name} was read, expected a refusal containing {detail!r}"
    expect, perimeter = _independent_area(path, detail)
    tol_mm = 0.02 / cav.mm_per_unit  # default chord tolerance, in drawing units
    assert abs(cav.outline.area / cav.mm_per_unit ** 2 - expect) <= perimeter * tol_mm
    assert all(f.severity in ("warning", "info") for f in findings)


@needs_corpus
def test_recovered_corpus_file_reports_repairs():
    _, findings = read_cavity(CORPUS / "recover02.dxf", display_name="recover02.dxf",
                              layer_map={"CAVITY": "Vport"})
    assert any(f.check == "cavity.repaired" and "INVALID_TABLE_HANDLE" in f.subject
               for f in findings)
