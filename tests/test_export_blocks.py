"""Tests of pipeline.export.response_plot / blocks: the filter response plots in report.html.

The reference for every frequency is scipy.signal.freqs (a general-purpose reference library)
evaluating the textbook transfer functions typed here from the component values, not the
project's own formulas: "Op Amps For Everyone" ch. 16 for the unity-gain Sallen-Key sections,
H(s) = 1 / (1 + s R C) and s R C / (1 + s R C) for the first-order RC sections.
"""

from __future__ import annotations

import math
import re
import xml.etree.ElementTree as ET

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import optimize, signal

from pipeline.circuit import analyse_blocks
from pipeline.export.response_plot import CHAR_W, DEPTH_DB, minus, plot_window, response_svg
from pipeline.model import Design, Part, PinDef, RawTable

P2 = (PinDef("1", "1", "passive"), PinDef("2", "2", "passive"))
SVG = "{http://www.w3.org/2000/svg}"


def _textbook_tf(kind: str, v: dict) -> tuple[list[float], list[float]]:
    if kind == "sallen-key-lowpass":
        r1, r2, c1, c2 = v["R1"], v["R2"], v["Cf"], v["Cg"]
        return [1.0], [r1 * r2 * c1 * c2, c2 * (r1 + r2), 1.0]
    if kind == "sallen-key-highpass":
        c1, c2, r1, r2 = v["C1"], v["C2"], v["Rf"], v["Rg"]
        t2 = r1 * r2 * c1 * c2
        return [t2, 0.0, 0.0], [t2, r1 * (c1 + c2), 1.0]
    rc = v["R"] * v["C"]
    return ([1.0], [rc, 1.0]) if kind == "rc-lowpass" else ([rc, 0.0], [rc, 1.0])


def _minus_3db_hz(num, den, f0: float) -> float:
    """The frequency where |H| is 3.0103 dB below its pass-band level (0 dB: unity gain), by
    scipy.signal.freqs; |H| crosses that level once between f0 / 1000 and 1000 f0."""
    def level(f):
        _, h = signal.freqs(num, den, worN=[2 * math.pi * f])
        return 20 * math.log10(abs(h[0])) + 10 * math.log10(2)
    return optimize.brentq(level, f0 / 1e3, f0 * 1e3, xtol=1e-12 * f0)


def _design(kind: str, values: dict, tol_r=0.01, tol_c=0.05, targets=None) -> Design:
    parts, roles = [], {}
    for i, (role, v) in enumerate(values.items()):
        is_c = role.startswith("C")
        ref = f"{'C' if is_c else 'R'}{i + 1}"
        parts.append(Part(ref, "capacitor" if is_c else "resistor", "0603", P2, value=v,
                          tolerance=tol_c if is_c else tol_r))
        roles[role] = ref
    items = [("type", kind), ("parts", roles)] + ([("targets", targets)] if targets else [])
    return Design("t", "A", "d.toml", tuple(parts), (), (RawTable("f", tuple(items), "d.toml", "blocks.f", 1),))


_R = st.floats(2.0, 6.0).map(lambda e: 10 ** e)            # 100 ohm .. 1 Mohm
_C = st.floats(-10.0, -6.0).map(lambda e: 10 ** e)         # 100 pF .. 1 uF


@st.composite
def filters(draw):
    kind = draw(st.sampled_from(["sallen-key-lowpass", "sallen-key-highpass", "rc-lowpass", "rc-highpass"]))
    if kind.startswith("rc"):
        return kind, {"R": draw(_R), "C": draw(_C)}
    r, c = draw(_R), draw(_C)
    # ratios bounded so that f_3db lies within the computed response (Q from about 0.09 to 5)
    rr, cr = 10 ** draw(st.floats(-1.0, 1.0)), 10 ** draw(st.floats(-1.0, 2.0))
    if kind == "sallen-key-lowpass":
        return kind, {"R1": r, "R2": r * rr, "Cf": c * cr, "Cg": c}
    return kind, {"C1": c * cr, "C2": c, "Rf": r, "Rg": r * rr}


