"""A measured cavity (issue 14, item 1): the pocket from caliper measurements in a TOML file.

Areas are checked against closed forms (a rounded rectangle w*h - (4 - pi) r^2, a circle pi r^2,
a fillet in a concave corner adding r^2 (1 - pi/4): elementary geometry) within the area a
flattening of chord error tol can lose (at most tol per unit of arc length); the same shape as a
DXF drawing read by the DXF reader must give the same cavity and region within that tolerance.
"""

from __future__ import annotations

import math
from pathlib import Path

import ezdxf
import pytest
from click.testing import CliRunner

from pipeline.cavity import read_cavity
from pipeline.cli import main
from pipeline.errors import CavityError
from pipeline.model import BoardOptions
from pipeline.region import usable_region

ROOT = Path(__file__).resolve().parents[1]
OUTLINES = ROOT / "outlines"
TOL = 0.02  # mm, the default chord tolerance


def _write(tmp_path: Path, text: str, name: str = "pocket.toml") -> Path:
    p = tmp_path / name
    p.write_text(text)
    return p


def _read(p: Path, **kw):
    return read_cavity(p, display_name=p.name, **kw)


@pytest.mark.parametrize("w,h,r", [(28, 17, 3), (40, 20, 0), (30, 30, 15), (50, 10, 4.5)])
def test_rounded_rectangle_area_closed_form(tmp_path, w, h, r):
    p = _write(tmp_path, f"[pocket]\nsize = [{w}, {h}]\ncorner_radius = {r}\n")
    cavity, findings = _read(p)
    exact = w * h - (4 - math.pi) * r ** 2  # rounded rectangle (closed form)
    assert cavity.outline.area <= exact + 1e-9
    assert exact - cavity.outline.area <= 2 * math.pi * r * TOL + 1e-9
    assert cavity.outline.bounds == pytest.approx((0, 0, w, h))
    assert findings == []


def test_inch_pocket_against_closed_form(tmp_path):
    p = _write(tmp_path, 'units = "inch"\n[pocket]\nsize = [1.8, 1.2]\ncorner_radius = 0.15\n')
    cavity, _ = _read(p)
    # 1 in = 25.4 mm exactly (1959 international yard and pound agreement)
    exact = (1.8 * 1.2 - (4 - math.pi) * 0.15 ** 2) * 25.4 ** 2
    assert cavity.unit_name == "inch" and cavity.mm_per_unit == 25.4
    assert exact - cavity.outline.area == pytest.approx(0, abs=2 * math.pi * 0.15 * 25.4 * TOL)


def test_points_with_a_concave_fillet(tmp_path):
    # an L: 50 x 18 foot and an 18 x 20 upright, 4 mm fillet in the inside corner (corner 4)
    p = _write(tmp_path, "[pocket]\npoints = [[0, 0], [50, 0], [50, 18], [18, 18], [18, 38], [0, 38]]\n"
                         "radii = [0, 0, 0, 4, 0, 0]\n")
    cavity, _ = _read(p)
    exact = 50 * 18 + 18 * 20 + 4 ** 2 * (1 - math.pi / 4)  # a concave fillet adds r^2 (1 - pi/4)
    assert cavity.outline.area == pytest.approx(exact, abs=2 * math.pi * 4 / 4 * TOL + 1e-9)


def test_points_with_every_corner_rounded_equal_the_rectangle(tmp_path):
    a = _read(_write(tmp_path, "[pocket]\nsize = [28, 17]\ncorner_radius = 3\n", "a.toml"))[0]
    b = _read(_write(tmp_path, "[pocket]\npoints = [[0, 0], [28, 0], [28, 17], [0, 17]]\nradii = [3, 3, 3, 3]\n",
                     "b.toml"))[0]
    assert a.outline.symmetric_difference(b.outline).area < 1e-9


def test_bosses_ribs_and_zones(tmp_path):
    p = _write(tmp_path, """
lid_depth = 7
[pocket]
size = [60, 40]
[[boss]]
center = [10, 10]
diameter = 5
[[rib]]
path = [[20, 5], [40, 5], [40, 25]]
width = 2
[[rib]]
at = [50, 30]
size = [6, 2]
[[zone]]
name = "under the battery"
depth = 3.5
points = [[0, 20], [30, 20], [30, 40], [0, 40]]
""")
    cavity, _ = _read(p)
    boss, rib, block = cavity.keepouts
    assert math.pi * 2.5 ** 2 - boss.area == pytest.approx(0, abs=2 * math.pi * 2.5 * TOL)  # pi r^2
    assert rib.area == pytest.approx((20 + 20) * 2)  # a mitred polyline: centre length x width
    assert block.area == pytest.approx(12)
    (zone,) = cavity.depth_zones
    assert (zone.depth_mm, zone.layer, zone.polygon.area) == (3.5, "under the battery", 600.0)
    assert cavity.depth_mm == 7


def test_lid_depth_defaults_to_the_project_depth(tmp_path):
    cavity, _ = _read(_write(tmp_path, "[pocket]\nsize = [10, 10]\n"), depth_mm=4.5)
    assert cavity.depth_mm == 4.5


def _dxf_cavity_of_demo():
    return read_cavity(OUTLINES / "controller-bay.dxf", display_name="controller-bay.dxf", depth_mm=6.0)[0]


