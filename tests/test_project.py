"""project.toml validation and the typed TOML fields every reader shares (issue 13 items 1, 2, 4)."""

from __future__ import annotations

import json
from pathlib import Path

import pytest
from click.testing import CliRunner

from pipeline.cli import main
from pipeline.errors import DesignError, ProjectError
from pipeline.project import load_project
from pipeline.tomlsrc import TomlSource, number_problem, text_problem

DESIGN = """[design]
name = "pads"
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
[nets]
VCC = ["P1.1", "R1.1"]
GND = ["P2.1", "R1.2"]
"""


def _proj(tmp_path: Path, project: str, design: str = DESIGN) -> Path:
    d = tmp_path / "proj"
    d.mkdir()
    (d / "design.toml").write_text(design)
    (d / "project.toml").write_text(project)
    return d


def _run(proj: Path):
    return CliRunner().invoke(main, ["run", str(proj)])


NON_FINITE = ["nan", "inf", "-inf", "+nan"]


@pytest.mark.parametrize("value", [*NON_FINITE, "1e308", "-1e308", '"1e308V"', "100001"])
def test_defect_1_voltage_not_finite_or_absurd_is_located_exit_2(tmp_path, value):
    proj = _proj(tmp_path, '[project]\ndesign = "design.toml"\n', DESIGN + f"[voltages]\nVCC = {value}\n")
    r = _run(proj)
    assert r.exit_code == 2, r.output
    assert "design.toml:17: voltages.VCC:" in r.stderr, r.stderr
    assert not (proj / "out").exists()


@pytest.mark.parametrize("value", ["3.3", "-5", '"12V"', "100000"])
def test_defect_1_ordinary_voltages_still_pass(tmp_path, value):
    proj = _proj(tmp_path, '[project]\ndesign = "design.toml"\n', DESIGN + f"[voltages]\nVCC = {value}\n")
    assert _run(proj).exit_code == 0


@pytest.mark.parametrize("table, key", [
    ("cavity", "chord_tolerance_mm"), ("order", "spares_percent"), ("cavity", "depth_mm"),
    ("board", "thickness_mm"), ("board", "edge_clearance_mm"), ("board", "wall_clearance_mm"),
    ("board", "min_inside_radius_mm"),
])
@pytest.mark.parametrize("value", NON_FINITE)
def test_defect_4_nan_and_inf_refused_in_project_file(tmp_path, table, key, value):
    proj = _proj(tmp_path, f'[project]\ndesign = "design.toml"\n[{table}]\n{key} = {value}\n')
    r = _run(proj)
    assert r.exit_code == 2, r.output
    assert f"project.toml:4: {table}.{key}: expected a finite number" in r.stderr, r.stderr
    assert not (proj / "out").exists()


@pytest.mark.parametrize("key", ["design", "cavity", "parts_map"])
def test_defect_2_nul_in_project_paths_is_located_exit_2(tmp_path, key):
    keys = {"design": "design.toml", key: "a\\u0000b"}
    proj = _proj(tmp_path, "[project]\n" + "".join(f'{k} = "{v}"\n' for k, v in keys.items()))
    line = 2 + list(keys).index(key)
    r = _run(proj)
    assert r.exit_code == 2, r.output
    assert f"project.toml:{line}: project.{key}: a path cannot hold a NUL character" in r.stderr, r.stderr
    assert "internal error" not in r.stderr


@pytest.mark.parametrize("v, checks, problem", [
    (1, {}, None),
    (2.5, {"lo": 0, "hi": 5}, None),
    (float("nan"), {}, "expected a finite number, found nan"),
    (float("-inf"), {"lo": 0}, "expected a finite number, found -inf"),
    (True, {}, "expected a number, found True"),
    ("3", {}, "expected a number, found '3'"),
    (2.0, {"integer": True}, "expected a whole number, found 2.0"),
    (0, {"lo": 0, "lo_open": True}, "must be greater than 0, found 0"),
    (-1, {"lo": 0}, "must be at least 0, found -1"),
    (6, {"hi": 5}, "must be at most 5, found 6"),
])
def test_number_rule(v, checks, problem):
    assert number_problem(v, **checks) == problem


