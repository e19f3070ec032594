"""Tests of the picture writers: fit.svg, report.html and board-outline.dxf.

Model objects are built directly from shapely geometries. Each numeric
check names the outside fact it rests on.
"""

from __future__ import annotations

import base64
import hashlib
import io
import math
import os
import re
import subprocess
import sys
import xml.etree.ElementTree as ET
from html.parser import HTMLParser
from pathlib import Path

import ezdxf
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from shapely import affinity
from shapely.geometry import LineString, MultiPolygon, Point, Polygon, box

from pipeline.export.dxf import EDGE_LAYER, board_outline_dxf
from pipeline.export.report import report_html
from pipeline.export.svg import drawing_scale, fit_svg, nice_length
from pipeline.model import (
    AreaEstimate,
    Cavity,
    DepthZone,
    FitResult,
    Finding,
    HeightZone,
    Placement,
    Region,
)

ROOT = Path(__file__).resolve().parents[1]
SVG_NS = "{http://www.w3.org/2000/svg}"


# --------------------------------------------------------------------------
# small scenes
# --------------------------------------------------------------------------
def _placement(ref, x, y, length, width, rot=0, side="top"):
    ll, ww = (length, width) if rot in (0, 180) else (width, length)
    return Placement(ref, x, y, rot, side, box(x - ll / 2, y - ww / 2, x + ll / 2, y + ww / 2))


def _scene(*, fits=True, placements=None, unplaced=(), keepouts=None, zones=None, size=(60.0, 36.0),
           source="bay.dxf", depth=5.0):
    w, h = size
    outline = box(0, 0, w, h)
    if keepouts is None:
        keepouts = (Point(0.12 * w, 0.2 * h).buffer(0.05 * h),)
    if zones is None:
        zones = (DepthZone(box(0.6 * w, 0, 0.75 * w, h), 2.0, "DEPTH-2"),
                 DepthZone(box(0, 0.7 * h, 0.3 * w, h), 3.5, "DEPTH-3.5"))
    cav = Cavity(source, outline, tuple(keepouts), tuple(zones), None, depth, "mm", 1.0)
    region_geom = outline.buffer(-0.3, join_style="mitre")
    for k in keepouts:
        region_geom = region_geom.difference(k.buffer(0.3))
    reg = Region(region_geom, (HeightZone(region_geom, depth - 0.8),), 0.8)
    if placements is None:
        placements = (
            _placement("U1", 0.3 * w, 0.5 * h, 6.0, 4.0),
            _placement("R1", 0.5 * w, 0.3 * h, 2.2, 1.2),
            _placement("R10", 0.5 * w, 0.6 * h, 2.2, 1.2, rot=90),
            _placement("C1", 0.85 * w, 0.5 * h, 2.2, 1.2, side="bottom"),
        )
    est = AreaEstimate(40.0, 55.0, 70.0, 90.0, "courtyards x (1.3 .. 2.2), common practice")
    board = box(1, 1, w - 1, h - 1)
    fit = FitResult(fits, reg.area_mm2, 40.0, est, tuple(placements), board,
                    () if fits else ("U9 found no room: it needs 5.6 x 5.6 mm.",), tuple(unplaced))
    return cav, reg, fit


def _svg_root(data: bytes) -> ET.Element:
    return ET.fromstring(data)


def _parts(root):
    return [g for g in root.iter(SVG_NS + "g") if "part" in (g.get("class") or "").split()]


def _labels(root):
    """ref -> (text element, leader line or None), from the labels layer."""
    out = {}
    for g in root.iter(SVG_NS + "g"):
        if g.get("class") == "label":
            out[g.get("data-ref")] = (g.find(SVG_NS + "text"), g.find(SVG_NS + "line"))
    return out


def _path_points(d: str) -> list[tuple[float, float]]:
    return [(float(a), float(b)) for a, b in re.findall(r"(-?\d+\.\d+),(-?\d+\.\d+)", d)]


def _relative_luminance(hex_colour: str) -> float:
    # WCAG 2.x definition of relative luminance (sRGB linearisation, Rec. 709 weights).
    def lin(c):
        c = c / 255.0
        return c / 12.92 if c <= 0.04045 else ((c + 0.055) / 1.055) ** 2.4

    r, g, b = (int(hex_colour[i:i + 2], 16) for i in (1, 3, 5))
    return 0.2126 * lin(r) + 0.7152 * lin(g) + 0.0722 * lin(b)


# --------------------------------------------------------------------------
# fit.svg
# --------------------------------------------------------------------------
def test_svg_parses_as_svg_11():
    root = _svg_root(fit_svg(*_scene(), title="Bay"))
    assert root.tag == SVG_NS + "svg"
    assert root.get("version") == "1.1"
    assert root.find(SVG_NS + "title").text == "Bay"


def test_svg_one_element_per_placement_with_ref():
    cav, reg, fit = _scene()
    root = _svg_root(fit_svg(cav, reg, fit))
    parts = _parts(root)
    assert len(parts) == len(fit.placements)
    titles = sorted(g.find(SVG_NS + "title").text.split(" ")[0] for g in parts)
    assert titles == sorted(p.ref for p in fit.placements)
    labels = _labels(root)
    for g in parts:  # every courtyard of this scene is big enough for its label inside
        ref = g.find(SVG_NS + "title").text.split(" ")[0]
        assert g.get("data-ref") == ref and labels[ref][0].text == ref and labels[ref][1] is None


def test_svg_courtyard_vertices_are_drawing_coordinates_with_y_flipped():
    # closed form: the y-flip maps drawing (x, y) to SVG (x, -y), nothing else.
    pl = _placement("U1", 20.0, 12.5, 6.0, 4.0)
    cav, reg, fit = _scene(placements=(pl,))
    (g,) = _parts(_svg_root(fit_svg(cav, reg, fit)))
    pts = _path_points(g.find(SVG_NS + "path").get("d"))
    expected = [(x, -y) for x, y in list(pl.courtyard.exterior.coords)[:-1]]
    assert len(pts) == len(expected)
    for (px, py), (ex, ey) in zip(pts, expected):
        assert px == pytest.approx(ex, abs=5e-4) and py == pytest.approx(ey, abs=5e-4)


