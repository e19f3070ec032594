"""The smallest board that places and routes (issue 9, item 7): outline mode ``"smallest"``.

Entry point: :func:`smallest_board`.

Method: branch and bound over rectangle shapes with a bisection on area
per shape (ours; bisection: R. L. Burden and J. D. Faires, "Numerical
analysis", section 2.1; branch and bound: A. H. Land and A. G. Doig,
Econometrica 28, 1960). A candidate board is a rectangle of a given
orientation, aspect ratio and area at the best position inside the usable
region, or the region cut by such a rectangle
(:func:`pipeline.route.shapes.board_at`). Shapes: every ``ANGLE_STEP_DEG``
over half a turn, times the aspect ratios ``ASPECTS`` and the region's own
(its bounding box in that orientation).

Each candidate passes cheap screens before the expensive routing:

1. area at least the courtyard sum (nothing smaller holds the parts);
2. the placer without routing and without the improvement pass
   (:func:`pipeline.place.place_and_fit`): it must place every part;
3. placement with the improvement pass and the spreading over the candidate
   board (:mod:`pipeline.place_spread`), each movable part then turned a
   half turn where that shortens its nets (:mod:`pipeline.place_orient`;
   on the demo's board at 0 deg, aspect 1.5 and 1.45 x the courtyard sum
   the placement routes with the half turns and leaves a net open without,
   bench/README.md), and shifted by routing pitches where that opens a
   track's way between facing pads (:func:`pipeline.place_orient.open_gaps`;
   on that board it freed the pads that were walled in), and the RUDY demand estimate (:mod:`pipeline.route.demand`)
   of that placement, the one routed: a 90th-percentile demand above
   ``P90_MAX`` of capacity is hopeless and is not routed (screening screen
   2's compact placement instead stopped boards whose spread placement
   demands half as much, bench/README.md);
4. routing (:func:`pipeline.route.route_fit`, which routes that placement
   first and then spreads the parts while they still place, each spread
   placement given the same half turns and shifts), within ``ATTEMPT_SHARE``
   of the routing time budget; the board counts only when the independent
   copper check is clean.

Phase 1 bounds every shape from below: a bisection on area (``PLACE_STEPS``
halvings of its logarithm) with screen 2 alone gives the least area at
which the shape places. Phase 2 takes the shapes in order of that bound
and routes: the first shape that routes at all is bisected on area
(``ROUTE_STEPS`` halvings, screens 1 to 4); every later shape is first
tried at ``1 - BEAT`` of the best area so far and bisected only when it
routes there; a shape whose placement bound is not below that is skipped,
and so are all after it (branch and bound); only the ``SHAPES_ROUTED``
shapes with the least bounds are routed at all (a screen that trades
completeness for time: routing is the expensive step). Phase 3 refines the best
shape's angle by ``REFINE_DEG`` either side and its aspect by
``REFINE_ASPECT``, as in phase 2. Phase 4 bisects the best shape's area
further, between its last failure and its best, until the two are within
``TIGHT`` (at most ``TIGHT_STEPS`` more attempts). Phase 5 routes the
``LADDER_SHAPES`` shapes with the least placement bounds on a ladder of
areas rising by ``LADDER`` from ``LADDER_SPAN`` below the best (routing is
not monotone in area, so a bisection can step over a smaller board that
routes; :func:`_ladder`). Deterministic (shapes in a fixed order,
ties keep the first); the router's own time budget is the one outside
influence.

Cost: ``shapes x PLACE_STEPS`` placements (about 0.1 s each for 60 parts)
plus, for the routed shapes, ``ROUTE_STEPS + 1`` route attempts each (and
``TIGHT_STEPS`` at most for the best, and up to 20 on the ladder), an
attempt being up to ``len(SPREAD_STEPS)`` routings.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any, Callable

from shapely.geometry import Polygon

from .shapes import Shape, board_at

__all__ = ["smallest_board", "search", "Smallest", "shapes_to_try", "ANGLE_STEP_DEG", "ASPECTS", "PLACE_STEPS",
           "ROUTE_STEPS", "P90_MAX", "ATTEMPT_SHARE", "BEAT", "SHAPES_ROUTED", "TIGHT", "TIGHT_STEPS",
           "LADDER_SHAPES", "LADDER", "LADDER_SPAN"]

#: orientation step over half a turn, degrees.
ANGLE_STEP_DEG = 15.0
#: aspect ratios tried besides the region's own (long side / short side).
ASPECTS = (1.0, 1.5, 2.0, 3.0, 4.0)
#: bisection halvings of log(area) for the placement bound of each shape.
PLACE_STEPS = 5
#: bisection halvings of log(area) for the routed area of a shape.
ROUTE_STEPS = 4
#: a later shape must beat the best area so far by this share to be tried (our choice).
BEAT = 0.02
#: RUDY 90th-percentile demand / capacity of the placement to be routed above which it is not routed
#: (our choice: only the hopeless; on the 60-part board the spread placements at 2.4 to 2.5 x the courtyard
#: sum demand 0.44 to 0.51 where the compact ones demand 0.95 to 1.16, bench/README.md).
P90_MAX = 1.0
#: share of the copper rules' routing time budget one candidate's routing (all of route_fit's attempts) may
#: spend in the search (our choice: on the 60-part board of bench/bench_route.py at 2.4 to 2.5 x the
#: courtyard sum, two candidates routed, in 33 s (second placement) and 141 s (fifth, loaded machine), and
#: the four that did not each spent the whole 180 s; half the budget loses the slow successes but tries
#: twice the candidates in the same time; bench/README.md).
ATTEMPT_SHARE = 0.5
#: phase 2 routes at most this many shapes, those with the least placement bounds (a screen: routing
#: is the expensive step; our choice).
SHAPES_ROUTED = 10
#: phase 3: angle steps either side of the best, degrees, and aspect factors.
REFINE_DEG = (7.5, 3.75)
REFINE_ASPECT = (1.25, 1.0 / 1.25)
#: phase 4: the best shape is bisected further until its routed area is within this share of its last
#: failure (our choice; four halvings over the first shape's span leave about 3 %).
TIGHT = 0.01
#: phase 4: at most this many more route attempts.
TIGHT_STEPS = 3
#: phase 5: how many shapes (least placement bounds first) are routed on a ladder of areas (our choice).
LADDER_SHAPES = 2
#: phase 5: the ladder's step, a share of the area: the search's own resolution ``TIGHT`` (one rule
#: for how close a failure must be to the answer; 1.5 % was tried first, bench/README.md).
LADDER = TIGHT
#: phase 5: the ladder starts this share below the best area (our choice).
LADDER_SPAN = 0.1

Progress = Callable[[str, float], None]


@dataclass(frozen=True)
class Smallest:
    """The search's answer: the board, its fit and routing, and its area against the courtyard sum.

    ``failed_area_mm2`` is the largest area below the answer at the same
    shape that was tried and did not place and route (0 when none was).
    ``counts`` says how many candidates each screen stopped.
    """

    fit: Any            # pipeline.model.FitResult on the smallest board
    outcome: Any        # pipeline.route.RouteOutcome
    board: Polygon
    angle_deg: float
    area_mm2: float
    ratio: float        # board area / courtyard sum
    tries: int
    aspect: float = 1.0
    mode: str = ""
    failed_area_mm2: float = 0.0
    rule_of_thumb_ratio: float = 0.0  # the area estimate's expected board / courtyard sum
    counts: dict = field(default_factory=dict, compare=False)

    @property
    def shape(self) -> Shape:
        return Shape(self.angle_deg, self.aspect)

    def to_dict(self) -> dict:
        return {"method": "branch and bound over rectangle shapes, bisection on area", "angle_deg": self.angle_deg,
                "area_mm2": round(self.area_mm2, 3), "ratio_to_courtyards": round(self.ratio, 4),
                "tries": self.tries, "aspect_ratio": round(self.aspect, 4), "shape": self.mode,
                "rule_of_thumb_ratio": round(self.rule_of_thumb_ratio, 4),
                "screened": {k: self.counts[k] for k in sorted(self.counts)}}


def shapes_to_try(region, angle_step: float = ANGLE_STEP_DEG, aspects=ASPECTS) -> list[Shape]:
    """Every orientation in ``[0, 180)`` by ``angle_step`` times ``aspects`` and the region's own aspect there.

    The region's own aspect at an angle where it is below 1 is the same
    rectangle as its inverse a quarter turn on, so it is kept only where it
    is at least 1; an own aspect within 5 % of a listed one is left out.
    """
    from shapely import affinity

    out = []
    for k in range(int(round(180.0 / angle_step))):
        angle = k * angle_step
        minx, miny, maxx, maxy = affinity.rotate(region, -angle, origin=region.centroid).bounds
        own = (maxx - minx) / (maxy - miny) if maxy > miny else 1.0
        extra = (own,) if own >= 1.0 and all(abs(own / a - 1) > 0.05 for a in aspects) else ()
        out += [Shape(angle, a) for a in (*aspects, *extra)]
    return out


class _Search:
    """The screens and the bookkeeping; ``works(shape, area)`` is the whole test of one candidate."""

    def __init__(self, fit, items, region, options, design, library, rules, progress):
        self.fit, self.items, self.region, self.options = fit, items, region, options
        self.design, self.library, self.rules, self.progress = design, library, rules, progress
        self.floor = fit.courtyard_area_mm2
        self.counts = {"below courtyard sum": 0, "outside region": 0, "does not place": 0, "demand too high": 0,
                       "routed": 0, "route attempts": 0, "placements": 0}
        self.tries = 0

    def places(self, shape: Shape, area: float):
        """Screens 1 and 2: the board and its compact placement, or None."""
        from ..place import place_and_fit

        self.tries += 1
        if area < self.floor:
            self.counts["below courtyard sum"] += 1
            return None
        got = board_at(self.region.board_region, shape, area)
        if got is None or got[0].is_empty:
            self.counts["outside region"] += 1
            return None
        self.counts["placements"] += 1
        f = place_and_fit(self.items, self.region, self.options, user_board=got[0], improve=False)
        if not f.fits:
            self.counts["does not place"] += 1
            return None
        return got, f

    def routes(self, shape: Shape, area: float):
        """All four screens: ``(fit, outcome, board, mode)`` when the board routes, else None; the routing
        (screen 4) may spend ``ATTEMPT_SHARE`` of the rules' time budget."""
        import dataclasses

        from ..place import place_and_fit
        from . import ROUTED, route_fit
        from .demand import routing_demand
        from .pads import board_from_placement

        placed = self.places(shape, area)
        if placed is None:
            return None
        (board, mode), _ = placed
        f = place_and_fit(self.items, self.region, self.options, user_board=board, improve=True)
        if not f.fits:
            self.counts["does not place"] += 1
            return None
        f = self.oriented(f)
        pads = board_from_placement(board, f.placements, self.design, self.library, self.rules.layer_names,
                                    level=self.options.density)
        if routing_demand(pads, self.rules).p90 > P90_MAX:
            self.counts["demand too high"] += 1
            return None
        self.counts["route attempts"] += 1
        rules = dataclasses.replace(self.rules, time_budget_s=ATTEMPT_SHARE * self.rules.time_budget_s)
        f, out = route_fit(f, self.items, self.region, self.options, self.design, self.library, rules,
                           user_board=board, arrange=self.oriented)
        if out.verdict.status != ROUTED:
            return None
        self.counts["routed"] += 1
        return f, out, board, mode

    def oriented(self, f):
        """``f`` with its movable parts turned a half turn where that shortens their nets
        (:func:`pipeline.place_orient.orient_parts`) and then shifted by routing pitches where that opens
        a track's way between facing pads (:func:`pipeline.place_orient.open_gaps`); fixed and edge parts
        stay, copper-area nets count nothing for the turns, near rules met stay met."""
        import dataclasses

        from ..place_orient import open_gaps, orient_parts

        keep = [it.ref for it in self.items if it.fixed is not None or it.edge]
        skip = [n.name for n in self.design.nets if self.rules.area_layer(n.name) is not None]
        level = self.options.density
        placed = orient_parts(f.placements, self.design, self.library, level=level, keep=keep, skip_nets=skip,
                              items=self.items)
        area = f.board_outline.intersection(self.region.board_region)
        placed = open_gaps(placed, self.design, self.library, area, zones=self.region.zones, level=level, keep=keep,
                           items=self.items, gap_mm=self.rules.track_width_mm + 2 * self.rules.clearance_mm,
                           step_mm=self.rules.pitch_mm)
        return dataclasses.replace(f, placements=placed)

    def place_bound(self, shape: Shape) -> float | None:
        """Least area (mm^2) found by bisection at which ``shape`` places; None when not even the region does."""
        lo, hi = self.floor, self.region.board_region.area
        if self.places(shape, hi) is None:
            return None
        if self.places(shape, lo) is not None:
            return lo
        for _ in range(PLACE_STEPS):
            mid = math.sqrt(lo * hi)
            if self.places(shape, mid) is None:
                lo = mid
            else:
                hi = mid
        return hi

    def bisect_route(self, shape: Shape, lo: float, hi: float, found, steps: int = ROUTE_STEPS):
        """Bisect log(area) in ``(lo, hi]`` (``found`` routes at ``hi``): the least routed area and the last failure."""
        failed = 0.0
        for _ in range(steps):
            mid = math.sqrt(lo * hi)
            got = self.routes(shape, mid)
            if got is None:
                lo = failed = mid
            else:
                hi, found = mid, got
        return hi, found, failed


