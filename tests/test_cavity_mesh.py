"""A cavity from a 3D model of the shell (issue 14, items 2-4): STL, OBJ and 3MF.

Shells are built from primitives with ``trimesh.creation`` (boxes, cylinders): a closed box with
a box-shaped void inside (the inner box inverted), a boss standing on the void's floor, a rib
hanging from the lid. Their answers are closed forms (elementary geometry): the floor is the
void's bottom, the outline the void's plan rectangle w*h, a boss of a regular n-gon section has
area (n/2) r^2 sin(2 pi / n), a rib's depth is the floor-to-rib-bottom distance, and a zone built
from grid cells of side g differs from the true shape by at most g per unit of boundary length.
"""

from __future__ import annotations

import math
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
import trimesh
from click.testing import CliRunner
from trimesh.creation import box, cylinder

from pipeline.cavity import read_cavity
from pipeline.cli import main
from pipeline.errors import CavityError

ROOT = Path(__file__).resolve().parents[1]
W, H, D = 60.0, 40.0, 20.0  # void (mm): the floor at z = -D/2
BOSS_R, BOSS_N, BOSS_AT = 2.5, 64, (-20.0, 5.0)
RIB_W, RIB_H = 2.0, 3.0  # rib under the lid: x from RIB_X - 1 to RIB_X + 1, full height of the void in y
RIB_X = 10.3
GRID = 0.2  # mm, the default grid step
# Binary STL stores float32 (24-bit mantissa, IEEE 754): coordinates near 150 mm keep about 1e-5 mm,
# so an outline of perimeter 200 mm can move its area by up to about 0.002 mm^2.
F32_AREA = 0.01


def _shell(boss: bool = True, rib: bool = True) -> trimesh.Trimesh:
    outer = box((W + 4, H + 4, D + 4))
    inner = box((W, H, D))
    inner.invert()
    parts = [outer, inner]
    if boss:
        b = cylinder(radius=BOSS_R, height=D, sections=BOSS_N)
        b.apply_translation((*BOSS_AT, 0))
        parts.append(b)
    if rib:
        r = box((RIB_W, H, RIB_H))
        r.apply_translation((RIB_X, 0, D / 2 - RIB_H / 2))
        parts.append(r)
    return trimesh.util.concatenate(parts)


def _save(mesh: trimesh.Trimesh, path: Path, file_type: str | None = None) -> Path:
    mesh.export(path, file_type=file_type) if file_type else mesh.export(path)
    return path


def _read(path: Path, **kw):
    return read_cavity(path, display_name=path.name, **kw)


def _ngon_area(r: float, n: int) -> float:
    return 0.5 * n * r * r * math.sin(2 * math.pi / n)  # regular n-gon inscribed in radius r (elementary)


def test_floor_outline_keepout_and_rib_zone_match_closed_form(tmp_path):
    cavity, findings = _read(_save(_shell(), tmp_path / "shell.stl"))
    floor = [f for f in findings if f.check == "cavity.mesh-floor"]
    assert floor and "-10.000 mm" in floor[0].message  # the void's bottom, z = -D/2 (box centred at 0)
    assert cavity.outline.area == pytest.approx(W * H, abs=GRID * 2 * (W + H))  # w*h within the step
    (k,) = cavity.keepouts
    assert k.area == pytest.approx(_ngon_area(BOSS_R, BOSS_N), rel=1e-6)  # regular n-gon area
    assert math.dist((k.centroid.x, k.centroid.y), BOSS_AT) < GRID
    assert cavity.depth_mm == D  # void height, exact
    (zone,) = cavity.depth_zones
    assert zone.depth_mm == pytest.approx(D - RIB_H, abs=1e-9)  # floor to the rib's bottom, exact
    perimeter = 2 * (RIB_W + H)
    assert abs(zone.polygon.area - RIB_W * H) <= GRID * perimeter  # one cell per unit of boundary
    assert zone.polygon.bounds[0] == pytest.approx(RIB_X - RIB_W / 2, abs=GRID)


