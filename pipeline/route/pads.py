"""Pads of a placed design, for the router: THE one place to switch to real pads.

Entry point: :func:`board_from_placement`. Until the library gives real pad
shapes (a ``Pad`` per pin), the pads are laid out here from the package
data the library has today: land extent, pin count, pitch and family
(our approximation, not a published land pattern):

* two-terminal parts (chip, tantalum, SOD): two pads at the ends of the
  land length, each ``PAD_FRACTION`` of it long, the land width wide;
* SOT: pins 1..k on the lower row left to right, the rest on the upper row
  right to left (JEDEC numbering, counter-clockwise from pin 1; three pins:
  1 and 2 below, 3 above; otherwise a full lower row); a pad is
  ``land_length - (pins per row - 1) x pitch`` wide along the row and
  ``(land_width - body_width) / 2`` long across it;
* two-row ICs (SOIC, MSOP, TSSOP): as SOT with half the pins per row;
  DIP: round through-hole pads of that width;
* QFN: a quarter of the pins per side, counter-clockwise;
* headers: round through-hole pads on the pitch, pin 1 lower left (two
  rows: odd pins on the lower row);
* wire pads: one surface pad of the land size.

A pad of pin number ``k`` connects to the part's pin ``"k"``. Parts are
placed by courtyard centre; the land pattern is centred on it, turned
counter-clockwise by the rotation, and mirrored in x for the bottom side.
Cost O(pins).
"""

from __future__ import annotations

import math
from typing import Iterable

from shapely import affinity
from shapely.geometry import Point, Polygon, box

from ..model import Design, Package, Placement
from .board import RouteBoard, RoutePad

__all__ = ["board_from_placement", "land_pads", "PAD_FRACTION"]

#: a chip's pad length as a fraction of its toe-to-toe land length (our approximation).
PAD_FRACTION = 0.35
#: circle segments per quarter for round pads.
_QUAD_SEGS = 4
_THROUGH = ("dip", "header")


def land_pads(package: Package) -> list[tuple[int, Polygon, bool]]:
    """``(pin number, copper outline, through-hole)`` per pad, package frame.

    The frame has the pin rows (or a chip's terminal axis) along x and the
    land pattern centred on the origin.

    >>> [(n, round(p.centroid.x, 2)) for n, p, _ in land_pads(_chip())]
    [(1, -0.75), (2, 0.75)]
    """
    fam, n, L, W = package.family, package.pin_count, package.land_length_mm, package.land_width_mm
    if n == 1:
        return [(1, box(-L / 2, -W / 2, L / 2, W / 2), False)]
    if package.pitch_mm <= 0 or n == 2 and fam not in ("header",):
        pl = PAD_FRACTION * L
        return [(1, box(-L / 2, -W / 2, -L / 2 + pl, W / 2), False),
                (2, box(L / 2 - pl, -W / 2, L / 2, W / 2), False)]
    if fam == "header":
        return _header(package)
    if fam == "qfn":
        return _qfn(package)
    slots = int(math.floor(L / package.pitch_mm - 1e-9)) + 1
    lower = (2 if n == 3 else min(slots, n - 1)) if fam == "sot" else (n + 1) // 2
    return _two_rows(package, lower, n - lower, fam in _THROUGH)


def _two_rows(package: Package, lower: int, upper: int, through: bool) -> list[tuple[int, Polygon, bool]]:
    """Pins 1..lower on the lower row left to right, the rest on the upper row right to left."""
    p, L, W = package.pitch_mm, package.land_length_mm, package.land_width_mm
    slots = int(math.floor(L / p - 1e-9)) + 1          # pin positions the land length holds
    pw = max(L - (slots - 1) * p, 0.1)                  # pad size along the row
    pl = pw if through else max((W - package.body_width_mm) / 2, pw)  # across the row
    y = W / 2 - pl / 2
    xs = [(i - (slots - 1) / 2) * p for i in range(slots)]

    def row(count: int) -> list[float]:
        if count == 1:
            return [0.0]
        if count == 2 and slots == 3:
            return [xs[0], xs[-1]]
        return xs[:count]

    out = [(i + 1, _pad(x, -y, pw, pl, through), through) for i, x in enumerate(row(lower))]
    out += [(lower + i + 1, _pad(x, y, pw, pl, through), through)
            for i, x in enumerate(sorted(row(upper), reverse=True))]
    return out


