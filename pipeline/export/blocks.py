"""The HTML and SVG of declared circuit blocks in ``report.html``.

Entry point: :func:`block_sections`, one (heading, html fragment) pair per
:class:`~pipeline.model.BlockReport`. Pure functions of the reports; every
user-written string is escaped here.
"""

from __future__ import annotations

import html
import math
from typing import Sequence

import numpy as np

from ..circuit.blocktype import part_value_text
from ..model import BlockReport
from ..values import format_quantity as fmt
from ..values import format_share

__all__ = ["block_sections"]


_E = html.escape


def _svg(rep: BlockReport, index: int) -> str:
    r = rep.response
    assert r is not None
    clip = f"stage-plot-{index}"
    w, h, ml, mr, mt, mb = 640, 300, 58, 18, 26, 42
    pw, ph = w - ml - mr, h - mt - mb
    f = np.asarray(r.f_hz)
    lf0, lf1 = math.log10(f[0]), math.log10(f[-1])
    top = math.ceil((max(max(r.high_db), r.passband_db) + 3.0) / 10.0) * 10.0
    bottom = max(math.floor(min(r.low_db) / 10.0) * 10.0, top - 80.0)

    def x(fr: float) -> float:
        return ml + (math.log10(fr) - lf0) / (lf1 - lf0) * pw

    def y(db: float) -> float:
        db = min(max(db, bottom - 40.0), top + 40.0)      # clipped by the plot's clipPath
        return mt + (top - db) / (top - bottom) * ph

    def pts(fs: Sequence[float], dbs: Sequence[float]) -> str:
        return " ".join(f"{x(a):.2f},{y(b):.2f}" for a, b in zip(fs, dbs))

    out = [f'<svg xmlns="http://www.w3.org/2000/svg" viewBox="0 0 {w} {h}" width="{w}" height="{h}" '
           f'role="img" aria-label="{_E("frequency response of stage " + rep.name)}" '
           f'font-family="sans-serif" font-size="11">',
           f'<rect x="0" y="0" width="{w}" height="{h}" fill="#fbfaf6"/>',
           f'<rect x="{ml}" y="{mt}" width="{pw}" height="{ph}" fill="#ffffff" stroke="#8a8579"/>',
           f'<clipPath id="{clip}"><rect x="{ml}" y="{mt}" width="{pw}" height="{ph}"/></clipPath>']
    for dec in range(math.ceil(lf0), math.floor(lf1) + 1):
        for m in range(1, 10):
            fr = m * 10.0 ** dec
            if f[0] <= fr <= f[-1]:
                col = "#d9d4c7" if m == 1 else "#efebe2"
                out.append(f'<line x1="{x(fr):.2f}" y1="{mt}" x2="{x(fr):.2f}" y2="{mt + ph}" stroke="{col}"/>')
        out.append(f'<text x="{x(10.0 ** dec):.2f}" y="{mt + ph + 15}" text-anchor="middle" '
                   f'fill="#4a463e">{_E(fmt(10.0 ** dec, "Hz", 3))}</text>')
    step = 10 if top - bottom <= 60 else 20
    db = math.floor(top / step) * step
    while db >= bottom - 1e-9:
        out.append(f'<line x1="{ml}" y1="{y(db):.2f}" x2="{ml + pw}" y2="{y(db):.2f}" stroke="#e6e1d6"/>')
        out.append(f'<text x="{ml - 6}" y="{y(db) + 4:.2f}" text-anchor="end" fill="#4a463e">{db:g}</text>')
        db -= step
    band = pts(r.f_hz, r.high_db) + " " + pts(r.f_hz[::-1], r.low_db[::-1])
    out.append(f'<g clip-path="url(#{clip})">')
    out.append(f'<polygon points="{band}" fill="#cfe0e8" stroke="#9fc1d1" stroke-width="0.6"/>')
    ref3 = r.passband_db - 3.0
    out.append(f'<line x1="{ml}" y1="{y(ref3):.2f}" x2="{ml + pw}" y2="{y(ref3):.2f}" '
               f'stroke="#7d9a5a" stroke-dasharray="2,3"/>')
    out.append(f'<polyline points="{pts(r.f_hz, r.nominal_db)}" fill="none" stroke="#1f4e66" stroke-width="1.8"/>')
    out.append("</g>")
    for fr, lab, col, dash, dy in ((r.f0_hz, "f0", "#a8452b", "5,3", 0),
                                   (r.f3db_hz, "-3 dB", "#5b7f2a", "2,2", 12)):
        if np.isfinite(fr) and f[0] <= fr <= f[-1]:
            out.append(f'<line x1="{x(fr):.2f}" y1="{mt}" x2="{x(fr):.2f}" y2="{mt + ph}" stroke="{col}" '
                       f'stroke-dasharray="{dash}"/>')
            out.append(f'<text x="{x(fr) + 4:.2f}" y="{mt + 12 + dy}" fill="{col}">'
                       f'{_E(lab + " " + fmt(fr, "Hz"))}</text>')
    out.append(f'<text x="{ml + pw / 2:.2f}" y="{h - 8}" text-anchor="middle" fill="#4a463e">frequency (Hz, log)</text>')
    out.append(f'<text x="14" y="{mt + ph / 2:.2f}" text-anchor="middle" fill="#4a463e" '
               f'transform="rotate(-90 14 {mt + ph / 2:.2f})">gain (dB)</text>')
    out.append(f'<text x="{ml}" y="{mt - 9}" fill="#2b2924">{_E(rep.name)}: nominal (line), '
               f'tolerance corners (band)</text>')
    out.append("</svg>")
    return "\n".join(out)


