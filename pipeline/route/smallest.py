"""The smallest board that places and routes (issue 9, item 7): outline mode ``"smallest"``.

Entry point: :func:`smallest_board`.

Method: branch and bound over rectangle shapes with a descent and a
bisection on area per shape (ours; bisection: R. L. Burden and J. D. Faires, "Numerical
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
   placement given the same half turns and shifts), within the attempt's
   cap (below); the board counts only when the independent copper check is
   clean.

Phase 1 bounds every shape from below: a bisection on area (``PLACE_STEPS``
halvings of its logarithm) with screen 2 alone gives the least area at
which the shape places. Phase 2 routes the whole region (every shape's
board at the region's area is the region itself) and descends from there
with the shape of the least placement bound (:func:`_descend`: steps of
``DESCENT`` down until a board does not route, then a bisection until the
least routed area and the last failure are within ``TIGHT``); then the
other shapes whose bound is below ``1 - BEAT`` of the best area, ranked by
screen 3's RUDY demand at that area (:func:`_ranked`, the ``SHAPES_ROUTED``
least), are each tried there and descended when they route (branch and
bound). Phase 3 refines the best shape's angle by ``REFINE_DEG`` either side
and its aspect by ``REFINE_ASPECT``, as in phase 2. Phase 4 routes the
``LADDER_SHAPES`` shapes with the least placement bounds on a ladder of
areas rising by ``LADDER`` from ``LADDER_SPAN`` below the best (routing is
not monotone in area, so a descent can step over a smaller board that
routes; :func:`_ladder`). Deterministic (shapes in a fixed order, ties keep
the first; equal boards are placed and routed once); the router's time
budget is the one outside influence.

Bounded: the search starts no route attempt once ``ROUTE_ATTEMPTS`` were
made or their routing took ``SEARCH_SHARE`` x the routing time budget
together (what it found by then is its answer); the first attempt may take
``ATTEMPT_SHARE`` of the budget and each later one ``CAP_FACTOR`` x the
slowest attempt that routed, at least ``CAP_MIN_S`` (a board that does not
route spends its whole cap trying route_fit's spread placements, one that
routes stops at the first that does; :meth:`_Search.attempt_cap_s`).

Cost: ``shapes x (PLACE_STEPS + 2)`` placements (about 0.1 s each for 60
parts), one improved placement and RUDY map per ranked shape, and at most
``ROUTE_ATTEMPTS`` route attempts, each up to ``len(SPREAD_STEPS) +
len(PIN_STEPS)`` routings within its cap: the routing part at most
``SEARCH_SHARE x budget`` plus one attempt's cap.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any, Callable

from shapely.geometry import Polygon

from .shapes import Shape, board_at

__all__ = ["smallest_board", "search", "Smallest", "shapes_to_try", "ANGLE_STEP_DEG", "ASPECTS", "PLACE_STEPS",
           "P90_MAX", "ATTEMPT_SHARE", "BEAT", "SHAPES_ROUTED", "TIGHT", "DESCENT", "ROUTE_ATTEMPTS", "CAP_FACTOR",
           "CAP_MIN_S", "SEARCH_SHARE", "LADDER_SHAPES", "LADDER", "LADDER_SPAN"]

#: orientation step over half a turn, degrees.
ANGLE_STEP_DEG = 15.0
#: aspect ratios tried besides the region's own (long side / short side).
ASPECTS = (1.0, 1.5, 2.0, 3.0, 4.0)
#: bisection halvings of log(area) for the placement bound of each shape.
PLACE_STEPS = 5
#: a later shape must beat the best area so far by this share to be tried (our choice).
BEAT = 0.02
#: RUDY 90th-percentile demand / capacity of the placement to be routed above which it is not routed
#: (our choice: only the hopeless; on the 60-part board the spread placements at 2.4 to 2.5 x the courtyard
#: sum demand 0.44 to 0.51 where the compact ones demand 0.95 to 1.16, bench/README.md).
P90_MAX = 1.0
#: share of the copper rules' routing time budget the first candidate's routing (all of route_fit's
#: attempts) may spend in the search, and the most any later one may (our choice: on the 60-part board of
#: bench/bench_route.py at 2.4 to 2.5 x the courtyard sum, two candidates routed, in 33 s and 141 s, and the
#: four that did not each spent the whole 180 s, bench/README.md).
ATTEMPT_SHARE = 0.5
#: a later candidate's routing may take this many times the slowest candidate that routed (our choice:
#: on the 60-part board the boards from 2.45 to 3.2 x routed in 3 to 32 s, the slowest near the least
#: routed area, where one that does not route would otherwise spend ATTEMPT_SHARE x 180 s; bench/README.md).
CAP_FACTOR = 2.0
#: ... and at least this many seconds (our choice: what the 60-part board's slow successes took).
CAP_MIN_S = 40.0
#: the whole search routes at most this many candidates (our choice: the demo's searches made 13 to 20)...
ROUTE_ATTEMPTS = 60
#: ... and starts no route attempt once they took this many times the rules' time budget together (our
#: choice: 4 x the default 180 s is 12 minutes of routing; the 60-part board's whole search took 20 minutes
#: with its placements at a load average of 5 and stopped on this bound, the demo's routed for 88 s in all;
#: bench/README.md).
SEARCH_SHARE = 4.0
#: phase 2 routes at most this many shapes besides the first, those with the least RUDY demand (a screen:
#: routing is the expensive step; our choice).
SHAPES_ROUTED = 6
#: the descent's step: from an area that routes, the next tried is this share of it (our choice: on the
#: 60-part board a step of 0.9 met a failure 7 to 10 % under each later shape's least routed area, at 70 s
#: each, where the routed steps above cost 10 to 35 s; bench/README.md).
DESCENT = 0.95
#: phase 3: angle steps either side of the best, degrees, and aspect factors.
REFINE_DEG = (7.5, 3.75)
REFINE_ASPECT = (1.25, 1.0 / 1.25)
#: the descent's bisection stops when the least routed area is within this share of the last failure
#: (our choice: the ratio is reported to two decimals, and 1 % of 1.5 to 2.5 is 0.015 to 0.025).
TIGHT = 0.01
#: phase 4: how many shapes (least placement bounds first) are routed on a ladder of areas (our choice).
LADDER_SHAPES = 2
#: phase 4: the ladder's step, a share of the area: the search's own resolution ``TIGHT`` (one rule
#: for how close a failure must be to the answer; 1.5 % was tried first, bench/README.md).
LADDER = TIGHT
#: phase 4: the ladder starts this share below the best area (our choice).
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
    """The screens and the bookkeeping; ``routes(shape, area)`` is the whole test of one candidate.

    Candidates are keyed by their board (:func:`_board_key`): shapes that
    give the same board (a rectangle the region cuts the same way at two
    orientations, or the whole region) are placed, screened and routed once.
    """

    def __init__(self, fit, items, region, options, design, library, rules, progress):
        self.fit, self.items, self.region, self.options = fit, items, region, options
        self.design, self.library, self.rules, self.progress = design, library, rules, progress
        self.floor = fit.courtyard_area_mm2
        self.counts = {"below courtyard sum": 0, "outside region": 0, "does not place": 0, "demand too high": 0,
                       "routed": 0, "route attempts": 0, "placements": 0, "same board": 0}
        self.tries = 0
        self.placed: dict = {}     # board key -> screen 2's compact fit
        self.prepared: dict = {}   # board key -> (key, board, mode, fit to route, RUDY p90) or None
        self.routed: dict = {}     # board key -> what routes returned
        self.slowest_ok_s = 0.0    # the longest routing (s) of a candidate that routed
        self.routing_s = 0.0       # seconds all route attempts took together

    def left(self) -> bool:
        """Whether the search may route another candidate: fewer than ``ROUTE_ATTEMPTS`` made and their
        routing under ``SEARCH_SHARE`` x the rules' time budget in all."""
        return (self.counts.get("route attempts", 0) < ROUTE_ATTEMPTS
                and self.routing_s < SEARCH_SHARE * self.rules.time_budget_s)

    def attempt_cap_s(self) -> float:
        """Seconds the next candidate's routing may take: ``CAP_FACTOR`` x the slowest routed candidate so
        far, at least ``CAP_MIN_S``, at most ``ATTEMPT_SHARE`` of the rules' time budget (that share
        until a candidate has routed)."""
        share = ATTEMPT_SHARE * self.rules.time_budget_s
        if self.slowest_ok_s <= 0.0:
            return share
        return min(share, max(CAP_MIN_S, CAP_FACTOR * self.slowest_ok_s))

    def places(self, shape: Shape, area: float):
        """Screens 1 and 2: the board and its compact placement, or None (placed once per board)."""
        from ..place import place_and_fit

        self.tries += 1
        if area < self.floor:
            self.counts["below courtyard sum"] += 1
            return None
        got = board_at(self.region.board_region, shape, area)
        if got is None or got[0].is_empty:
            self.counts["outside region"] += 1
            return None
        key = _board_key(got[0])
        if key in self.placed:
            self.counts["same board"] += 1
            f = self.placed[key]
        else:
            self.counts["placements"] += 1
            f = self.placed[key] = place_and_fit(self.items, self.region, self.options, user_board=got[0],
                                                 improve=False)
        if not f.fits:
            self.counts["does not place"] += 1
            return None
        return got, f

    def prepare(self, shape: Shape, area: float):
        """Screens 1 to 3 once per board: ``(key, board, mode, fit, p90)`` with the placement to be routed and
        its RUDY 90th-percentile demand / capacity, or None when a screen before the demand stops it."""
        from ..place import place_and_fit
        from .demand import routing_demand
        from .pads import board_from_placement

        got = board_at(self.region.board_region, shape, area) if area >= self.floor else None
        key = _board_key(got[0]) if got is not None and not got[0].is_empty else None
        if key is not None and key in self.prepared:
            self.counts["same board"] += 1
            return self.prepared[key]
        placed = self.places(shape, area)
        ready = None
        if placed is not None:
            (board, mode), _ = placed
            f = place_and_fit(self.items, self.region, self.options, user_board=board, improve=True)
            if not f.fits:
                self.counts["does not place"] += 1
            else:
                f = self.oriented(f)
                pads = board_from_placement(board, f.placements, self.design, self.library, self.rules.layer_names,
                                            level=self.options.density)
                ready = (key, board, mode, f, routing_demand(pads, self.rules).p90)
        if key is not None:
            self.prepared[key] = ready
        return ready

    def routes(self, shape: Shape, area: float):
        """All four screens: ``(fit, outcome, board, mode)`` when the board routes, else None; the routing
        (screen 4) may spend :meth:`attempt_cap_s`. Call only while :meth:`left` holds."""
        import dataclasses
        import time

        from . import ROUTED, route_fit

        ready = self.prepare(shape, area)
        if ready is None:
            return None
        key, board, mode, f, p90 = ready
        if key in self.routed:
            return self.routed[key]
        if p90 > P90_MAX:
            self.counts["demand too high"] += 1
            self.routed[key] = None
            return None
        self.counts["route attempts"] += 1
        rules = dataclasses.replace(self.rules, time_budget_s=self.attempt_cap_s())
        start = time.monotonic()
        f, out = route_fit(f, self.items, self.region, self.options, self.design, self.library, rules,
                           user_board=board, arrange=self.oriented)
        took = time.monotonic() - start
        self.routing_s += took
        got = None
        if out.verdict.status == ROUTED:
            self.counts["routed"] += 1
            self.slowest_ok_s = max(self.slowest_ok_s, took)
            got = (f, out, board, mode)
        self.routed[key] = got
        return got

    def demand(self, shape: Shape, area: float) -> tuple[float, str | None]:
        """Screen 3's figure for ``shape`` at ``area`` (RUDY p90 / capacity; infinity when it does not place)
        and the board's key (None when there is no board)."""
        ready = self.prepare(shape, area)
        return (math.inf, None) if ready is None else (ready[4], ready[0])

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