def test_svg_larger_y_appears_higher():
    low = _placement("R1", 20.0, 5.0, 3.0, 2.0)
    high = _placement("R2", 20.0, 25.0, 3.0, 2.0)
    cav, reg, fit = _scene(placements=(low, high))
    texts = {t.text: float(t.get("y")) for t in _svg_root(fit_svg(cav, reg, fit)).iter(SVG_NS + "text")
             if t.get("class") == "ref"}
    # SVG y grows downwards: the part at larger drawing y has the smaller SVG y (closed form).
    assert texts["R2"] < texts["R1"]
    assert texts["R1"] - texts["R2"] == pytest.approx(20.0, abs=1e-3)


@pytest.mark.parametrize("width", [8.0, 60.0, 137.0, 400.0, 2500.0])
def test_svg_scale_bar_spans_its_labelled_length(width):
    cav, reg, fit = _scene(size=(width, width / 2), placements=(), keepouts=(), zones=())
    root = _svg_root(fit_svg(cav, reg, fit))
    (bar,) = [g for g in root.iter(SVG_NS + "g") if g.get("class") == "scale-bar"]
    frame = [r for r in bar.iter(SVG_NS + "rect") if r.get("class") == "scale-bar-frame"][0]
    label = [t for t in bar.iter(SVG_NS + "text") if t.get("class") == "scale-bar-label"][0].text
    length = float(label.removesuffix(" mm"))
    # closed form: one user unit is one drawing millimetre, so L mm spans L units.
    assert float(frame.get("width")) == pytest.approx(length, abs=1e-3)
    # the 1-2-5 series (common practice): L = m x 10^n with m in {1, 2, 5}
    mantissa = length / 10 ** math.floor(math.log10(length) + 1e-12)
    assert min(abs(mantissa - m) for m in (1, 2, 5)) < 1e-9
    # largest such length within a quarter of the drawing width; the next step is at most 2.5x larger
    assert width / 4 / 2.5 - 1e-9 <= length <= width / 4 + 1e-9


@pytest.mark.parametrize("limit,expected", [(15.0, 10.0), (7.3, 5.0), (0.26, 0.2), (100.0, 100.0),
                                            (2.0, 2.0), (1.99, 1.0), (4999.0, 2000.0)])
def test_nice_length_is_the_largest_1_2_5_step(limit, expected):
    # 1-2-5 series of round lengths (common practice), worked by hand.
    assert nice_length(limit) == expected


def test_svg_paper_size_matches_the_stated_scale():
    cav, reg, fit = _scene(size=(60.0, 36.0))
    data = fit_svg(cav, reg, fit)
    root = _svg_root(data)
    vb = [float(v) for v in root.get("viewBox").split()]
    width_mm = float(root.get("width").removesuffix("mm"))
    s = drawing_scale(60.0)
    assert s == 2.0  # 60 mm x 2 = 120 mm <= 180 mm, x 5 = 300 mm > 180 mm (worked by hand)
    assert width_mm == pytest.approx(vb[2] * s, abs=2e-3)  # printed at 100 %: 1 drawing mm = s paper mm
    assert b"Scale 2:1 when printed at 100 %" in data


def test_svg_escapes_user_text():
    nasty_title = 'Bay <b> & "quotes" \'single\''
    nasty_ref = 'R<1>&"'
    pl = _placement(nasty_ref, 20.0, 12.0, 8.0, 4.0)
    cav, reg, fit = _scene(placements=(pl,), source='dir/<bay>&.dxf')
    data = fit_svg(cav, reg, fit, title=nasty_title)
    root = _svg_root(data)  # would raise on unescaped markup
    assert root.find(SVG_NS + "title").text == nasty_title
    assert b"<b>" not in data and b'R<1>&"' not in data and b"<bay>" not in data
    assert b"R&lt;1&gt;&amp;&quot;" in data
    (g,) = _parts(root)
    assert g.get("data-ref") == nasty_ref and _labels(root)[nasty_ref][0].text == nasty_ref
    texts = [t.text for t in root.iter(SVG_NS + "text")]
    assert "Cavity drawing: dir/<bay>&.dxf" in texts


def test_svg_control_characters_do_not_break_xml():
    pl = _placement("R\x01\x1b1", 20.0, 12.0, 8.0, 4.0)
    cav, reg, fit = _scene(placements=(pl,))
    root = _svg_root(fit_svg(cav, reg, fit, title="a\x00b"))
    assert root.find(SVG_NS + "title").text == "a\ufffdb"


def test_svg_lists_unplaced_parts_only_when_it_does_not_fit():
    cav, reg, fit = _scene(fits=False, unplaced=("U9", "R22", "R3"))
    texts = [t.text for t in _svg_root(fit_svg(cav, reg, fit)).iter(SVG_NS + "text")]
    assert "Not placed (3)" in texts
    assert "R3 R22 U9" in texts  # natural order: R3 before R22
    cav, reg, fit = _scene(fits=True)
    texts = [t.text for t in _svg_root(fit_svg(cav, reg, fit)).iter(SVG_NS + "text")]
    assert not any(t and t.startswith("Not placed") for t in texts)


