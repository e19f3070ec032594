"""The one-page report: ``report.html``.

Entry point: :func:`report_html`.

One self-contained HTML5 file: inline CSS, the fit picture inlined as SVG,
one inline script of our own (:mod:`pipeline.export.picture_js`), no
external fonts, images, style sheets or scripts; a content security policy
allows nothing from the network and no script but that one (by its SHA-256
hash). It opens from a mail attachment or a USB stick and prints as it
shows. In order:

1. the verdict (:mod:`pipeline.verdict`): its headline, the exit status,
   the count of findings per severity and each reason, blocking ones first;
2. the order (:mod:`pipeline.export.order_view`): the board as a
   fabricator quotes it and the BOM files' lines, cell for cell;
3. the area figures in mm^2: usable region, courtyard sum, the estimated
   board area (low / expected / high, with the estimate's rule), how much
   of the region the expected area takes, and the board outline's area;
4. why it does not fit (``blocked_by``) and the parts not placed;
5. the picture, with layer switches, zoom buttons and net buttons that the
   script shows (hidden, and the picture fully drawn, when scripts are
   blocked);
6. the placements (ref in natural order, centre x / y in mm in the
   drawing's frame, rotation, side);
7. every finding, grouped by severity (error, warning, info), in the
   order given; the fit's own warnings are added when the caller did not
   already pass them;
8. the extra sections, each a heading and an HTML fragment.

Escaping: the extra sections' fragments are trusted HTML made by
snugboard's own modules and are inserted as given; the SVG is snugboard's
own output. Everything else (title, refs, finding text, blocked-by reasons,
section headings, BOM cells) may come from the user and is escaped by
:func:`pipeline.export.markup.escape`; the script puts user text on the
page only through ``textContent``.

The output is deterministic: no clock, no random ids, fixed number
formatting.
"""

from __future__ import annotations

import base64
import hashlib
import re
from typing import Mapping, Sequence

from ..model import SEVERITIES, SEVERITY_WORDS, BoardOptions, FitResult, Finding
from ..order import natural_key
from ..values import format_area, format_fixed
from .markup import escape as _esc
from ..verdict import Verdict, decide
from .order_view import order_section
from .picture_js import LAYERS as _LAYERS
from .picture_js import SCRIPT as _SCRIPT

__all__ = ["report_html"]

_XML_PROLOG = re.compile(r"^\s*<\?xml[^>]*\?>\s*")

