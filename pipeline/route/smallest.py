"""The smallest board that places and routes (issue 9, item 7): outline mode ``"smallest"``.

Entry point: :func:`smallest_board`.

Method (ours): for each of a few orientations ``ANGLES_DEG`` the usable
region's bounding rectangle in that orientation is shrunk about the region's
centroid by a factor ``t`` in (0, 1]; the candidate board is the region cut
by that rectangle (a plain rectangle wherever the region is convex). Its
area grows monotonically with ``t``, so a bisection on ``t`` (``STEPS``
halvings) finds the smallest candidate that places
(:func:`pipeline.place.place_and_fit` on it as the user's board) and routes
(:func:`pipeline.route.route_fit`, whose verdict needs the independent
copper check clean). The search starts at the board whose area equals the
courtyard sum (nothing smaller can hold the parts) and ends at the whole
region. The smallest routed board over all orientations wins; ties keep the
first angle. Deterministic.

Cost: ``len(ANGLES_DEG) x (STEPS + 2)`` placements and routings at most.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any, Callable

from shapely import affinity
from shapely.geometry import Polygon

__all__ = ["smallest_board", "Smallest", "ANGLES_DEG", "STEPS"]

#: Rectangle orientations tried, degrees (a rectangle repeats every 90 deg).
ANGLES_DEG = (0.0, 30.0, 60.0)
#: Bisection halvings of the shrink factor per orientation.
STEPS = 6


@dataclass(frozen=True)
class Smallest:
    """The search's answer: the board, its fit and routing, and its area against the courtyard sum."""

    fit: Any            # pipeline.model.FitResult on the smallest board
    outcome: Any        # pipeline.route.RouteOutcome
    board: Polygon
    angle_deg: float
    area_mm2: float
    ratio: float        # board area / courtyard sum
    tries: int
    shrink: float = 1.0       # the shrink factor of the found board
    failed_shrink: float = 0.0  # the last smaller factor that did not place and route (one step smaller)

    def to_dict(self) -> dict:
        return {"method": "region cut by a shrunk rectangle, bisection", "angle_deg": self.angle_deg,
                "area_mm2": round(self.area_mm2, 3), "ratio_to_courtyards": round(self.ratio, 4),
                "tries": self.tries}


def cut(region: Polygon, angle_deg: float, t: float) -> Polygon:
    """``region`` cut by its bounding rectangle at ``angle_deg`` shrunk by ``t`` about its centroid."""
    c = region.centroid
    turned = affinity.rotate(region, -angle_deg, origin=c)
    minx, miny, maxx, maxy = turned.bounds
    cx, cy = (minx + maxx) / 2, (miny + maxy) / 2
    hw, hh = (maxx - minx) * t / 2, (maxy - miny) * t / 2
    rect = Polygon([(cx - hw, cy - hh), (cx + hw, cy - hh), (cx + hw, cy + hh), (cx - hw, cy + hh)])
    board = affinity.rotate(rect, angle_deg, origin=c).intersection(region)
    if board.geom_type != "Polygon":  # keep the largest piece of a cut that splits the region
        board = max(getattr(board, "geoms", [Polygon()]), key=lambda g: g.area, default=Polygon())
    return board if isinstance(board, Polygon) else Polygon()


def smallest_board(fit, items, region, options, design, library, rules, *,
                   progress: Callable[[str, float], None] | None = None) -> Smallest | None:
    """Search the smallest board inside ``region.board_region`` that places and routes.

    ``fit`` is the compact fit on the whole region (its courtyard sum is the
    lower bound). Returns None when no candidate routes (not even the whole
    region).
    """
    from ..place import place_and_fit
    from . import ROUTED, route_fit

    whole = region.board_region
    floor = fit.courtyard_area_mm2
    best: Smallest | None = None
    tries = 0

    def attempt(angle: float, t: float):
        nonlocal tries
        tries += 1
        board = cut(whole, angle, t)
        if board.is_empty or board.area < floor:
            return None
        f = place_and_fit(items, region, options, user_board=board, improve=True)
        if not f.fits:
            return None
        f, out = route_fit(f, items, region, options, design, library, rules, user_board=board)
        return (f, out, board) if out.verdict.status == ROUTED else None

    for k, angle in enumerate(ANGLES_DEG):
        if progress is not None:
            progress(f"smallest board: orientation {angle:g} deg", k / len(ANGLES_DEG))
        minx, miny, maxx, maxy = affinity.rotate(whole, -angle, origin=whole.centroid).bounds
        lo, hi = math.sqrt(floor / ((maxx - minx) * (maxy - miny))), 1.0  # cut area <= t^2 x rectangle
        found = attempt(angle, hi)
        if found is None:
            continue
        for _ in range(STEPS):
            mid = (lo + hi) / 2
            got = attempt(angle, mid)
            if got is None:
                lo = mid
            else:
                hi, found = mid, got
        f, out, board = found
        if best is None or board.area < best.area_mm2 - 1e-9:
            best = Smallest(f, out, board, angle, board.area, board.area / floor if floor > 0 else math.inf, 0,
                            hi, lo)
    if best is None:
        return None
    from dataclasses import replace
    return replace(best, tries=tries)