@pytest.mark.parametrize("v, checks, problem", [
    ("x", {}, None),
    ("", {}, "expected text, found ''"),
    ("  ", {}, "expected text, found '  '"),
    (3, {}, "expected text, found 3"),
    ("dense", {"choices": ("most", "nominal")}, "'dense' is not one of: most, nominal"),
    ("a\x00b", {"path": True}, "a path cannot hold a NUL character"),
    ("a\x00b", {}, None),
])
def test_text_rule(v, checks, problem):
    assert text_problem(v, **checks) == problem


def test_typed_fields_raise_the_readers_error_class_at_the_line():
    src = TomlSource.from_text("d.toml", "[a]\nx = nan\ny = 3\nz = 1\n")
    with pytest.raises(DesignError, match=r"^d\.toml:2: a\.x: expected a finite number"):
        src.number("a.x", src.data["a"]["x"], DesignError)
    with pytest.raises(ProjectError, match=r"^d\.toml:3: a\.y: expected text"):
        src.text("a.y", src.data["a"]["y"], ProjectError)
    with pytest.raises(ProjectError, match=r"^d\.toml:4: a\.z: expected true or false"):
        src.flag("a.z", src.data["a"]["z"], ProjectError)
    assert src.number("a.y", 3, lo=0) == 3


def test_load_project_defaults(tmp_path):
    proj = _proj(tmp_path, '[project]\ndesign = "design.toml"\n')
    p = load_project(proj)
    assert p.design_path == (proj / "design.toml").resolve()
    assert p.chord_tolerance_mm == 0.02 and p.order.spares_percent == 0


# The unit words (pipeline.cavity.units.UNIT_WORDS, the reader's one list): project.toml takes every
# word the cavity reader takes, and its message for any other word lists them all.
from pipeline.cavity.units import UNIT_WORDS, unit_code  # noqa: E402
from pipeline.errors import CavityError  # noqa: E402


def _toml_text(s: str) -> str:
    return json.dumps(s)   # a JSON string with \\u escapes is a TOML basic string (TOML 1.0, "String")


@pytest.mark.parametrize("word", [*UNIT_WORDS, "MM", " Inch "])
@pytest.mark.parametrize("key", ["cavity.units", "board.outline_units"])
def test_every_unit_word_the_reader_takes_is_taken_in_project_toml(tmp_path, key, word):
    table, name = key.split(".")
    proj = _proj(tmp_path, f'[project]\ndesign = "design.toml"\n[{table}]\n{name} = {_toml_text(word)}\n')
    p = load_project(proj)
    assert getattr(p, "units" if key == "cavity.units" else "outline_units") == word
    unit_code(word)   # and the reader takes it too (raises otherwise)


def test_the_words_the_readers_message_suggests_are_taken_in_project_toml(tmp_path):
    """The bug this guards: the reader's message said "micron", which project.toml refused."""
    with pytest.raises(CavityError) as ei:
        unit_code("furlong")
    suggested = str(ei.value).split("use one of ", 1)[1].split(", ")
    assert suggested == list(UNIT_WORDS)
    for i, word in enumerate(suggested):
        (tmp_path / str(i)).mkdir()
        proj = _proj(tmp_path / str(i), f'[project]\ndesign = "design.toml"\n[cavity]\nunits = {_toml_text(word)}\n')
        assert load_project(proj).units == word