@pytest.mark.parametrize("floor", [-10, "find"])
def test_a_given_floor_gives_the_found_answer(tmp_path, floor):
    ref, _ = _read(_save(_shell(), tmp_path / "ref.stl"))
    got, findings = _read(_save(_shell(), tmp_path / "given.stl"), mesh_options={"mesh_floor": floor})
    assert got.outline.symmetric_difference(ref.outline).area < 1e-9
    assert [z.depth_mm for z in got.depth_zones] == [z.depth_mm for z in ref.depth_zones]
    assert ("as given" in findings[0].message) == (floor != "find")


@pytest.mark.parametrize("fmt,name", [("stl", "s.stl"), ("stl_ascii", "s.stl"), ("obj", "s.obj"), ("3mf", "s.3mf")])
def test_every_format_gives_the_same_cavity(tmp_path, fmt, name):
    ref, _ = _read(_save(_shell(), tmp_path / "ref.stl"))
    got, _ = _read(_save(_shell(), tmp_path / name, fmt))
    assert got.outline.symmetric_difference(ref.outline).area < 1e-6
    assert [z.depth_mm for z in got.depth_zones] == [z.depth_mm for z in ref.depth_zones]
    assert got.keepouts[0].area == pytest.approx(ref.keepouts[0].area, rel=1e-6)  # ASCII STL: ~7 digits


def test_inches_give_the_same_region(tmp_path):
    ref, _ = _read(_save(_shell(), tmp_path / "mm.stl"))
    inch = _shell()
    inch.apply_scale(1 / 25.4)  # 1 in = 25.4 mm exactly (1959 international inch)
    got, findings = _read(_save(inch, tmp_path / "in.stl"), default_units="inch")
    assert got.outline.symmetric_difference(ref.outline).area < F32_AREA
    assert [z.depth_mm for z in got.depth_zones] == [z.depth_mm for z in ref.depth_zones]
    assert not [f for f in findings if f.check == "cavity.implausible-size"]


@pytest.mark.parametrize("up,rotation", [
    ("z", (math.radians(30), (0, 0, 1))),  # turned about up: the same region, turned
    ("y", (-math.pi / 2, (1, 0, 0))),  # R_x(-90 deg) takes +z to +y (right-hand rule)
    ("-x", (-math.pi / 2, (0, 1, 0))),  # R_y(-90 deg) takes +z to -x
])
def test_rotated_and_translated_mesh_gives_the_same_region(tmp_path, up, rotation):
    ref, _ = _read(_save(_shell(), tmp_path / "ref.stl"))
    mesh = _shell()
    mesh.apply_transform(trimesh.transformations.rotation_matrix(rotation[0], rotation[1]))
    mesh.apply_translation((123.4, -56.7, 8.9))
    got, _ = _read(_save(mesh, tmp_path / "moved.stl"), mesh_options={"mesh_up": up})
    assert got.outline.area == pytest.approx(ref.outline.area, abs=F32_AREA)
    assert got.depth_mm == pytest.approx(ref.depth_mm, abs=1e-4)
    assert [z.depth_mm for z in got.depth_zones] == [z.depth_mm for z in ref.depth_zones]
    assert abs(got.depth_zones[0].polygon.area - RIB_W * H) <= GRID * 2 * (RIB_W + H)
    # the boss keeps its distance from the outline's centre (a rigid motion keeps distances)
    c_ref, c_got = ref.outline.centroid, got.outline.centroid
    d_ref = ref.keepouts[0].centroid.distance(c_ref)
    assert got.keepouts[0].centroid.distance(c_got) == pytest.approx(d_ref, abs=GRID)


def test_a_mesh_in_metres_read_as_mm_is_warned(tmp_path):
    m = _shell()
    m.apply_scale(0.001)
    _, findings = _read(_save(m, tmp_path / "metres.stl"))
    assert any(f.check == "cavity.implausible-size" for f in findings)


def _open_hole(mesh: trimesh.Trimesh, faces: list[int]) -> trimesh.Trimesh:
    keep = np.ones(len(mesh.faces), bool)
    keep[faces] = False
    return trimesh.Trimesh(mesh.vertices, mesh.faces[keep], process=False)


def _flip(mesh: trimesh.Trimesh, faces) -> trimesh.Trimesh:
    f = mesh.faces.copy()
    f[faces] = f[faces][:, ::-1]
    return trimesh.Trimesh(mesh.vertices, f, process=False)


