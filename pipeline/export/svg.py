"""The fit picture: ``fit.svg``.

Entry point: :func:`fit_svg`.

What it shows, bottom to top: the cavity floor shaded by its default depth,
the depth zones shaded by their depth (clipped to the cavity), the keep-outs
(hatched), the cavity outline, the usable board region (dashed), the board
outline, the placed courtyards (bottom side dashed, top side solid) labelled
by ref, then a title, a legend (one entry per depth), a scale bar and, when
the design does not fit, the parts that found no room.

Coordinates
-----------
One SVG user unit is one millimetre of the drawing's frame, and y is
flipped (SVG y points down): a drawing point ``(x, y)`` mm is written at
SVG ``(x, -y)``. The ``width`` / ``height`` attributes are in mm on paper at
a round drawing scale (``1/2/5 x 10^n``, stated in the legend), chosen so
the drawing's longest side is at most about 180 mm on paper: the file
prints at that true scale. Text heights and line widths are set in paper
millimetres and converted to drawing units with that scale (text heights
3.5 / 2.5 mm and line widths 0.25 / 0.35 / 0.5 mm as in ISO 3098 / ISO 128:
common practice).

Determinism: numbers are written with 3 decimals (1 um); keep-outs, zones
and courtyards are drawn in a sorted order; all user text (title, source,
refs) is XML-escaped, and characters XML 1.0 cannot hold are replaced by
U+FFFD.

Labels: a courtyard's ref is written across its longer fitting direction at
the largest size that fits (estimated advance 0.62 em per character for a
sans-serif face, from memory of common sans-serif metrics), capped at
3.5 mm on paper and at 0.8 of the courtyard side it stands across. A label that
would come out under 1.5 mm on paper, or would overlap a label already
placed (top-side labels go first), is left out and its ref listed in the
legend instead (the legend's lists of unlabelled and unplaced refs are
cut at a few lines and the rest counted). Every courtyard also carries its
ref, side and rotation as an SVG ``<title>`` (shown on hover).

Bottom-side courtyards are drawn as seen from the top, through the board
(not mirrored), dashed, under the top-side ones.
"""

from __future__ import annotations

import math
import re
from typing import Iterable, Sequence

from shapely.geometry import LinearRing, LineString, Polygon
from shapely.geometry.base import BaseGeometry, BaseMultipartGeometry

from ..model import Cavity, FitResult, Placement, Region
from ..order import natural_key

__all__ = ["fit_svg", "nice_length", "drawing_scale"]

# ---- look (our own) ------------------------------------------------------
_INK = "#262b33"  # text and cavity outline
_MUTED = "#5c6470"
_PAPER = "#ffffff"
_KEEPOUT_FILL = "#e9e9e6"
_KEEPOUT_LINE = "#6d6d69"
_REGION_LINE = "#1d7f6e"  # usable region, dashed
_BOARD_LINE = "#143a52"
_TOP = "#2f4f9e"  # top-side courtyards
_BOTTOM = "#8a3f8f"  # bottom-side courtyards, dashed
_UNPLACED = "#a3261b"
#: Depth ramp, deep (light, cool-neutral) to shallow (dark, warm); interpolated in sRGB.
_DEPTH_RAMP = ("#f6f1e4", "#ecd3a4", "#dc9f5f", "#b8612f", "#7c3318")

# ---- paper sizes in mm (converted with the drawing scale) ----------------
_MAX_DRAWING_MM = 180.0
_MARGIN = 7.0
_GAP = 8.0
_LEGEND_W = 66.0
_HEAD_H = 17.0
_FOOT_H = 10.0
_T_TITLE = 5.0
_T_TEXT = 3.0
_T_SMALL = 2.5
_LABEL_MAX = 3.5
_LABEL_MIN = 1.5
_EM_ADVANCE = 0.62
_W_THIN = 0.18
_W_LINE = 0.25
_W_MID = 0.35
_W_THICK = 0.5
_W_BOARD = 0.6

