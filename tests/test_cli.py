"""The command line through click's runner: exit codes, --json, bad input, no half-written output."""

from __future__ import annotations

import json
import re
import shutil
import sys
from pathlib import Path

import pytest
from click.testing import CliRunner

from pipeline.cli import main

ROOT = Path(__file__).resolve().parents[1]

MINI_DESIGN = """
[design]
name = "mini"
[parts.P1]
kind = "wire-pad"
package = "pad-1.5mm"
[parts.P2]
kind = "wire-pad"
package = "pad-1.5mm"
[parts.R1]
kind = "resistor"
value = "10k"
package = "0603"
[parts.R2]
kind = "resistor"
value = "4k7"
package = "0603"
[parts.R3]
kind = "resistor"
value = "4k7"
package = "0603"
dnp = true
[nets]
A = ["P1.1", "R1.1"]
B = ["R1.2", "R2.1", "R3.1"]
GND = ["R2.2", "R3.2", "P2.1"]
"""


def _project(tmp_path: Path, design: str = MINI_DESIGN, project: str | None = None) -> Path:
    d = tmp_path / "proj"
    d.mkdir()
    (d / "design.toml").write_text(design)
    (d / "project.toml").write_text(project or '[project]\nname = "mini"\ndesign = "design.toml"\n'
                                    '[order]\nboards = 10\nspares_percent = 10\n')
    return d


def _invoke(*args):
    return CliRunner().invoke(main, list(args), catch_exceptions=False)


def test_run_without_cavity_writes_bom_and_netlist(tmp_path):
    proj = _project(tmp_path)
    r = _invoke("run", str(proj))
    assert r.exit_code == 0, r.output
    out = proj / "out"
    for name in ("bom.csv", "netlist.csv", "netlist.json", "findings.json", "netlist.edf", "report.html"):
        assert (out / name).is_file(), name
    bom = (out / "bom.csv").read_bytes().decode("utf-8")
    assert "R1" in bom and "R2" in bom and "R3" not in bom.split("\r\n", 1)[1]
    # 1 part x 10 boards + 10 % spares = 11 (hand computed)
    assert ",10,1,11\r\n" in bom


def test_json_output_shape(tmp_path):
    proj = _project(tmp_path)
    r = CliRunner().invoke(main, ["run", str(proj), "--json"])
    assert r.exit_code == 0
    data = json.loads(r.stdout)
    assert set(data) >= {"exit_status", "findings", "fit"} and data["exit_status"] == 0
    assert all(set(f) >= {"severity", "subject", "message"} for f in data["findings"])


def test_connectivity_error_exits_1(tmp_path):
    proj = _project(tmp_path, MINI_DESIGN.replace('A = ["P1.1", "R1.1"]', 'A = ["R1.1"]'))
    r = _invoke("run", str(proj))
    assert r.exit_code == 1
    assert "only one pin" in r.output


BAD_PROJECTS = [
    # (project.toml text, design text, what the message must name)
    ('[project]\ndesign = "design.toml"\ncolour = 1\n', MINI_DESIGN, "project.toml:3: project.colour"),
    ('[project]\ndesign = "design.toml"\ncavity = "bay.dxf"\n', MINI_DESIGN, "bay.dxf"),
    ('[project]\ndesign = "design.toml"\n[board]\nsides = 3\n', MINI_DESIGN, "project.toml:4: board.sides"),
    ('[project]\ndesign = "design.toml"\n[board]\ndensity = "dense"\n', MINI_DESIGN, "board.density"),
    ('[project]\ndesign = "missing.toml"\n', MINI_DESIGN, "missing.toml: file not found"),
    ('[project]\ndesign = "design.toml"\n[order]\nboards = 0\n', MINI_DESIGN, "order.boards"),
    ('[project]\ndesign = "design.toml"\n[nonsense]\n', MINI_DESIGN, "unknown table [nonsense]"),
    ('[project\n', MINI_DESIGN, "project.toml:1: not valid TOML"),
    ('[project]\ndesign = "design.toml"\n', MINI_DESIGN.replace('value = "10k"', 'value = "10q"'),
     "design.toml:12: parts.R1.value"),
    ('[project]\ndesign = "design.toml"\n', MINI_DESIGN.replace('"R1.2", "R2.1"', '"R1.2", "R2.7"'),
     "design.toml:25: nets.B: R2.7"),
]