@pytest.mark.parametrize("damage", [
    lambda m: _open_hole(m, [0]),  # one triangle missing: a hole the library fills
    lambda m: _flip(m, [3]),  # one face turned over
    lambda m: _flip(m, slice(None)),  # every face turned over (inside out)
])
def test_repairable_damage_is_warned_and_repaired(tmp_path, damage):
    ref, _ = _read(_save(_shell(), tmp_path / "ref.stl"))
    cavity, findings = _read(_save(damage(_shell()), tmp_path / "damaged.stl"))
    assert any(f.check == "cavity.mesh-repaired" for f in findings)
    assert cavity.outline.area == pytest.approx(ref.outline.area, rel=1e-9)


@pytest.mark.parametrize("content,reason", [
    (b"", "empty"),
    (b"this is not a mesh\n", "no triangles"),
    (None, "not closed"),
])
def test_unusable_meshes_exit_2_naming_the_file_and_writing_nothing(tmp_path, content, reason):
    p = tmp_path / "bad.stl"
    if content is None:
        m = _shell(boss=False, rib=False)
        _save(_open_hole(m, list(range(0, 12, 2)) + [1]), p)  # a whole side and more: no simple hole
    else:
        p.write_bytes(content)
    out = tmp_path / "out.dxf"
    r = CliRunner().invoke(main, ["cavity", str(p), "--write-dxf", str(out)])
    assert r.exit_code == 2 and "bad.stl" in r.output and reason in r.output, r.output
    assert "Traceback" not in r.output and not out.exists()


def test_a_mesh_with_no_enclosed_space_is_refused(tmp_path):
    with pytest.raises(CavityError, match="no floor|encloses no space"):
        _read(_save(box((10, 10, 10)), tmp_path / "solid.stl"))


def test_cli_prints_floor_keepouts_zones_and_writes_dxf(tmp_path):
    p = _save(_shell(), tmp_path / "shell.stl")
    out = tmp_path / "shell.dxf"
    r = CliRunner().invoke(main, ["cavity", str(p), "--write-dxf", str(out)])
    assert r.exit_code == 0, r.output
    assert "Board plane at -10.000 mm" in r.output and "keep-out 1" in r.output
    assert f"{D - RIB_H:g} mm deep" in r.output
    back, _ = read_cavity(out, display_name="shell.dxf")  # the DXF reader reads what was written
    assert back.outline.area == pytest.approx(W * H, rel=1e-6)
    assert [z.depth_mm for z in back.depth_zones] == [pytest.approx(D - RIB_H)]


@pytest.mark.parametrize("key,value", [("mesh_up", '"w"'), ("mesh_grid_mm", "0"), ("mesh_floor", '"low"')])
def test_bad_mesh_settings_are_refused_naming_the_key(tmp_path, key, value):
    p = _save(_shell(), tmp_path / "shell.stl")
    (tmp_path / "project.toml").write_text(f'[project]\ndesign = "d.toml"\ncavity = "shell.stl"\n[cavity]\n{key} = {value}\n')
    r = CliRunner().invoke(main, ["cavity", str(p), "--project", str(tmp_path)])
    assert r.exit_code == 2 and key in r.output, r.output


def test_reading_a_dxf_never_imports_the_mesh_library():
    code = ("from pathlib import Path\nfrom pipeline.cavity import read_cavity\n"
            "read_cavity(Path('outlines/controller-bay.dxf'))\nimport sys\nprint('trimesh' in sys.modules)")
    out = subprocess.run([sys.executable, "-c", code], cwd=ROOT, capture_output=True, text=True, check=True)
    assert out.stdout.strip().splitlines()[-1] == "False"


def _shell_script():
    import importlib.util
    spec = importlib.util.spec_from_file_location("outlines_shell", ROOT / "outlines" / "shell.py")
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    return mod


def test_demo_bay_mesh_is_reproducible_and_committed():
    mod = _shell_script()
    data = mod.stl_bytes()
    assert data == mod.stl_bytes()
    assert (ROOT / "outlines" / "controller-bay.stl").read_bytes() == data, "stale: run outlines/shell.py"