_MAX_LIST_LINES = 12
_HATCH_ID = "snug-fit-hatch"
_INVALID_XML = re.compile("[\x00-\x08\x0b\x0c\x0e-\x1f\ud800-\udfff\ufffe\uffff]")


def fit_svg(cavity: Cavity, region: Region, fit: FitResult, *, title: str = "") -> bytes:
    """Draw cavity, region, board and placed parts as a standalone SVG 1.1 picture.

    Parameters
    ----------
    cavity : Cavity
        Outline, keep-outs and depth zones in mm (drawing frame).
    region : Region
        The usable board region; ``thickness_mm`` turns depths into the part
        heights named in the legend (height = depth - board thickness).
    fit : FitResult
        Placements (their ``courtyard`` geometries are drawn), the board
        outline (else the user's ``cavity.board``), the verdict and the
        unplaced refs.
    title : str, optional
        Heading text; user text, escaped.

    Returns
    -------
    bytes
        UTF-8 SVG document. One SVG user unit = 1 mm; drawing ``(x, y)`` is
        SVG ``(x, -y)``.

    Examples
    --------
    >>> from shapely.geometry import box
    >>> from pipeline.model import AreaEstimate, Cavity, FitResult, Placement, Region
    >>> cav = Cavity("bay.dxf", box(0, 0, 40, 20), (), (), None, 5.0, "mm", 1.0)
    >>> reg = Region(box(0.3, 0.3, 39.7, 19.7), (), 0.8)
    >>> est = AreaEstimate(4.0, 5.0, 6.0, 8.0, "rule")
    >>> pl = Placement("R1", 10.0, 10.0, 0, "top", box(9, 9.5, 11, 10.5))
    >>> fit = FitResult(True, reg.area_mm2, 2.0, est, (pl,), box(1, 1, 39, 19), ())
    >>> svg = fit_svg(cav, reg, fit, title="A <demo>")
    >>> svg.startswith(b"<?xml") and b"A &lt;demo&gt;" in svg
    True
    """
    board = fit.board_outline if fit.board_outline is not None else cavity.board
    placements = sorted(fit.placements, key=lambda p: (p.side != "bottom", natural_key(p.ref)))
    minx, miny, maxx, maxy = _bounds(
        [cavity.outline, region.board_region, board, *cavity.keepouts]
        + [z.polygon for z in cavity.depth_zones]
        + [p.courtyard for p in placements]
    )
    w, h = maxx - minx, maxy - miny
    s = drawing_scale(max(w, h))
    u = 1.0 / s  # drawing mm per paper mm
    bar = nice_length(w / 4.0)

    depths, colour_of = _depth_palette(cavity)
    thickness = float(region.thickness_mm)
    labels, skipped = _labels(placements, u)
    unplaced = sorted(fit.unplaced, key=natural_key) if not fit.fits else []

    heading = title or "Board fit"
    # frame: drawing block on the left, legend on the right
    left = minx - _MARGIN * u
    top = -maxy - (_MARGIN + _HEAD_H) * u
    legend_x = maxx + _GAP * u
    legend_lines = _legend(depths, colour_of, thickness, placements, skipped, unplaced, s)
    legend_h = _legend_height(legend_lines) * u
    draw_bottom = -miny + (_MARGIN + _FOOT_H) * u
    bottom = max(draw_bottom, top + (_HEAD_H + _MARGIN) * u + legend_h + _MARGIN * u)
    right = legend_x + (_LEGEND_W + _MARGIN) * u
    right = max(right, left + (2 * _MARGIN + _header_width(heading, fit, cavity)) * u)
    vb_w, vb_h = right - left, bottom - top

    out: list[str] = []
    add = out.append
    add('<?xml version="1.0" encoding="UTF-8"?>')
    add(
        f'<svg xmlns="http://www.w3.org/2000/svg" version="1.1" '
        f'width="{_f(vb_w * s)}mm" height="{_f(vb_h * s)}mm" '
        f'viewBox="{_f(left)} {_f(top)} {_f(vb_w)} {_f(vb_h)}" '
        f'font-family="sans-serif" class="snug-fit">'
    )
    add(f"<title>{_esc(heading)}</title>")
    add(
        "<desc>One user unit is one millimetre of the drawing's frame; "
        "a drawing point (x, y) is drawn at (x, -y).</desc>"
    )
    p = 1.4 * u
    add(
        f'<defs><pattern id="{_HATCH_ID}" patternUnits="userSpaceOnUse" width="{_f(p)}" '
        f'height="{_f(p)}" patternTransform="rotate(45)">'
        f'<rect x="0" y="0" width="{_f(p)}" height="{_f(p)}" fill="{_KEEPOUT_FILL}"/>'
        f'<line x1="{_f(p / 2)}" y1="0" x2="{_f(p / 2)}" y2="{_f(p)}" '
        f'stroke="{_KEEPOUT_LINE}" stroke-width="{_f(_W_THIN * u)}"/></pattern></defs>'
    )
    add(f'<rect class="paper" x="{_f(left)}" y="{_f(top)}" width="{_f(vb_w)}" height="{_f(vb_h)}" fill="{_PAPER}"/>')

    # cavity floor at its default depth
    add(
        f'<path class="cavity-floor" d="{_path_d(cavity.outline)}" fill="{colour_of[cavity.depth_mm]}" '
        f'fill-rule="evenodd" stroke="none"/>'
    )
    # depth zones, deepest first so the shallower (ruling) depth lies on top
    zones = sorted(cavity.depth_zones, key=lambda z: (-z.depth_mm, _geom_key(z.polygon)))
    if zones:
        add(f'<g class="depth-zones" stroke="{_MUTED}" stroke-width="{_f(_W_THIN * u)}" fill-rule="evenodd">')
        for z in zones:
            g = _clip(z.polygon, cavity.outline)
            d = _path_d(g)
            if d:
                add(
                    f'<path class="depth-zone" d="{d}" fill="{colour_of[z.depth_mm]}">'
                    f"<title>{_esc(_mm(z.depth_mm))} mm deep</title></path>"
                )
        add("</g>")
    keepouts = sorted(cavity.keepouts, key=_geom_key)
    if keepouts:
        add(
            f'<g class="keepouts" fill="url(#{_HATCH_ID})" fill-rule="evenodd" '
            f'stroke="{_KEEPOUT_LINE}" stroke-width="{_f(_W_MID * u)}">'
        )
        for k in keepouts:
            d = _path_d(k)
            if d:
                add(f'<path class="keepout" d="{d}"/>')
        add("</g>")
    add(
        f'<path class="cavity-outline" d="{_path_d(cavity.outline)}" fill="none" '
        f'stroke="{_INK}" stroke-width="{_f(_W_THICK * u)}" stroke-linejoin="round"/>'
    )
    d = _path_d(region.board_region)
    if d:
        add(
            f'<path class="usable-region" d="{d}" fill="none" fill-rule="evenodd" stroke="{_REGION_LINE}" '
            f'stroke-width="{_f(_W_MID * u)}" stroke-dasharray="{_f(2.0 * u)} {_f(1.0 * u)}"/>'
        )
    if board is not None and not board.is_empty:
        add(
            f'<path class="board-outline" d="{_path_d(board)}" fill="{_PAPER}" fill-opacity="0.3" '
            f'fill-rule="evenodd" stroke="{_BOARD_LINE}" stroke-width="{_f(_W_BOARD * u)}" '
            f'stroke-linejoin="round"/>'
        )

    # courtyards: bottom side first (under the board), then top side
    if placements:
        add('<g class="placements">')
        for pl in placements:
            add(_part(pl, labels.get((pl.side, pl.ref)), u))
        add("</g>")

    add(_scale_bar(minx, -miny + (_MARGIN - 1.0) * u, bar, u))
    add(_origin(minx, miny, maxx, maxy, u))
    add(_header(left + _MARGIN * u, top, heading, fit, cavity, u))
    add(_legend_svg(legend_lines, legend_x, top + (_HEAD_H + _MARGIN) * u, u))
    add("</svg>")
    return ("\n".join(out) + "\n").encode("utf-8")