@pytest.mark.parametrize("key,also", [("cavity.units", ""), ("board.outline_units", "drawing or ")])
@pytest.mark.parametrize("word", ["furlong", "millimetre2", "drawing2", "", "u m"])
def test_an_unknown_unit_word_is_located_and_lists_the_words_exit_2(tmp_path, key, also, word):
    table, name = key.split(".")
    proj = _proj(tmp_path, f'[project]\ndesign = "design.toml"\n[{table}]\n{name} = {_toml_text(word)}\n')
    r = _run(proj)
    assert r.exit_code == 2, r.output
    assert "Traceback" not in r.output and not (proj / "out").exists()
    if not word:
        assert f"project.toml:4: {key}: expected text" in r.stderr, r.stderr
        return
    want = f"project.toml:4: {key}: unknown units {word!r}: use {also}one of {', '.join(UNIT_WORDS)}"
    assert want in r.stderr, r.stderr
    assert all(w in r.stderr for w in ("micron", "um", "mil", "inch", "millimetre"))


def test_drawing_is_a_cavity_units_word_only_for_the_outline(tmp_path):
    proj = _proj(tmp_path, '[project]\ndesign = "design.toml"\n[cavity]\nunits = "drawing"\n')
    r = _run(proj)
    assert r.exit_code == 2 and "project.toml:4: cavity.units: unknown units 'drawing'" in r.stderr, r.stderr


def test_spread_refresh_reaches_fit_json_warnings_too(tmp_path, monkeypatch):
    """When routing spreads the parts, the near-rule notes are recomputed for the spread placement in
    the findings and in fit.json's warnings alike (before, fit.json kept the compact placement's notes).

    The routed placement is faked: every capacitor moved 60 mm off, so each decoupling rule breaks and
    the refreshed notes must name them in both outputs. The outputs agreeing is the check (no figure)."""
    import dataclasses

    import pipeline.project as project

    proj = Path(__file__).resolve().parents[1] / "demo_project"   # read only: the run writes to tmp_path
    real = project._route

    def moved(*args, **kwargs):
        fit, verdict, out = real(*args, **kwargs)
        far = tuple(dataclasses.replace(p, x_mm=p.x_mm + 60.0) if p.ref.startswith("C") else p
                    for p in fit.placements)
        return dataclasses.replace(fit, placements=far), dataclasses.replace(verdict, spread_mm=0.4), out

    monkeypatch.setattr(project, "_route", moved)
    res = CliRunner().invoke(main, ["run", str(proj), "--out", str(tmp_path / "out")])
    assert res.exit_code in (0, 1), res.output
    findings = json.loads((tmp_path / "out" / "findings.json").read_text())
    warnings = json.loads((tmp_path / "out" / "fit.json").read_text())["warnings"]
    unmet = [f for f in findings if f["check"] == "place.rule-unmet"]
    assert unmet, "the moved capacitors must break their decoupling rules"
    assert unmet == [w for w in warnings if w["check"] == "place.rule-unmet"]


@pytest.mark.parametrize("revision, heading", [
    ('revision = "A"', "Trigger click, revision A"),   # said as one, not "Trigger click A"
    ("", "Trigger click"),                              # no revision: the name alone
])
def test_report_heading_names_the_revision_as_such(tmp_path, revision, heading):
    import shutil

    root = Path(__file__).resolve().parents[1]
    proj = tmp_path / "p"
    shutil.copytree(root / "demo_project", proj)
    design = proj / "design.toml"
    text = design.read_text(encoding="utf-8")
    assert 'revision = "A"\n' in text
    design.write_text(text.replace('revision = "A"\n', revision + "\n" if revision else ""), encoding="utf-8")
    toml = (proj / "project.toml").read_text(encoding="utf-8")
    (proj / "project.toml").write_text(toml.replace('cavity = "../outlines/controller-bay.dxf"\n', ""),
                                       encoding="utf-8")
    r = CliRunner().invoke(main, ["run", str(proj), "--out", str(tmp_path / "out")])
    assert r.exit_code == 0, r.output
    html = (tmp_path / "out" / "report.html").read_text(encoding="utf-8")
    assert f"<h1>{heading}</h1>" in html and f"<title>{heading}</title>" in html