def test_demo_bay_mesh_gives_the_region_of_the_drawing():
    from pipeline.model import BoardOptions
    from pipeline.region import usable_region

    mesh, _ = read_cavity(ROOT / "outlines" / "controller-bay.stl", display_name="controller-bay.stl")
    dxf, _ = read_cavity(ROOT / "outlines" / "controller-bay.dxf", display_name="controller-bay.dxf", depth_mm=6.0)
    tol = 0.02  # the chord tolerance both were flattened to
    assert mesh.outline.symmetric_difference(dxf.outline).area <= tol * dxf.outline.length
    for a, b in zip(mesh.keepouts, dxf.keepouts):
        assert a.symmetric_difference(b).area <= tol * b.length
    assert mesh.depth_mm == dxf.depth_mm == 6.0
    assert [z.depth_mm for z in mesh.depth_zones] == [z.depth_mm for z in dxf.depth_zones] == [2.0]
    (rm, _), (rd, _) = usable_region(mesh, BoardOptions()), usable_region(dxf, BoardOptions())
    assert [z.max_height_mm for z in rm.zones] == [z.max_height_mm for z in rd.zones]
    for zm, zd in zip(rm.zones, rd.zones):
        # grid cells of side GRID along the zone boundaries, plus the chord tolerance along the outline
        assert zm.polygon.symmetric_difference(zd.polygon).area <= GRID * zd.polygon.length + tol * dxf.outline.length


def _tray(w: float, h: float, depth: float, wall: float) -> trimesh.Trimesh:
    """An open tray built by hand: inside w x h, floor at z = 0, walls up to z = depth, 'wall' thick.

    Four rectangular rings (outer bottom, outer top, inner top, inner floor) joined by quads, the
    outer bottom and the inner floor capped; normals made outward by the library afterwards.
    """
    def ring(x0, y0, x1, y1, z):
        return [(x0, y0, z), (x1, y0, z), (x1, y1, z), (x0, y1, z)]
    rings = [ring(-wall, -wall, w + wall, h + wall, -wall), ring(-wall, -wall, w + wall, h + wall, depth),
             ring(0, 0, w, h, depth), ring(0, 0, w, h, 0)]
    verts = np.array([p for r in rings for p in r], float)
    faces = []
    for r in range(3):
        for i in range(4):
            a, b = 4 * r + i, 4 * r + (i + 1) % 4
            faces += [(a, b, b + 4), (a, b + 4, a + 4)]
    faces += [(0, 2, 1), (0, 3, 2), (12, 13, 14), (12, 14, 15)]
    mesh = trimesh.Trimesh(verts, faces, process=True)
    trimesh.repair.fix_normals(mesh)
    assert mesh.is_watertight and mesh.volume > 0  # a closed solid: wall volume, elementary
    return mesh


def test_open_tray_takes_the_project_depth_and_a_lid_mesh_its_own(tmp_path):
    tray = _save(_tray(40, 30, 8, 2), tmp_path / "tray.stl")
    open_cavity, _ = _read(tray, depth_mm=7.5)
    assert open_cavity.outline.area == pytest.approx(40 * 30, rel=1e-9)  # inside of the walls
    assert open_cavity.depth_mm == 7.5 and not open_cavity.depth_zones  # nothing above: the project's depth
    lid = box((44, 34, 2), transform=trimesh.transformations.translation_matrix((20, 15, 9)))  # z 8..10
    rib = box((3, 30, 2.5), transform=trimesh.transformations.translation_matrix((20, 15, 6.75)))  # z 5.5..8
    _save(trimesh.util.concatenate([lid, rib]), tmp_path / "lid.stl")
    closed, _ = _read(tray, depth_mm=7.5, mesh_options={"mesh_lid": str(tmp_path / "lid.stl")})
    assert closed.depth_mm == 8.0  # floor z = 0 to the lid's underside z = 8
    (zone,) = closed.depth_zones
    assert zone.depth_mm == 5.5  # floor to the rib's bottom
    assert abs(zone.polygon.area - 3 * 30) <= GRID * 2 * (3 + 30)  # one cell per unit of boundary