_CSS = """
:root { --ink: #1f252d; --muted: #5b6470; --rule: #d5d9de; --band: #f4f6f8;
        --ok: #17694f; --ok-bg: #e3f3ec; --bad: #9c2417; --bad-bg: #fbe9e6;
        --none: #4a5361; --none-bg: #eceef1; --warn: #8a5a00; --warn-bg: #fdf3dc; --info: #2f4f9e; }
* { box-sizing: border-box; }
html { font-family: system-ui, sans-serif; color: var(--ink); background: #fff; line-height: 1.45; }
body { max-width: 60rem; margin: 0 auto; padding: 1.5rem 1.25rem 3rem; }
h1 { font-size: 1.6rem; margin: 0 0 .75rem; }
h2 { font-size: 1.2rem; margin: 2rem 0 .6rem; padding-bottom: .2rem; border-bottom: 2px solid var(--rule); }
h3 { font-size: 1rem; margin: 1.2rem 0 .4rem; }
nav { font-size: .9rem; margin: 0 0 1rem; color: var(--muted); }
nav a { color: inherit; margin-right: .9rem; }
.verdict { border-radius: .4rem; padding: .9rem 1.1rem; margin: 0 0 1rem; border-left: .5rem solid; }
.verdict strong { font-size: 1.35rem; display: block; }
.verdict.ready { background: var(--ok-bg); border-color: var(--ok); color: var(--ok); }
.verdict.does-not-fit { background: var(--bad-bg); border-color: var(--bad); color: var(--bad); }
.verdict.attention { background: var(--warn-bg); border-color: var(--warn); color: var(--warn); }
.verdict span, .verdict ul { color: var(--ink); }
.verdict li.blocking { font-weight: 600; }
.controls { font-size: .9rem; margin: .3rem 0; }
.controls .group { margin-right: 1rem; }
.controls label { margin-right: .6rem; }
.controls button { font: inherit; margin-right: .3rem; }
.nets button { font: inherit; font-size: .85rem; margin: .1rem; padding: .05rem .4rem; }
.nets button[aria-pressed="true"] { background: #f2c200; }
.tip { position: fixed; z-index: 10; pointer-events: none; background: #fff; border: 1px solid var(--ink);
       border-radius: .25rem; padding: .3rem .5rem; font-size: .85rem; max-width: 22rem; }
figure svg { touch-action: none; }
.wide { overflow-x: auto; }
table.order { font-size: .85rem; }
table.order td:nth-child(3) { white-space: nowrap; }
svg.hide-zones .depth-zones, svg.hide-zones .cavity-floor, svg.hide-keepouts .keepouts,
svg.hide-courtyards .placements, svg.hide-courtyards .pads, svg.hide-labels .labels,
svg.hide-copper .copper { display: none; }
svg.show-congestion .congestion { display: inline; }
svg .net-hit path, svg path.pad.net-hit { fill: #f2c200; fill-opacity: .9; stroke: #6b5200; }
svg path.pad.net-hit { stroke-width: .08; }
svg .net-hit[data-net]:not(.pad) { stroke: #f2c200; }
svg.net-active .part:not(.net-hit), svg.net-active .pad:not(.net-hit) { opacity: .35; }
svg path.area.net-hit { fill: #f2c200; stroke: none; }
svg g.via.net-hit circle:first-child { fill: #f2c200; }
svg.net-active .copper [data-net]:not(.net-hit) { opacity: .35; }
table { border-collapse: collapse; width: 100%; font-size: .92rem; margin: .3rem 0 .8rem; }
th, td { text-align: left; padding: .3rem .55rem; border-bottom: 1px solid var(--rule); vertical-align: top; }
th { background: var(--band); font-weight: 600; }
td.num, th.num { text-align: right; font-variant-numeric: tabular-nums; white-space: nowrap; }
table.figures { width: auto; min-width: 28rem; }
table.placements { width: auto; min-width: 32rem; }
table.findings { table-layout: fixed; }
col.message { width: 62%; } col.concerns { width: 16%; } col.check { width: 22%; }
table.findings code { overflow-wrap: anywhere; }
code { font-size: .88em; }
ul.reasons li { margin: .2rem 0; }
.refs { font-family: ui-monospace, monospace; font-size: .9rem; }
figure { margin: .5rem 0; }
figure svg { display: block; width: 100%; height: auto; border: 1px solid var(--rule); }
.sev-error { color: var(--bad); }
.sev-warning { color: var(--warn); }
.sev-info { color: var(--info); }
.quiet { color: var(--muted); }
footer { margin-top: 2.5rem; font-size: .8rem; color: var(--muted); }
@media print {
  body { max-width: none; padding: 0; }
  nav { display: none; }
  .verdict, th { -webkit-print-color-adjust: exact; print-color-adjust: exact; }
  h2 { break-after: avoid; }
  tr, figure { break-inside: avoid; }
  figure svg { max-height: 180mm; }
}
"""