def test_demo_measured_file_gives_the_drawings_cavity_and_region():
    drawn = _dxf_cavity_of_demo()
    measured, _ = read_cavity(OUTLINES / "controller-bay.cavity.toml", display_name="m", depth_mm=1.0)
    perimeter = drawn.outline.length
    assert drawn.outline.symmetric_difference(measured.outline).area <= perimeter * TOL
    for a, b in zip(drawn.keepouts, measured.keepouts):
        assert a.symmetric_difference(b).area <= a.length * TOL
    (za,), (zb,) = drawn.depth_zones, measured.depth_zones
    assert za.depth_mm == zb.depth_mm and za.polygon.symmetric_difference(zb.polygon).area < 1e-9
    assert measured.depth_mm == 6.0  # lid_depth in the file wins over the project's depth
    board = BoardOptions(thickness_mm=0.8, wall_clearance_mm=0.3)
    ra, rb = usable_region(drawn, board)[0], usable_region(measured, board)[0]
    assert ra.board_region.symmetric_difference(rb.board_region).area <= ra.board_region.length * TOL
    assert [round(z.max_height_mm, 9) for z in ra.zones] == [round(z.max_height_mm, 9) for z in rb.zones]


def test_write_dxf_reads_back_as_the_same_cavity(tmp_path):
    out = tmp_path / "bay.dxf"
    r = CliRunner().invoke(main, ["cavity", str(OUTLINES / "controller-bay.cavity.toml"), "--write-dxf", str(out)],
                           catch_exceptions=False)
    assert r.exit_code == 0, r.output
    doc = ezdxf.readfile(out)
    assert doc.header["$INSUNITS"] == 4
    assert {la.dxf.name for la in doc.layers} >= {"CAVITY", "KEEPOUT", "DEPTH-2"}
    back, _ = read_cavity(out, depth_mm=6.0)
    measured, _ = read_cavity(OUTLINES / "controller-bay.cavity.toml")
    assert back.outline.symmetric_difference(measured.outline).area < 1e-6
    assert len(back.keepouts) == 2 and back.depth_zones[0].depth_mm == 2.0
    again = CliRunner().invoke(main, ["cavity", str(OUTLINES / "controller-bay.cavity.toml"), "--write-dxf", str(out)])
    assert again.exit_code == 2 and "exists already" in again.output
    assert ezdxf.readfile(out).header["$INSUNITS"] == 4  # the existing file was left alone


def test_write_dxf_in_inches(tmp_path):
    p = _write(tmp_path, 'units = "inch"\n[pocket]\nsize = [1.8, 1.2]\ncorner_radius = 0.15\n')
    out = tmp_path / "inch.dxf"
    r = CliRunner().invoke(main, ["cavity", str(p), "--write-dxf", str(out)], catch_exceptions=False)
    assert r.exit_code == 0, r.output
    doc = ezdxf.readfile(out)
    assert doc.header["$INSUNITS"] == 1  # DXF reference: 1 = inches
    back, _ = read_cavity(out)
    assert back.outline.bounds == pytest.approx((0, 0, 1.8 * 25.4, 1.2 * 25.4))


def test_run_with_a_measured_cavity(tmp_path):
    r = CliRunner().invoke(main, ["run", str(ROOT / "demo_project"), "--cavity",
                                  str(OUTLINES / "controller-bay.cavity.toml"), "--out", str(tmp_path / "out")],
                           catch_exceptions=False)
    assert r.exit_code in (0, 1), r.output
    assert (tmp_path / "out" / "fit.svg").exists() and (tmp_path / "out" / "board-outline.dxf").exists()


@pytest.mark.parametrize("text,key,reason", [
    ("[pocket]\nsize = [10, 6]\ncorner_radius = 3.5\n", "pocket.corner_radius", "more than half the shorter side"),
    ("[pocket]\nsize = [10, -6]\n", "pocket.size", "greater than 0"),
    ("[pocket]\npoints = [[0, 0], [10, 0], [10, 10], [0, 10]]\nradii = [6, 6, 0, 0]\n", "pocket.radii", "need 12"),
    ("[pocket]\npoints = [[0, 0], [10, 10], [10, 0], [0, 10]]\n", "pocket.points", "crosses or touches itself"),
    ("[pocket]\nsize = [10, 10]\n[[boss]]\ncenter = [30, 30]\ndiameter = 2\n", "boss[0].center", "wholly outside"),
    ("[pocket]\nsize = [10, 10]\n[[boss]]\ncenter = [3, 3]\ndiameter = 0\n", "boss[0].diameter", "greater than 0"),
    ("[pocket]\nsize = [10, 10]\n[[zone]]\ndepth = -1\nsize = [2, 2]\n", "zone[0].depth", "at least 0"),
    ("[pocket]\nsize = [10, 10]\n[[rib]]\npath = [[1, 1], [5, 1]]\n", "rib[0].width", "expected a number"),
    ("lid_depth = 0\n[pocket]\nsize = [10, 10]\n", "lid_depth", "greater than 0"),
    ('units = "furlong"\n[pocket]\nsize = [10, 10]\n', "units", "unknown units"),
    ("[pocket]\nsize = [10, 10]\ncorner_radiu = 1\n", "pocket.corner_radiu", "unknown key"),
    ("wall = 2\n[pocket]\nsize = [10, 10]\n", "wall", "unknown key"),
    ("units = \"mm\"\n", "pocket", "no [pocket]"),
    ("[pocket]\nsize = [nan, 10]\n", "pocket.size", "finite"),
])
def test_impossible_measurements_refused_naming_the_key(tmp_path, text, key, reason):
    p = _write(tmp_path, text)
    with pytest.raises(CavityError) as ei:
        _read(p)
    msg = str(ei.value)
    assert f": {key}: " in msg and reason in msg, msg
    assert msg.startswith("pocket.toml:")


def test_impossible_measurement_through_the_cli(tmp_path):
    p = _write(tmp_path, "[pocket]\nsize = [10, 6]\n\ncorner_radius = 3.5\n")
    r = CliRunner().invoke(main, ["cavity", str(p)])
    assert r.exit_code == 2 and "Traceback" not in r.output
    assert f"{p}:4: pocket.corner_radius: " in r.output, r.output
