"""One verdict everywhere: the terminal, --json, fit.json, report.html and fit.svg agree, and the exit
status follows from it; advice in blocked_by is tried before it is given."""

from __future__ import annotations

import json
import re
import xml.etree.ElementTree as ET
from html.parser import HTMLParser
from pathlib import Path
from types import SimpleNamespace

import pytest
from click.testing import CliRunner
from shapely.geometry import box

from pipeline.advice import UNTRIED, tried_advice
from pipeline.cli import main
from pipeline.model import BoardOptions, Cavity, DepthZone, FitResult, Finding, HeightZone, PlaceItem, Region
from pipeline.place import place_and_fit
from pipeline.region import usable_region
from pipeline.starter import starter_files
from pipeline.verdict import Routing, decide

SVG_NS = "{http://www.w3.org/2000/svg}"


def _starter(tmp_path: Path, edit=lambda name, text: text) -> Path:
    d = tmp_path / "proj"
    d.mkdir()
    for name, data in starter_files().items():
        if name.endswith(".toml"):
            data = edit(name, data.decode()).encode()
        (d / name).write_bytes(data)
    return d


def _block_miss(name, text):
    return text.replace('targets = { current = "3mA .. 6mA" }', 'targets = { current = "10mA .. 20mA" }')


def _warning(name, text):  # 0.9 mm is not a common stock thickness: project.thickness warning
    return text.replace("thickness_mm = 0.8 ", "thickness_mm = 0.9 ")


def _too_big(name, text):  # a 20-pin header (50.8 mm long) in a 30 x 20 mm pocket
    if name != "design.toml":
        return text
    return text.replace("[nets]", '[parts.J1]\nkind = "header"\npackage = "header-1x20-2.54"\n\n[nets]').replace(
        'VCC = ["P1.1", "R1.1"]', 'VCC = ["P1.1", "R1.1", "J1.1"]').replace(
        'GND = ["P2.1",', 'GND = ["J1.2", "P2.1",')


def _bad(name, text):
    return text.replace('value = "10k"', 'value = "10q"')


class _Headline(HTMLParser):
    def __init__(self):
        super().__init__()
        self.on = False
        self.text = ""
        self.level = None

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        if tag == "section" and a.get("id") == "verdict":
            self.level = a.get("data-level")
        if tag == "strong" and a.get("class") == "headline":
            self.on = True

    def handle_endtag(self, tag):
        if tag == "strong":
            self.on = False

    def handle_data(self, data):
        if self.on:
            self.text += data


CASES = [
    # (case, edit, level, exit status)
    ("fits-clean", lambda n, t: t, "ready", 0),
    ("block-miss", _block_miss, "attention", 1),
    ("warning", _warning, "attention", 0),
    ("no-fit", _too_big, "does-not-fit", 1),
]


@pytest.mark.parametrize("case,edit,level,status", CASES, ids=[c[0] for c in CASES])
def test_every_output_shows_the_same_verdict(tmp_path, case, edit, level, status):
    proj = _starter(tmp_path, edit)
    r = CliRunner().invoke(main, ["run", str(proj), "--json"], catch_exceptions=False)
    assert r.exit_code == status, r.stderr
    out = json.loads(r.stdout)
    v = out["verdict"]
    assert (v["level"], v["exit_status"], out["exit_status"]) == (level, status, status)
    said = [line[len("verdict: "):] for line in r.stderr.splitlines() if line.startswith("verdict: ")]
    fit_json = json.loads((proj / "out" / "fit.json").read_text())
    page = _Headline()
    page.feed((proj / "out" / "report.html").read_text())
    svg = ET.fromstring((proj / "out" / "fit.svg").read_bytes())
    svg_lines = [t.text for t in svg.iter(SVG_NS + "text") if t.get("class") == "verdict"]
    assert said == [v["headline"]]
    assert fit_json["verdict"] == v and out["fit"]["verdict"] == v
    assert (page.text, page.level) == (v["headline"], level)
    assert " ".join(svg_lines) == v["headline"]
    assert svg.find(SVG_NS + "title").text.endswith(" - verdict: " + v["headline"])  # as the terminal says it
    assert v["headline"].startswith({"ready": "Ready to lay out", "attention": "Fits, needs attention",
                                     "does-not-fit": "Does not fit"}[level])
    # run routes by default (issue 9): these boards route; a board that does not fit is not routed
    assert ("placement only: routing not checked" if level == "does-not-fit" else "(placed and routed)") \
        in v["headline"]
    blocking = [x for x in v["reasons"] if x["blocking"]]
    assert bool(blocking) == (status == 1 and level == "attention")
    if case == "block-miss":
        assert [x["check"] for x in blocking] == ["block.target-missed"] and "block target missed" in v["headline"]
    if case == "warning":
        assert [x["check"] for x in v["reasons"]] == ["project.thickness"]


def test_bad_input_has_no_verdict_and_writes_nothing(tmp_path):
    proj = _starter(tmp_path, _bad)
    r = CliRunner().invoke(main, ["run", str(proj), "--json"], catch_exceptions=False)
    out = json.loads(r.stdout)
    assert r.exit_code == 2 == out["exit_status"] and "design.toml" in out["error"] and "R2" in out["error"]
    assert not (proj / "out").exists()
    assert "verdict:" not in r.stderr


def test_check_command_uses_the_same_rule(tmp_path):
    proj = _starter(tmp_path)
    ok = CliRunner().invoke(main, ["check", str(proj / "design.toml"), "--json"])
    assert ok.exit_code == 0 and json.loads(ok.stdout)["verdict"]["level"] == "ready"
    (proj / "design.toml").write_text((proj / "design.toml").read_text().replace('"P4.1"]', ']'))
    # P4 is then connected to nothing: a connection error (README findings table)
    bad = CliRunner().invoke(main, ["check", str(proj / "design.toml"), "--json"])
    v = json.loads(bad.stdout)["verdict"]
    assert bad.exit_code == 1 == v["exit_status"] and v["level"] == "attention"


