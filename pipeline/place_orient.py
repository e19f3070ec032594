"""Orientation for routing: a part turned a half turn when that shortens its nets.

Entry points: :func:`orient_parts` (a placement in, the same placement with
some parts turned by 180 degrees out) and :func:`open_gaps` (parts shifted
by whole routing pitches where facing pads of two parts leave no room for
a track between them; its own notes). The smallest-board search
(:mod:`pipeline.route.smallest`) runs both, in that order, on every
placement it routes; the default run uses neither.

Why. The packer (:mod:`pipeline.place`) chooses each courtyard's position
and whether it stands at 0 or 90 degrees, but never which way round: a
resistor whose pin 1 net lies to its right is placed with pin 1 on the
left as often as not, and its two nets then cross it. A half turn leaves
the courtyard rectangle where it is (same cells, same neighbours, so every
placement constraint still holds) and only swaps the pads' ends, so it is
free for legality and shortens the tracks the router must find.

Method: greedy cell flipping, as the detailed-placement stage of standard
cell placers does it (cited from memory: M. Pan, N. Viswanathan and C.
Chu, "An efficient and effective detailed placement algorithm", ICCAD 2005,
flips cells to reduce wirelength after legalisation). For each movable part
in natural order the total half-perimeter wirelength (HPWL) of its nets,
measured between pad centres, is computed at its rotation and at the
rotation plus 180 degrees; the half turn is kept only when it is shorter
by more than :data:`GAIN_MM`. Passes repeat until none turns a part (at
most :data:`PASSES`). Each kept turn lowers the total HPWL, so it never
grows. Deterministic: a fixed order, ties keep the current rotation.

Parts left as they are: those named in ``keep`` (the caller's fixed and
edge parts) and parts with no connected pad (nothing to shorten). Nets in
``skip_nets`` (nets given to a copper area) count for nothing. A half turn
that would leave a near rule (:mod:`pipeline.place_rules`: a decoupling
capacitor within reach of its IC's supply pins) unmet where it was met is
not made: turning an IC moves its supply pins, turning a capacitor its
pads.

Cost: O(passes x sum over parts of the pins of their nets), with each
package's turned pads computed once per (package, rotation, side)
(:func:`pipeline.library.lands.turned_pads` keeps them).
"""

from __future__ import annotations

import dataclasses
import math
from typing import Iterable

from .library.lands import turned_pads
from .model import Design, Placement
from .order import natural_key
from .wirelength import half_perimeter

__all__ = ["orient_parts", "open_gaps", "pad_hpwl", "PASSES", "GAIN_MM", "MOVES"]

#: at most this many passes over the parts (our choice: the demo and the 60-part board of
#: bench/bench_route.py settle in two).
PASSES = 4
#: a half turn is kept only when it shortens the part's nets by more than this, mm (rounding noise).
GAIN_MM = 1e-6


class _Pins:
    """Pad centres per net and part (the turned pads: :func:`pipeline.library.lands.turned_pads`)."""

    def __init__(self, design: Design, library, level: str, skip_nets: frozenset):
        self.design, self.library, self.level = design, library, level
        self.net_of = {(pr.ref, pr.pin): n.name for n in design.nets for pr in n.pins if n.name not in skip_nets}
        self.at: dict[str, dict[str, list[tuple[float, float]]]] = {}  # net -> ref -> pad centres

    def of(self, pl: Placement, rotation: int) -> dict[str, list[tuple[float, float]]]:
        """The part's connected pad centres (mm) by net, turned to ``rotation``."""
        package = self.library.package(self.design.part(pl.ref).package)
        out: dict[str, list[tuple[float, float]]] = {}
        for pad, dx, dy, _ in turned_pads(package, rotation, pl.side, self.level):
            net = self.net_of.get((pl.ref, pad.number))
            if net is not None:
                out.setdefault(net, []).append((pl.x_mm + dx, pl.y_mm + dy))
        return out

    def put(self, ref: str, pins: dict) -> None:
        for net, pts in pins.items():
            self.at.setdefault(net, {})[ref] = pts

    def hpwl(self, nets: Iterable[str]) -> float:
        total = 0.0
        for net in nets:
            pts = [p for pts in self.at.get(net, {}).values() for p in pts]
            total += half_perimeter([p[0] for p in pts], [p[1] for p in pts])
        return total