@pytest.mark.parametrize("project, design, needle", BAD_PROJECTS, ids=[b[2] for b in BAD_PROJECTS])
def test_bad_input_exits_2_names_culprit_writes_nothing(tmp_path, project, design, needle):
    proj = _project(tmp_path, design, project)
    r = CliRunner().invoke(main, ["run", str(proj)])
    assert r.exit_code == 2, r.output
    assert needle in r.stderr, r.stderr
    assert "Traceback" not in r.output
    assert not (proj / "out").exists()


def test_bad_input_json_still_one_object(tmp_path):
    proj = _project(tmp_path, project='[project]\ndesign = "nope.toml"\n')
    r = CliRunner().invoke(main, ["run", str(proj), "--json"])
    assert r.exit_code == 2
    assert json.loads(r.stdout)["exit_status"] == 2


def test_outputs_never_overwrite_inputs(tmp_path):
    proj = _project(tmp_path)
    shutil.copy(proj / "design.toml", proj / "bom.csv")
    r = CliRunner().invoke(main, ["run", str(proj), "--design", str(proj / "bom.csv"), "--out", str(proj)])
    assert r.exit_code == 2 and "input" in r.stderr
    assert (proj / "bom.csv").read_text() == MINI_DESIGN


def test_failed_run_keeps_previous_outputs(tmp_path):
    proj = _project(tmp_path)
    assert _invoke("run", str(proj)).exit_code == 0
    before = (proj / "out" / "bom.csv").read_bytes()
    (proj / "design.toml").write_text(MINI_DESIGN.replace('value = "10k"', 'value = "ten"'))
    r = CliRunner().invoke(main, ["run", str(proj)])
    assert r.exit_code == 2
    assert (proj / "out" / "bom.csv").read_bytes() == before


def test_check_command(tmp_path):
    p = tmp_path / "d.toml"
    p.write_text(MINI_DESIGN)
    r = _invoke("check", str(p))
    assert r.exit_code == 0 and "mini: 5 parts, 3 nets" in r.output
    p.write_text(MINI_DESIGN + '[parts.R9]\nkind = "resistor"\nvalue = "1k"\npackage = "0603"\n')
    r = _invoke("check", str(p), "--json")
    assert r.exit_code == 1
    assert any(f["check"] == "connect.unconnected-part" for f in json.loads(r.stdout)["findings"])


def test_packages_and_kinds_listings():
    r = _invoke("packages")
    assert r.exit_code == 0 and "SOIC-8" in r.output and "0603" in r.output
    r = _invoke("packages", "so-8", "--json")
    data = json.loads(r.output)
    assert data[0]["name"] == "SOIC-8" and set(data[0]["courtyards"]) == {"most", "nominal", "least"}
    r = CliRunner().invoke(main, ["packages", "SOIC-9"])
    assert r.exit_code == 2 and "SOIC-9" in r.stderr
    r = _invoke("kinds", "comparator-dual")
    assert "OUTA" in r.output and "open-drain" in r.output


def test_readme_test_command_is_what_ci_runs():
    readme = (ROOT / "README.md").read_text()
    ci = (ROOT / ".ci" / "run").read_text()
    blocks = re.findall(r"```(?:sh|bash)?\n(.*?)```", readme, re.S)
    test_cmd = next(b.strip() for b in blocks if "pytest" in b)
    assert test_cmd in ci


def _demo_copy(tmp_path: Path) -> Path:
    shutil.copytree(ROOT / "demo_project", tmp_path / "demo_project", ignore=shutil.ignore_patterns("out"))
    shutil.copytree(ROOT / "outlines", tmp_path / "outlines", ignore=shutil.ignore_patterns("*.py", "__pycache__"))
    return tmp_path / "demo_project"