def _qfn(package: Package) -> list[tuple[int, Polygon, bool]]:
    p, L, n = package.pitch_mm, package.land_length_mm, package.pin_count
    per = n // 4
    pl, pw = 0.8, p / 2
    c = L / 2 - pl / 2
    out = []
    offs = [(i - (per - 1) / 2) * p for i in range(per)]
    for side, (ax, ay, turned) in enumerate(((0, -1, False), (1, 0, True), (0, 1, False), (-1, 0, True))):
        seq = offs if side < 2 else offs[::-1]
        for k, o in enumerate(seq):
            x, y = (c * ax, o) if turned else (o, c * ay)
            w, h = (pl, pw) if turned else (pw, pl)
            out.append((side * per + k + 1, box(x - w / 2, y - h / 2, x + w / 2, y + h / 2), False))
    return out


def _header(package: Package) -> list[tuple[int, Polygon, bool]]:
    p, n, d = package.pitch_mm, package.pin_count, min(package.land_width_mm, 1.7)
    rows = 2 if package.land_width_mm > 2 * d - 1e-9 and n % 2 == 0 and n > 1 else 1
    cols = n // rows
    out = []
    for k in range(n):
        col, r = (k // 2, k % 2) if rows == 2 else (k, 0)
        x = (col - (cols - 1) / 2) * p
        y = 0.0 if rows == 1 else (r - 0.5) * p
        out.append((k + 1, _pad(x, y, d, d, True), True))
    return out


def _pad(x: float, y: float, w: float, h: float, round_: bool) -> Polygon:
    if round_:
        return Point(x, y).buffer(min(w, h) / 2, quad_segs=_QUAD_SEGS)
    return box(x - w / 2, y - h / 2, x + w / 2, y + h / 2)


def _chip() -> Package:  # for the doctest: an 0603 land extent (footprints/packages.csv)
    return Package("0603", (), "chip", 1.6, 0.8, 0.9, 2.30, 0.8, 2, 0.0, "", ())


# --------------------------------------------------------------------------
def board_from_placement(outline: Polygon, placements: Iterable[Placement], design: Design, library,
                         layers: tuple[str, ...], holes: Iterable[Polygon] = ()) -> RouteBoard:
    """The routing input of a placed design.

    ``outline`` is the board (its interiors become holes), ``library``
    anything with ``package(name)``, ``layers`` the copper layer names top
    first. Pads of parts that are not placed are left out.
    """
    net_of = {(pr.ref, pr.pin): n.name for n in design.nets for pr in n.pins}
    pads: list[RoutePad] = []
    for pl in placements:
        part = design.part(pl.ref)
        for num, poly, through in land_pads(library.package(part.package)):
            pin = str(num)
            geo = poly if pl.side == "top" else affinity.scale(poly, -1, 1, origin=(0, 0))
            geo = affinity.rotate(geo, pl.rotation_deg, origin=(0, 0))
            geo = affinity.translate(geo, pl.x_mm, pl.y_mm)
            side = (layers[0],) if pl.side == "top" else (layers[-1],)
            pads.append(RoutePad(pl.ref, pin, net_of.get((pl.ref, pin)), layers if through else side, geo))
    holes = tuple(Polygon(r) for r in getattr(outline, "interiors", ())) + tuple(holes)
    exterior = Polygon(outline.exterior) if hasattr(outline, "exterior") else outline
    pads.sort(key=lambda p: (p.ref, p.pin))
    return RouteBoard(exterior, holes, tuple(pads))

