"""``snugboard new DIR``: a starter project that runs clean, written only into a new or empty folder."""

from __future__ import annotations

import json

import ezdxf
import pytest
from click.testing import CliRunner

from pipeline.cli import main
from pipeline.starter import starter_files


def test_new_project_runs_clean(tmp_path):
    target = tmp_path / "mine"
    r = CliRunner().invoke(main, ["new", str(target)], catch_exceptions=False)
    assert r.exit_code == 0 and sorted(p.name for p in target.iterdir()) == ["cavity.dxf", "design.toml",
                                                                              "project.toml"]
    run = CliRunner().invoke(main, ["run", str(target), "--json"], catch_exceptions=False)
    out = json.loads(run.stdout)
    assert run.exit_code == 0 and out["verdict"]["level"] == "ready"
    assert not [f for f in out["findings"] if f["severity"] != "info"]  # no error, no warning
    assert out["fit"]["fits"] is True
    check = CliRunner().invoke(main, ["check", str(target / "design.toml")], catch_exceptions=False)
    assert check.exit_code == 0


def test_new_project_files_are_commented_and_the_drawing_is_a_real_dxf(tmp_path):
    files = starter_files()
    assert files == starter_files()  # the same bytes every time
    project = files["project.toml"].decode()
    assert sum(1 for line in project.splitlines() if "#" in line) >= 10  # commented for a newcomer
    path = tmp_path / "cavity.dxf"
    path.write_bytes(files["cavity.dxf"])
    doc = ezdxf.readfile(path)  # ezdxf reads it back: the layers our reader expects
    layers = {e.dxf.layer for e in doc.modelspace()}
    assert layers == {"CAVITY", "KEEPOUT", "DEPTH-2.5"} and doc.header["$INSUNITS"] == 4  # 4 = millimetres (DXF)


@pytest.mark.parametrize("setup", ["file-inside", "is-a-file"])
def test_new_refuses_a_folder_with_files(tmp_path, setup):
    target = tmp_path / "busy"
    if setup == "file-inside":
        target.mkdir()
        (target / "notes.txt").write_text("mine")
    else:
        target.write_text("mine")
    r = CliRunner().invoke(main, ["new", str(target)])
    assert r.exit_code == 2 and "busy" in r.stderr and "Traceback" not in r.output
    if setup == "file-inside":
        assert [p.name for p in target.iterdir()] == ["notes.txt"]
        assert (target / "notes.txt").read_text() == "mine"
    else:
        assert target.read_text() == "mine"


def test_new_accepts_an_empty_folder(tmp_path):
    (tmp_path / "empty").mkdir()
    assert CliRunner().invoke(main, ["new", str(tmp_path / "empty")]).exit_code == 0