def test_svg_legend_has_one_entry_per_depth_and_shallower_is_darker():
    cav, reg, fit = _scene()
    root = _svg_root(fit_svg(cav, reg, fit))
    legend = [g for g in root.iter(SVG_NS + "g") if g.get("class") == "legend"][0]
    texts = [t.text for t in legend.iter(SVG_NS + "text")]
    depth_rows = [t for t in texts if " mm deep" in t]
    # heights = depth - board thickness 0.8 mm (region model of issue 3)
    assert depth_rows == ["2 mm deep \u00b7 parts \u2264 1.2 mm", "3.5 mm deep \u00b7 parts \u2264 2.7 mm",
                          "5 mm deep \u00b7 parts \u2264 4.2 mm"]
    zone_fill = {}
    for p in root.iter(SVG_NS + "path"):
        if p.get("class") == "depth-zone":
            zone_fill[float(p.find(SVG_NS + "title").text.split()[0])] = p.get("fill")
        if p.get("class") == "cavity-floor":
            zone_fill[5.0] = p.get("fill")
    lum = [_relative_luminance(zone_fill[d]) for d in sorted(zone_fill)]
    # WCAG 2.x relative luminance: strictly increasing with depth (shallow = darker)
    assert lum == sorted(lum) and len(set(lum)) == 3


def test_svg_bottom_side_is_dashed_and_top_is_not():
    cav, reg, fit = _scene()
    for g in _parts(_svg_root(fit_svg(cav, reg, fit))):
        dashed = g.find(SVG_NS + "path").get("stroke-dasharray") is not None
        assert dashed == ("part-bottom" in g.get("class"))


def test_svg_small_parts_get_leader_labels_instead_of_a_list():
    tiny = _placement("C77", 30.0, 18.0, 0.3, 0.15)
    cav, reg, fit = _scene(placements=(tiny, _placement("U1", 10.0, 18.0, 6.0, 4.0)))
    root = _svg_root(fit_svg(cav, reg, fit))
    labels = _labels(root)
    assert labels["U1"][0].text == "U1" and labels["U1"][1] is None
    text, leader = labels["C77"]
    assert text.text == "C77" and leader is not None
    # the leader ends on the courtyard (y flipped) and starts on the label's box, outside the courtyard
    x0, y0, x1, y1 = tiny.courtyard.bounds
    px, py = float(leader.get("x2")), -float(leader.get("y2"))
    assert x0 - 1e-3 <= px <= x1 + 1e-3 and y0 - 1e-3 <= py <= y1 + 1e-3
    assert not tiny.courtyard.buffer(1e-3).contains(Point(float(text.get("x")), -float(text.get("y"))))
    texts = [t.text for t in root.iter(SVG_NS + "text")]
    assert not any(t and t.startswith("Not labelled") for t in texts)


def test_svg_labels_stay_inside_their_courtyards():
    cav, reg, fit = _scene()
    root = _svg_root(fit_svg(cav, reg, fit))
    by_ref = {p.ref: p for p in fit.placements}
    seen_vertical = False
    for t, leader in _labels(root).values():
        assert leader is None
        p = by_ref[t.text]
        x0, y0, x1, y1 = p.courtyard.bounds
        vertical = t.get("transform") is not None
        seen_vertical |= vertical
        # closed form: the text height (font size) stays within the courtyard side it stands across
        across = (x1 - x0) if vertical else (y1 - y0)
        assert 0 < float(t.get("font-size")) <= across
        # and the label is centred on the courtyard centre (y flipped)
        assert float(t.get("x")) == pytest.approx(p.x_mm, abs=1e-3)
    assert seen_vertical  # R10 stands at 90 degrees: 1.2 wide x 2.2 tall, labelled upright


def test_svg_overlapping_labels_are_not_drawn_twice():
    top = _placement("U1", 20.0, 18.0, 6.0, 4.0)
    under = _placement("R5", 20.0, 18.0, 3.0, 1.6, side="bottom")
    cav, reg, fit = _scene(placements=(top, under))
    labels = _labels(_svg_root(fit_svg(cav, reg, fit)))
    assert labels["U1"][1] is None  # the top part keeps its label inside
    assert labels["R5"][1] is not None  # the part under it is labelled by a leader, not drawn over U1's label


def test_svg_is_deterministic_and_independent_of_input_order():
    cav, reg, fit = _scene()
    a = fit_svg(cav, reg, fit, title="x")
    assert a == fit_svg(cav, reg, fit, title="x")
    shuffled = FitResult(fit.fits, fit.region_area_mm2, fit.courtyard_area_mm2, fit.estimate,
                         tuple(reversed(fit.placements)), fit.board_outline, fit.blocked_by)
    cav2 = Cavity(cav.source, cav.outline, cav.keepouts, tuple(reversed(cav.depth_zones)), None,
                  cav.depth_mm, "mm", 1.0)
    assert fit_svg(cav2, reg, shuffled, title="x") == a


def test_svg_numbers_have_three_decimals():
    data = fit_svg(*_scene()).decode()
    d = re.findall(r' d="([^"]+)"', data)[0]
    assert all(re.fullmatch(r"-?\d+\.\d{3}", n) for pair in re.findall(r"[-\d.]+,[-\d.]+", d)
               for n in pair.split(","))


def test_svg_draws_holes_and_multipolygons():
    ring = box(0, 0, 40, 30).difference(box(15, 10, 25, 20))
    two = MultiPolygon([box(0, 0, 10, 10), box(20, 0, 30, 10)])
    cav = Cavity("ring.dxf", ring, (), (DepthZone(two, 2.0, "DEPTH-2"),), None, 5.0, "mm", 1.0)
    reg = Region(ring.buffer(-0.3), (), 0.8)
    est = AreaEstimate(0.0, 0.0, 0.0, 0.0, "")
    fit = FitResult(True, reg.area_mm2, 0.0, est, (), None, ())
    root = _svg_root(fit_svg(cav, reg, fit))
    floor = [p for p in root.iter(SVG_NS + "path") if p.get("class") == "cavity-floor"][0]
    assert floor.get("d").count("M") == 2 and floor.get("fill-rule") == "evenodd"
    zone = [p for p in root.iter(SVG_NS + "path") if p.get("class") == "depth-zone"][0]
    assert zone.get("d").count("M") == 2


