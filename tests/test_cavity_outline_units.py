"""board-outline.dxf in the cavity drawing's units (issue 10, item 10) and on a layer name of our own
(item 11). Lengths are checked against the exact inch (1 in = 25.4 mm, 1959 international yard and
pound agreement); the file is read back with ezdxf (reference library)."""

from __future__ import annotations

import io
import json
import shutil
from pathlib import Path

import ezdxf
import pytest
from click.testing import CliRunner
from shapely.geometry import Polygon, box

from pipeline.cli import main
from pipeline.export.dxf import EDGE_LAYER, board_outline_dxf

ROOT = Path(__file__).resolve().parents[1]


def _read(data: bytes):
    return ezdxf.read(io.StringIO(data.decode("utf-8")))


def _outline(doc) -> Polygon:
    """The largest closed polyline on the edge layer (the board; the others are its cut-outs)."""
    rings = [Polygon([(x, y) for x, y, *_ in pl.get_points("xy")])
             for pl in doc.modelspace().query("LWPOLYLINE") if pl.dxf.layer == EDGE_LAYER and pl.closed]
    return max(rings, key=lambda p: p.area)


@pytest.mark.parametrize("code,mm,measurement", [(1, 25.4, 0), (4, 1.0, 1), (5, 10.0, 1), (9, 0.0254, 0)])
def test_outline_written_in_the_given_units(code, mm, measurement):
    doc = _read(board_outline_dxf(box(0, 0, 25.4, 50.8), units=(code, mm)))
    assert doc.header["$INSUNITS"] == code and doc.header["$MEASUREMENT"] == measurement
    got = _outline(doc)
    # 25.4 x 50.8 mm is exactly 1 x 2 in, 2.54 x 5.08 cm, 1000 x 2000 mil
    want = box(0, 0, 25.4 / mm, 50.8 / mm)
    assert got.symmetric_difference(want).area == pytest.approx(0, abs=1e-9 * want.area)


def test_layer_is_our_own_name():
    data = board_outline_dxf(box(0, 0, 10, 5))
    assert EDGE_LAYER == "BOARD-PROFILE"
    assert b"BOARD-PROFILE" in data and b"SNUG-BOARD-EDGE" not in data


def _inch_project(tmp_path: Path, outline_units: str | None) -> Path:
    proj = tmp_path / "proj"
    shutil.copytree(ROOT / "demo_project", proj)
    shutil.copy(ROOT / "outlines" / "inch-pocket.dxf", proj / "pocket.dxf")
    text = (proj / "project.toml").read_text().replace('"../outlines/controller-bay.dxf"', '"pocket.dxf"')
    if outline_units is not None:
        text = text.replace("[board]\n", f'[board]\noutline_units = "{outline_units}"\n')
    (proj / "project.toml").write_text(text)
    return proj


@pytest.mark.parametrize("setting,code,k", [(None, 4, 1.0), ("mm", 4, 1.0), ("drawing", 1, 25.4), ("mil", 9, 0.0254)])
def test_run_writes_the_outline_in_the_chosen_units(tmp_path, setting, code, k):
    proj = _inch_project(tmp_path, setting)
    r = CliRunner().invoke(main, ["run", str(proj), "--out", str(tmp_path / "out")], catch_exceptions=False)
    assert r.exit_code in (0, 1), r.output
    doc = ezdxf.readfile(tmp_path / "out" / "board-outline.dxf")
    assert doc.header["$INSUNITS"] == code
    fit = json.loads((tmp_path / "out" / "fit.json").read_text())
    in_mm = Polygon([(x * k, y * k) for x, y in _outline(doc).exterior.coords])
    want = Polygon(fit["board_outline"])
    # the same outline as fit.json's (millimetres) once scaled back by the exact inch
    assert in_mm.symmetric_difference(want).area < 1e-6 * want.area


def test_bad_outline_units_named(tmp_path):
    proj = _inch_project(tmp_path, "furlong")
    r = CliRunner().invoke(main, ["run", str(proj), "--out", str(tmp_path / "out")], catch_exceptions=False)
    assert r.exit_code == 2 and "board.outline_units" in r.output, r.output
    assert not (tmp_path / "out").exists()