@pytest.mark.parametrize("routing,level,status,scope", [
    (None, "ready", 0, "placement only: routing not checked"),
    (Routing("routed"), "ready", 0, "placed and routed"),
    (Routing("skipped"), "ready", 0, "placement only: routing switched off"),
    (Routing("open", ("SIG", "GND")), "attention", 1, "placed; routing left nets open"),
    # the router's own result carries the same two fields and is taken as it is
    (SimpleNamespace(status="open", open=("SIG", "GND"), tracks=()), "attention", 1, "placed; routing left nets open"),
])
def test_routing_result_joins_the_verdict(routing, level, status, scope):
    fit = _fit_of(fits=True)
    v = decide([], fit, routing=routing)
    assert (v.level, v.exit_status, v.scope) == (level, status, scope)
    if routing is not None and routing.status == "open":
        assert v.reasons[0].subject == ("GND", "SIG") and v.reasons[0].blocking


def test_notes_never_block_and_no_cavity_is_named():
    notes = [Finding("info", "values.series", ("R1",), "on E24")]
    assert decide(notes, _fit_of(fits=True)).level == "ready"
    v = decide(notes, None)
    assert v.level == "attention" and v.exit_status == 0 and "fit not checked" in v.headline


def _fit_of(fits: bool) -> FitResult:
    from pipeline.model import AreaEstimate, Placement

    est = AreaEstimate(1.0, 2.0, 3.0, 1.0, "rule")
    pl = Placement("R1", 1.0, 1.0, 0, "top", box(0, 0, 2, 2))
    return FitResult(fits, 100.0, 4.0, est, (pl,), box(0, 0, 10, 10), (), ())


# --------------------------------------------------------------------------
# advice: tried before it is given
# --------------------------------------------------------------------------
def _cavity(w, h, depth=5.0, zones=()):
    return Cavity("bay.dxf", box(0, 0, w, h), (), tuple(zones), None, depth, "mm", 1.0)


def _items(n, length=4.0, width=4.0, height=1.0):
    return [PlaceItem(f"R{i}", length, width, height, (f"N{i}", f"N{i + 1}")) for i in range(1, n + 1)]


def test_placer_still_words_the_suggestions_we_test():
    # If the placer rewords its advice, this fails: UNTRIED must follow it (pipeline/advice.py).
    board = BoardOptions()
    cav = _cavity(12.6, 12.6)
    region, _ = usable_region(cav, board)
    fit = place_and_fit(_items(12), region, board)
    assert not fit.fits and any(UNTRIED[0][0].search(r) for r in fit.blocked_by)
    tall = place_and_fit([PlaceItem("U1", 2.0, 2.0, 4.5, ("A",))], region, board)
    assert not tall.fits and any(UNTRIED[1][0].search(r) for r in tall.blocked_by)


def test_two_sides_advised_only_when_a_rerun_places_more():
    board = BoardOptions(thickness_mm=0.4)  # the thinnest common stock: nothing thinner to try
    cav = _cavity(12.6, 12.6)  # 12.0 x 12.0 region, 11 x 11 after the 0.5 mm edge clearance
    region, _ = usable_region(cav, board)
    items = _items(6)  # 6 courtyards of 4 x 4: 4 fit on one side (2 x 2), all 6 on two sides
    fit = tried_advice(place_and_fit(items, region, board), items, cav, board, (0.4, 0.8))
    assert not fit.fits
    assert "Tried a two-sided board (sides = 2): every part is placed." in fit.blocked_by
    assert not any("sides = 2), or" in r for r in fit.blocked_by)
    big = _items(1, 20.0, 20.0)  # larger than the board on any side: two sides cannot help
    fit = tried_advice(place_and_fit(big, region, board), big, cav, board, (0.4, 0.8))
    assert not fit.fits and not any("sides = 2" in r for r in fit.blocked_by)


def test_thinner_board_advised_only_when_it_helps_and_area_fact_dropped():
    board = BoardOptions(thickness_mm=1.6)
    cav = _cavity(30, 20, depth=5.0)
    region, _ = usable_region(cav, board)
    # 3.5 mm tall: 5.0 - 1.6 = 3.4 mm of room, 5.0 - 0.4 = 4.6 mm on the thinnest stock (closed form)
    items = [PlaceItem("U1", 3.0, 3.0, 3.5, ("A",)), PlaceItem("R1", 2.0, 1.0, 0.5, ("A",))]
    raw = place_and_fit(items, region, board)
    assert not raw.fits and any(r.startswith("The usable board area is") for r in raw.blocked_by)
    fit = tried_advice(raw, items, cav, board, (0.4, 0.8, 1.6))
    assert "Tried a 0.4 mm board (thickness_mm = 0.4): every part is placed." in fit.blocked_by
    # area was plentiful (board 500+ mm2 against an expected ~20 mm2): that fact is not a blocker
    assert not any(r.startswith("The usable board area is") for r in fit.blocked_by)
    assert not any("a thinner board or" in r for r in fit.blocked_by)
    # 5.5 mm tall: no stock thickness leaves room under a 5 mm lid, so no thinner board is advised
    items = [PlaceItem("U1", 3.0, 3.0, 5.5, ("A",))]
    fit = tried_advice(place_and_fit(items, region, board), items, cav, board, (0.4, 0.8, 1.6))
    assert not any("Tried" in r for r in fit.blocked_by)
