"""The frequency-response plot of a filter block, as inline SVG for ``report.html``.

Entry points: :func:`plot_window` (what the plot shows) and
:func:`response_svg` (the picture).

The plot is scaled to where the block's figures are: half a decade either
side of f0, the -3 dB frequency and any frequency target, and in level from
just above the highest point of the tolerance band down to the lowest point
in that window, but never more than :data:`DEPTH_DB` below the pass band, so
the tolerance band stays visible instead of 80 dB of stop band. Frequency
targets are drawn as shaded ranges; f0 and the -3 dB point are labelled in
a lane above the plot (two rows when their labels would touch), so no label
crosses a curve or another label. Tick labels on 1-2-5 frequencies and on a
dB step chosen for about six lines; every label is kept inside the picture
(measured with :data:`CHAR_W`, a sans-serif estimate). Minus signs are
U+2212.
"""

from __future__ import annotations

import math
from typing import Sequence

import numpy as np

from ..model import BlockReport, Response
from ..values import format_quantity as fmt
from .markup import escape

__all__ = ["plot_window", "response_svg", "DEPTH_DB", "MARGIN_DECADES", "minus"]

#: The plot reaches at most this far below the pass band (dB).
DEPTH_DB = 24.0
#: Decades shown either side of the outermost figure or target.
MARGIN_DECADES = 0.5
#: Estimated width of one character at font-size 11 (px; sans-serif averages about 0.55 em).
CHAR_W = 6.2

_W, _H = 640, 330
_ML, _MR, _MT, _MB = 58, 22, 62, 42
_E = escape  # user text (the block name) as all user text: pipeline.export.markup
_FREQ_FIGURES = ("f0", "f_3db")


def minus(text: str) -> str:
    """``text`` with hyphen-minus signs before digits written as U+2212 MINUS SIGN.

    >>> minus("-3 dB, -10, a-b")
    '\u22123 dB, \u221210, a-b'
    """
    out = []
    for i, ch in enumerate(text):
        nxt = text[i + 1:i + 2]
        out.append("\u2212" if ch == "-" and nxt.isdigit() and (i == 0 or not text[i - 1].isalnum()) else ch)
    return "".join(out)


def _targets(rep: BlockReport) -> list[tuple[str, float, float]]:
    return [(f.name, f.target.lo, f.target.hi) for f in rep.figures
            if f.name in _FREQ_FIGURES and f.target is not None and f.target.lo > 0]


def _step(span: float) -> float:
    for s in (1.0, 2.0, 5.0, 10.0, 20.0):
        if span / s <= 8:
            return s
    return 20.0


def plot_window(rep: BlockReport) -> tuple[float, float, float, float]:
    """``(f_low, f_high, db_bottom, db_top)`` the plot of ``rep`` shows (Hz, dB); see :func:`_window`."""
    return _window(rep)[:4]


def _window(rep: BlockReport) -> tuple[float, float, float, float, float]:
    """``(f_low, f_high, db_bottom, db_top, db_step)`` of the plot of ``rep`` (Hz, dB).

    The frequencies of interest are f0, the -3 dB frequency and the ends of
    frequency targets; the window is :data:`MARGIN_DECADES` wider on each
    side, within the computed response. The levels run from the lowest
    tolerance-band point in that window (at most :data:`DEPTH_DB` below the
    pass band) to 1 dB above its highest, rounded out to the tick step.
    """
    r = rep.response
    assert r is not None
    f = np.asarray(r.f_hz)
    marks = [v for v in (r.f0_hz, r.f3db_hz) if math.isfinite(v) and v > 0]
    marks += [v for _, lo, hi in _targets(rep) for v in (lo, hi)]
    f_lo = max(min(marks) / 10 ** MARGIN_DECADES, float(f[0]))
    f_hi = min(max(marks) * 10 ** MARGIN_DECADES, float(f[-1]))
    inside = (f >= f_lo) & (f <= f_hi)
    high = np.asarray(r.high_db)[inside]
    low = np.asarray(r.low_db)[inside]
    top = max(float(np.max(high[np.isfinite(high)], initial=r.passband_db)), r.passband_db) + 1.0
    bottom = max(float(np.min(low[np.isfinite(low)], initial=r.passband_db - 3.0)), r.passband_db - DEPTH_DB)
    bottom = min(bottom, r.passband_db - 4.0)          # the -3 dB line always shows
    step = _step(top - bottom)
    return f_lo, f_hi, math.floor(bottom / step) * step, math.ceil(top / step) * step, step