@settings(max_examples=40, deadline=None)
@given(filters())
def test_plot_window_holds_f0_and_the_minus_3db_point(flt):
    kind, values = flt
    (rep,), _ = analyse_blocks(_design(kind, values), draws=0)
    num, den = _textbook_tf(kind, values)
    # closed form: f0 = 1 / (2 pi sqrt(product of the time constants)) = 1 / (2 pi sqrt(a2)) (or RC)
    f0 = 1 / (2 * math.pi * math.sqrt(den[0])) if len(den) == 3 else 1 / (2 * math.pi * den[0])
    f3 = _minus_3db_hz(num, den, f0)
    assert rep.response.f3db_hz == pytest.approx(f3, rel=1e-6)
    f_lo, f_hi, bottom, top = plot_window(rep)
    assert f_lo < f0 < f_hi and f_lo < f3 < f_hi
    assert bottom < -3.0103 < top                  # the -3 dB level is on the plot
    # scaled to the figures, not the stop band: at most DEPTH_DB below the pass band and 1 dB above
    # the band's peak, each rounded out by at most one tick step (5 dB at these spans)
    assert bottom >= -DEPTH_DB - 5 and top <= max(rep.response.high_db) + 1 + 5
    # the band is drawn at its real width: every plotted point of the envelope inside the window
    _, h = signal.freqs(num, den, worN=2 * math.pi * np.array([f_lo, f_hi]))
    assert max(20 * np.log10(np.abs(h))) <= top


def _texts(svg: str):
    root = ET.fromstring(svg)
    width = float(root.get("width"))
    out = []
    for t in root.iter(f"{SVG}text"):
        if t.get("transform"):
            continue
        x, n = float(t.get("x")), len(t.text or "") * CHAR_W
        anchor = t.get("text-anchor", "start")          # the SVG default
        a = {"start": (x, x + n), "end": (x - n, x)}.get(anchor, (x - n / 2, x + n / 2))
        out.append((t.text, a, float(t.get("y"))))
    return out, width


@pytest.mark.parametrize("kind, values, targets", [
    ("sallen-key-lowpass", {"R1": 10e3, "R2": 10e3, "Cf": 22e-9, "Cg": 10e-9},
     {"f0": "1.2kHz ±5%", "f_3db": "1.0kHz .. 1.3kHz"}),
    ("sallen-key-highpass", {"C1": 100e-9, "C2": 100e-9, "Rf": 1.6e3, "Rg": 3.2e3}, {"f0": "700Hz ±5%"}),
    ("rc-lowpass", {"R": 1e3, "C": 10e-9}, None),          # f0 at 15.9 kHz: labels near the right edge
    ("rc-highpass", {"R": 100e3, "C": 1e-6}, {"f0": "1.59Hz ±5%"}),
])
def test_labels_inside_the_picture_apart_and_with_minus_signs(kind, values, targets):
    (rep,), _ = analyse_blocks(_design(kind, values, targets=targets), draws=0)
    svg = response_svg(rep, 1)
    texts, width = _texts(svg)
    for text, (a, b), _ in texts:
        assert 0 <= a and b <= width, text
        assert not re.search(r"(^|[^\w])-\d", text), text          # U+2212, not hyphen-minus
    lane = [(a, b, y) for text, (a, b), y in texts if y < 62 and y > 20]     # the marker labels
    for i, (a, b, y) in enumerate(lane):
        for c, d, y2 in lane[i + 1:]:
            assert y != y2 or b < c or d < a, "marker labels overlap"
    assert any("\u22123 dB" in t for t, _, _ in texts)
    # the level ticks: evenly spaced round numbers, 0 dB among them
    levels = [float(t.replace("\u2212", "-")) for t, _, _ in texts if re.fullmatch("\u2212?\\d+", t or "")]
    steps = {round(a - b, 9) for a, b in zip(levels, levels[1:])}
    assert len(levels) >= 3 and len(steps) == 1 and 0.0 in levels
    if targets:
        assert svg.count("target</title>") == len(targets)


def test_minus():
    assert minus("-3 dB") == "\u22123 dB" and minus("-10") == "\u221210" and minus("a-1") == "a-1"


def test_a_block_name_is_escaped_as_all_user_text_is():
    """A block name is a TOML key, so any text. Reference: XML 1.0 (fifth edition) section 2.2, whose
    Char production leaves out U+0001: the inline SVG must not hold it (expat, behind xml.etree,
    refuses such a document); the name is escaped by pipeline.export.markup like all user text."""
    from dataclasses import replace

    d = _design("rc-lowpass", {"R": 1e3, "C": 10e-9})
    d = replace(d, stages=(replace(d.stages[0], name="it's \x01 <f>"),))
    (rep,), _ = analyse_blocks(d, draws=0)
    svg = response_svg(rep, 1)
    root = ET.fromstring(svg)
    assert "it&#39;s \ufffd &lt;f&gt;" in svg and "\x01" not in svg
    assert root.get("aria-label") == "frequency response of block it's \ufffd <f>"