def test_demo_runs_clean_and_shows_its_stages(tmp_path):
    proj = _demo_copy(tmp_path)
    r = CliRunner().invoke(main, ["run", str(proj), "--sweep"])
    assert r.exit_code == 0, r.stdout
    for stage in ("antinoise", "click", "lamp"):
        assert f"block: Block '{stage}'" in r.stdout
    assert "largest size that fits: " in r.stdout
    names = sorted(p.name for p in (proj / "out").iterdir())
    for name in ("bom.csv", "netlist.csv", "netlist.json", "fit.json", "findings.json", "fit.svg",
                 "board-outline.dxf", "netlist.edf", "report.html", "blocks.json", "design.cir"):
        assert name in names
    report = (proj / "out" / "report.html").read_text()
    assert "antinoise" in report and "<svg" in report


def test_unwritable_out_folder_is_bad_input():
    r = CliRunner().invoke(main, ["run", str(ROOT / "demo_project"), "--out", "/dev/null/x"])
    assert r.exit_code == 2  # an output folder that cannot exist: bad input, named
    assert "/dev/null/x" in r.stderr


def test_missed_stage_target_exits_1_and_applied_retune_passes(tmp_path):
    proj = _demo_copy(tmp_path)
    design = proj / "design.toml"
    text = design.read_text()
    assert 'f0 = "490Hz ±7%"' in text
    design.write_text(text.replace('f0 = "490Hz ±7%"', 'f0 = "400Hz ±5%"'))
    r = CliRunner().invoke(main, ["run", str(proj)])
    assert r.exit_code == 1
    assert "outside its target 400Hz" in r.stdout and "block: " in r.stdout
    stages = json.loads((proj / "out" / "blocks.json").read_text())
    antinoise = next(s for s in stages if s["name"] == "antinoise")
    best = antinoise["retune"]["proposals"][0]
    assert best["passes"]
    # Apply the proposal to the design file and run again: every target must pass.
    from pipeline.values import format_value
    text = design.read_text()
    for v in best["values"]:
        block = f"[parts.{v['ref']}]\n"
        head, tail = text.split(block, 1)
        body, rest = tail.split("\n\n", 1)
        body = re.sub(r'value = "[^"]*"', f'value = "{format_value(v["value"])}"', body)
        text = head + block + body + "\n\n" + rest
    design.write_text(text)
    r = CliRunner().invoke(main, ["run", str(proj)])
    assert r.exit_code == 0, r.stdout
    findings = json.loads((proj / "out" / "findings.json").read_text())
    assert not [f for f in findings if f["check"] == "block.target-missed"]


def test_off_series_value_names_nearest_values(tmp_path):
    proj = _demo_copy(tmp_path)
    design = proj / "design.toml"
    # 1.234M is in no series; IEC 60063 tables: E192 neighbours 1.23M / 1.24M, E24 (5 %) 1.2M / 1.3M
    design.write_text(design.read_text().replace('[parts.R3]\nkind = "resistor"\nvalue = "1M"',
                                                 '[parts.R3]\nkind = "resistor"\nvalue = "1.234M"'))
    r = CliRunner().invoke(main, ["run", str(proj), "--json"])
    data = json.loads(r.stdout)
    off = [f for f in data["findings"] if f["check"] == "values.off-series"]
    assert off and "R3" in off[0]["subject"]
    for near in ("1.23M", "1.24M", "1.2M", "1.3M"):
        assert near in off[0]["message"], off[0]["message"]


def _dxf(path: Path, draw) -> Path:
    import ezdxf

    doc = ezdxf.new("R2010", units=ezdxf.units.MM)
    draw(doc.modelspace())
    doc.saveas(path)
    return path


def _box(msp, x0, y0, x1, y1, layer):
    msp.add_lwpolyline([(x0, y0), (x1, y0), (x1, y1), (x0, y1)], close=True, dxfattribs={"layer": layer})