def _freq_ticks(f_lo: float, f_hi: float) -> tuple[list[float], list[float]]:
    """(labelled 1-2-5 ticks, unlabelled grid lines) inside [f_lo, f_hi]."""
    labelled, grid = [], []
    for dec in range(math.floor(math.log10(f_lo)), math.ceil(math.log10(f_hi)) + 1):
        for m in range(1, 10):
            fr = m * 10.0 ** dec
            if f_lo <= fr <= f_hi:
                (labelled if m in (1, 2, 5) else grid).append(fr)
    return labelled, grid


def _anchored(x: float, text: str, lo: float, hi: float) -> tuple[float, str]:
    """A centred label's x and anchor, moved so the text stays between ``lo`` and ``hi``."""
    half = len(text) * CHAR_W / 2
    if x - half < lo:
        return lo, "start"
    if x + half > hi:
        return hi, "end"
    return x, "middle"


def _extent(x: float, anchor: str, text: str) -> tuple[float, float]:
    width = len(text) * CHAR_W
    return {"start": (x, x + width), "end": (x - width, x)}.get(anchor, (x - width / 2, x + width / 2))


def _lanes(spans: Sequence[tuple[float, float]], gap: float = 8.0) -> list[int]:
    """Row (0, 1, ...) for each label extent so that labels in one row keep ``gap`` px apart."""
    rows: list[int] = []
    taken: list[list[tuple[float, float]]] = []
    for a, b in spans:
        row = 0
        while row < len(taken) and not all(b + gap < c or a - gap > d for c, d in taken[row]):
            row += 1
        if row == len(taken):
            taken.append([])
        taken[row].append((a, b))
        rows.append(row)
    return rows


def _curves(r: Response, x, y) -> list[str]:
    def pts(fs: Sequence[float], dbs: Sequence[float]) -> str:
        return " ".join(f"{x(a):.2f},{y(b):.2f}" for a, b in zip(fs, dbs))

    band = pts(r.f_hz, r.high_db) + " " + pts(r.f_hz[::-1], r.low_db[::-1])
    return [f'<polygon points="{band}" fill="#bcd6e3" stroke="#6f9fb8" stroke-width="0.8"/>',
            f'<polyline points="{pts(r.f_hz, r.nominal_db)}" fill="none" stroke="#1f4e66" stroke-width="1.8"/>']


def response_svg(rep: BlockReport, index: int) -> str:
    """The response plot of filter block ``rep`` as an ``<svg>`` element (``index`` keeps ids unique)."""
    r = rep.response
    assert r is not None
    f_lo, f_hi, bottom, top, step = _window(rep)
    pw, ph = _W - _ML - _MR, _H - _MT - _MB
    lf0, lf1 = math.log10(f_lo), math.log10(f_hi)

    def x(fr: float) -> float:
        return _ML + (math.log10(fr) - lf0) / (lf1 - lf0) * pw

    def y(db: float) -> float:
        db = min(max(db, bottom - 40.0), top + 40.0)      # clipped by the plot's clipPath
        return _MT + (top - db) / (top - bottom) * ph

    clip = f"block-plot-{index}"
    out = [f'<svg xmlns="http://www.w3.org/2000/svg" viewBox="0 0 {_W} {_H}" width="{_W}" height="{_H}" '
           f'role="img" aria-label="{_E("frequency response of block " + rep.name)}" '
           f'font-family="sans-serif" font-size="11">',
           f'<rect x="0" y="0" width="{_W}" height="{_H}" fill="#fbfaf6"/>',
           f'<rect x="{_ML}" y="{_MT}" width="{pw}" height="{ph}" fill="#ffffff" stroke="#8a8579"/>',
           f'<clipPath id="{clip}"><rect x="{_ML}" y="{_MT}" width="{pw}" height="{ph}"/></clipPath>']
    out += _grid(x, y, (f_lo, f_hi), (bottom, top, step), pw, ph)
    out.append(f'<g clip-path="url(#{clip})">')
    for name, lo, hi in _targets(rep):
        a, b = x(max(lo, f_lo)), x(min(hi, f_hi))
        out.append(f'<rect x="{a:.2f}" y="{_MT}" width="{max(b - a, 0.0):.2f}" height="{ph}" fill="#e9dfb9" '
                   f'fill-opacity="0.7"><title>{_E(name)} target</title></rect>')
    out.append(f'<line x1="{_ML}" y1="{y(r.passband_db - 3.0):.2f}" x2="{_ML + pw}" y2="{y(r.passband_db - 3.0):.2f}" '
               f'stroke="#7d9a5a" stroke-dasharray="2,3"/>')
    out += _curves(r, x, y)
    out.append("</g>")
    out += _markers(rep, x, pw, ph)
    out.append(f'<text x="{_ML + pw / 2:.2f}" y="{_H - 8}" text-anchor="middle" fill="#4a463e">frequency (Hz, log)</text>')
    out.append(f'<text x="14" y="{_MT + ph / 2:.2f}" text-anchor="middle" fill="#4a463e" '
               f'transform="rotate(-90 14 {_MT + ph / 2:.2f})">gain (dB)</text>')
    legend = "nominal (line), tolerance corners (band)" + (", target (shaded)" if _targets(rep) else "")
    out.append(f'<text x="{_ML}" y="16" fill="#2b2924">{_E(rep.name)}: {legend}</text>')
    out.append("</svg>")
    return "\n".join(out)