def _board_key(board: Polygon) -> str:
    """One text per board, the same for equal boards (vertices to 1e-6 mm, normalised ring order)."""
    import shapely

    return shapely.set_precision(board, 1e-6).normalize().wkt


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
    """Phases 1 to 4 (module notes) over ``s`` (its ``places``, ``demand`` and ``routes`` screens).

    Returns ``(shape, area, found, failed_area)`` for the smallest routed
    board (``found`` is what ``s.routes`` returned), or None.
    """
    shapes = shapes_to_try(s.region.board_region)
    bounds = []
    for k, shape in enumerate(shapes):
        if s.progress is not None:
            s.progress(f"smallest board: placement bound {k + 1}/{len(shapes)}", 0.4 * k / len(shapes))
        b = s.place_bound(shape)
        if b is not None:
            bounds.append((b, k, shape))
    bounds.sort()
    ordered = [(b, sh) for b, _, sh in bounds]
    best = _route_phase(s, ordered[:1], None, 0.4, 0.1)
    if best is None:
        best = _route_phase(s, ordered[1:], None, 0.5, 0.0)   # the first shape's board did not route at all
        if best is None:
            return None
    best = _route_phase(s, _ranked(s, ordered, best), best, 0.5, 0.3)
    refined = []
    for d in REFINE_DEG:
        refined += [Shape((best[0].angle_deg + sign * d) % 180.0, best[0].aspect) for sign in (-1, 1)]
    refined += [Shape(best[0].angle_deg, max(1.0, best[0].aspect * f)) for f in REFINE_ASPECT]
    fresh = []
    for shape in dict.fromkeys(refined):
        b = s.place_bound(shape)
        if b is not None:
            fresh.append((b, shape))
    best = _route_phase(s, _ranked(s, sorted(fresh, key=lambda t: t[0]), best), best, 0.8, 0.1)
    every = sorted([(b, k, sh) for b, k, sh in bounds] + [(b, len(shapes) + k, sh) for k, (b, sh) in enumerate(fresh)])
    return _ladder(s, [(b, sh) for b, _, sh in every], best)