def smallest_board(fit, items, region, options, design, library, rules, *,
                   progress: Progress | None = None) -> Smallest | None:
    """Search the smallest board inside ``region.board_region`` that places and routes (method: module notes).

    ``fit`` is the compact fit on the whole region (its courtyard sum is the
    lower bound, its area estimate the rule of thumb reported beside the
    answer). Returns None when no candidate routes (not even the whole
    region).
    """
    s = _Search(fit, items, region, options, design, library, rules, progress)
    best = search(s)
    if best is None:
        return None
    shape, area, (f, out, board, mode), failed = best
    if progress is not None:
        progress("smallest board: done", 1.0)
    est = fit.estimate.expected_mm2 / s.floor if s.floor > 0 else math.inf
    return Smallest(f, out, board, shape.angle_deg, board.area, board.area / s.floor if s.floor > 0 else math.inf,
                    s.tries, shape.aspect, mode, failed, est, dict(s.counts))


def search(s: "_Search"):
    """Phases 1 to 5 (module notes) over ``s`` (its ``places`` and ``routes`` screens).

    Returns ``(shape, area, found, failed_area)`` for the smallest routed
    board (``found`` is what ``s.routes`` returned), or None.
    """
    shapes = shapes_to_try(s.region.board_region)
    bounds = []
    for k, shape in enumerate(shapes):
        if s.progress is not None:
            s.progress(f"smallest board: placement bound {k + 1}/{len(shapes)}", 0.5 * k / len(shapes))
        b = s.place_bound(shape)
        if b is not None:
            bounds.append((b, k, shape))
    bounds.sort()
    best = _route_phase(s, [(b, sh) for b, _, sh in bounds[:SHAPES_ROUTED]], None, 0.5, 0.4)
    if best is None:
        return None
    refined = []
    for d in REFINE_DEG:
        refined += [Shape((best[0].angle_deg + sign * d) % 180.0, best[0].aspect) for sign in (-1, 1)]
    refined += [Shape(best[0].angle_deg, max(1.0, best[0].aspect * f)) for f in REFINE_ASPECT]
    fresh = []
    for shape in dict.fromkeys(refined):
        b = s.place_bound(shape)
        if b is not None:
            fresh.append((b, shape))
    best = _tighten(s, _route_phase(s, sorted(fresh, key=lambda t: t[0]), best, 0.9, 0.1))
    every = sorted([(b, k, sh) for b, k, sh in bounds] + [(b, len(shapes) + k, sh) for k, (b, sh) in enumerate(fresh)])
    return _ladder(s, [(b, sh) for b, _, sh in every], best)


