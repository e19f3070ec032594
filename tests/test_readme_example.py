"""README's worked example ("A worked example: real parts on a small board") runs clean as written.

Issue 8's "Done when": a design written from README alone, with a side-entry connector fixed behind a
slot, a tactile switch, an electrolytic, a crystal and a package of its own, runs clean. The files are
taken from README.md (the code block after each ``<!-- example: NAME -->`` marker), so README and this
test cannot drift apart.
"""

from __future__ import annotations

import json
import math
import re
import tomllib
from pathlib import Path

import pytest
from click.testing import CliRunner
from shapely.geometry import Point, Polygon

from pipeline.cli import main

README = Path(__file__).resolve().parents[1] / "README.md"
_BLOCK = re.compile(r"<!-- example: (?P<name>[\w.\-]+) -->\n```toml\n(?P<body>.*?)\n```", re.S)


def _examples() -> dict[str, str]:
    return {m["name"]: m["body"] + "\n" for m in _BLOCK.finditer(README.read_text(encoding="utf-8"))}


def test_readme_holds_the_three_files_and_the_parts_the_issue_names():
    files = _examples()
    assert set(files) == {"project.toml", "bay.toml", "design.toml"}
    design = tomllib.loads(files["design.toml"])
    packages = {p["package"] for p in design["parts"].values()}
    assert any(p.startswith("pins(") and "entry=side" in p for p in packages)
    assert any(p.startswith("tact-") for p in packages) and any(p.startswith("can-") for p in packages)
    assert any(p.startswith("xtal-") for p in packages)
    assert set(design["packages"]) & packages  # a package of its own, used by a part
    assert "at" in design["parts"]["J1"]
    assert tomllib.loads(files["bay.toml"])["boss"][0]["mount"] == "M2"


@pytest.fixture(scope="module")
def example_run(tmp_path_factory):
    folder = tmp_path_factory.mktemp("readme-example")
    for name, body in _examples().items():
        (folder / name).write_text(body, encoding="utf-8")
    result = CliRunner().invoke(main, ["run", str(folder)], catch_exceptions=False)
    return folder, result


def test_readme_example_runs_clean(example_run):
    folder, result = example_run
    assert result.exit_code == 0, result.output
    findings = json.loads((folder / "out" / "findings.json").read_text())
    bad = [f for f in findings if f["severity"] in ("error", "warning")]
    assert bad == []
    fit = json.loads((folder / "out" / "fit.json").read_text())
    assert fit["verdict"]["level"] == "ready"


def test_readme_example_fixed_connector_and_boss(example_run):
    folder, _ = example_run
    fit = json.loads((folder / "out" / "fit.json").read_text())
    j1 = next(p for p in fit["placements"] if p["ref"] == "J1")
    assert (j1["x_mm"], j1["y_mm"], j1["rotation_deg"]) == (18.0, 20.0, 0)  # exactly where README fixes it
    # the M2 clearance hole (ISO 273 medium series: 2.4 mm) at the boss centre (4.5, 4.5)
    holes = [Polygon(h) for h in fit["board_outline_holes"]]
    (hole,) = [h for h in holes if h.centroid.distance(Point(4.5, 4.5)) < 1e-3]
    assert hole.area == pytest.approx(math.pi * 1.2 ** 2, rel=0.01)