# --------------------------------------------------------------------------
# report.html
# --------------------------------------------------------------------------
VOID = {"area", "base", "br", "col", "embed", "hr", "img", "input", "link", "meta", "source", "track", "wbr"}


class _Checker(HTMLParser):
    """Strict nesting check on top of the standard library's HTML tokenizer."""

    def __init__(self):
        super().__init__(convert_charrefs=True)
        self.stack: list[str] = []
        self.problems: list[str] = []
        self.tags: list[str] = []
        self.text: list[str] = []
        self.by_table: dict[str, list[str]] = {}
        self._table = None
        self.headings: list[str] = []
        self._in_h3 = False
        self.attrs: list[tuple[str, dict]] = []

    def handle_starttag(self, tag, attrs):
        self.tags.append(tag)
        self.attrs.append((tag, dict(attrs)))
        if tag == "table":
            self._table = dict(attrs).get("class", "")
        if tag == "h3":
            self._in_h3 = True
        if tag not in VOID:
            self.stack.append(tag)

    def handle_startendtag(self, tag, attrs):
        self.tags.append(tag)
        self.attrs.append((tag, dict(attrs)))

    def handle_endtag(self, tag):
        if tag in VOID:
            return
        if not self.stack or self.stack[-1] != tag:
            self.problems.append(f"</{tag}> closes {self.stack[-1:] or 'nothing'}")
            return
        self.stack.pop()
        if tag == "table":
            self._table = None
        if tag == "h3":
            self._in_h3 = False

    def handle_data(self, data):
        self.text.append(data)
        if self._table is not None:
            self.by_table.setdefault(self._table, []).append(data)
        if self._in_h3:
            self.headings.append(data)


def _check_html(data: bytes) -> _Checker:
    text = data.decode("utf-8")
    c = _Checker()
    c.feed(text)
    c.close()
    assert c.problems == [] and c.stack == [], (c.problems, c.stack)
    assert text.startswith("<!DOCTYPE html>")
    return c


FINDINGS = (
    Finding("warning", "values.off-series", ("R7",), "R7 is 4.75k <not in E24> & 'off' \"series\"."),
    Finding("error", "connect.single-pin-net", ("N1",), "Net N1 has one pin <script>alert(1)</script>."),
    Finding("info", "ratings.missing", ("C3",), "C3 has no voltage rating."),
    Finding("warning", "fit.tight", ("U1",), "U1 is taller than the rib allows."),
)


@pytest.mark.parametrize(
    "case,level,banner",
    [("fits", "ready", "Ready to lay out"), ("attention", "attention", "Fits, needs attention"),
     ("no-fit", "does-not-fit", "Does not fit"), ("none", "attention", "Needs attention")],
)
def test_report_parses_and_shows_the_verdict(case, level, banner):
    if case == "none":
        fit, svg = None, None
    else:
        cav, reg, fit = _scene(fits=case != "no-fit", unplaced=() if case != "no-fit" else ("U9",))
        svg = fit_svg(cav, reg, fit)
    findings = () if case == "fits" else FINDINGS
    c = _check_html(report_html(title="Trigger <click>", fit=fit, findings=findings, fit_svg=svg))
    verdicts = [a for t, a in c.attrs if t == "section" and a.get("id") == "verdict"]
    assert len(verdicts) == 1 and verdicts[0]["data-level"] == level and level in verdicts[0]["class"]
    assert any(t.startswith(banner) for t in c.text)
    if case == "none":
        assert any("fit not checked" in t for t in c.text)
    if case == "no-fit":
        assert "U9 found no room: it needs 5.6 x 5.6 mm." in c.text


def test_report_is_self_contained_with_the_svg_inlined():
    cav, reg, fit = _scene()
    svg = fit_svg(cav, reg, fit)
    data = report_html(title="t", fit=fit, findings=(), fit_svg=svg)
    c = _check_html(data)
    assert c.tags.count("svg") == 1 and c.tags.count("script") == 1 and "link" not in c.tags
    # the one script is inline and the page allows no other (Content Security Policy, W3C CSP Level 3:
    # a 'sha256-' source is the base64 SHA-256 of the script text)
    script = data.decode().split("<script>", 1)[1].split("</script>", 1)[0]
    digest = base64.b64encode(hashlib.sha256(script.encode()).digest()).decode()
    (csp,) = [a["content"] for t, a in c.attrs if t == "meta" and a.get("http-equiv") == "Content-Security-Policy"]
    assert "default-src 'none'" in csp and f"script-src 'sha256-{digest}'" in csp
    assert not any(k in ("src",) or (k == "href" and not v.startswith("#"))
                   for _, a in c.attrs for k, v in a.items())
    body = svg.decode().split("?>", 1)[1].strip()
    assert body in data.decode()  # the picture as written, without its XML prolog
    assert b"<?xml" not in data


def test_report_every_finding_escaped_and_grouped_by_severity():
    data = report_html(title="t", fit=None, findings=FINDINGS, fit_svg=None)
    c = _check_html(data)
    text = "".join(c.text)
    for f in FINDINGS:
        assert f.message in text  # the parser's decoded text is the message exactly
        if any(c in f.message for c in "<>&\"'"):
            assert f.message.encode() not in data  # never raw when it holds markup characters
    assert b"<script>" not in data
    assert b"&lt;script&gt;alert(1)&lt;/script&gt;" in data
    assert c.headings == ["Errors (1)", "Warnings (2)", "Notes (1)"]
    for f in FINDINGS:
        table = f"findings findings-{f.severity}"
        assert f.message in "".join(c.by_table[table])