def report_html(
    *, title: str, fit: FitResult | None, findings: Sequence[Finding], fit_svg: bytes | None,
    sections: Sequence[tuple[str, str]] = (), verdict: Verdict | None = None,
    order_files: Mapping[str, bytes] | None = None, board: BoardOptions | None = None,
) -> bytes:
    """Build the self-contained HTML report.

    Parameters
    ----------
    title : str
        Page title and heading (user text, escaped).
    fit : FitResult or None
        The fit verdict; ``None`` when the project gives no cavity.
    findings : sequence of Finding
        Every finding of every check, in the order to show them within
        each severity.
    fit_svg : bytes or None
        The picture from :func:`pipeline.export.svg.fit_svg` (UTF-8), inlined.
    sections : sequence of (str, str)
        Extra ``(heading, html_fragment)`` pairs; the heading is escaped, the
        fragment is trusted HTML and inserted as given.
    verdict : Verdict, optional
        The run's overall verdict; made here with :func:`pipeline.verdict.decide`
        from ``findings`` and ``fit`` when not given.
    order_files : mapping of file name to bytes, optional
        The BOM export's CSV files (``bom.csv``, ``bom-totals.csv``,
        ``bom-unfitted.csv``, ``board-features.csv`` and any other it gives),
        shown as the order.
    board : BoardOptions, optional
        Layers, thickness and sides, for the board as one would order it.

    Returns
    -------
    bytes
        UTF-8 HTML5 document; lengths in mm, areas in mm^2. Cost: linear in
        the findings, placements and the picture's size.

    Examples
    --------
    >>> from pipeline.model import Finding
    >>> page = report_html(title="Demo <1>", fit=None,
    ...                    findings=[Finding("warning", "connect.case-clash", ("R1",), "Check R1 & R2.")], fit_svg=None)
    >>> b"Needs attention" in page and b"Check R1 &amp; R2." in page and b"Demo &lt;1&gt;" in page
    True
    """
    all_findings = _with_fit_warnings(findings, fit)
    if verdict is None:
        verdict = decide(all_findings, fit)
    script = _SCRIPT if fit_svg else ""
    nav = _nav(fit, fit_svg, sections, bool(order_files))
    main = _main(verdict, all_findings, fit, fit_svg, sections, order_files, board)
    out = [*_head(title, script), *_header(title, nav), "<main>", *main, "</main>", _FOOTER]
    if script:
        out.append(f"<script>{script}</script>")
    out += ["</body>", "</html>"]
    return ("\n".join(out) + "\n").encode("utf-8")


_FOOTER = '<footer>Written by snugboard. All lengths in millimetres, areas in mm\u00b2.</footer>'


def _nav(fit: FitResult | None, fit_svg: bytes | None, sections: Sequence[tuple[str, str]],
         has_order: bool) -> list[tuple[str, str]]:
    """The ``(anchor, link text)`` pairs of the page's navigation, in the order of its sections."""
    nav = [("verdict", "Verdict")]
    if has_order:
        nav.append(("order", "Order"))
    if fit is not None:
        nav.append(("areas", "Areas"))
        if fit_svg:
            nav.append(("picture", "Picture"))
        nav.append(("placements", "Placements"))
    nav.append(("findings", "Findings"))
    nav.extend((f"section-{i + 1}", heading) for i, (heading, _) in enumerate(sections))
    return nav


def _head(title: str, script: str) -> list[str]:
    """The document's lines up to ``<body>``: charset, security policy, title and style."""
    return [
        "<!DOCTYPE html>",
        '<html lang="en">',
        "<head>",
        '<meta charset="utf-8">',
        f'<meta http-equiv="Content-Security-Policy" content="{_csp(script)}">',
        '<meta name="viewport" content="width=device-width, initial-scale=1">',
        '<meta name="generator" content="snugboard">',
        f"<title>{_esc(title)}</title>",
        f"<style>{_CSS}</style>",
        "</head>",
        "<body>",
    ]


def _header(title: str, nav: Sequence[tuple[str, str]]) -> list[str]:
    """The page header's lines: the heading and the navigation links (user text escaped)."""
    links = "".join(f'<a href="#{key}">{_esc(text)}</a>' for key, text in nav)
    return ["<header>", f"<h1>{_esc(title)}</h1>", f"<nav>{links}</nav>", "</header>"]


def _main(verdict: Verdict, findings: Sequence[Finding], fit: FitResult | None, fit_svg: bytes | None,
          sections: Sequence[tuple[str, str]], order_files: Mapping[str, bytes] | None,
          board: BoardOptions | None) -> list[str]:
    """The lines inside ``<main>``, one a section (see the module docstring for their order)."""
    counts = {sev: sum(1 for f in findings if f.severity == sev) for sev in SEVERITIES}
    out = [_verdict(verdict, counts)]
    if order_files:
        out.append(order_section(order_files, fit, board))
    if fit is not None:
        out += [_areas(fit), _blocked(fit)]
        if fit_svg:
            out.append(_picture(fit_svg))
        out.append(_placements(fit))
    elif fit_svg:
        out.append(_picture(fit_svg))
    out.append(_findings(findings))
    for i, (heading, fragment) in enumerate(sections):
        out += [f'<section id="section-{i + 1}" class="extra"><h2>{_esc(heading)}</h2>', fragment, "</section>"]
    return out