# --------------------------------------------------------------------------
# scale and numbers
# --------------------------------------------------------------------------
def nice_length(limit_mm: float) -> float:
    """Largest round length ``{1, 2, 5} x 10^n`` mm not above ``limit_mm``.

    >>> nice_length(15.0), nice_length(7.3), nice_length(0.26), nice_length(100.0)
    (10.0, 5.0, 0.2, 100.0)
    """
    limit = max(float(limit_mm), 1e-9)
    e = math.floor(math.log10(limit))
    best = 10.0 ** (e - 1) * 5
    for k in (e - 1, e, e + 1):
        for m in (1, 2, 5):
            v = m * 10.0**k
            if v <= limit * (1 + 1e-12) and v > best:
                best = v
    return float(f"{best:.12g}")


def drawing_scale(size_mm: float) -> float:
    """Paper mm per drawing mm: the largest ``{1, 2, 5} x 10^n`` putting ``size_mm`` within 180 mm.

    >>> drawing_scale(60.0), drawing_scale(100.0), drawing_scale(300.0), drawing_scale(12.0)
    (2.0, 1.0, 0.5, 10.0)
    """
    return nice_length(_MAX_DRAWING_MM / max(float(size_mm), 1e-6))


def _f(v: float) -> str:
    s = f"{float(v):.3f}"
    return "0.000" if s == "-0.000" else s


