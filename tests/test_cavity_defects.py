"""Regression tests for the cavity reader's defects of issue 13 (items 5 to 10 and 14).

Each test is named after its defect and reproduces it from the issue's words; the user-visible
ones go through the command line (click's runner, or a subprocess where the process environment
is the point): exit status 2, a message naming the file and the entity, no traceback.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

import ezdxf
import pytest
import shapely
from click.testing import CliRunner
from shapely.geometry import Polygon

import pipeline.cavity.load as load_mod
from pipeline.cavity import Limits, read_cavity
from pipeline.cavity.chain import Ring, one_outline
from pipeline.cli import main
from pipeline.errors import CavityError

ROOT = Path(__file__).resolve().parents[1]
RECT = [(0, 0), (40, 0), (40, 20), (0, 20)]


def _invoke(*args):
    return CliRunner().invoke(main, [str(a) for a in args], catch_exceptions=False)


def _drawing(path: Path, pts=RECT, *, version: str = "R2013", units: int = 4, extra=None) -> Path:
    doc = ezdxf.new(version, units=units)
    msp = doc.modelspace()
    msp.add_lwpolyline(pts, close=True, dxfattribs={"layer": "CAVITY"})
    if extra:
        extra(msp)
    doc.saveas(path)
    return path


def _refused(result, *words):
    """Exit 2, one located message on stderr naming every word, no traceback."""
    assert result.exit_code == 2, result.output
    assert "Traceback" not in result.output
    for w in words:
        assert w in result.output, (w, result.output)


# --------------------------------------------------------------------------
# 5. a cavity path with a component over 255 characters
# --------------------------------------------------------------------------
def test_defect_05_long_path_component_cavity_command(tmp_path):
    name = str(tmp_path / ("c" * 300 + ".dxf"))
    _refused(_invoke("cavity", name), "cannot be read", "too long")


def test_defect_05_long_path_component_in_project_file(tmp_path):
    proj = tmp_path / "proj"
    shutil_copy_demo(proj)
    text = (proj / "project.toml").read_text().replace('"../outlines/controller-bay.dxf"',
                                                        '"' + "b" * 300 + '.dxf"')
    (proj / "project.toml").write_text(text)
    r = _invoke("run", proj, "--out", tmp_path / "out")
    _refused(r, "b" * 300, "cannot be read")
    assert not (tmp_path / "out").exists()


def shutil_copy_demo(dest: Path) -> None:
    import shutil

    shutil.copytree(ROOT / "demo_project", dest)


# --------------------------------------------------------------------------
# 6. coordinates near 1e300
# --------------------------------------------------------------------------
@pytest.mark.parametrize("scale", [1e300, 1e12])
def test_defect_06_huge_coordinates_refused_naming_the_entity(tmp_path, scale):
    p = _drawing(tmp_path / "far.dxf", [(x * scale, y * scale) for x, y in RECT])
    r = _invoke("cavity", p)
    _refused(r, str(p), "LWPOLYLINE #", "from the drawing's origin", "cavity_coordinate_mm")


def test_defect_06_huge_coordinates_refused_by_run(tmp_path):
    p = _drawing(tmp_path / "far.dxf", [(x * 1e300, y * 1e300) for x, y in RECT])
    r = _invoke("run", ROOT / "demo_project", "--cavity", p, "--out", tmp_path / "out")
    _refused(r, "far.dxf", "LWPOLYLINE #")
    assert not (tmp_path / "out").exists()


def test_defect_06_limit_raised_in_project_file(tmp_path):
    p = _drawing(tmp_path / "far.dxf", [(x + 2e7, y) for x, y in RECT])
    proj = tmp_path / "proj"
    proj.mkdir()
    (proj / "project.toml").write_text('[project]\ndesign = "d.toml"\n[limits]\ncavity_coordinate_mm = 100000000\n')
    r = _invoke("cavity", p, "--project", proj)
    assert r.exit_code == 0, r.output
    # the area of a 40 x 20 rectangle, far from the origin (closed form)
    assert "800.0 mm2" in r.output


# --------------------------------------------------------------------------
# 7. a damaged DXF holding bytes that are not UTF-8
# --------------------------------------------------------------------------
def _damaged_non_utf8(tmp_path: Path) -> Path:
    p = _drawing(tmp_path / "raw.dxf", extra=lambda msp: msp.add_circle((10, 10), 2, dxfattribs={"layer": "KEEPZZ"}))
    data = p.read_bytes().replace(b"KEEPZZ", b"KEEP\xff\xfe").replace(b"\n  0\nEOF\n", b"\n")
    bad = tmp_path / "damaged.dxf"
    bad.write_bytes(data)
    return bad


def test_defect_07_non_utf8_bytes_cavity_on_strict_stdout(tmp_path):
    bad = _damaged_non_utf8(tmp_path)
    env = {**os.environ, "PYTHONIOENCODING": "utf-8:strict"}
    r = subprocess.run([sys.executable, "-m", "pipeline.cli", "cavity", str(bad)], cwd=ROOT, env=env,
                       capture_output=True)
    assert r.returncode == 0, r.stderr.decode("utf-8", "replace")
    out = (r.stdout + r.stderr).decode("utf-8")  # strict: would fail on a lone surrogate
    assert "KEEP\\xff\\xfe" in out


def test_defect_07_non_utf8_bytes_run_writes_escaped_names(tmp_path):
    bad = _damaged_non_utf8(tmp_path)
    r = _invoke("run", ROOT / "demo_project", "--cavity", bad, "--out", tmp_path / "out")
    assert r.exit_code in (0, 1), r.output
    findings = json.loads((tmp_path / "out" / "findings.json").read_text("utf-8"))
    ignored = [f for f in findings if f["check"] == "cavity.ignored-layers"]
    assert ignored and ignored[0]["subject"] == ["KEEP\\xff\\xfe"], ignored


# --------------------------------------------------------------------------
# 8. an unreadable HOME
# --------------------------------------------------------------------------
def test_defect_08_unreadable_home(tmp_path):
    p = _drawing(tmp_path / "bay.dxf")
    # a HOME the system cannot even look into (a name over the length limit): the same failure
    # as a folder without search permission, and reproducible when the tests run as root
    env = {**os.environ, "HOME": str(tmp_path / ("h" * 300))}
    env.pop("XDG_CONFIG_HOME", None)
    r = subprocess.run([sys.executable, "-m", "pipeline.cli", "cavity", str(p)], cwd=ROOT, env=env,
                       capture_output=True, text=True)
    assert r.returncode == 0, r.stderr
    assert "800.0 mm2" in r.stdout


def test_defect_08_config_variable_restored():
    code = ("import os; os.environ['XDG_CONFIG_HOME'] = '/x'; from pipeline.dxflib import import_ezdxf; "
            "import_ezdxf(); print(os.environ['XDG_CONFIG_HOME'])")
    r = subprocess.run([sys.executable, "-c", code], cwd=ROOT, capture_output=True, text=True)
    assert r.stdout.strip() == "/x", r.stderr


# --------------------------------------------------------------------------
# 9. a drawing whose CAVITY entities are all degenerate
# --------------------------------------------------------------------------
def test_defect_09_all_cavity_entities_degenerate(tmp_path):
    doc = ezdxf.new("R2013", units=4)
    msp = doc.modelspace()
    for x in (0, 10, 20):
        msp.add_line((x, 5), (x, 5), dxfattribs={"layer": "CAVITY"})
    p = tmp_path / "zero.dxf"
    doc.saveas(p)
    r = _invoke("cavity", p)
    _refused(r, "zero.dxf", "LINE #", "all of zero size")
    assert "no entities" not in r.output


# --------------------------------------------------------------------------
# 10. no HEADER section; decimal commas
# --------------------------------------------------------------------------
def _entities_only(tmp_path: Path) -> Path:
    doc = ezdxf.new("R12")
    doc.modelspace().add_polyline2d(RECT, close=True, dxfattribs={"layer": "CAVITY"})
    p = tmp_path / "full.dxf"
    doc.saveas(p)
    text = p.read_text()
    only = tmp_path / "entities-only.dxf"
    only.write_text(text[text.index("  0\nSECTION\n  2\nENTITIES"):])
    return only


def test_defect_10_no_header_means_no_units(tmp_path):
    p = _entities_only(tmp_path)
    r = _invoke("cavity", p, "--json")
    assert r.exit_code == 0, r.output
    info = json.loads(r.output)["cavity"]
    assert info["units"] == "mm" and info["cavity_area_mm2"] == 800.0
    cavity, findings = read_cavity(p, default_units="inch")
    # 40 x 20 inch = 800 * 25.4^2 mm^2 (1 in = 25.4 mm exactly)
    assert cavity.unit_name == "inch" and cavity.outline.area == pytest.approx(800 * 25.4 ** 2)
    assert any(f.check == "cavity.units" for f in findings)


def test_defect_10_decimal_commas_refused_naming_the_entity(tmp_path):
    p = _drawing(tmp_path / "comma.dxf", [(0, 0), (40.5, 0), (40.5, 20), (0, 20)])
    data = p.read_bytes()
    assert b"\n40.5\n" in data
    p.write_bytes(data.replace(b"\n40.5\n", b"\n40,5\n"))
    r = _invoke("cavity", p)
    _refused(r, "comma.dxf:", "LWPOLYLINE #", "'40,5'", "decimal comma")
    line = int(r.output.split("comma.dxf:")[1].split(":")[0])
    assert p.read_text().splitlines()[line - 1] == "40,5"


# --------------------------------------------------------------------------
# 14. a million entities; many holes
# --------------------------------------------------------------------------
def test_defect_14_entity_count_refused_before_the_document_is_built(tmp_path, monkeypatch):
    doc = ezdxf.new("R2013", units=4)
    msp = doc.modelspace()
    for i in range(60):
        msp.add_line((i, 0), (i, 1), dxfattribs={"layer": "Hatching"})
    p = tmp_path / "many.dxf"
    doc.saveas(p)
    built = []
    monkeypatch.setattr(ezdxf, "readfile", lambda *a, **k: built.append(1))
    with pytest.raises(CavityError) as ei:
        read_cavity(p, display_name="many.dxf", limits=Limits(dxf_entities=50))
    assert not built  # refused on the raw tags, before ezdxf built anything
    text = str(ei.value)
    assert text.startswith("many.dxf:") and ": LINE: " in text and "dxf_entities" in text


def test_defect_14_entity_limit_from_project_file(tmp_path):
    p = _drawing(tmp_path / "bay.dxf", extra=lambda msp: [msp.add_line((i, 0), (i, 1)) for i in range(30)])
    proj = tmp_path / "proj"
    proj.mkdir()
    (proj / "project.toml").write_text('[project]\ndesign = "d.toml"\n[limits]\ndxf_entities = 20\n')
    _refused(_invoke("cavity", p, "--project", proj), "bay.dxf", "more than 20 entities",
             "[limits] dxf_entities = ...")


def test_defect_14_byte_limit_names_its_key(tmp_path):
    p = _drawing(tmp_path / "bay.dxf")
    with pytest.raises(CavityError, match=r"raise it in project.toml with \[limits\] dxf_bytes = \.\.\."):
        read_cavity(p, limits=Limits(dxf_bytes=1000))


def test_defect_14_holes_are_not_compared_pairwise(monkeypatch):
    """One outline with 400 holes: the old reader compared every pair (79,800 intersects calls)."""
    holes = [shapely.Point(2 + 4 * i, 2 + 4 * j).buffer(1, quad_segs=2) for i in range(20) for j in range(20)]
    outer = shapely.box(0, 0, 80, 80)
    polys = [(outer, Ring(outer.exterior.coords, ("outer",)))]
    polys += [(h, Ring(h.exterior.coords, (f"hole {k}",))) for k, h in enumerate(holes)]
    calls = []
    real = Polygon.intersects
    monkeypatch.setattr(Polygon, "intersects", lambda self, other: calls.append(1) or real(self, other))
    result = one_outline(polys, "cavity outline", "holes.dxf")
    assert len(result.interiors) == 400
    assert len(calls) < 10
    # area: square minus 400 octagons of circumradius 1, each 2*sqrt(2) (regular octagon, closed form)
    assert result.area == pytest.approx(80 * 80 - 400 * 2 * 2 ** 0.5)


def test_defect_14_overlapping_holes_still_refused():
    outer = shapely.box(0, 0, 80, 80)
    a, b = shapely.box(10, 10, 20, 20), shapely.box(15, 15, 25, 25)
    polys = [(p, Ring(p.exterior.coords, (lab,))) for p, lab in ((outer, "outer"), (a, "A"), (b, "B"))]
    with pytest.raises(CavityError, match="inside or across the hole A"):
        one_outline(polys, "cavity outline", "holes.dxf")


def test_printable_escapes_surrogates_and_controls():
    assert load_mod.printable("L\udcffX\x1b") == "L\\xffX\\x1b"