REFUSALS = {
    # name: (drawing, text the message must hold)
    "open-chain": (lambda m: [m.add_line((0, 0), (40, 0), dxfattribs={"layer": "CAVITY"}),
                              m.add_line((40, 0), (40, 30), dxfattribs={"layer": "CAVITY"}),
                              m.add_line((40, 30), (0, 30), dxfattribs={"layer": "CAVITY"}),
                              m.add_line((0, 30), (0, 2), dxfattribs={"layer": "CAVITY"})],
                   "(0, 2)"),  # the free end, in drawing units
    "bow-tie": (lambda m: m.add_lwpolyline([(0, 0), (40, 30), (40, 0), (0, 30)], close=True,
                                           dxfattribs={"layer": "CAVITY"}), "(20, 15)"),  # the crossing
    "no-outline": (lambda m: _box(m, 0, 0, 40, 30, "Walls"), "CAVITY"),
    "two-outlines": (lambda m: [_box(m, 0, 0, 40, 30, "CAVITY"), _box(m, 50, 0, 90, 30, "CAVITY")], "outline"),
    "open-keepout": (lambda m: [_box(m, 0, 0, 40, 30, "CAVITY"),
                                m.add_line((5, 5), (10, 5), dxfattribs={"layer": "KEEPOUT"}),
                                m.add_line((10, 5), (10, 10), dxfattribs={"layer": "KEEPOUT"})],
                     "KEEPOUT"),
    "open-depth-zone": (lambda m: [_box(m, 0, 0, 40, 30, "CAVITY"),
                                   m.add_line((5, 5), (10, 5), dxfattribs={"layer": "DEPTH-1.5"})],
                        "DEPTH-1.5"),
}


@pytest.mark.parametrize("name", sorted(REFUSALS))
def test_every_cavity_refusal_exits_2_located_writes_nothing(tmp_path, name):
    draw, needle = REFUSALS[name]
    proj = _project(tmp_path)
    cav = _dxf(tmp_path / f"{name}.dxf", draw)
    r = CliRunner().invoke(main, ["run", str(proj), "--cavity", str(cav)])
    assert r.exit_code == 2, r.output
    assert f"{name}.dxf" in r.stderr and needle in r.stderr, r.stderr
    assert "Traceback" not in r.output
    assert not (proj / "out").exists()


def test_cavity_command_reads_a_drawing_alone():
    import math
    r = _invoke("cavity", str(ROOT / "outlines" / "controller-bay.dxf"), "--project", str(ROOT / "demo_project"),
                "--json")
    assert r.exit_code == 0
    info = json.loads(r.stdout)["cavity"]
    # closed form of the drawn pocket: rounded rectangle w h - (4 - pi) r^2, chords within 0.02 mm x perimeter
    assert abs(info["cavity_area_mm2"] - (28 * 17 - (4 - math.pi) * 9)) < 2 * math.pi * 3 * 0.02
    # demo depth 6 mm, board 0.8 mm: 5.2 mm parts off the rib, 1.2 mm under the 2 mm rib
    assert sorted(z["max_part_height_mm"] for z in info["height_zones"]) == [1.2, 5.2]
    r = CliRunner().invoke(main, ["cavity", str(ROOT / "outlines" / "user-layers.dxf")])
    assert r.exit_code == 2 and "map your layer" in r.stderr


ESC_NAME = "A\\u001b[2J\\u001b]0;x\\u0007\\r\\u202eB\\u2066"  # TOML escapes: ESC CSI, OSC title, BEL, CR, RLO, LRI


def _raw_controls(text: str) -> list[str]:
    return [c for c in text if c in "\x1b\x07\r\u202e\u2066"]


def test_defect_21_control_characters_from_inputs_escaped_in_error_message(tmp_path):
    proj = _project(tmp_path, MINI_DESIGN.replace('A = ["P1.1", "R1.1"]', f'"{ESC_NAME}" = ["P1.1", "R9.1"]'))
    r = CliRunner().invoke(main, ["run", str(proj)])
    assert r.exit_code == 2, r.output
    assert _raw_controls(r.stderr) == [], repr(r.stderr)
    assert "A\\x1b[2J\\x1b]0;x\\x07\\rB" not in r.stderr  # (the RLO sits between \r and B)
    assert "A\\x1b[2J\\x1b]0;x\\x07\\r\\u202eB\\u2066" in r.stderr, r.stderr