def _mm(v: float) -> str:
    """Short fixed text for a length: 3 decimals, trailing zeros dropped."""
    s = f"{float(v):.3f}".rstrip("0").rstrip(".")
    return "0" if s in ("-0", "") else s


def _scale_text(s: float) -> str:
    return f"{_mm(s)}:1" if s >= 1 else f"1:{_mm(1.0 / s)}"


def _esc(text: object) -> str:
    s = _INVALID_XML.sub("\ufffd", str(text))
    return (
        s.replace("&", "&amp;").replace("<", "&lt;").replace(">", "&gt;")
        .replace('"', "&quot;").replace("'", "&#39;")
    )


# --------------------------------------------------------------------------
# geometry
# --------------------------------------------------------------------------
def _polygons(geom: BaseGeometry | None) -> Iterable[Polygon]:
    if geom is None or geom.is_empty:
        return
    if isinstance(geom, Polygon):
        yield geom
    elif isinstance(geom, BaseMultipartGeometry):
        for g in geom.geoms:
            yield from _polygons(g)


def _ring_d(coords: Sequence[tuple[float, ...]], closed: bool) -> str:
    pts = [(c[0], c[1]) for c in coords]
    if closed and len(pts) > 1 and pts[0] == pts[-1]:
        pts.pop()
    if not pts:
        return ""
    d = "M" + " L".join(f"{_f(x)},{_f(-y)}" for x, y in pts)
    return d + (" Z" if closed else "")


def _path_d(geom: BaseGeometry | None) -> str:
    """SVG path data of a geometry's polygons (y flipped); rings and lines as strokes."""
    if geom is None or geom.is_empty:
        return ""
    if isinstance(geom, (LineString, LinearRing)):
        return _ring_d(list(geom.coords), isinstance(geom, LinearRing))
    parts = []
    for poly in _polygons(geom):
        parts.append(_ring_d(list(poly.exterior.coords), True))
        parts.extend(_ring_d(list(r.coords), True) for r in poly.interiors)
    return " ".join(p for p in parts if p)


def _bounds(geoms: Iterable[BaseGeometry | None]) -> tuple[float, float, float, float]:
    b = [g.bounds for g in geoms if g is not None and not g.is_empty]
    if not b:
        return (0.0, 0.0, 1.0, 1.0)
    minx = min(x[0] for x in b)
    miny = min(x[1] for x in b)
    maxx = max(x[2] for x in b)
    maxy = max(x[3] for x in b)
    if maxx - minx < 1e-6:
        maxx = minx + 1.0
    if maxy - miny < 1e-6:
        maxy = miny + 1.0
    return float(minx), float(miny), float(maxx), float(maxy)