def _csp(script: str) -> str:
    """Content security policy: nothing from the network; only this page's own script (by its hash)."""
    allowed = f" script-src 'sha256-{base64.b64encode(hashlib.sha256(script.encode()).digest()).decode()}';" \
        if script else ""
    return f"default-src 'none'; style-src 'unsafe-inline'; img-src data:;{allowed}"


def _picture(fit_svg: bytes) -> str:
    """The picture, with the controls the script shows (hidden when scripts are blocked)."""
    layers = "".join(f'<label><input type="checkbox" data-layer="{k}"{" checked" if on else ""}> {t}</label>'
                     for k, t, on in _LAYERS)
    return (
        '<section id="picture"><h2>Picture</h2>'
        f'<div id="picture-controls" class="controls" hidden><span class="group">{layers}</span>'
        '<span class="group"><button type="button" data-zoom="in">Zoom in</button>'
        '<button type="button" data-zoom="out">Zoom out</button>'
        '<button type="button" data-zoom="reset">Whole picture</button></span>'
        '<p class="quiet">Hover a part for its facts; drag to pan, wheel to zoom; pick a net to light its parts.</p>'
        '<div id="picture-nets" class="nets"></div></div>'
        f'<figure id="picture-figure">{_inline_svg(fit_svg)}<figcaption class="quiet">Millimetres in the cavity '
        "drawing's frame; the scale bar and legend are in the picture.</figcaption></figure>"
        '<div id="picture-tip" class="tip" hidden></div></section>'
    )


# --------------------------------------------------------------------------
# parts of the page
# --------------------------------------------------------------------------
def _verdict(verdict: Verdict, counts: dict[str, int]) -> str:
    tally = ", ".join(_count(counts[s], s) for s in SEVERITIES)
    reasons = ""
    if verdict.reasons:
        items = "".join(f'<li class="{"blocking" if r.blocking else "advisory"}">'
                        f'{"Blocks: " if r.blocking else ""}{_esc(r.message)}</li>' for r in verdict.reasons)
        reasons = f'<ul class="reasons">{items}</ul>'
    return (
        f'<section id="verdict" class="verdict {verdict.level}" data-level="{verdict.level}" '
        f'data-exit-status="{verdict.exit_status}"><strong class="headline">{_esc(verdict.headline)}</strong>'
        f"<span>Exit status {verdict.exit_status}. Findings: {_esc(tally)}.</span>{reasons}</section>"
    )


def _count(n: int, severity: str) -> str:
    word = SEVERITY_WORDS.get(severity, severity)
    return f"{n} {word}" + ("" if n == 1 else "s")


def _areas(fit: FitResult) -> str:
    est = fit.estimate
    rows = [
        ("Usable board region", format_area(fit.region_area_mm2)),
        ("Courtyards of the fitted parts (sum)", format_area(fit.courtyard_area_mm2)),
        ("Estimated board area, low", format_area(est.low_mm2)),
        ("Estimated board area, expected", format_area(est.expected_mm2)),
        ("Estimated board area, high", format_area(est.high_mm2)),
    ]
    if fit.region_area_mm2 > 0:
        share = 100.0 * est.expected_mm2 / fit.region_area_mm2
        rows.append(("Expected area as a share of the region", f"{share:.1f} %"))
    if fit.board_outline is not None and not fit.board_outline.is_empty:
        rows.append(("Board outline", format_area(float(fit.board_outline.area))))
    if fit.wirelength_mm > 0:
        rows.append(("Half-perimeter wirelength of the placement", f"{fit.wirelength_mm:.1f} mm"))
    body = "".join(f'<tr><th scope="row">{_esc(k)}</th><td class="num">{_esc(v)}</td></tr>' for k, v in rows)
    rule = f'<p class="quiet">Estimate: {_esc(est.rule)}</p>' if est.rule else ""
    return f'<section id="areas"><h2>Areas</h2><table class="figures">{body}</table>{rule}</section>'