def _grid(x, y, freqs: tuple[float, float], levels: tuple[float, float, float], pw: float, ph: float
          ) -> list[str]:
    f_lo, f_hi = freqs
    bottom, top, step = levels
    out = []
    labelled, plain = _freq_ticks(f_lo, f_hi)
    for fr in plain:
        out.append(f'<line x1="{x(fr):.2f}" y1="{_MT}" x2="{x(fr):.2f}" y2="{_MT + ph}" stroke="#efebe2"/>')
    for fr in labelled:
        out.append(f'<line x1="{x(fr):.2f}" y1="{_MT}" x2="{x(fr):.2f}" y2="{_MT + ph}" stroke="#d9d4c7"/>')
        text = fmt(fr, "Hz", 3)
        tx, anchor = _anchored(x(fr), text, 2.0, _W - 2.0)
        out.append(f'<text x="{tx:.2f}" y="{_MT + ph + 15}" text-anchor="{anchor}" fill="#4a463e">{_E(text)}</text>')
    n = int(round((top - bottom) / step))
    for i in range(n + 1):
        db = top - i * step
        out.append(f'<line x1="{_ML}" y1="{y(db):.2f}" x2="{_ML + pw}" y2="{y(db):.2f}" stroke="#e6e1d6"/>')
        out.append(f'<text x="{_ML - 6}" y="{y(db) + 4:.2f}" text-anchor="end" fill="#4a463e">'
                   f'{minus(f"{db:g}")}</text>')
    return out


def _markers(rep: BlockReport, x, pw: float, ph: float) -> list[str]:
    """Dashed lines at f0 and the -3 dB frequency, labelled in the lane above the plot."""
    r = rep.response
    marks = [(fr, lab, col, dash) for fr, lab, col, dash in
             ((r.f0_hz, "f0", "#a8452b", "5,3"), (r.f3db_hz, "-3 dB", "#5b7f2a", "2,2"))
             if math.isfinite(fr) and r.f_hz[0] <= fr <= r.f_hz[-1]]
    if len(marks) == 2 and math.isclose(marks[0][0], marks[1][0], rel_tol=1e-3):
        fr, _, col, dash = marks[0]        # one line, one label: "f0 = -3 dB" (first order, Butterworth)
        marks = [(fr, "f0 = -3 dB", col, dash)]
    placed = []
    for fr, lab, _, _ in marks:
        text = minus(f"{lab} {fmt(fr, 'Hz')}")
        tx, anchor = _anchored(x(fr), text, 2.0, _W - 2.0)
        placed.append((text, tx, anchor))
    out = []
    rows = _lanes([_extent(tx, anchor, text) for text, tx, anchor in placed])
    for (fr, _, col, dash), (text, tx, anchor), row in zip(marks, placed, rows):
        xx = x(fr)
        out.append(f'<line x1="{xx:.2f}" y1="{_MT}" x2="{xx:.2f}" y2="{_MT + ph}" stroke="{col}" '
                   f'stroke-dasharray="{dash}"/>')
        out.append(f'<text x="{tx:.2f}" y="{_MT - 8 - 14 * row}" text-anchor="{anchor}" fill="{col}">'
                   f'{_E(text)}</text>')
    return out