def _geom_key(g: BaseGeometry) -> tuple:
    if g is None or g.is_empty:
        return (math.inf,)
    return tuple(round(float(v), 6) for v in g.bounds) + (round(float(g.area), 6), g.wkt)


def _clip(zone: BaseGeometry, outline: BaseGeometry) -> BaseGeometry:
    if zone.is_valid and outline.is_valid:
        return zone.intersection(outline)
    return zone


# --------------------------------------------------------------------------
# depth colours
# --------------------------------------------------------------------------
def _rgb(hex_colour: str) -> tuple[int, int, int]:
    return tuple(int(hex_colour[i : i + 2], 16) for i in (1, 3, 5))  # type: ignore[return-value]


def _ramp(t: float) -> str:
    """Colour at ``t`` in 0..1 along the depth ramp (0 = deep/light, 1 = shallow/dark)."""
    t = min(max(t, 0.0), 1.0) * (len(_DEPTH_RAMP) - 1)
    i = min(int(t), len(_DEPTH_RAMP) - 2)
    a, b = _rgb(_DEPTH_RAMP[i]), _rgb(_DEPTH_RAMP[i + 1])
    f = t - i
    return "#" + "".join(f"{round(x + (y - x) * f):02x}" for x, y in zip(a, b))


def _depth_palette(cavity: Cavity) -> tuple[list[float], dict[float, str]]:
    """Distinct depths (ascending: shallowest first) and a colour for each.

    The shade mixes rank and value (half each) so that every depth gets its
    own colour and larger gaps in depth look larger; the shallowest depth
    ends at 80 % of the ramp so that labels on it stay readable.
    """
    depths = sorted({float(cavity.depth_mm), *(float(z.depth_mm) for z in cavity.depth_zones)})
    n = len(depths)
    lo, hi = depths[0], depths[-1]
    colours = {}
    for i, d in enumerate(depths):
        if n == 1:
            t = 0.0
        else:
            rank = (n - 1 - i) / (n - 1)
            value = (hi - d) / (hi - lo)
            t = 0.8 * (0.5 * rank + 0.5 * value)
        colours[d] = _ramp(t)
    return depths, colours


# --------------------------------------------------------------------------
# courtyards and labels
# --------------------------------------------------------------------------
def _labels(placements: Sequence[Placement], u: float) -> tuple[dict, list[str]]:
    """Label size and direction per placement, and the refs left unlabelled.

    Top-side labels are placed first, then bottom-side ones; a label that
    would come out smaller than the readable minimum, or would overlap a
    label already placed (a bottom part under a top part), is left out.
    """
    labels: dict[tuple[str, str], tuple[float, bool]] = {}
    skipped: list[str] = []
    fmax, fmin = _LABEL_MAX * u, _LABEL_MIN * u
    taken = _BoxGrid(4.0 * fmax)
    for pl in sorted(placements, key=lambda p: (p.side == "bottom", natural_key(p.ref))):
        g = pl.courtyard
        if g is None or g.is_empty:
            skipped.append(pl.ref)
            continue
        x0, y0, x1, y1 = g.bounds
        w, h = x1 - x0, y1 - y0
        n = max(len(pl.ref), 1)
        across = min(fmax, 0.8 * h, 0.86 * w / (_EM_ADVANCE * n))
        upright = min(fmax, 0.8 * w, 0.86 * h / (_EM_ADVANCE * n))
        vertical = upright > 1.25 * across
        size = upright if vertical else across
        half_long, half_short = 0.5 * _EM_ADVANCE * n * size, 0.4 * size
        hx, hy = (half_short, half_long) if vertical else (half_long, half_short)
        box = (pl.x_mm - hx, pl.y_mm - hy, pl.x_mm + hx, pl.y_mm + hy)
        if size < fmin or taken.hits(box):
            skipped.append(pl.ref)
        else:
            taken.add(box)
            labels[(pl.side, pl.ref)] = (size, vertical)
    return labels, sorted(set(skipped), key=natural_key)


