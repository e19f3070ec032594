"""Routing inside `snugboard run`: the demo routes, --no-route and the project key skip, a tight board is open."""

import csv
import io
import json
import math

import ezdxf
import pytest

from pipeline.copper import check_copper
from test_contract import _resistors, invoke, make_project, rect_cavity

ROUTES_KEYS = ["status", "board_outline", "holes", "layers", "pads", "tracks", "vias", "areas", "rules", "open"]


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    out = tmp_path_factory.mktemp("demo") / "out"
    r = invoke("run", "demo_project", "--out", out)
    return r, out


def test_demo_routes_and_the_independent_check_agrees(demo):
    r, out = demo
    assert r.exit_code == 0, r.output
    assert "routing: routed" in r.output
    doc = json.loads((out / "routes.json").read_text())
    assert list(doc) == ROUTES_KEYS                       # the issue's format, in its order
    assert doc["status"] == "routed" and doc["open"] == [] and doc["tracks"]
    assert check_copper(doc).clean
    fit = json.loads((out / "fit.json").read_text())
    assert fit["routing"]["status"] == "routed" and fit["routing"]["vias"] == len(doc["vias"])
    assert 0 < fit["routing"]["demand_p90_ratio"] <= fit["routing"]["demand_peak_ratio"]


def test_demo_has_no_via_in_a_surface_pad(demo):
    from shapely.geometry import Point, Polygon
    doc = json.loads((demo[1] / "routes.json").read_text())
    surface = [Polygon(p["polygon"]) for p in doc["pads"] if len(p["layers"]) == 1]
    for v in doc["vias"]:
        c = Point(v["x"], v["y"])
        assert all(s.distance(c) >= v["diameter_mm"] / 2 - 1e-3 for s in surface)


def test_demo_copper_drawing_and_placement_table(demo):
    out = demo[1]
    rows = list(csv.reader(io.StringIO((out / "placement.csv").read_text())))
    assert rows[0] == ["part", "centre_x_mm", "centre_y_mm", "turn_deg", "board_side"]
    fit = json.loads((out / "fit.json").read_text())
    assert [r[0] for r in rows[1:]] == [p["ref"] for p in fit["placements"]]
    doc = ezdxf.readfile(out / "board-copper.dxf")
    msp = doc.modelspace()
    tracks = [*msp.query('LWPOLYLINE[layer=="SNUG-CU-TOP"]'), *msp.query('LWPOLYLINE[layer=="SNUG-CU-BOTTOM"]')]
    routes = json.loads((out / "routes.json").read_text())
    assert len(tracks) == len(routes["tracks"])
    assert len(msp.query('CIRCLE[layer=="SNUG-VIA"]')) == len(routes["vias"])
    # a track's length in the drawing equals its length in routes.json (same centre line)
    t0 = routes["tracks"][0]
    length = sum(math.dist(a, b) for a, b in zip(t0["points"], t0["points"][1:]))
    assert any(abs(sum(math.dist(a[:2], b[:2]) for a, b in zip(list(p.get_points()), list(p.get_points())[1:]))
                   - length) < 1e-3 for p in tracks)


def test_no_route_keeps_the_placement_verdict(tmp_path):
    r = invoke("run", "demo_project", "--out", tmp_path / "out", "--no-route")
    assert r.exit_code == 0, r.output
    assert "routing: skipped" in r.output
    assert not (tmp_path / "out" / "routes.json").exists()
    fit = json.loads((tmp_path / "out" / "fit.json").read_text())
    assert fit["routing"]["status"] == "skipped" and "switched off" in fit["routing"]["reason"]


def _tight_ring(tmp_path, name, tables):
    """16 resistors in a ring packed on one copper layer, in a region of 1.45 x their courtyards (1.5 x
    routes since the placer spreads the parts; 1.35 x does not place)."""
    # sized from one resistor's courtyard so that it follows the library
    probe = make_project(tmp_path / f"{name}-probe", design=_resistors(1, package="1206"),
                         cavity=rect_cavity(tmp_path / f"{name}-probe.dxf"), tables={"copper": {"route": False}})
    invoke("run", probe)
    a = json.loads((probe / "out" / "fit.json").read_text())["courtyard_area_mm2"]
    k = math.sqrt(16 * a * 1.45 / 40.0)
    w, h = 8 * k + 0.6, 5 * k + 0.6          # the wall clearance 0.3 on each side
    return make_project(tmp_path / name, design=_resistors(16, package="1206"),
                        cavity=rect_cavity(tmp_path / f"{name}.dxf", w, h), tables=tables)


def test_parts_that_fit_but_do_not_route_are_not_called_fitting(tmp_path):
    proj = _tight_ring(tmp_path, "tight", {"board": {"layers": 1}})
    r = invoke("run", proj, "--json")
    out = json.loads(r.stdout)
    assert out["fit"]["fits"], out["fit"]["blocked_by"]
    assert out["fit"]["routing"]["status"] == "open" and out["fit"]["routing"]["open_nets"]
    assert r.exit_code == 1
    blocks = [r for r in out["verdict"]["reasons"] if r["check"] == "route.open"]
    assert blocks and blocks[0]["blocking"] and set(blocks[0]["subject"]) == set(out["fit"]["routing"]["open_nets"])
    assert "routing left nets open" in out["verdict"]["headline"]
    notes = [f for f in out["findings"] if f["check"] == "route.demand"]
    assert notes and "not proven" in notes[0]["message"] and "demand peak" in notes[0]["message"]


def test_project_key_switches_routing_off(tmp_path):
    proj = _tight_ring(tmp_path, "off", {"board": {"layers": 1}, "copper": {"route": False}})
    r = invoke("run", proj, "--json")
    out = json.loads(r.stdout)
    assert out["fit"]["routing"]["status"] == "skipped"
    assert r.exit_code == (0 if out["fit"]["fits"] else 1)


def test_demo_picture_and_report_show_the_copper(demo):
    import re
    import xml.etree.ElementTree as ET
    out = demo[1]
    routes = json.loads((out / "routes.json").read_text())
    root = ET.parse(out / "fit.svg").getroot()
    ns = "{http://www.w3.org/2000/svg}"
    for layer in routes["layers"]:
        group = root.find(f".//{ns}g[@data-layer-name='{layer}']")
        assert len(group.findall(f"{ns}polyline")) == sum(t["layer"] == layer for t in routes["tracks"])
    assert len(root.findall(f".//{ns}g[@class='via']")) == len(routes["vias"]) > 0
    assert root.find(f".//{ns}g[@class='congestion']").get("display") == "none"
    html = (out / "report.html").read_text()
    assert html.count('class="track"') == len(routes["tracks"])
    assert re.search(r'data-layer="copper" checked', html)
    assert re.search(r'data-layer="congestion">', html)           # the congestion map starts switched off