def test_report_area_figures_placements_and_sections():
    cav, reg, fit = _scene()
    sections = (("Stage <lowpass>", '<table class="stage"><tr><td>f0</td><td>1.00 kHz</td></tr></table>'),)
    data = report_html(title="t", fit=fit, findings=(), fit_svg=None, sections=sections)
    c = _check_html(data)
    text = "".join(c.text)
    for v in (fit.region_area_mm2, 40.0, 55.0, 70.0, 90.0):
        assert f"{v:.1f} mm\u00b2" in text
    # expected / region, as a percentage (closed form)
    assert f"{100 * 70.0 / fit.region_area_mm2:.1f} %" in text
    assert "Stage <lowpass>" in text and b"Stage &lt;lowpass&gt;" in data
    assert sections[0][1].encode() in data  # trusted fragment inserted as given
    rows = "".join(c.by_table["placements"])
    for p in fit.placements:
        assert p.ref in rows and f"{p.x_mm:.3f}" in rows and f"{p.y_mm:.3f}" in rows


def test_report_adds_fit_warnings_once():
    cav, reg, fit = _scene()
    w = Finding("warning", "fit.tight", ("J1",), "J1 sits at the board edge.")
    fit = FitResult(fit.fits, fit.region_area_mm2, fit.courtyard_area_mm2, fit.estimate, fit.placements,
                    fit.board_outline, fit.blocked_by, warnings=(w,))
    once = report_html(title="t", fit=fit, findings=(w,), fit_svg=None)
    added = report_html(title="t", fit=fit, findings=(), fit_svg=None)
    for page in (once, added):
        c = _check_html(page)
        assert "".join(c.by_table["findings findings-warning"]).count("J1 sits at the board edge.") == 1


def test_report_is_deterministic():
    cav, reg, fit = _scene()
    args = dict(title="t", fit=fit, findings=FINDINGS, fit_svg=fit_svg(cav, reg, fit))
    assert report_html(**args) == report_html(**args)


# --------------------------------------------------------------------------
# board-outline.dxf
# --------------------------------------------------------------------------
def _read_dxf(data: bytes):
    return ezdxf.read(io.StringIO(data.decode("utf-8")))


def _tags(data: bytes) -> list[tuple[int, str]]:
    """Plain group-code/value pairs of an ASCII DXF file (DXF reference: 2 lines per tag)."""
    lines = data.decode("utf-8").split("\n")
    return [(int(lines[i].strip()), lines[i + 1]) for i in range(0, len(lines) - 1, 2)]


def _header_value(tags, name):
    for i, (code, value) in enumerate(tags):
        if code == 9 and value == name:
            return tags[i + 1][1]
    raise KeyError(name)


def _lwpolylines_by_tags(tags):
    """Vertices of each LWPOLYLINE in ENTITIES, read from group codes 10/20 (DXF reference)."""
    out, cur, in_entities = [], None, False
    for code, value in tags:
        if code == 2 and value == "ENTITIES":
            in_entities = True
        elif code == 0 and in_entities:
            if cur is not None:
                out.append(cur)
                cur = None
            if value == "LWPOLYLINE":
                cur = {"layer": None, "flags": 0, "xs": [], "ys": []}
            if value == "ENDSEC":
                break
        elif cur is not None:
            if code == 8:
                cur["layer"] = value
            elif code == 70:
                cur["flags"] = int(value)
            elif code == 10:
                cur["xs"].append(float(value))
            elif code == 20:
                cur["ys"].append(float(value))
    return out


def _shoelace(pts):
    # Gauss's area formula: positive for counter-clockwise vertex order.
    return 0.5 * sum(x0 * y1 - x1 * y0 for (x0, y0), (x1, y1) in zip(pts, pts[1:] + pts[:1]))


SHAPES = {
    "rectangle": box(0, 0, 30, 20),
    "far-from-origin": box(1000.25, -2000.5, 1042.75, -1960.125),
    "l-shape": Polygon([(0, 0), (40, 0), (40, 10), (10, 10), (10, 30), (0, 30)]),
    "rotated": affinity.rotate(box(0, 0, 25, 12), 17.5, origin=(3, 4)),
    "rounded": box(5, 5, 45, 25).buffer(4.0, quad_segs=16),
    "clockwise": Polygon([(0, 0), (0, 10), (20, 10), (20, 0)]),
}


@pytest.mark.parametrize("name", sorted(SHAPES))
def test_dxf_reads_back_one_closed_polyline_in_mm(name):
    shape = SHAPES[name]
    data = board_outline_dxf(shape)
    doc = _read_dxf(data)
    assert doc.units == ezdxf.units.MM  # $INSUNITS 4 = millimetres (DXF reference)
    assert doc.header["$MEASUREMENT"] == 1  # 1 = metric (DXF reference)
    ents = list(doc.modelspace())
    assert [e.dxftype() for e in ents] == ["LWPOLYLINE"]
    (pl,) = ents
    assert pl.dxf.layer == EDGE_LAYER and pl.closed
    pts = [(float(x), float(y)) for x, y in pl.get_points("xy")]
    # reference library: shapely's area of the input against the read-back polygon
    assert Polygon(pts).area == pytest.approx(shape.area, abs=1e-6)
    assert Polygon(pts).symmetric_difference(shape).area < 1e-6
    assert _shoelace(pts) > 0  # exterior written counter-clockwise


@pytest.mark.parametrize("name", ["rectangle", "rounded"])
def test_dxf_tags_read_without_ezdxf(name):
    shape = SHAPES[name]
    tags = _tags(board_outline_dxf(shape))
    assert _header_value(tags, "$INSUNITS") == "4"  # DXF reference: 4 = Millimeters
    (pl,) = _lwpolylines_by_tags(tags)
    assert pl["layer"] == EDGE_LAYER and pl["flags"] & 1  # bit 1 of code 70 = closed (DXF reference)
    pts = list(zip(pl["xs"], pl["ys"]))
    assert abs(_shoelace(pts)) == pytest.approx(shape.area, abs=1e-6)  # Gauss's area formula