class _BoxGrid:
    """Axis-aligned boxes bucketed on a square grid, for overlap queries."""

    def __init__(self, cell: float) -> None:
        self.cell = max(cell, 1e-9)
        self.cells: dict[tuple[int, int], list[tuple[float, float, float, float]]] = {}

    def _keys(self, b):
        c = self.cell
        for i in range(math.floor(b[0] / c), math.floor(b[2] / c) + 1):
            for j in range(math.floor(b[1] / c), math.floor(b[3] / c) + 1):
                yield (i, j)

    def hits(self, b) -> bool:
        for k in self._keys(b):
            for o in self.cells.get(k, ()):
                if b[0] < o[2] and o[0] < b[2] and b[1] < o[3] and o[1] < b[3]:
                    return True
        return False

    def add(self, b) -> None:
        for k in self._keys(b):
            self.cells.setdefault(k, []).append(b)


def _part(pl: Placement, label: tuple[float, bool] | None, u: float) -> str:
    bottom = pl.side == "bottom"
    colour = _BOTTOM if bottom else _TOP
    side = "bottom" if bottom else "top"
    dash = f' stroke-dasharray="{_f(1.2 * u)} {_f(0.7 * u)}"' if bottom else ""
    body = [
        f'<g class="part part-{side}">',
        f"<title>{_esc(pl.ref)} ({side}, {pl.rotation_deg} deg)</title>",
        f'<path d="{_path_d(pl.courtyard)}" fill="{colour}" fill-opacity="{"0.10" if bottom else "0.20"}" '
        f'stroke="{colour}" stroke-width="{_f(_W_LINE * u)}"{dash}/>',
    ]
    if label is not None:
        size, vertical = label
        cx, cy = pl.x_mm, -pl.y_mm
        rot = f' transform="rotate(-90 {_f(cx)} {_f(cy)})"' if vertical else ""
        style = ' font-style="italic"' if bottom else ""
        body.append(
            f'<text class="ref" x="{_f(cx)}" y="{_f(cy + 0.35 * size)}" font-size="{_f(size)}" '
            f'text-anchor="middle" fill="{_INK}"{style}{rot}>{_esc(pl.ref)}</text>'
        )
    body.append("</g>")
    return "".join(body)


# --------------------------------------------------------------------------
# header, scale bar, legend
# --------------------------------------------------------------------------
def _header_lines(heading: str, fit: FitResult, cavity: Cavity) -> tuple[str, str, str]:
    total = len(fit.placements) + len(fit.unplaced)
    verdict = "Fits" if fit.fits else "Does not fit"
    line2 = (
        f"{verdict}: {len(fit.placements)} of {total} parts placed; usable region "
        f"{fit.region_area_mm2:.1f} mm\u00b2, courtyards {fit.courtyard_area_mm2:.1f} mm\u00b2"
    )
    line3 = f"Cavity drawing: {cavity.source}"
    return heading, line2, line3


def _header_width(heading: str, fit: FitResult, cavity: Cavity) -> float:
    """Estimated paper width (mm) of the header's longest line."""
    lines = _header_lines(heading, fit, cavity)
    return max(_EM_ADVANCE * len(t) * size for t, size in zip(lines, (_T_TITLE * 1.1, _T_TEXT, _T_SMALL)))


def _header(x: float, top: float, heading: str, fit: FitResult, cavity: Cavity, u: float) -> str:
    heading, line2, line3 = _header_lines(heading, fit, cavity)
    colour = _REGION_LINE if fit.fits else _UNPLACED
    return (
        f'<g class="header">'
        f'<text class="title" x="{_f(x)}" y="{_f(top + 7.0 * u)}" font-size="{_f(_T_TITLE * u)}" '
        f'font-weight="bold" fill="{_INK}">{_esc(heading)}</text>'
        f'<text class="verdict" x="{_f(x)}" y="{_f(top + 11.5 * u)}" font-size="{_f(_T_TEXT * u)}" '
        f'fill="{colour}">{_esc(line2)}</text>'
        f'<text class="source" x="{_f(x)}" y="{_f(top + 15.0 * u)}" font-size="{_f(_T_SMALL * u)}" '
        f'fill="{_MUTED}">{_esc(line3)}</text></g>'
    )