def _ladder(s: "_Search", bounds, best):
    """Phase 5: the ``LADDER_SHAPES`` shapes with the least placement bounds, each routed on a ladder of
    areas rising by ``1 + LADDER`` from ``max(bound, (1 - LADDER_SPAN) x best)`` while below the best
    area; a shape's first rung that routes is its answer, and the best so far when smaller.

    Why: routing is not monotone in area (the packer's slots change with the board, so a smaller
    board's placement can route where a larger one's does not), and a bisection that meets a failure
    above such an island never looks below it: on the demo (bench/README.md) the shape at 0 deg,
    aspect 1.5 failed at 1.58 x the courtyard sum and was left at 1.63 x, but routes at 1.45 x.
    Cost: at most ``LADDER_SHAPES x ceil(log((1 - TIGHT) / (1 - LADDER_SPAN)) / log(1 + LADDER))``
    route attempts (20 with the values here); a rung that does not place costs one placement.
    """
    for bound, shape in bounds[:LADDER_SHAPES]:
        area, failed = max(bound, best[1] * (1.0 - LADDER_SPAN)), 0.0
        while area < best[1] * (1.0 - TIGHT):
            got = s.routes(shape, area)
            if got is not None:
                best = (shape, area, got, failed)
                break
            failed, area = area, area * (1.0 + LADDER)
    return best