def _ranked(s: "_Search", bounds, best):
    """The shapes worth routing against ``best``, best first: those whose placement bound is below the
    area they would be tried at, ``(1 - BEAT) x`` the best area, ordered by screen 3's RUDY demand there
    (least first; ties by bound, then by the order given), one shape per board, at most ``SHAPES_ROUTED``.

    Why by demand: the 60-part board's shapes all place from 1.2 x the courtyard sum (their bounds tie),
    while at 2.5 x some route and some do not (bench/README.md). Cost: one placement with the improvement
    pass, the half turns and one RUDY map per shape (about 1 s each for 60 parts).
    """
    target = best[1] * (1.0 - BEAT)
    scored, boards = [], set()
    for k, (bound, shape) in enumerate(bounds):
        if bound >= target or shape == best[0]:
            continue
        p90, key = s.demand(shape, target)
        if p90 > P90_MAX or (key is not None and key in boards):
            continue
        boards.add(key)
        scored.append((p90, bound, k, shape))
    scored.sort(key=lambda t: t[:3])
    return [(bound, shape) for _, bound, _, shape in scored[:SHAPES_ROUTED]]


def _descend(s: "_Search", shape: Shape, area: float, found):
    """From a routed ``area``, step down by ``DESCENT`` until a board does not route, then bisect log(area)
    between that failure and the least routed area until they are within ``TIGHT`` (an exponential search
    then a bisection: J. L. Bentley and A. C. Yao, "An almost optimal algorithm for unbounded searching",
    Information Processing Letters 5(3), 1976, with a fixed step). Stops early when the route attempts run
    out. Returns ``(area, found, failed)``; ``failed`` is 0 when no failure was met.

    Why downwards: a board well above the least routed area routes in a few seconds (the 60-part board's
    top and 2.8 x: 4 and 3 s), while one that does not route spends its whole cap, so steps from above
    meet one failure before the bracket where a bisection from the placement bound meets one per halving.
    """
    failed = 0.0
    while s.left():
        nxt = area * DESCENT
        got = s.routes(shape, nxt)
        if got is None:
            failed = nxt
            break
        area, found = nxt, got
    while failed > 0.0 and area > failed * (1.0 + TIGHT) and s.left():
        mid = math.sqrt(failed * area)
        got = s.routes(shape, mid)
        if got is None:
            failed = mid
        else:
            area, found = mid, got
    return area, found, failed