class _NearRules:
    """The near rules touching each part (as the capacitor or as the target), and whether a turn keeps them."""

    def __init__(self, items, placed: list):
        self.index = {pl.ref: k for k, pl in enumerate(placed)}
        self.touching: dict[str, list] = {}
        for it in items:
            if it.near is not None and it.ref in self.index and it.near.target in self.index:
                for ref in {it.ref, it.near.target}:
                    self.touching.setdefault(ref, []).append((it.ref, it.near))

    def keeps(self, placed: list, k: int, moved: Placement) -> bool:
        """Whether putting part ``k`` as ``moved`` (turned or shifted) leaves met every near rule touching
        it that is met now."""
        from .place_rules import TOL, near_distance

        def at(ref: str, turned: bool) -> tuple:
            pl = moved if turned else placed[self.index[ref]]
            return (pl.x_mm, pl.y_mm, pl.rotation_deg, pl.side)

        ref = placed[k].ref
        for own, rule in self.touching.get(ref, ()):
            if near_distance(rule, at(own, False), at(rule.target, False)) > rule.within_mm + TOL:
                continue  # unmet already: a turn cannot break it
            if near_distance(rule, at(own, own == ref), at(rule.target, rule.target == ref)) > rule.within_mm + TOL:
                return False
        return True


def pad_hpwl(placements: Iterable[Placement], design: Design, library, *, level: str = "nominal",
             skip_nets: Iterable[str] = ()) -> float:
    """Total half-perimeter wirelength (mm) of the nets between the placed parts' pad centres.

    Cost O(pins).
    """
    pins = _Pins(design, library, level, frozenset(skip_nets))
    for pl in placements:
        pins.put(pl.ref, pins.of(pl, pl.rotation_deg))
    return pins.hpwl(sorted(pins.at))


def orient_parts(placements: Iterable[Placement], design: Design, library, *, level: str = "nominal",
                 keep: Iterable[str] = (), skip_nets: Iterable[str] = (), items: Iterable = ()
                 ) -> tuple[Placement, ...]:
    """``placements`` with parts turned a half turn where that shortens their nets (module notes).

    Positions, sides and courtyards stay; only ``rotation_deg`` changes (by
    180 degrees, modulo 360). ``keep``: refs never turned; ``items``: the
    placer's items, whose near rules a turn must not break. Returns the
    placements in the order given.
    """
    placed = list(placements)
    rules = _NearRules(items, placed)
    pins = _Pins(design, library, level, frozenset(skip_nets))
    for pl in placed:
        pins.put(pl.ref, pins.of(pl, pl.rotation_deg))
    held = set(keep)
    order = sorted((k for k, pl in enumerate(placed) if pl.ref not in held),
                   key=lambda k: natural_key(placed[k].ref))
    for _ in range(PASSES):
        turned = 0
        for k in order:
            pl = placed[k]
            now = pins.of(pl, pl.rotation_deg)
            if not now:
                continue
            other = (pl.rotation_deg + 180) % 360
            flipped = pins.of(pl, other)
            before = pins.hpwl(now)
            pins.put(pl.ref, flipped)
            turned_pl = dataclasses.replace(pl, rotation_deg=other)
            if pins.hpwl(flipped) < before - GAIN_MM and rules.keeps(placed, k, turned_pl):
                placed[k] = turned_pl
                turned += 1
            else:
                pins.put(pl.ref, now)
        if turned == 0:
            break
    return tuple(placed)


