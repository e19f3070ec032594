"""Orientation for routing: a part turned a half turn when that shortens its nets.

Entry point: :func:`orient_parts` (a placement in, the same placement with
some parts turned by 180 degrees out).

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
from typing import Iterable

from .library.lands import turned_pads
from .model import Design, Placement
from .order import natural_key

__all__ = ["orient_parts", "pad_hpwl", "PASSES", "GAIN_MM"]

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
        return sum(_span(p for pts in self.at.get(net, {}).values() for p in pts) for net in nets)


class _NearRules:
    """The near rules touching each part (as the capacitor or as the target), and whether a turn keeps them."""

    def __init__(self, items, placed: list):
        self.index = {pl.ref: k for k, pl in enumerate(placed)}
        self.touching: dict[str, list] = {}
        for it in items:
            if it.near is not None and it.ref in self.index and it.near.target in self.index:
                for ref in {it.ref, it.near.target}:
                    self.touching.setdefault(ref, []).append((it.ref, it.near))

    def keeps(self, placed: list, k: int, rotation: int) -> bool:
        """Whether turning part ``k`` to ``rotation`` leaves met every near rule touching it that is met now."""
        from .place_rules import TOL, near_distance

        def at(ref: str, turned: bool) -> tuple:
            pl = placed[self.index[ref]]
            return (pl.x_mm, pl.y_mm, rotation if turned else pl.rotation_deg, pl.side)

        ref = placed[k].ref
        for own, rule in self.touching.get(ref, ()):
            if near_distance(rule, at(own, False), at(rule.target, False)) > rule.within_mm + TOL:
                continue  # unmet already: a turn cannot break it
            if near_distance(rule, at(own, own == ref), at(rule.target, rule.target == ref)) > rule.within_mm + TOL:
                return False
        return True


def _span(points) -> float:
    """Half perimeter (mm) of the bounding box of ``points`` (0 for fewer than two)."""
    pts = list(points)
    if len(pts) < 2:
        return 0.0
    xs, ys = [p[0] for p in pts], [p[1] for p in pts]
    return (max(xs) - min(xs)) + (max(ys) - min(ys))


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
            if pins.hpwl(flipped) < before - GAIN_MM and rules.keeps(placed, k, other):
                placed[k] = dataclasses.replace(pl, rotation_deg=other)
                turned += 1
            else:
                pins.put(pl.ref, now)
        if turned == 0:
            break
    return tuple(placed)