def _blocked(fit: FitResult) -> str:
    if fit.fits and not fit.blocked_by and not fit.unplaced:
        return ""
    out = ['<section id="blocked"><h2>What blocks the fit</h2>']
    if fit.blocked_by:
        out.append('<ul class="reasons">' + "".join(f"<li>{_esc(r)}</li>" for r in fit.blocked_by) + "</ul>")
    if fit.unplaced:
        refs = " ".join(sorted(fit.unplaced, key=natural_key))
        out.append(f'<p>Not placed ({len(fit.unplaced)}): <span class="refs">{_esc(refs)}</span></p>')
    out.append("</section>")
    return "".join(out)


def _placements(fit: FitResult) -> str:
    out = [f'<section id="placements"><h2>Placements ({len(fit.placements)})</h2>']
    if not fit.placements:
        out.append('<p class="quiet">No part was placed.</p></section>')
        return "".join(out)
    out.append(
        '<table class="placements"><thead><tr><th>Ref</th><th class="num">x (mm)</th>'
        '<th class="num">y (mm)</th><th class="num">Rotation (\u00b0)</th><th>Side</th></tr></thead><tbody>'
    )
    for p in sorted(fit.placements, key=lambda p: (natural_key(p.ref), p.side)):
        out.append(
            f"<tr><td>{_esc(p.ref)}</td><td class=\"num\">{format_fixed(p.x_mm)}</td>"
            f"<td class=\"num\">{format_fixed(p.y_mm)}</td><td class=\"num\">{int(p.rotation_deg)}</td>"
            f"<td>{_esc(p.side)}</td></tr>"
        )
    out.append("</tbody></table></section>")
    return "".join(out)


def _findings(findings: Sequence[Finding]) -> str:
    out = [f'<section id="findings"><h2>Findings ({len(findings)})</h2>']
    if not findings:
        out.append('<p class="quiet">No findings.</p>')
    order = list(SEVERITIES) + sorted({f.severity for f in findings} - set(SEVERITIES))
    for sev in order:
        group = [f for f in findings if f.severity == sev]
        if not group:
            continue
        head = f"{SEVERITY_WORDS[sev].capitalize()}s" if sev in SEVERITY_WORDS else sev.capitalize()
        out.append(f'<h3 class="sev-{_esc(_slug(sev))}">{_esc(head)} ({len(group)})</h3>')
        out.append(
            f'<table class="findings findings-{_esc(_slug(sev))}">'
            '<colgroup><col class="message"><col class="concerns"><col class="check"></colgroup>'
            "<thead><tr><th>Message</th>"
            "<th>Concerns</th><th>Check</th></tr></thead><tbody>"
        )
        for f in group:
            out.append(
                f"<tr><td>{_esc(f.message)}</td><td class=\"refs\">{_esc(' '.join(f.subject))}</td>"
                f"<td><code>{_esc(f.check)}</code></td></tr>"
            )
        out.append("</tbody></table>")
    out.append("</section>")
    return "".join(out)


# --------------------------------------------------------------------------
# helpers
# --------------------------------------------------------------------------
def _with_fit_warnings(findings: Sequence[Finding], fit: FitResult | None) -> list[Finding]:
    """The findings, then the fit's own warnings not already among them (order kept)."""
    out = list(findings)
    seen = set(out)
    for f in fit.warnings if fit is not None else ():
        if f not in seen:
            out.append(f)
            seen.add(f)
    return out


def _inline_svg(svg: bytes) -> str:
    text = svg.decode("utf-8", errors="replace")
    return _XML_PROLOG.sub("", text, count=1).strip()


def _slug(text: str) -> str:
    return re.sub(r"[^a-z0-9-]+", "-", text.lower()).strip("-") or "other"