#: moves tried for a part in the gap-opening pass, in steps (``step_mm``) along x and y, in this order
#: (ties keep the first; our choice: one and two steps each way).
MOVES = ((1, 0), (-1, 0), (0, 1), (0, -1), (2, 0), (-2, 0), (0, 2), (0, -2))


class _Lands:
    """Each placed part's pad rectangles (mm, axis aligned: ``x0, y0, x1, y1``), net and copper sides."""

    def __init__(self, design: Design, library, level: str, placed: list):
        self.design, self.library, self.level = design, library, level
        self.net_of = {(pr.ref, pr.pin): n.name for n in design.nets for pr in n.pins}
        self.of = [self.lands(pl) for pl in placed]

    def lands(self, pl: Placement) -> list[tuple]:
        """``(x0, y0, x1, y1, net or a unique token, sides)`` per pad of ``pl`` as placed."""
        package = self.library.package(self.design.part(pl.ref).package)
        out = []
        for pad, dx, dy, rot in turned_pads(package, pl.rotation_deg, pl.side, self.level):
            w, h = (pad.height_mm, pad.width_mm) if rot == 90 else (pad.width_mm, pad.height_mm)
            x, y = pl.x_mm + dx, pl.y_mm + dy
            net = self.net_of.get((pl.ref, pad.number), (pl.ref, pad.number))
            sides = ("top", "bottom") if pad.drill_mm > 0 else (pl.side,)
            out.append((x - w / 2, y - h / 2, x + w / 2, y + h / 2, net, sides))
        return out


def _gap(a: tuple, b: tuple) -> float:
    """Distance (mm) between two axis-aligned rectangles ``(x0, y0, x1, y1, ...)`` (0 when they touch)."""
    dx = max(a[0] - b[2], b[0] - a[2], 0.0)
    dy = max(a[1] - b[3], b[1] - a[3], 0.0)
    return math.hypot(dx, dy)


def _tight(own: list, others: Iterable[list], gap_mm: float) -> int:
    """Pairs of ``own`` pads and other parts' pads of other nets on a common side closer than ``gap_mm``."""
    n = 0
    for lands in others:
        for b in lands:
            for a in own:
                if a[4] != b[4] and set(a[5]) & set(b[5]) and _gap(a, b) < gap_mm - GAIN_MM:
                    n += 1
    return n


def _overlaps(box: tuple, boxes: Iterable[tuple]) -> bool:
    """Whether ``box`` (``x0, y0, x1, y1``) overlaps any of ``boxes`` by more than a touch."""
    return any(min(box[2], b[2]) - max(box[0], b[0]) > GAIN_MM and min(box[3], b[3]) - max(box[1], b[1]) > GAIN_MM
               for b in boxes)