def test_dxf_polygon_with_holes_writes_each_hole_on_the_same_layer():
    plate = box(0, 0, 50, 30)
    holes = [Point(10, 10).buffer(2.0, quad_segs=8), box(30, 12, 40, 20)]
    shape = plate.difference(holes[0]).difference(holes[1])
    doc = _read_dxf(board_outline_dxf(shape))
    pls = list(doc.modelspace().query("LWPOLYLINE"))
    assert len(pls) == 3 and all(p.dxf.layer == EDGE_LAYER and p.closed for p in pls)
    signed = [_shoelace([(float(x), float(y)) for x, y in p.get_points("xy")]) for p in pls]
    assert signed[0] > 0 and all(s < 0 for s in signed[1:])  # exterior CCW, holes CW
    # closed form: plate minus holes; shapely for the inscribed 32-gon
    assert sum(signed) == pytest.approx(shape.area, abs=1e-6)
    assert signed[0] == pytest.approx(50 * 30, abs=1e-9)


def test_dxf_bytes_identical_on_two_calls_and_option_restored():
    before = ezdxf.options.write_fixed_meta_data_for_testing
    a = board_outline_dxf(SHAPES["rounded"])
    b = board_outline_dxf(SHAPES["rounded"])
    assert a == b
    assert ezdxf.options.write_fixed_meta_data_for_testing == before


_CHILD = """
import sys
from shapely.geometry import box
from pipeline.export.dxf import board_outline_dxf
sys.stdout.buffer.write(board_outline_dxf(box(5, 5, 45, 25).buffer(4.0, quad_segs=16)))
"""


def test_dxf_bytes_identical_across_processes():
    outs = []
    for seed in ("0", "4242"):
        env = {k: v for k, v in os.environ.items() if k != "SOURCE_DATE_EPOCH"}
        env["PYTHONHASHSEED"] = seed
        r = subprocess.run([sys.executable, "-c", _CHILD], cwd=ROOT, env=env, capture_output=True,
                           timeout=60, check=True)
        outs.append(r.stdout)
    assert outs[0] == outs[1]
    assert len(outs[0]) > 1000 and b"LWPOLYLINE" in outs[0]


def _julian(tags, name):
    return float(_header_value(tags, name))


def test_dxf_timestamp_written_as_dxf_julian_date(monkeypatch):
    monkeypatch.delenv("SOURCE_DATE_EPOCH", raising=False)
    t = 1_700_000_000  # 2023-11-14 22:13:20 UTC
    tags = _tags(board_outline_dxf(SHAPES["rectangle"], timestamp=t))
    # DXF header dates are Julian day number + fraction of the day (DXF reference); the Julian day
    # number of 1970-01-01 is 2440588 (Meeus, Astronomical Algorithms, ch. 7; from memory).
    expected = 2440588 + t / 86400
    for name in ("$TDCREATE", "$TDUCREATE", "$TDUPDATE", "$TDUUPDATE"):
        assert _julian(tags, name) == pytest.approx(expected, abs=1.2e-5)  # within a second


def test_dxf_source_date_epoch_is_honoured(monkeypatch):
    monkeypatch.setenv("SOURCE_DATE_EPOCH", "86400")
    a = board_outline_dxf(SHAPES["rectangle"])
    assert _julian(_tags(a), "$TDCREATE") == pytest.approx(2440589.0, abs=1e-9)  # 1970-01-02
    monkeypatch.delenv("SOURCE_DATE_EPOCH")
    b = board_outline_dxf(SHAPES["rectangle"])
    assert a != b
    # without a timestamp: ezdxf's fixed date 2000-01-01 = Julian day number 2451545 (Meeus; from memory)
    assert _julian(_tags(b), "$TDCREATE") == pytest.approx(2451545.0, abs=1e-9)


def test_dxf_guids_are_fixed():
    tags = _tags(board_outline_dxf(SHAPES["rectangle"]))
    zero = "{00000000-0000-0000-0000-000000000000}"
    assert _header_value(tags, "$FINGERPRINTGUID") == zero
    assert _header_value(tags, "$VERSIONGUID") == zero


@pytest.mark.parametrize(
    "bad",
    [
        Polygon(),
        LineString([(0, 0), (1, 1)]),
        MultiPolygon([box(0, 0, 1, 1), box(2, 0, 3, 1)]),
        Polygon([(0, 0), (2, 2), (2, 0), (0, 2)]),  # bow-tie: self-intersecting
    ],
    ids=["empty", "line", "two-boards", "bow-tie"],
)
def test_dxf_refuses_what_is_not_one_board(bad):
    with pytest.raises(ValueError):
        board_outline_dxf(bad)


def test_dxf_accepts_a_multipolygon_of_one():
    shape = MultiPolygon([box(0, 0, 10, 5)])
    doc = _read_dxf(board_outline_dxf(shape))
    (pl,) = doc.modelspace().query("LWPOLYLINE")
    assert Polygon(list(pl.get_points("xy"))).area == pytest.approx(50.0, abs=1e-9)  # 10 x 5


def test_svg_long_ref_lists_are_cut_and_counted():
    refs = tuple(f"R{i}" for i in range(1, 201))
    cav, reg, fit = _scene(fits=False, unplaced=refs)
    root = _svg_root(fit_svg(cav, reg, fit))
    legend = [g for g in root.iter(SVG_NS + "g") if g.get("class") == "legend"][0]
    texts = [t.text for t in legend.iter(SVG_NS + "text")]
    start = texts.index("Not placed (200)") + 1
    listed, tail = [], None
    for t in texts[start:]:
        if t.startswith("\u2026 and "):
            tail = int(t.split()[2])
            break
        listed.extend(t.split(" "))
    # every ref is either listed (in natural order) or counted: the two add up to 200
    assert listed == list(refs[: len(listed)]) and tail == 200 - len(listed)


