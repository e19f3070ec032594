"""Mounting bosses (pipeline/mount.py): screw sizes against the standards, the board covering the
boss, the hole at its centre, no courtyard or copper on the head ring, and bad input."""

from __future__ import annotations

import json
import math

import ezdxf
import pytest
import shapely
from click.testing import CliRunner
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from shapely.geometry import LineString, Point, Polygon, box

from pipeline.cli import main
from pipeline.errors import CavityError
from pipeline.model import BoardOptions, Cavity, MountMark, PlaceItem
from pipeline.mount import HEAD_CLEARANCE_MM, mark_points, resolve_mounts, screws
from pipeline.place import place_and_fit
from pipeline.region import usable_region
from pipeline.starter import write_starter


# -- the screw table against the published standards --------------------------------------------
# ISO 273 clearance holes, medium series (H13): M2 2.4, M2.5 2.9, M3 3.4 mm (the ISO 273 / DIN 406
#   table as reprinted by engineeringhardware.com "Clearance Hole Sizes" and draughtsman.co.uk).
# ISO 7045 pan head with cross recess, product grade A: dk max M2 4.0, M2.5 5.0, M3 5.6 mm; k max
#   1.6, 2.1, 2.4 mm (the ISO 7045 dimension table as reprinted by a fastener supplier; DIN 7985,
#   the older German pan head, differs: M3 dk 6.0, k 2.52, so the two must not be mixed up).
@pytest.mark.parametrize("name, hole, dk, k", [
    ("M2", 2.4, 4.0, 1.6),
    ("M2.5", 2.9, 5.0, 2.1),
    ("M3", 3.4, 5.6, 2.4),
])
def test_screw_sizes_match_iso_273_and_iso_7045(name, hole, dk, k):
    s = screws()[name]
    assert (s.hole_mm, s.head_mm, s.head_height_mm) == (hole, dk, k)
    assert s.thread_mm == float(name[1:])
    # ring = dk max + 0.5 mm all round (common practice, stated in pipeline/mount.py)
    assert s.ring_mm == pytest.approx(dk + 2 * 0.5)
    assert HEAD_CLEARANCE_MM == 0.5
    assert "ISO 273" in s.source and "ISO 7045" in s.source


# -- region and placement on model values ---------------------------------------------------------
def _cavity(w, h, bx, by, bd, screw="M2", depth=5.0, centre=True):
    boss = Point(bx, by).buffer(bd / 2, quad_segs=32)
    mark = MountMark(0, screw, (bx, by) if centre else None, "bay.toml", "boss[0].mount", 3)
    return Cavity("bay.toml", box(0, 0, w, h), (boss,), (), None, depth, "mm", 1.0, mounts=(mark,))


def test_region_covers_a_mounting_boss_and_keeps_the_other_keepouts():
    cav = _cavity(30, 20, 10, 10, 4.0)
    region, findings = usable_region(cav, BoardOptions(wall_clearance_mm=0.5))
    # closed form: the 29 x 19 mm inset rectangle, the boss not cut out (it is covered)
    assert region.area_mm2 == pytest.approx(29 * 19)
    assert [f.check for f in findings] == ["region.mount"]
    plain = Cavity("bay.toml", cav.outline, cav.keepouts, (), None, 5.0, "mm", 1.0)
    region2, _ = usable_region(plain, BoardOptions(wall_clearance_mm=0.5))
    assert region2.area_mm2 < region.area_mm2 - 15  # a 5 mm circle (4 mm boss + 2 x 0.5) cut out


def test_head_taller_than_the_lid_allows_is_an_error_finding():
    # lid 2.0 mm over a 0.8 mm board leaves 1.2 mm; an M2 pan head is 1.6 mm (ISO 7045 k max)
    region, findings = usable_region(_cavity(30, 20, 10, 10, 4.0, depth=2.0), BoardOptions())
    assert [(f.severity, f.check) for f in findings] == [("error", "region.mount-head")]


def _courtyards(n):
    return [PlaceItem(f"R{i}", 2.2 + 0.3 * (i % 3), 1.3 + 0.2 * (i % 2), 0.6, ("A", f"N{i}")) for i in range(n)]