def _table(head: Sequence[str], rows: Sequence[Sequence[str]], cls: str) -> str:
    th = "".join(f"<th>{_E(h)}</th>" for h in head)
    body = "".join("<tr>" + "".join(f"<td>{_E(c)}</td>" for c in row) + "</tr>" for row in rows)
    return f'<table class="{cls}"><thead><tr>{th}</tr></thead><tbody>{body}</tbody></table>'


def block_sections(reports: Sequence[BlockReport]) -> list[tuple[str, str]]:
    """(heading, html fragment) per stage for ``report.html``.

    The heading is plain text (the report writer escapes it); everything
    user-written inside the fragment is escaped here. A fragment holds the
    parts table, the figures table (nominal, target, corner extremes,
    percentiles, share out of target, verdict), an inline SVG frequency
    response for filters, and the retune proposals when there are some.
    """
    out = []
    for rep in reports:
        units = {f.name: f.unit for f in rep.figures}
        parts = [(p.role, p.ref, p.value_text or "",
                  "" if p.tolerance is None else f"{p.tolerance * 100:g} %" + (" (assumed)" if p.tolerance_assumed else ""))
                 for p in rep.parts]
        figs = []
        for f in rep.figures:
            verdict = "" if f.passes is None else ("meets target" if f.passes else "MISSES target")
            figs.append((f.label, fmt(f.nominal, f.unit), f.target.text if f.target else "",
                         fmt(f.corner_min, f.unit), fmt(f.corner_max, f.unit),
                         fmt(f.p01, f.unit), fmt(f.p50, f.unit), fmt(f.p99, f.unit),
                         "" if f.share_out is None else format_share(f.share_out), verdict))
        bits = ['<div class="stage">',
                f'<p>{_E(rep.type)}' + (f": {_E(rep.note)}" if rep.note else "") +
                f'. Spread: every tolerance corner, and {rep.draws} Monte Carlo builds (seed {rep.seed}, '
                f'each part uniform within its tolerance).</p>']
        if rep.settings:
            bits.append("<p>" + _E("; ".join(f"{k} = {fmt(v, 'V')}" for k, v in rep.settings)) + "</p>")
        if rep.assumptions:
            bits.append("<p>Assumed: " + _E("; ".join(rep.assumptions)) + ".</p>")
        bits.append(_table(("role", "part", "value", "tolerance"), parts, "stage-parts"))
        bits.append(_table(("figure", "nominal", "target", "corner min", "corner max", "1st pct",
                            "median", "99th pct", "builds out", "verdict"), figs, "stage-figures"))
        if rep.response is not None:
            bits.append(f'<figure class="stage-response">{_svg(rep, len(out) + 1)}</figure>')
        if rep.proposals:
            kinds = {p.role: p.kind for p in rep.parts}
            rows = []
            for i, p in enumerate(rep.proposals, 1):
                vals = ", ".join(f"{ref} = {part_value_text(v, kinds[role])}" for role, ref, v in p.values)
                fg = ", ".join(f"{k} {fmt(v, units.get(k, ''))}" for k, v in p.figures)
                rows.append((str(i), vals, fg, f"{p.error:.3g}", "yes" if p.passes else "no",
                             "" if p.share_out is None else format_share(p.share_out)))
            ser = ", ".join(f"{k} {v}" for k, v in rep.series)
            bits.append(f"<p>Retune with preferred values ({_E(ser)}):</p>")
            bits.append(_table(("#", "values", "figures", "error", "meets all", "builds out"), rows,
                               "stage-retune"))
        bits.append("</div>")
        out.append((f"Stage {rep.name} ({rep.type})", "\n".join(bits)))
    return out