def _label_boxes(root):
    """Each label's box from its text element: 0.72 em per character wide, 0.6 em each side of the
    centre line (the rendered extent of common sans-serif faces, from memory), rotated boxes turned."""
    boxes = {}
    for ref, (t, _) in _labels(root).items():
        size = float(t.get("font-size"))
        cx, cy = float(t.get("x")), float(t.get("y")) - 0.35 * size
        hw, hh = 0.36 * len(t.text) * size, 0.6 * size
        if t.get("transform"):
            hw, hh = hh, hw
        boxes[ref] = (cx - hw, cy - hh, cx + hw, cy + hh)
    return boxes


@settings(max_examples=25, deadline=None)
@given(st.lists(st.tuples(st.floats(2, 58), st.floats(2, 34), st.sampled_from([(0.6, 0.3), (1.0, 0.5), (1.6, 0.8),
                                                                               (2.2, 1.2), (5.0, 4.0)])),
                min_size=1, max_size=30))
def test_svg_labels_never_overlap(parts):
    placements = tuple(_placement(f"R{i}", x, y, length, width) for i, (x, y, (length, width)) in enumerate(parts))
    cav, reg, fit = _scene(placements=placements)
    root = _svg_root(fit_svg(cav, reg, fit))
    boxes = sorted(_label_boxes(root).items())
    for i, (a, p) in enumerate(boxes):
        for b, q in boxes[i + 1:]:
            overlap = min(p[2], q[2]) - max(p[0], q[0]), min(p[3], q[3]) - max(p[1], q[1])
            assert min(overlap) <= 1e-6, (a, b)
    labelled = set(dict(boxes))
    listed = [t.text for t in root.iter(SVG_NS + "text") if (t.text or "").startswith("Not labelled")]
    assert labelled == {p.ref for p in placements} or listed  # a part without a label is named in the legend


def test_svg_depth_colours_cannot_be_read_as_copper():
    # Copper is drawn warm (hue 0..60 degrees, saturated). HSV saturation from the standard library's colorsys.
    import colorsys

    root = _svg_root(fit_svg(*_scene()))
    fills = [p.get("fill") for p in root.iter(SVG_NS + "path") if p.get("class") in ("depth-zone", "cavity-floor")]
    assert len(fills) == 3
    for f in fills:
        r, g, b = (int(f[i:i + 2], 16) / 255 for i in (1, 3, 5))
        assert colorsys.rgb_to_hsv(r, g, b)[1] < 0.08, f  # grey: no hue to speak of