def _origin(minx: float, miny: float, maxx: float, maxy: float, u: float) -> str:
    """A small cross at the drawing's origin (0, 0), when it lies within the drawing."""
    if not (minx <= 0.0 <= maxx and miny <= 0.0 <= maxy):
        return ""
    a = 2.5 * u
    lw = _f(_W_LINE * u)
    return (
        f'<g class="origin" stroke="{_MUTED}" stroke-width="{lw}">'
        f'<line x1="{_f(-a)}" y1="0.000" x2="{_f(a)}" y2="0.000"/>'
        f'<line x1="0.000" y1="{_f(-a)}" x2="0.000" y2="{_f(a)}"/>'
        f'<text x="{_f(-0.8 * u)}" y="{_f(3.2 * u)}" font-size="{_f(_T_SMALL * u)}" text-anchor="end" '
        f'stroke="none" fill="{_MUTED}">0,0</text></g>'
    )


def _scale_bar(x: float, y: float, length: float, u: float) -> str:
    """A bar of ``length`` drawing mm starting at ``(x, y)`` (SVG coords), halves alternating."""
    hgt = 1.4 * u
    lw = _f(_W_LINE * u)
    label = f"{_mm(length)} mm"
    return (
        f'<g class="scale-bar">'
        f'<rect class="scale-bar-half" x="{_f(x)}" y="{_f(y)}" width="{_f(length / 2)}" height="{_f(hgt)}" '
        f'fill="{_INK}"/>'
        f'<rect class="scale-bar-frame" x="{_f(x)}" y="{_f(y)}" width="{_f(length)}" height="{_f(hgt)}" '
        f'fill="none" stroke="{_INK}" stroke-width="{lw}"/>'
        f'<text x="{_f(x)}" y="{_f(y + hgt + 3.0 * u)}" font-size="{_f(_T_SMALL * u)}" '
        f'text-anchor="middle" fill="{_INK}">0</text>'
        f'<text class="scale-bar-label" x="{_f(x + length)}" y="{_f(y + hgt + 3.0 * u)}" '
        f'font-size="{_f(_T_SMALL * u)}" text-anchor="middle" fill="{_INK}">{_esc(label)}</text></g>'
    )


# Legend lines are (kind, text, extra) tuples laid out top to bottom in paper mm.
_ROW = 5.6
_HEAD_ROW = 6.5
_TEXT_ROW = 4.0


def _wrap(words: Sequence[str], width: int) -> list[str]:
    lines: list[str] = []
    cur = ""
    for w in words:
        if cur and len(cur) + 1 + len(w) > width:
            lines.append(cur)
            cur = w
        else:
            cur = f"{cur} {w}" if cur else w
    if cur:
        lines.append(cur)
    return lines