def open_gaps(placements: Iterable[Placement], design: Design, library, area, *, gap_mm: float, step_mm: float,
              zones: Iterable = (), level: str = "nominal", keep: Iterable[str] = (), items: Iterable = ()
              ) -> tuple[Placement, ...]:
    """``placements`` with top-side parts shifted by whole steps where that opens a track's way between pads.

    Why: two parts placed courtyard against courtyard may face each other
    with pads closer than a track and its two clearances (``gap_mm``): no
    track passes between them, and a pad walled in on its other sides too
    cannot be reached at all (on the 60-part board of bench/bench_route.py
    a TSSOP pin row with 0402 parts 0.4 to 0.5 mm off, and an 0402 pad
    0.32 mm from the next 0402 end to end, bench/README.md).

    Method: greedy local moves (ours), as a detailed placer's cell shifting
    to a legal neighbouring site (cited from memory: M. Pan, N. Viswanathan
    and C. Chu, ICCAD 2005). A *tight pair* is a pad of one part and a pad
    of another, of different nets (an unconnected pad counts as its own
    net), on a common copper side, whose rectangles lie less than
    ``gap_mm`` apart. For each movable top-side part in natural order with
    tight pairs, the moves :data:`MOVES` (multiples of ``step_mm``) are
    tried; a move is legal when the moved courtyard lies in ``area``
    (shapely polygon, mm), in the ``zones`` (:class:`pipeline.model.HeightZone`)
    at least as high as the lowest one its courtyard meets now, overlaps
    no other courtyard on its side, and keeps every met near rule
    (:mod:`pipeline.place_rules`). Of the legal moves the one with fewest
    tight pairs, then the shortest pad-centre half perimeter of its nets,
    is made when it has fewer tight pairs than the part has where it
    stands. The total of tight pairs falls with every move, so the passes
    (at most :data:`PASSES`) end. Rotations, sides and the parts in
    ``keep`` stay. Deterministic (fixed orders, ties keep the first).

    Cost: O(passes x parts^2) courtyard bound distances to find each part's
    neighbours within reach, and O(passes x parts x moves x pads^2)
    rectangle distances against those neighbours' pads; one shapely cover
    test per candidate move. Meant for the smallest-board search's boards
    (tens to a few hundred parts).
    """
    import shapely
    from shapely.geometry import box
    from shapely.affinity import translate

    placed = list(placements)
    near = _NearRules(items, placed)
    lands = _Lands(design, library, level, placed)
    pins = _Pins(design, library, level, frozenset())
    for pl in placed:
        pins.put(pl.ref, pins.of(pl, pl.rotation_deg))
    zones = tuple(zones)
    held = set(keep)
    order = sorted((k for k, pl in enumerate(placed) if pl.ref not in held and pl.side == "top"),
                   key=lambda k: natural_key(placed[k].ref))
    reach = gap_mm + 2 * max(abs(c) for m in MOVES for c in m) * step_mm
    for _ in range(PASSES):
        moved = 0
        for k in order:
            pl = placed[k]
            x0, y0, x1, y1 = pl.courtyard.bounds
            near_k = [j for j, q in enumerate(placed) if j != k and _gap(q.courtyard.bounds, (x0, y0, x1, y1)) < reach]
            others = [lands.of[j] for j in near_k]
            now = _tight(lands.of[k], others, gap_mm)
            if now == 0:
                continue
            room = _room(area, zones, pl.courtyard)
            walls = [placed[j].courtyard.bounds for j in near_k if placed[j].side == pl.side]
            best = None
            for mx, my in MOVES:
                dx, dy = mx * step_mm, my * step_mm
                cand = (x0 + dx, y0 + dy, x1 + dx, y1 + dy)
                if _overlaps(cand, walls) or not shapely.covers(room, box(*cand)):
                    continue
                shifted = dataclasses.replace(pl, x_mm=pl.x_mm + dx, y_mm=pl.y_mm + dy, courtyard=translate(pl.courtyard, dx, dy))
                tight = _tight(lands.lands(shifted), others, gap_mm)
                if tight >= now or not near.keeps(placed, k, shifted):
                    continue
                at = pins.of(shifted, pl.rotation_deg)
                old = pins.of(pl, pl.rotation_deg)
                pins.put(pl.ref, at)
                score = (tight, pins.hpwl(at))
                pins.put(pl.ref, old)
                if best is None or score < best[0]:
                    best = (score, shifted)
            if best is not None:
                placed[k] = best[1]
                lands.of[k] = lands.lands(best[1])
                pins.put(pl.ref, pins.of(best[1], pl.rotation_deg))
                moved += 1
        if moved == 0:
            break
    return tuple(placed)


def _room(area, zones: tuple, courtyard):
    """Where ``courtyard``'s part may stand: ``area``, within the zones at least as high as the lowest one
    it meets now (buffered by a hair so that a courtyard on the rim is covered)."""
    import shapely

    allowed = area
    if zones:
        met = [z.max_height_mm for z in zones if z.polygon.intersection(courtyard).area > GAIN_MM]
        if met:
            allowed = allowed.intersection(shapely.union_all([z.polygon for z in zones if z.max_height_mm >= min(met)]))
    return allowed.buffer(GAIN_MM, join_style="mitre")