def _ladder(s: "_Search", bounds, best):
    """Phase 4: the ``LADDER_SHAPES`` shapes with the least placement bounds, each routed on a ladder of
    areas rising by ``1 + LADDER`` from ``max(bound, (1 - LADDER_SPAN) x best)`` while below the best
    area; a shape's first rung that routes is its answer, and the best so far when smaller.

    Why: routing is not monotone in area (the packer's slots change with the board, so a smaller
    board's placement can route where a larger one's does not), and a bisection that meets a failure
    above such an island never looks below it: on the demo (bench/README.md) the shape at 0 deg,
    aspect 1.5 failed at 1.58 x the courtyard sum and was left at 1.63 x, but routes at 1.45 x.
    Cost: at most ``LADDER_SHAPES x ceil(log((1 - TIGHT) / (1 - LADDER_SPAN)) / log(1 + LADDER))``
    route attempts (20 with the values here), fewer when the search's ``ROUTE_ATTEMPTS`` run out; a
    rung that does not place costs one placement.
    """
    for bound, shape in bounds[:LADDER_SHAPES]:
        area, failed = max(bound, best[1] * (1.0 - LADDER_SPAN)), 0.0
        while area < best[1] * (1.0 - TIGHT) and s.left():
            got = s.routes(shape, area)
            if got is not None:
                best = (shape, area, got, failed)
                break
            failed, area = area, area * (1.0 + LADDER)
    return best


def _route_phase(s: _Search, bounds, best, start: float, span: float):
    """Phases 2 and 3: route the shapes in the order given; ``best`` is (shape, area, found, failed).

    Without a best the shape is routed on the whole region first and descended from there
    (:func:`_descend`); with one, it is tried at ``1 - BEAT`` of the best area and descended only when it
    routes there. Stops when the search's ``ROUTE_ATTEMPTS`` run out.
    """
    for k, (bound, shape) in enumerate(bounds):
        if not s.left():
            break
        if s.progress is not None:
            s.progress(f"smallest board: routing shape {k + 1}/{len(bounds)}", start + span * k / max(len(bounds), 1))
        area = s.region.board_region.area if best is None else best[1] * (1.0 - BEAT)
        if best is not None and bound >= area:
            continue  # it places only on a board at least this large
        got = s.routes(shape, area)
        if got is not None:
            area, found, failed = _descend(s, shape, area, got)
            best = (shape, area, found, failed)
    return best