def _legend(depths, colour_of, thickness, placements, skipped, unplaced, s) -> list[tuple]:
    rows: list[tuple] = [("head", "Legend", None)]
    rows.append(("cavity", "cavity outline", None))
    for d in depths:  # shallowest (darkest) first
        room = d - thickness
        tail = f"parts \u2264 {_mm(room)} mm" if room > 0 else "no room for parts"
        rows.append(("depth", f"{_mm(d)} mm deep \u00b7 {tail}", colour_of[d]))
    rows.append(("keepout", "keep-out", None))
    rows.append(("region", "usable board region", None))
    rows.append(("board", "board outline", None))
    rows.append(("top", "part courtyard, top side", None))
    if any(p.side == "bottom" for p in placements):
        rows.append(("bottom", "part courtyard, bottom side", None))
    rows.append(("text", f"Scale {_scale_text(s)} when printed at 100 %", None))
    if unplaced:
        rows.append(("head-red", f"Not placed ({len(unplaced)})", None))
        rows.extend(("text", line, None) for line in _wrap_capped(unplaced, 34, _MAX_LIST_LINES))
    if skipped:
        rows.append(("head", f"Not labelled, no room ({len(skipped)})", None))
        rows.extend(("text", line, None) for line in _wrap_capped(skipped, 34, _MAX_LIST_LINES // 2))
    return rows


def _wrap_capped(refs: Sequence[str], width: int, max_lines: int) -> list[str]:
    """Refs wrapped to lines; past ``max_lines`` the rest is counted, not listed."""
    lines = _wrap(refs, width)
    if len(lines) <= max_lines:
        return lines
    shown = lines[: max_lines - 1]
    rest = len(refs) - sum(len(line.split(" ")) for line in shown)
    return shown + [f"… and {rest} more"]


def _legend_height(rows: Sequence[tuple]) -> float:
    return sum(_HEAD_ROW if k.startswith("head") else _TEXT_ROW if k == "text" else _ROW for k, _, _ in rows)


def _swatch(kind: str, extra, x: float, y: float, u: float) -> str:
    w, h = 8.0 * u, 4.0 * u
    box = f'x="{_f(x)}" y="{_f(y)}" width="{_f(w)}" height="{_f(h)}"'
    mid = _f(y + h / 2)
    line = f'x1="{_f(x)}" y1="{mid}" x2="{_f(x + w)}" y2="{mid}"'
    if kind == "cavity":
        return f'<line {line} stroke="{_INK}" stroke-width="{_f(_W_THICK * u)}"/>'
    if kind == "depth":
        return f'<rect {box} fill="{extra}" stroke="{_MUTED}" stroke-width="{_f(_W_THIN * u)}"/>'
    if kind == "keepout":
        return f'<rect {box} fill="url(#{_HATCH_ID})" stroke="{_KEEPOUT_LINE}" stroke-width="{_f(_W_MID * u)}"/>'
    if kind == "region":
        return (
            f'<line {line} stroke="{_REGION_LINE}" stroke-width="{_f(_W_MID * u)}" '
            f'stroke-dasharray="{_f(2.0 * u)} {_f(1.0 * u)}"/>'
        )
    if kind == "board":
        return f'<line {line} stroke="{_BOARD_LINE}" stroke-width="{_f(_W_BOARD * u)}"/>'
    if kind == "top":
        return (
            f'<rect {box} fill="{_TOP}" fill-opacity="0.20" stroke="{_TOP}" stroke-width="{_f(_W_LINE * u)}"/>'
        )
    if kind == "bottom":
        return (
            f'<rect {box} fill="{_BOTTOM}" fill-opacity="0.10" stroke="{_BOTTOM}" '
            f'stroke-width="{_f(_W_LINE * u)}" stroke-dasharray="{_f(1.2 * u)} {_f(0.7 * u)}"/>'
        )
    return ""


def _legend_svg(rows: Sequence[tuple], x: float, y: float, u: float) -> str:
    out = ['<g class="legend">']
    for kind, text, extra in rows:
        if kind.startswith("head"):
            colour = _UNPLACED if kind == "head-red" else _INK
            cls = "unplaced-head" if kind == "head-red" else "legend-head"
            out.append(
                f'<text class="{cls}" x="{_f(x)}" y="{_f(y + 4.5 * u)}" font-size="{_f(_T_TEXT * u)}" '
                f'font-weight="bold" fill="{colour}">{_esc(text)}</text>'
            )
            y += _HEAD_ROW * u
        elif kind == "text":
            out.append(
                f'<text class="legend-text" x="{_f(x)}" y="{_f(y + 2.8 * u)}" font-size="{_f(_T_SMALL * u)}" '
                f'fill="{_INK}">{_esc(text)}</text>'
            )
            y += _TEXT_ROW * u
        else:
            out.append(_swatch(kind, extra, x, y, u))
            out.append(
                f'<text class="legend-text" x="{_f(x + 10.5 * u)}" y="{_f(y + 3.1 * u)}" '
                f'font-size="{_f(_T_TEXT * u)}" fill="{_INK}">{_esc(text)}</text>'
            )
            y += _ROW * u
    out.append("</g>")
    return "".join(out)
