"""Routing: prove that a placed board can carry its connections.

Entry point: :func:`route_placed` (a fit to a :class:`RouteOutcome`). Steps:
pads from the placement (:mod:`.pads`, the one place to switch to real
pads), routing demand (:mod:`.demand`, RUDY), the router (:mod:`.router`,
PathFinder with A*), ``routes.json`` (:mod:`pipeline.export.routes`) and
the independent check of that document (:mod:`pipeline.copper`). The board
is called routed only when the router completed every connection AND the
independent check is clean; a routing the router calls complete but the
check rejects is a defect, reported as one.

:class:`RouteVerdict` is the small frozen value other steps consume (the
overall verdict, the report).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Callable

from .rules import CopperRules

# no geometry library at import time: reading project.toml imports the rules from here
__all__ = ["RouteVerdict", "RouteOutcome", "route_placed", "route_fit", "skipped", "CopperRules", "SPREAD_STEPS",
           "FIRST_SHARE", "PIN_STEPS", "spread_attempts"]

ROUTED, OPEN, SKIPPED = "routed", "open", "skipped"

#: room added around every courtyard (in routing pitches, to its length and to its width) when the
#: compact placement does not route: tried in this order, first that routes wins (our choice).
SPREAD_STEPS = (0, 1, 2, 3, 4, 6)
#: pitches added across each part's pin rows (pin-side inflation, pipeline/route/inflate.py), tried after
#: the uniform steps (our choice: on the demo it routes boards of 1.7 x the courtyard sum that uniform
#: growth does not place; the half steps are what routes them, bench/README.md).
PIN_STEPS = (0.5, 1, 1.5, 2, 3, 4)
#: share of the time budget the compact fit's routing may use (our choice, measured on the 2,000-part board
#: of bench/bench_route.py: its compact fit walls 967 of 1,052 nets in, yet took the whole budget, while the
#: first spread placement, routed in what was left, left 928 open in one round; at 0.5 the spread placement
#: left 890 open, at 0.3 894, one run each under different loads, bench/README.md)
FIRST_SHARE = 0.5


@dataclass(frozen=True)
class RouteVerdict:
    """The routing verdict: ``status`` is ``"routed"``, ``"open"`` or ``"skipped"``.

    ``open_nets`` names the nets not completed; ``demand_peak`` /
    ``demand_p90`` are the RUDY demand-to-capacity ratios (``None`` when not
    routed); ``congestion`` up to ten ``(x, y)`` mm where nets still shared;
    ``defects`` the independent check's findings beyond the open nets
    (should be empty: anything here is a router defect); ``reason`` says why
    routing was skipped.
    """

    status: str
    open_nets: tuple[str, ...] = ()
    demand_peak: float | None = None
    demand_p90: float | None = None
    vias: int = 0
    wirelength_mm: float = 0.0
    congestion: tuple[tuple[float, float], ...] = ()
    defects: tuple[str, ...] = ()
    reason: str = ""
    spread_mm: float = 0.0
    smallest: Any = None  # pipeline.route.smallest.Smallest, outline mode "smallest" only

    @property
    def open(self) -> tuple[str, ...]:
        """The open nets (the name :func:`pipeline.verdict.decide` reads)."""
        return self.open_nets

    @property
    def label(self) -> str:
        """``routed``, ``open with N nets`` or ``skipped``."""
        if self.status == OPEN:
            return f"open with {len(self.open_nets)} net{'s' if len(self.open_nets) != 1 else ''}"
        return self.status

    def to_dict(self) -> dict[str, Any]:
        r = lambda v: None if v is None else round(float(v), 4)  # noqa: E731
        return {"status": self.status, "verdict": self.label, "open_nets": list(self.open_nets),
                "demand_peak_ratio": r(self.demand_peak), "demand_p90_ratio": r(self.demand_p90),
                "vias": self.vias, "wirelength_mm": r(self.wirelength_mm),
                "congestion_at": [[r(x), r(y)] for x, y in self.congestion],
                "defects": list(self.defects), "reason": self.reason, "spread_mm": r(self.spread_mm),
                **({"smallest_board": self.smallest.to_dict()} if self.smallest is not None else {})}


@dataclass(frozen=True)
class RouteOutcome:
    """Everything routing produced: verdict, the routing input, copper and the document."""

    verdict: RouteVerdict
    board: Any          # pipeline.route.board.RouteBoard
    routing: Any
    document: dict
    demand: Any = None  # pipeline.route.demand.Demand (the congestion map)


def skipped(reason: str) -> RouteVerdict:
    return RouteVerdict(SKIPPED, reason=reason)


def route_placed(outline, placements, design, library, rules: CopperRules, *, level: str = "nominal",
                 progress: Callable[[str, float], None] | None = None, keepouts=(),
                 time_budget_s: float | None = None) -> RouteOutcome:
    """Route a placed design on ``outline`` (shapely polygon, mm) and check it independently.

    ``keepouts``: polygons copper keeps off on every layer, passed to the
    router as holes (so ``routes.json`` lists them under ``holes`` too).
    ``time_budget_s``: seconds the pads, the demand and the router may
    take together (default ``rules.time_budget_s``); the independent check
    after them is not cut short.

    Cost: the router's (see :mod:`pipeline.route.router`) plus the check's
    O(n log n) in pieces of copper.
    """
    import time

    from ..copper import check_copper
    from ..export.routes import routes_dict
    from .demand import routing_demand
    from .pads import board_from_placement
    from .router import route_board

    start = time.monotonic()
    board = board_from_placement(outline, placements, design, library, rules.layer_names, keepouts, level=level)
    demand = routing_demand(board, rules)
    budget = (rules.time_budget_s if time_budget_s is None else time_budget_s) - (time.monotonic() - start)
    routing = route_board(board, rules, progress=progress, time_budget_s=max(budget, 0.0))
    doc = routes_dict(board, rules, routing)
    check = check_copper(doc)
    defects = tuple(p.message + f" (at {p.x:.2f}, {p.y:.2f} mm)" for p in check.except_open(routing.open))
    status = ROUTED if routing.status == ROUTED and check.clean else OPEN
    doc["status"] = status
    verdict = RouteVerdict(status, routing.open, demand.peak, demand.p90, len(routing.vias),
                           routing.wirelength_mm, routing.congestion, defects)
    return RouteOutcome(verdict, board, routing, doc, demand)


def route_fit(fit, items, region, options, design, library, rules: CopperRules, *, user_board=None,
              progress: Callable[[str, float], None] | None = None, arrange: Callable[[Any], Any] | None = None):
    """Route a fit; when it does not route, spread the parts and try again.

    Placement for routing by iterating placement and routing: the placer
    (:func:`pipeline.place.place_and_fit`, unchanged) places grown
    courtyards and each placement is routed; the first that routes wins,
    else the one with fewest open nets (:func:`spread_attempts` gives the
    order: the compact fit, uniform growth by ``SPREAD_STEPS`` pitches,
    then pin-side inflation by ``PIN_STEPS`` pitches (:mod:`.inflate`: room
    only on the sides facing the pins), which still places where uniform
    growth no longer does). A sequence stops at its first
    placement that does not place (larger growth places no better). A grown
    courtyard placed legally holds the true one at its centre, so the true
    placement is legal too. Returns ``(fit, RouteOutcome)`` with the fit
    whose placements were routed (true courtyards; the courtyard sum and
    estimate of the compact fit); ``spread_mm`` is the most mm added to a
    courtyard's length or width.

    ``rules.time_budget_s`` bounds all the attempts together: the compact
    fit's routing gets ``FIRST_SHARE`` of it, each later routing what the
    earlier ones left, and no further spread is tried (or, once placed,
    routed) once it is spent (the first attempt always runs).

    ``arrange`` (a fit to a fit with the same courtyards, e.g. the
    smallest-board search's half turns, :func:`pipeline.place_orient.orient_parts`)
    is applied to every placement before it is routed, the compact fit's and
    each spread one's alike; None routes them as placed (the default run).
    """
    import dataclasses
    import time

    from ..place import place_and_fit

    best, stopped = None, set()
    deadline = time.monotonic() + rules.time_budget_s
    for kind, grown in spread_attempts(items, library, options.density, rules.pitch_mm):
        if best is not None and time.monotonic() >= deadline:
            break
        if kind in stopped:
            continue
        if grown is None:
            f = fit
        else:
            spread = place_and_fit(grown, region, options, user_board=user_board)
            if not spread.fits:
                stopped.add(kind)
                continue
            f = dataclasses.replace(fit, placements=_true_courtyards(spread.placements, items),
                                    board_outline=spread.board_outline, wirelength_mm=spread.wirelength_mm)
        if arrange is not None:
            f = arrange(f)
        left = deadline - time.monotonic()
        if best is not None and left <= 0:
            break   # the re-placement spent what was left: no routing past the budget
        if grown is None:
            left *= FIRST_SHARE
        out = route_placed(f.board_outline, f.placements, design, library, rules, level=options.density,
                           progress=progress, keepouts=_head_rings(region), time_budget_s=left)
        m = _growth(grown, items)
        out = dataclasses.replace(out, verdict=dataclasses.replace(out.verdict, spread_mm=m))
        if best is None or len(out.verdict.open_nets) < len(best[1].verdict.open_nets):
            best = (f, out)
        if out.verdict.status == ROUTED:
            break
    return best


def spread_attempts(items, library, level: str, pitch_mm: float):
    """The placements route_fit tries, in order: ``(kind, grown items or None for the compact fit)``.

    Kinds: ``"compact"``, ``"uniform"`` (every courtyard grown by
    ``SPREAD_STEPS`` pitches in length and width) and ``"pins"``
    (:func:`pipeline.route.inflate.inflate` across the pin rows by each of
    ``PIN_STEPS`` pitches). Uniform growth comes first because on the
    60-part board of bench/bench_route.py pin-side placements left more
    nets open and, tried first, spent the time budget; pin-side growth adds
    about half the area, so it still places on the tight boards where
    uniform growth stops (the demo at 1.6 and 1.7 x the courtyard sum).
    Lazy: the grown items are built when asked.
    """
    import dataclasses

    from .inflate import inflate, pin_axes

    yield "compact", None
    for step in SPREAD_STEPS[1:]:
        m = step * pitch_mm
        yield "uniform", tuple(dataclasses.replace(it, length_mm=it.length_mm + m, width_mm=it.width_mm + m)
                               for it in items)
    axes = pin_axes(items, library, level)
    for s in PIN_STEPS:
        yield "pins", inflate(items, axes, s, pitch_mm)


def _growth(grown, items) -> float:
    """The most mm added to a courtyard's length or width (0 for the compact fit)."""
    if grown is None or not items:
        return 0.0
    return max(max(g.length_mm - it.length_mm, g.width_mm - it.width_mm) for g, it in zip(grown, items))


def _head_rings(region) -> tuple:
    """Mounting screws' head rings: copper keeps off them on every layer (pipeline/mount.py)."""
    from ..mount import circle

    return tuple(circle(m.x_mm, m.y_mm, m.ring_mm, outside=True) for m in getattr(region, "mounts", ()))


def _true_courtyards(placements, items):
    """Placements with each part's own courtyard rectangle at the same centre and turn."""
    import dataclasses

    from shapely.geometry import box

    size = {it.ref: (it.length_mm, it.width_mm) for it in items}
    out = []
    for p in placements:
        a, b = size[p.ref]
        if p.rotation_deg in (90, 270):
            a, b = b, a
        out.append(dataclasses.replace(p, courtyard=box(p.x_mm - a / 2, p.y_mm - b / 2, p.x_mm + a / 2, p.y_mm + b / 2)))
    return tuple(out)