@settings(max_examples=12, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(w=st.floats(22, 40), h=st.floats(14, 30), fx=st.floats(0.2, 0.8), fy=st.floats(0.25, 0.75),
       size=st.sampled_from(["M2", "M2.5", "M3"]), n=st.integers(2, 14), measured=st.booleans())
def test_generated_designs_keep_the_ring_free_and_the_hole_centred(w, h, fx, fy, size, n, measured):
    s = screws()[size]
    bd = s.hole_mm + 1.6
    bx, by = w * fx, h * fy
    cav = _cavity(w, h, bx, by, bd, size, centre=measured)
    board = BoardOptions(wall_clearance_mm=0.3, edge_clearance_mm=0.5)
    region, findings = usable_region(cav, board)
    fit = place_and_fit(_courtyards(n), region, board)
    outline = fit.board_outline
    # the board covers the boss: the outline (holes filled) holds it, and all of it but the hole
    filled = Polygon(outline.exterior)
    assert filled.covers(cav.keepouts[0])
    hole = Point(bx, by).buffer(s.hole_mm / 2, quad_segs=64)
    assert outline.buffer(1e-6).covers(cav.keepouts[0].difference(hole.buffer(0.01)))
    # exactly one hole of the outline is the screw hole, centred on the boss within 1e-6 mm
    drills = [Polygon(r) for r in outline.interiors if Polygon(r).distance(Point(bx, by)) < 1e-9]
    assert len(drills) == 1
    assert math.hypot(drills[0].centroid.x - bx, drills[0].centroid.y - by) < 1e-6
    # its diameter is the ISO 273 clearance hole (the polygon's area against pi d^2 / 4)
    assert drills[0].area == pytest.approx(math.pi * s.hole_mm ** 2 / 4, rel=0.01)
    # no courtyard on the true head ring (a fine circle, independent of the placer's polygon)
    ring = Point(bx, by).buffer(s.ring_mm / 2, quad_segs=256)
    for p in fit.placements:
        assert p.courtyard.intersection(ring).area < 1e-9, p.ref
        assert p.courtyard.intersection(cav.keepouts[0]).area < 1e-9, p.ref


def test_mark_points_picks_the_keepout_holding_the_point():
    cav = Cavity("bay.dxf", box(0, 0, 30, 20), (box(20, 0, 30, 3), Point(5, 5).buffer(2)), (), None, 5.0,
                 "mm", 1.0)
    marked = mark_points(cav, [((5.5, 4.5), "M2", "board.mount[0].at", 9)], "project.toml", CavityError)
    (m,) = resolve_mounts(marked)
    assert m.keepout == 1 and m.screw == "M2"
    assert math.hypot(m.x_mm - 5, m.y_mm - 5) < 1e-6  # centroid of the drawn circle = its centre


@pytest.mark.parametrize("screw, diameter, needle", [
    ("M3", 4.0, "too small"),     # M3: 3.4 mm hole + 2 x 0.5 mm face = 4.4 mm needed
    ("M2", 13.0, "too big"),      # M2: 3 x 4.0 mm head = 12 mm at most
])
def test_boss_too_small_or_too_big_is_refused(screw, diameter, needle):
    with pytest.raises(CavityError, match=needle):
        resolve_mounts(_cavity(40, 30, 20, 15, diameter, screw))


# -- the command line -----------------------------------------------------------------------------
def _starter(tmp_path, mount: str):
    write_starter(tmp_path / "p")
    proj = tmp_path / "p" / "project.toml"
    text = proj.read_text()
    text = text.replace("[cavity]", f"{mount}\n[cavity]", 1) if "[cavity]" in text else text + mount
    proj.write_text(text)
    return tmp_path / "p"


def test_cli_run_with_a_mount_writes_the_hole_everywhere(tmp_path):
    # the starter cavity has a 3.6 mm screw boss at (25, 15)
    folder = _starter(tmp_path, '\n[[board.mount]]\nat = [25.5, 15]\nscrew = "M2"\n')
    r = CliRunner().invoke(main, ["run", str(folder)], catch_exceptions=False)
    assert r.exit_code == 0, r.output
    out = folder / "out"
    ring = Point(25, 15).buffer(2.5, quad_segs=256)  # M2: 4.0 + 2 x 0.5 mm
    doc = json.loads((out / "routes.json").read_text())
    holes = [Polygon(h) for h in doc["holes"]]
    drills = [h for h in holes if abs(h.area - math.pi * 1.2 ** 2) < 0.05]
    assert len(drills) == 1 and drills[0].centroid.distance(Point(25, 15)) < 1e-3
    for t in doc["tracks"]:
        if t["layer"] == "top":
            assert LineString(t["points"]).buffer(t["width_mm"] / 2).intersection(ring).area < 1e-6
    dxf = ezdxf.readfile(out / "board-outline.dxf")
    rings = [Polygon([(x, y) for x, y, *_ in e.get_points()]) for e in dxf.modelspace().query("LWPOLYLINE")]
    assert any(abs(p.area - math.pi * 1.2 ** 2) < 0.05 and p.centroid.distance(Point(25, 15)) < 1e-3 for p in rings)
    assert "region.mount" in (out / "findings.json").read_text()
    svg = (out / "fit.svg").read_text()
    assert '<circle class="mount-ring" cx="25.000" cy="-15.000" r="2.500"' in svg  # drawn at (x, -y)
    assert "M2 clearance hole" in (out / "report.html").read_text()


@pytest.mark.parametrize("mount, needle", [
    ('[[board.mount]]\nat = [2, 2]\nscrew = "M2"\n', "board.mount[0].at: no keep-out"),
    ('[[board.mount]]\nat = [25, 15]\nscrew = "M9"\n', "board.mount[0].screw: unknown screw size"),
    ('[[board.mount]]\nat = [25, 15]\nscrew = "M3"\n', "too small for an M3 screw"),
    ('[[board.mount]]\nat = [25, 15]\nscrew = "M2"\nhead = 1\n', "board.mount[0].head: unknown key"),
    ('[[board.mount]]\nat = [25]\nscrew = "M2"\n', "board.mount[0].at: expected a point"),
])
def test_cli_bad_mount_exits_2_naming_file_and_key(tmp_path, mount, needle):
    folder = _starter(tmp_path, "\n" + mount)
    r = CliRunner().invoke(main, ["run", str(folder)])
    assert r.exit_code == 2, r.output
    assert "project.toml" in r.output and needle in r.output
    assert "Traceback" not in r.output
    assert not (folder / "out").exists()


def test_cli_measured_boss_mount_bad_size(tmp_path):
    folder = tmp_path / "m"
    write_starter(folder)
    (folder / "bay.toml").write_text('[pocket]\nsize = [30, 20]\n[[boss]]\ncenter = [5, 10]\ndiameter = 4\n'
                                     'mount = "M4"\n')
    proj = folder / "project.toml"
    proj.write_text(proj.read_text().replace('cavity = "cavity.dxf"', 'cavity = "bay.toml"'))
    r = CliRunner().invoke(main, ["run", str(folder)])
    assert r.exit_code == 2, r.output
    assert "bay.toml:6: boss[0].mount: unknown screw size 'M4'" in r.output
    assert not (folder / "out").exists()


def test_cli_part_fixed_on_the_head_ring_exits_2(tmp_path):
    folder = _starter(tmp_path, '\n[[board.mount]]\nat = [25, 15]\nscrew = "M2"\n')
    design = folder / "design.toml"
    # R1's courtyard centred 2 mm from the boss centre: inside the 2.5 mm M2 head ring
    design.write_text(design.read_text().replace("[parts.R1]\n", "[parts.R1]\nat = [23.0, 15.0]\n", 1))
    r = CliRunner().invoke(main, ["run", str(folder)])
    assert r.exit_code == 2, r.output
    assert "design.toml" in r.output and "parts.R1.at" in r.output and "head ring" in r.output
    assert not (folder / "out").exists()


def test_hole_cut_by_the_wall_clearance_is_an_error_finding():
    # hole of 2.4 mm at x = 1.0 reaches x = -0.2, beyond the 0.3 mm wall clearance (closed form)
    region, findings = usable_region(_cavity(30, 20, 1.0, 10, 4.0), BoardOptions(wall_clearance_mm=0.3))
    assert [(f.severity, f.check) for f in findings] == [("error", "region.mount-outside")]


def test_two_mounts_on_one_keepout_are_refused():
    cav = _cavity(30, 20, 10, 10, 4.0)
    twice = mark_points(cav, [((10, 10), "M2", "board.mount[0].at", 4)], "project.toml", CavityError)
    with pytest.raises(CavityError, match="already a mount"):
        resolve_mounts(twice)


@pytest.mark.parametrize("gap, blocked", [(0.0, False), (0.3, False), (0.5, True)])
def test_raised_board_leaves_less_room_for_the_head(gap, blocked):
    from pipeline.mount import raised_heads

    # lid 2.8 mm over a 0.8 mm board: 2.0 mm; an M2 head is 1.6 mm (ISO 7045 k max): gap 0.4 mm is the limit
    region, findings = usable_region(_cavity(30, 20, 10, 10, 4.0, depth=2.8), BoardOptions())
    assert [f.check for f in findings] == ["region.mount"]
    assert bool(raised_heads(region.mounts, region.zones, gap)) is blocked


def test_cli_cavity_command_names_the_mounting_boss(tmp_path):
    folder = _starter(tmp_path, '\n[[board.mount]]\nat = [25, 15]\nscrew = "M2"\n')
    r = CliRunner().invoke(main, ["cavity", str(folder / "cavity.dxf"), "--project", str(folder)])
    assert r.exit_code == 0, r.output
    # ISO 273 medium series 2.4 mm; ISO 7045 dk max 4.0 + 2 x 0.5 mm (common practice) = 5 mm
    assert "mounting boss: M2 hole 2.4 mm, head ring 5 mm" in r.output