def test_defect_21_control_characters_from_inputs_escaped_in_printed_text(tmp_path):
    proj = _project(tmp_path, MINI_DESIGN.replace('name = "mini"', f'name = "{ESC_NAME}"')
                    .replace('A = ["P1.1", "R1.1"]', 'A = ["R1.1"]'))
    r = CliRunner().invoke(main, ["run", str(proj)])
    assert r.exit_code == 1, r.output
    assert "only one pin" in r.stdout
    assert _raw_controls(r.output) == [], repr(r.output)
    assert "A\\x1b[2J\\x1b]0;x\\x07\\r\\u202eB\\u2066: " in r.stdout  # the summary line names the design
    r = CliRunner().invoke(main, ["run", str(proj), "--json"])
    assert _raw_controls(r.output) == []
    assert json.loads(r.stdout)["exit_status"] == 1


def _lines_run(fn) -> int:
    """Lines of pipeline/ code executed by ``fn()``: a cost count that does not depend on the machine's
    speed (the libraries underneath are not counted, so the project's own loops stand out)."""
    import pipeline

    home = str(Path(pipeline.__file__).parent)
    count = 0

    def lines(frame, event, arg):
        nonlocal count
        if event == "line":
            count += 1
        return lines

    def calls(frame, event, arg):
        return lines if frame.f_code.co_filename.startswith(home) else None

    sys.settrace(calls)
    try:
        fn()
    finally:
        sys.settrace(None)
    return count


def test_defect_13_check_cost_grows_linearly_with_parts(tmp_path):
    """Doubling the parts must about double the work of `check`, not quadruple it (a part lookup that
    scans every part made 100,000 parts take hours). Counted in executed lines, not seconds."""
    from generated import chain_design

    files = {}
    for n in (20, 150, 300):
        files[n] = tmp_path / f"d{n}.toml"
        files[n].write_text(chain_design(n))
    assert _invoke("check", str(files[20])).exit_code == 0  # imports, caches: not counted
    cost = {n: _lines_run(lambda n=n: _invoke("check", str(files[n]))) for n in (150, 300)}
    assert cost[300] / cost[150] < 2.3, cost  # linear: 2; with one n-long scan per pin: near 4


def test_a_run_keeps_the_cyclic_collector_rare_and_restores_its_thresholds(tmp_path):
    """Cost guard (counts, not seconds): the demo's placement-only run starts few garbage
    collections (about 220 at the interpreter's default thresholds, 19 full ones at 16,000 parts:
    pipeline.cli.GC_THRESHOLDS), and the caller's thresholds are back when the command returns."""
    import gc

    from pipeline.cli import GC_THRESHOLDS

    runs = []
    callback = lambda phase, info: runs.append(info["generation"]) if phase == "stop" else None  # noqa: E731
    before = gc.get_threshold()
    gc.callbacks.append(callback)
    try:
        res = CliRunner().invoke(main, ["run", str(ROOT / "demo_project"), "--out", str(tmp_path / "o"),
                                        "--no-route"])
    finally:
        gc.callbacks.remove(callback)
    assert res.exit_code == 0, res.output
    assert len(runs) <= 20 and runs.count(2) == 0, runs
    assert gc.get_threshold() == before != GC_THRESHOLDS


@pytest.mark.parametrize("args, needle", [
    (["--parts-map", "parts.toml"], "--parts-map is for a design file"),   # a folder names its own parts map
    ([], "project.toml: file not found: a project folder holds project.toml"),  # a folder that is no project
])
def test_check_of_a_folder_refuses_what_it_cannot_use(tmp_path, args, needle):
    folder = tmp_path / "d"
    folder.mkdir()
    if args:
        shutil.copytree(ROOT / "demo_project", folder, dirs_exist_ok=True)
    r = CliRunner().invoke(main, ["check", str(folder), *args])
    assert r.exit_code == 2 and needle in r.output and "Traceback" not in r.output
    assert args or str(folder / "project.toml") in r.output  # the folder the user gave, named
