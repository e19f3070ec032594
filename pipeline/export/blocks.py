"""The HTML and SVG of declared circuit blocks in ``report.html``.

Entry point: :func:`block_sections`, one (heading, html fragment) pair per
:class:`~pipeline.model.BlockReport`. Pure functions of the reports; every
user-written string is escaped here, by :func:`pipeline.export.markup.escape`
(the one escaping rule for user text).
"""

from __future__ import annotations

from typing import Sequence

from ..circuit.blocktype import part_value_text
from ..model import BlockReport
from ..values import format_quantity as fmt
from ..values import format_share
from .markup import escape as _E
from .response_plot import response_svg

__all__ = ["block_sections"]


def _table(head: Sequence[str], rows: Sequence[Sequence[str]], cls: str) -> str:
    th = "".join(f"<th>{_E(h)}</th>" for h in head)
    body = "".join("<tr>" + "".join(f"<td>{_E(c)}</td>" for c in row) + "</tr>" for row in rows)
    return f'<table class="{cls}"><thead><tr>{th}</tr></thead><tbody>{body}</tbody></table>'


def block_sections(reports: Sequence[BlockReport]) -> list[tuple[str, str]]:
    """(heading, html fragment) per declared block for ``report.html``.

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
        bits = ['<div class="block">',
                f'<p>{_E(rep.type)}' + (f": {_E(rep.note)}" if rep.note else "") +
                f'. Spread: every tolerance corner, and {rep.draws} Monte Carlo builds (seed {rep.seed}, '
                f'each part uniform within its tolerance).</p>']
        if rep.settings:
            bits.append("<p>" + _E("; ".join(f"{k} = {fmt(v, 'V')}" for k, v in rep.settings)) + "</p>")
        if rep.assumptions:
            bits.append("<p>Assumed: " + _E("; ".join(rep.assumptions)) + ".</p>")
        bits.append(_table(("role", "part", "value", "tolerance"), parts, "block-parts"))
        bits.append(_table(("figure", "nominal", "target", "corner min", "corner max", "1st pct",
                            "median", "99th pct", "builds out", "verdict"), figs, "block-figures"))
        if rep.response is not None:
            bits.append(f'<figure class="block-response">{response_svg(rep, len(out) + 1)}</figure>')
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
                               "block-retune"))
        bits.append("</div>")
        out.append((f"Block {rep.name} ({rep.type})", "\n".join(bits)))
    return out