def _tighten(s: "_Search", best):
    """Phase 4: bisect the best shape between its last failure (else the courtyard sum) and its area
    until they are within ``TIGHT`` (at most ``TIGHT_STEPS`` more route attempts)."""
    shape, area, found, failed = best
    lo = failed if failed > 0 else s.floor
    steps = 0
    while steps < TIGHT_STEPS and lo > 0 and area / lo > (1.0 + TIGHT) ** (2 ** steps):
        steps += 1
    if steps == 0:
        return best
    hi, found, last = s.bisect_route(shape, lo, area, found, steps)
    return shape, hi, found, last or failed


def _route_phase(s: _Search, bounds, best, start: float, span: float):
    """Phase 2/3: route the shapes in order of their placement bound; ``best`` is (shape, area, found, failed)."""
    for k, (bound, shape) in enumerate(bounds):
        if s.progress is not None:
            s.progress(f"smallest board: routing shape {k + 1}/{len(bounds)}", start + span * k / max(len(bounds), 1))
        if best is None:
            top = s.region.board_region.area
            got = s.routes(shape, top)
            if got is None:
                continue
            area, found, failed = s.bisect_route(shape, bound, top, got)
            best = (shape, area, found, failed)
            continue
        target = best[1] * (1.0 - BEAT)
        if bound >= target:
            break  # every later shape places only on a board at least this large
        got = s.routes(shape, target)
        if got is not None:
            area, found, failed = s.bisect_route(shape, bound, target, got)
            best = (shape, area, found, failed)
    return best