# --------------------------------------------------------------------------
# cost guards (issue 11): counted box tests, never seconds
# --------------------------------------------------------------------------
def _dense_grid(n: int, pitch: float = 1.0):
    """n parts of 0.6 x 0.3 mm on a square grid of ``pitch`` (too small for a label inside)."""
    side = math.ceil(math.sqrt(n))
    return [_placement(f"C{k + 1}", (k % side) * pitch, (k // side) * pitch, 0.6, 0.3) for k in range(n)]


def _count_box_tests(monkeypatch, placements, u=1.0, plain=False):
    """Labels, unlabelled refs and the box tests made; ``plain``: every spot box-tested (no raster)."""
    import pipeline.export.svg as svg

    if plain:
        monkeypatch.setattr(svg._CoveredCells, "open_spots", lambda self, cells, ref: range(len(svg._SPOTS)))
    grids = []

    class Counting(svg._BoxGrid):
        def __init__(self, cell):
            super().__init__(cell)
            grids.append(self)

    monkeypatch.setattr(svg, "_BoxGrid", Counting)
    b = svg._bounds([p.courtyard for p in placements])
    labels, skipped = svg.place_labels(placements, u, b)
    monkeypatch.undo()
    return sum(g.tests for g in grids), labels, skipped


def test_label_placer_box_tests_grow_linearly(monkeypatch):
    # a pairwise placer makes about n^2 / 2 box tests; ours makes O(1) per part, so the count per part
    # stays level when n grows 4 x (closed form of linear cost: tests(4n) / tests(n) <= 4 x slack)
    # (the frame's edge rejects spots cheaply, so small scenes are a little cheaper per part: 1.5 x slack)
    small, labels_s, _ = _count_box_tests(monkeypatch, _dense_grid(1600))
    large, labels_l, _ = _count_box_tests(monkeypatch, _dense_grid(6400))
    assert labels_s and labels_l
    assert large / small <= 4 * 1.5
    assert large < 6400 * 6399 / 2 / 4


@given(st.lists(st.tuples(st.floats(0, 30), st.floats(0, 30), st.sampled_from([(0.6, 0.3), (2.2, 1.2), (6.0, 4.0)])),
                min_size=1, max_size=40))
@settings(max_examples=40, deadline=None)
def test_label_placer_labels_never_overlap_checked_pairwise(parts):
    # the grid is only an index: every pair of placed label boxes, checked the plain pairwise way, is apart
    import pipeline.export.svg as svg

    pls = [_placement(f"R{k + 1}", x, y, ln, wd) for k, (x, y, (ln, wd)) in enumerate(parts)]
    labels, skipped = svg.place_labels(pls, 1.0, svg._bounds([p.courtyard for p in pls]))
    assert len(labels) + len(skipped) == len(pls)
    for i, a in enumerate(labels):
        for b in labels[i + 1:]:
            assert not (a.box[0] < b.box[2] and b.box[0] < a.box[2] and a.box[1] < b.box[3] and b.box[1] < a.box[3])


@pytest.mark.parametrize("x, text", [(-0.0004, "0.000"), (0.0004, "0.000"), (-0.0006, "-0.001"),
                                     (-10.0, "-10.000"), (2.0005, "2.001"), (-100.25, "-100.250")])
def test_svg_path_numbers_are_the_plain_three_decimal_text(x, text):
    # reference: Python's own "%.3f" (correctly rounded, IEEE 754), with a negative zero written 0.000
    from pipeline.export.svg import _path_d

    d = _path_d(LineString([(x, 1.0), (1.0, -x)]))
    assert d == f"M{text},-1.000 L1.000,{text}"


_coord = st.floats(-50, 50, allow_nan=False).map(lambda v: round(v, 4))
_some_geometry = st.one_of(
    st.none(),
    st.just(Polygon()),
    st.builds(lambda x, y, w, h: box(x, y, x + w, y + h), _coord, _coord, st.floats(0.1, 9), st.floats(0.1, 9)),
    st.builds(lambda x, y, r: Point(x, y).buffer(r, quad_segs=3).difference(Point(x, y).buffer(r / 3, quad_segs=2)),
              _coord, _coord, st.floats(0.5, 5)),
    st.builds(lambda x, y: MultiPolygon([box(x, y, x + 1, y + 1), box(x + 3, y, x + 4, y + 2)]), _coord, _coord),
    st.builds(lambda pts: LineString(pts), st.lists(st.tuples(_coord, _coord), min_size=2, max_size=6)),
)


def _rings_of(geom) -> list[tuple[list, bool]]:
    """The reference: each ring's coordinates read one at a time off shapely, as (points, closed)."""
    if geom is None or geom.is_empty:
        return []
    if isinstance(geom, LineString):
        return [(list(geom.coords), False)]
    polys = list(geom.geoms) if hasattr(geom, "geoms") else [geom]
    return [(list(r.coords)[:-1], True) for p in polys for r in (p.exterior, *p.interiors)]


@given(st.lists(_some_geometry, max_size=12))
@settings(max_examples=80, deadline=None)
def test_svg_paths_in_bulk_hold_every_ring_of_every_geometry(geoms):
    # reference: shapely's coordinates read ring by ring; each number within half a unit of the
    # third decimal of x and -y ("%.3f", correctly rounded), rings in order, Z on closed ones
    from pipeline.export.svg import _path_d, _paths_d

    ds = _paths_d(geoms)
    assert ds == [_path_d(g) for g in geoms]  # a geometry's text does not depend on its neighbours
    for g, d in zip(geoms, ds):
        rings = _rings_of(g)
        texts = [t for t in re.split(r" ?M", d) if t]
        assert len(texts) == len(rings)
        for text, (pts, closed) in zip(texts, rings):
            assert text.endswith(" Z") == closed
            got = [tuple(map(float, p.split(","))) for p in text.removesuffix(" Z").split(" L")]
            assert len(got) == len(pts)
            for (gx, gy), (x, y) in zip(got, pts):
                assert abs(gx - x) <= 0.0005 + 1e-9 and abs(gy + y) <= 0.0005 + 1e-9


def test_svg_paths_of_many_polygons_read_coordinates_once(monkeypatch):
    # cost guard (calls, not seconds): 300 courtyards -> one bulk coordinate read and one format
    import shapely as shp

    import pipeline.export.svg as svg

    calls = []
    real = shp.get_coordinates
    monkeypatch.setattr(svg.shapely, "get_coordinates", lambda *a, **k: calls.append(1) or real(*a, **k))
    ds = svg._paths_d([box(k, 0, k + 0.5, 1) for k in range(300)])
    assert len(calls) == 1 and ds[7] == "M7.500,0.000 L7.500,-1.000 L7.000,-1.000 L7.000,0.000 Z"


@given(st.text(max_size=30))
@settings(max_examples=200, deadline=None)
def test_markup_escape_matches_the_standard_library(text):
    # reference: xml.sax.saxutils.escape with the two quote entities, after replacing what XML 1.0
    # cannot hold (its Char production) and DEL (markup.py's rule) by U+FFFD
    from xml.sax.saxutils import escape as sax_escape

    from pipeline.export.markup import escape

    def xml_char(c):
        o = ord(c)
        return o in (9, 10, 13) or 0x20 <= o <= 0xD7FF and o != 0x7F or 0xE000 <= o <= 0xFFFD or o >= 0x10000

    clean = "".join(c if xml_char(c) else "\ufffd" for c in text)
    assert escape(text) == sax_escape(clean, {'"': "&quot;", "'": "&#39;"})


@given(st.lists(st.tuples(st.floats(0, 12), st.floats(0, 12), st.sampled_from([(0.6, 0.3), (2.2, 1.2), (6.0, 4.0)]),
                          st.sampled_from(["R", "C", "TP", "U"]), st.integers(1, 12000)),
                min_size=1, max_size=60),
       st.sampled_from([0.5, 1.0, 3.0]))
@settings(max_examples=60, deadline=None)
def test_label_raster_skips_only_spots_the_box_tests_refuse(parts, u):
    # reference: the same greedy search with every spot box-tested (no raster); the labels and the
    # unlabelled list must be identical, so the raster only ever skips spots that meet a label
    import pipeline.export.svg as svg

    pls = [_placement(f"{p}{n}", x, y, ln, wd) for (x, y, (ln, wd), p, n) in parts]
    seen, unique = set(), []
    for p in pls:
        if p.ref not in seen:
            seen.add(p.ref)
            unique.append(p)
    _, *plain = _count_box_tests(pytest.MonkeyPatch(), unique, u, plain=True)
    assert svg.place_labels(unique, u, svg._bounds([p.courtyard for p in unique])) == tuple(plain)


def test_label_raster_spares_box_tests_on_a_crowded_board(monkeypatch):
    # 3,600 small parts at 1 mm pitch drawn at 4 drawing mm per paper mm: the leader labels (about
    # 10 x 5 mm) cover the picture, so most parts end unlabelled; the plain search box-tests every
    # spot of each of them (64 spots), the raster skips the spots whose centre lies in a label grown
    # by the spot's half sizes. Same labels both ways (reference: the plain search).
    pls = _dense_grid(3600)
    plain_tests, *plain = _count_box_tests(monkeypatch, pls, 4.0, plain=True)
    fast_tests, *fast = _count_box_tests(monkeypatch, pls, 4.0)
    assert fast == plain
    assert len(plain[1]) > len(pls) / 2  # most parts unlabelled: the crowded case
    assert fast_tests < plain_tests / 5, (fast_tests, plain_tests)
