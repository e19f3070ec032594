"""Parts that must sit somewhere: the board edge by the wire entry, and near another part's pins.

Entry points (all called by :mod:`pipeline.place` and :mod:`pipeline.area`,
each at one line):

* :func:`attach_rules` - which placer items carry a rule (area step).
* :func:`pin_edge_parts` - the edge rule, applied *before* the packing.
* :func:`near_pass` - the near rule, applied *after* the packing and its
  swap improvement.
* :func:`unmet_rules` - what is left unmet, as ``blocked_by`` sentences
  and findings.

The rules (millimetres)
-----------------------
* **Edge.** Wire pads (kind ``wire-pad``) and connectors (kind ``header``),
  or any part with ``at_edge = true``, go inside the wire-entry zone (the
  courtyard centre in it) (layer
  role ``WIRE-ENTRY``, :attr:`pipeline.model.Region.wire_entry`) or else in
  the *edge band* nearest to it: courtyards within :data:`EDGE_BAND_MM` of
  the outer edge of the placement area (the board outline less its edge
  clearance; holes around keep-outs are not edges a wire can come over).
  With no zone drawn they go in the edge band, kept together.
  ``at_edge = false`` on a part switches the rule off for it.
* **Near.** A part with ``near = "U3"`` keeps one of its pads within
  ``within_mm`` (default :data:`NEAR_WITHIN_MM`) of one of U3's pads,
  distance between pad centres. By default every decoupling capacitor, as
  the connection check pairs them (:func:`pipeline.check.decoupling_caps`),
  keeps a pad within :data:`NEAR_WITHIN_MM` of the supply pins of its IC;
  a capacitor that pairs with several ICs (a shared supply) goes with the
  one nearest to it in the design's part order (ties: the earlier).

The method
----------
*Edge: pre-placement as fixed parts.* Before the packing, each edge part
(natural ref order) takes the best legal spot on a candidate grid of
courtyard centres (step :data:`EDGE_STEP_MM`, coarser on large boards so
at most about :data:`EDGE_CANDIDATES` centres) in both orientations. Legal:
the courtyard lies in the placement area and in the height zones that allow
its height, and overlaps no fixed or earlier edge part (exact shapely
tests, vectorised). Best, in tiers: centre inside the wire-entry zone
(nearest the edge first, then nearest the zone's middle), then in the edge band (nearest the zone first; with no zone,
nearest the edge parts already placed), then anywhere (nearest the zone or
edge; reported). The spot becomes a :class:`pipeline.model.Fixed`, so the
packer treats it as a part the user fixed. Cost: O(parts x candidates)
shapely predicates.

*Near: a post-pass that moves a part to the nearest legal slot.* After the
packing and the swap improvement (so the swaps cannot take the part away
again), each near part that is too far (natural ref order) is moved to the
free grid origin, among all legal ones of its height level in both
orientations, whose pads come nearest the target's pins; when no free
origin is near enough, it trades slots with the packed part of the same
cell size whose slot brings it nearest (both stay legal: the cells are the
same, and each must be allowed its height in the other's cells; a part
with a near rule of its own only when the trade still meets that rule). Legal origins come from
the packer's own window test over the blocked cells (outside the level's mask or under
another courtyard, counted once for the board and updated as parts move), so a move is legal on
the same grid the packer uses and the placer's shapely self-check still applies. The free
origins are searched in a window round the goal, widened only as far as the best trade found
allows (or, with no trade, until nothing outside can be nearer), read from free origins kept
for the whole board per height level and courtyard size and mended where a part moves; trades
are tried in order of a lower bound of their distance, ring by ring round the goal (12, 24,
48 mm ... by a cheaper bound from the courtyard centre, never past the best trade found or the
part's own distance), the bounds of a ring's candidates computed when it is read; partners whose
own near rule would surely break in the mover's slot (a bound from their goal's bounding box) are
dropped with vector operations before that. Cost: O(window cells + n) per moved part for n parts
(the n a few vector operations per ring over the size class), the window about the rule's
distance (the trade's) across.

Defaults (common practice, from memory)
---------------------------------------
:data:`NEAR_WITHIN_MM` = 3 mm: decoupling capacitors "within a few mm" of
the supply pins (REFERENCES.md section 7; application notes commonly ask
for under about 3 mm, from memory). :data:`EDGE_BAND_MM` = 1 mm: a courtyard
at most that far in from the edge still counts as at the edge (our own
figure; a soldered wire leaves over it).
"""

from __future__ import annotations

import bisect
import dataclasses
import math
from typing import Any, Sequence

import numpy as np
import shapely
from shapely.geometry.base import BaseGeometry

from .library.lands import board_xy, turned_pads
from .model import Finding, Fixed, NearRule, PlaceItem, Region
from .order import natural_key
from .values import format_mm as _fmt

__all__ = ["attach_rules", "pin_edge_parts", "near_pass", "unmet_rules", "near_distance", "refresh_near_notes",
           "slot_cells", "top_occupancy", "EDGE_KINDS", "EDGE_BAND_MM", "NEAR_WITHIN_MM", "EDGE_STEP_MM"]

#: Kinds that go to the board edge by the wire entry unless ``at_edge = false``.
EDGE_KINDS = ("wire-pad", "header")
#: A courtyard at most this far in from the placement area's outer edge is at the edge, mm (our own figure).
EDGE_BAND_MM = 1.0
#: Default near distance between pad centres, mm (common practice, from memory: "within a few mm").
NEAR_WITHIN_MM = 3.0
#: Candidate step of the edge pre-placement, mm.
EDGE_STEP_MM = 0.25
#: Most candidate centres per orientation the edge pre-placement looks at.
EDGE_CANDIDATES = 40_000
#: Geometric tolerance, mm.
TOL = 1e-6
#: The near pass's swap search first looks at parts with a pad this near the goal, mm (a search
#: step, not a rule: farther parts are looked at when none of these will do).
SWAP_REACH_MM = 12.0


# --------------------------------------------------------------------------
# which items carry a rule
# --------------------------------------------------------------------------
def attach_rules(items: Sequence[PlaceItem], design: Any, library: Any, density: str) -> tuple[PlaceItem, ...]:
    """``items`` with ``edge`` and ``near`` set from the design (module notes: the rules).

    Cost: one connectivity graph of the design and O(ICs x caps).
    """
    from .check import decoupling_caps
    from .graph import build_graph, pin_nets

    parts = {p.ref: p for p in design.parts}
    pkg = {it.ref: library.package(it.package) for it in items}
    g = build_graph(design)
    own = {k.name: k.category for k in design.kinds}  # kinds the design defines itself
    cat = {p.kind: own[p.kind] if p.kind in own else library.kind(p.kind).category for p in design.parts}
    decap = _decoupling_targets(design, decoupling_caps(design, g, cat), set(pkg))
    out = []
    for it in items:
        part = parts[it.ref]
        ask = part.ask
        edge = part.kind in EDGE_KINDS if ask is None or ask.at_edge is None else ask.at_edge
        near = None
        if ask is not None and ask.near and ask.near in pkg:
            near = NearRule(ask.near, (), ask.within_mm or NEAR_WITHIN_MM, "near", pkg[it.ref], pkg[ask.near],
                            density, ask.file, ask.line)
        elif it.ref in decap:
            ic = decap[it.ref]
            mine = {n for ns in pin_nets(g, it.ref).values() for n in ns}
            pins = tuple(p.number for p in parts[ic].pins if p.role == "supply"
                         and set(pin_nets(g, ic).get(p.number, ())) & mine)
            near = NearRule(ic, pins, NEAR_WITHIN_MM, "decoupling", pkg[it.ref], pkg[ic], density)
        out.append(dataclasses.replace(it, edge=bool(edge), near=near))
    return tuple(out)


def _decoupling_targets(design: Any, pairs: dict[str, tuple[str, ...]], fitted: set[str]) -> dict[str, str]:
    """cap ref -> the one IC it decouples: the paired IC nearest in part order (ties: the earlier).

    ICs with the same caps (those on the same supply nets) form one group, so each distinct list
    of caps is walked once, not once per IC (every IC pairs with every cap on shared rails:
    O(ICs x caps) at 16,000 parts, issue 11); the caps in the same groups share one sorted list of
    the groups' ICs and each cap finds its nearest by bisection. Cost: O(ICs + distinct cap lists'
    lengths + caps x log ICs)."""
    index = {p.ref: n for n, p in enumerate(design.parts)}
    groups: dict[tuple[str, ...], list[int]] = {}  # caps -> part positions of the fitted ICs pairing them
    for ic, caps in pairs.items():
        if ic in fitted:
            groups.setdefault(tuple(caps), []).append(index[ic])
    in_groups: dict[str, list[int]] = {}  # cap -> numbers of the groups that hold it
    for k, caps in enumerate(groups):
        for c in caps:
            if c in fitted:
                in_groups.setdefault(c, []).append(k)
    lists = list(groups.values())
    ordered: dict[tuple[int, ...], list[int]] = {}
    parts = design.parts
    out = {}
    for c, ks in in_groups.items():
        at = ordered.get(tuple(ks))
        if at is None:
            at = ordered[tuple(ks)] = sorted(n for k in ks for n in lists[k])
        k = bisect.bisect_left(at, index[c])  # the nearest is one of the two either side
        out[c] = parts[min(at[max(k - 1, 0):k + 1], key=lambda n: (abs(n - index[c]), n))].ref
    return out


# --------------------------------------------------------------------------
# the edge rule: pre-placement
# --------------------------------------------------------------------------
def _outer_edge(area: BaseGeometry) -> BaseGeometry:
    return shapely.union_all([shapely.get_exterior_ring(p) for p in shapely.get_parts(area)])


def _allowed(area: BaseGeometry, region: Region, height: float) -> BaseGeometry:
    """Where a top-side part of ``height`` may stand (area and the height zones that allow it)."""
    if not region.zones:
        return area
    ok = [z.polygon for z in region.zones if z.max_height_mm >= height - 1e-9]
    if not ok:
        return shapely.Polygon()
    u = shapely.union_all(ok).buffer(1e-7, join_style="mitre").buffer(-1e-7, join_style="mitre")
    return area.intersection(u)


def _candidates(area: BaseGeometry, dx: float, dy: float) -> tuple[np.ndarray, np.ndarray]:
    minx, miny, maxx, maxy = area.bounds
    span = max(maxx - minx, 1e-9) * max(maxy - miny, 1e-9)
    step = max(EDGE_STEP_MM, math.sqrt(span / EDGE_CANDIDATES))
    xs = np.arange(minx + dx / 2, maxx - dx / 2 + 1e-9, step)
    ys = np.arange(miny + dy / 2, maxy - dy / 2 + 1e-9, step)
    gx, gy = np.meshgrid(xs, ys)
    return gx.ravel(), gy.ravel()


def pin_edge_parts(items: Sequence[PlaceItem], fixed: dict, area: BaseGeometry, region: Region
                   ) -> tuple[tuple[PlaceItem, ...], dict, list[Finding]]:
    """Pre-place the edge parts as fixed parts (module notes: the method).

    Parameters
    ----------
    items : sequence of PlaceItem
    fixed : dict
        ``item -> (side, (x1, y1, x2, y2))`` of the parts the user fixed.
    area : geometry
        The placement area (board less its edge clearance), mm.
    region : Region
        Height zones and the wire-entry zone.

    Returns
    -------
    (items, fixed, findings)
        Items with the pre-placed ones fixed, ``fixed`` with them added, and
        a ``place.rule-unmet`` warning for each part that found no place in
        the zone or the edge band.
    """
    todo = sorted((i for i, it in enumerate(items) if it.edge and it.fixed is None and i not in fixed),
                  key=lambda i: natural_key(items[i].ref))
    if not todo or area.is_empty:
        return tuple(items), fixed, []
    items, fixed = list(items), dict(fixed)
    zone = region.wire_entry
    taken = [fixed[j][1] for j in fixed if fixed[j][0] == "top"]
    notes: list[Finding] = []
    placed: list[tuple[float, float]] = []
    spots: dict[tuple, tuple | None] = {}  # candidate spots by courtyard size and height (computed once)
    struck: dict[tuple, list] = {}  # per key: [spots no taken courtyard covers, taken courtyards applied]
    for i in todo:
        it = items[i]
        key = (it.length_mm, it.width_mm, it.height_mm)
        if key not in spots:
            spots[key] = _spots(it, _allowed(area, region, it.height_mm), _outer_edge(area), zone)
            struck[key] = [None if spots[key] is None else np.ones(len(spots[key][0]), dtype=bool), 0]
        best = _best_edge_spot(spots[key], taken, placed, zone is not None, struck[key])
        if best is None:
            notes.append(Finding("warning", "place.rule-unmet", (it.ref,),
                                 f"{it.ref} should sit at the board edge {_by(zone)}, but its courtyard fits "
                                 "nowhere beside the parts fixed there; it is placed with the other parts.",
                                 kind="edge"))
            continue
        tier, x, y, rot, far = best
        rect = _rect(it, x, y, rot)
        items[i] = dataclasses.replace(it, fixed=Fixed(x, y, rot, "top", "", 0))
        fixed[i] = ("top", rect)
        taken.append(rect)
        placed.append((x, y))
        if tier == 2:
            notes.append(Finding("warning", "place.rule-unmet", (it.ref,),
                                 f"{it.ref} should sit at the board edge {_by(zone)} (edge rule), but no room "
                                 f"is left there: it ended {_fmt(far)} mm from "
                                 + ("the zone." if zone is not None else "the edge band."), kind="edge"))
    return tuple(items), fixed, notes


def _by(zone) -> str:
    return "nearest the wire-entry zone" if zone is not None else "(no wire-entry zone is drawn)"


def _rect(it: PlaceItem, x: float, y: float, rot: int) -> tuple[float, float, float, float]:
    dx, dy = (it.length_mm, it.width_mm) if rot in (0, 180) else (it.width_mm, it.length_mm)
    return (x - dx / 2, y - dy / 2, x + dx / 2, y + dy / 2)


def _edge_distance(edge: BaseGeometry, boxes: np.ndarray) -> np.ndarray:
    """``shapely.distance(edge, boxes)`` (mm) for the lines ``edge``: the distance to the nearest of
    its segments, found in an STRtree of the segments (the same GEOS segment distances, so the same
    figures; a 558-vertex edge and 40,000 boxes took 1.2 s instead of 1.6 s here). Cost:
    O(boxes x log segments)."""
    segs = []
    for line in shapely.get_parts(edge):
        c = shapely.get_coordinates(line)
        segs.append(shapely.linestrings(np.stack((c[:-1], c[1:]), axis=1)))
    (at, _seg), d = shapely.STRtree(np.concatenate(segs)).query_nearest(boxes, return_distance=True,
                                                                        all_matches=False)
    out = np.full(len(boxes), np.inf)
    out[at] = d
    return out


def _spots(it: PlaceItem, allowed: BaseGeometry, edge: BaseGeometry, zone) -> tuple | None:
    """Every legal candidate centre of ``it`` on an empty board: (x, y, rotation, boxes, tier,
    distance to the edge, distance to the zone or None), in both orientations."""
    if allowed.is_empty:
        return None
    shapely.prepare(allowed)
    cols: list[list] = [[] for _ in range(7)]
    for rot in ((0, 90) if abs(it.length_mm - it.width_mm) > TOL else (0,)):
        dx, dy = (it.length_mm, it.width_mm) if rot == 0 else (it.width_mm, it.length_mm)
        x, y = _candidates(allowed, dx, dy)
        if not len(x):
            continue
        boxes = shapely.box(x - dx / 2, y - dy / 2, x + dx / 2, y + dy / 2)
        ok = shapely.covers(allowed, boxes)
        x, y, boxes = x[ok], y[ok], boxes[ok]
        de = np.round(_edge_distance(edge, boxes), 6)
        dz = np.round(shapely.distance(zone, boxes), 6) if zone is not None else np.full(len(x), np.inf)
        if zone is not None:
            inside = shapely.contains_xy(zone, x, y)
            tier = np.where(inside, 0, np.where(de <= EDGE_BAND_MM + TOL, 1, 2))
            c = zone.centroid  # inside the zone: nearest the edge, then nearest its middle
            dz = np.where(inside, np.round(np.hypot(x - c.x, y - c.y), 6), dz)
        else:
            tier = np.where(de <= EDGE_BAND_MM + TOL, 1, 2)
        for c, v in zip(cols, (x, y, np.full(len(x), rot), boxes, tier, de, dz)):
            c.append(v)
    if not cols[0]:
        return None
    x, y, rot, boxes, tier, de, dz = (np.concatenate(c) for c in cols)
    return x, y, rot, boxes, tier, de, dz, shapely.STRtree(boxes)


def _best_edge_spot(spots, taken: list, placed: list, has_zone: bool, struck: list):
    """(tier, x, y, rotation, distance) of the best free candidate, or None (module notes: tiers).

    ``struck`` is ``[free, n]``: the spots none of ``taken[:n]`` covers, kept between calls, so each
    taken courtyard is looked up in the spots' tree once, not once per later part (updated here;
    :func:`_tier_spots` appends the spots of each tier)."""
    if spots is None:
        return None
    x, y, rot, boxes, tier, de, dz, tree = spots
    free, done = struck[0], struck[1]
    if len(taken) > done:
        r = np.array(taken[done:], dtype=float).reshape(-1, 4) + np.array([1e-7, 1e-7, -1e-7, -1e-7])
        # (touching is legal)
        shrunk = shapely.box(*r.T)
        _, hit = tree.query(shrunk, predicate="intersects")
        free[hit] = False
        struck[1] = len(taken)
    # the first sort key first: the free spots of the best tier that has any (each tier's spots
    # kept ascending, so only the tiers up to that one are read, not every spot)
    tiers = _tier_spots(tier, struck)
    idx = next((sub for sub in (t[free[t]] for t in tiers) if len(sub)), None)
    if idx is None:
        return None
    x, y, rot, tier, de, dz = x[idx], y[idx], rot[idx], tier[idx], de[idx], dz[idx]
    if has_zone:
        score, far = np.where(tier == 0, de + 1e-3 * dz, dz), dz
    else:
        far = de
        score = de
        if placed:
            cx, cy = np.mean(placed, axis=0)
            score = np.where(tier == 1, np.round(np.hypot(x - cx, y - cy), 6), de)
    k = _lex_first(score, lambda k: np.round(y[k], 6), lambda k: np.round(x[k], 6), rot)
    return int(tier[k]), float(x[k]), float(y[k]), int(rot[k]), float(far[k])


def _tier_spots(tier: np.ndarray, struck: list) -> list[np.ndarray]:
    """The spot indices of each tier present, best tier first, ascending within a tier; kept in
    ``struck`` (its third item) after the first call."""
    if len(struck) < 3:
        struck.append([np.flatnonzero(tier == t) for t in np.unique(tier).tolist()])
    return struck[2]


def _lex_first(*keys) -> int:
    """``np.lexsort(keys[::-1])[0]``: the index with the smallest first key, ties broken by the
    next keys, then by index (lexsort is stable), found by narrowing to each key's minimum in turn
    (linear, not a sort of every candidate per part). A key is an array or a function of indices."""
    idx = np.arange(len(keys[0]))
    for key in keys:
        v = key(idx) if callable(key) else key[idx]
        idx = idx[v == v.min()]
        if len(idx) == 1:
            break
    return int(idx[0])


# --------------------------------------------------------------------------
# the near rule: a post-pass on the packer's grid
# --------------------------------------------------------------------------
def _points(rule: NearRule, own: bool, x: float, y: float, rot: int, side: str, pins=()) -> np.ndarray:
    """Board positions (mm, to 1 nm) of the own or the target package's pads (only ``pins`` when
    given) for a part at (``x``, ``y``): :func:`pads_on_board`'s positions, without building pads."""
    pkg = rule.own_package if own else rule.target_package
    pts = [board_xy(x, y, dx, dy) for pad, dx, dy, _t in turned_pads(pkg, rot, side, rule.level)
           if not pins or pad.number in pins]
    return np.array(pts, dtype=float).reshape(-1, 2)


def near_distance(rule: NearRule, own_at: tuple, target_at: tuple) -> float:
    """Nearest distance between this part's pad centres and the target's ``pins`` (all: empty), mm.

    ``own_at`` and ``target_at`` are ``(x, y, rotation, side)`` of the two
    placements (courtyard centres).
    """
    a = _points(rule, True, *own_at)
    b = _points(rule, False, *target_at, pins=rule.pins)
    if not len(a) or not len(b):
        return 0.0
    return float(np.min(np.hypot(a[:, None, 0] - b[None, :, 0], a[:, None, 1] - b[None, :, 1])))


def cells_of(g, rect) -> tuple[int, int, int, int]:
    """Rows and columns ``(r0, r1, c0, c1)`` of the grid ``g`` a rectangle ``(x1, y1, x2, y2)`` covers (rounded out)."""
    x1, y1, x2, y2 = rect
    c0 = int(math.floor((x1 - g.x0) / g.cell + 1e-9))
    c1 = int(math.ceil((x2 - g.x0) / g.cell - 1e-9))
    r0 = int(math.floor((y1 - g.y0) / g.cell + 1e-9))
    r1 = int(math.ceil((y2 - g.y0) / g.cell - 1e-9))
    return max(r0, 0), max(r1, 0), max(c0, 0), max(c1, 0)


def slot_cells(packer: Any, i: int, slot) -> tuple[int, int, int, int]:
    """Rows and columns ``(r0, r1, c0, c1)`` of ``packer``'s grid that item ``i``'s courtyard covers
    in ``slot`` (:func:`cells_of` of its rectangle)."""
    return cells_of(packer.grid, packer.rect(i, slot))


def top_occupancy(packer: Any, run: Any, fixed: dict) -> np.ndarray:
    """How many courtyards cover each top-side cell of ``packer``'s grid: the packed parts of ``run``
    and the ``fixed`` parts (``ref -> (side, rect)``). The one count the near pass and the spreading
    pass (:mod:`pipeline.place_spread`) start from. Cost O(cells covered)."""
    g = packer.grid
    occ = np.zeros((g.ny, g.nx), dtype=np.int32)
    cells = [slot_cells(packer, j, slot) for j, slot in run.slots.items() if slot[0] == "top"]
    cells += [cells_of(g, rect) for side, rect in fixed.values() if side == "top"]
    for r0, r1, c0, c1 in cells:
        occ[r0:r1, c0:c1] += 1
    return occ


def _where(packer, run, fixed: dict, i: int) -> tuple | None:
    """(x, y, rotation, side) of item ``i`` as placed, or None when it is not."""
    if i in fixed:
        f = packer.items[i].fixed
        return (f.x_mm, f.y_mm, f.rotation_deg, f.side)
    if i not in run.slots:
        return None
    x1, y1, x2, y2 = packer.rect(i, run.slots[i])
    return ((x1 + x2) / 2, (y1 + y2) / 2, 90 if run.slots[i][1] else 0, run.slots[i][0])


class _TopBoard:
    """The near pass's view of the packer's top side, kept up to date as parts move.

    ``occ`` counts the top-side courtyards (packed and fixed) over each grid
    cell, so a part's blocked cells are its level's closed cells plus every
    cell another courtyard covers, read in a window instead of rebuilt for
    the whole board per moved part; ``row``, ``col``, ``turn``, ``top`` hold
    each item's slot as arrays for the swap search. ``origins`` keeps, per
    (height level, courtyard rows, columns), the board's free origins with
    every courtyard counted (the packer's window test over the whole board,
    once) and mends the few origins a move touches, so a wide search window
    is a slice, not a new window test over its cells (issue 11).
    """

    def __init__(self, packer: Any, run: Any, fixed: dict) -> None:
        g = packer.grid
        self.packer, self.run, self.g = packer, run, g
        n = len(packer.items)
        self.row = np.zeros(n, dtype=np.int64)
        self.col = np.zeros(n, dtype=np.int64)
        self.turn = np.zeros(n, dtype=np.int64)
        self.top = np.zeros(n, dtype=bool)
        self.wc, self.hc = np.asarray(packer.wc), np.asarray(packer.hc)
        self.index = {it.ref: k for k, it in enumerate(packer.items)}
        self.goals: dict[tuple, tuple] = {}
        self.reach: dict[int, float] = {}  # item -> farthest pad offset (pad_reach)
        self.maps: dict[tuple[int, int, int], np.ndarray] = {}  # (level, h, w) -> free origins
        self.fixed = fixed
        self._partners: _Partners | None = None  # the swap search's view of the near rules (partners)
        self.occ = top_occupancy(packer, run, fixed)
        for j, slot in run.slots.items():
            self._record(j, slot)

    def _record(self, j: int, slot) -> None:
        self.row[j], self.col[j], self.turn[j], self.top[j] = slot[2], slot[3], slot[1], slot[0] == "top"

    def _put(self, j: int, slot, add: int) -> None:
        self._record(j, slot)
        if slot[0] == "top":
            r0, r1, c0, c1 = slot_cells(self.packer, j, slot)
            self.occ[r0:r1, c0:c1] += add
            for (lvl, h, w), ok in self.maps.items():  # origins whose courtyard covers a changed cell
                a0, a1 = max(0, r0 - h + 1), min(ok.shape[0], r1)
                b0, b1 = max(0, c0 - w + 1), min(ok.shape[1], c1)
                if a1 > a0 and b1 > b0:
                    ok[a0:a1, b0:b1] = _window_test(self._free(lvl, slice(a0, a1 + h - 1), slice(b0, b1 + w - 1)), h, w)

    def _free(self, lvl: int, rows: slice, cols: slice) -> np.ndarray:
        """Cells of the window inside level ``lvl``'s mask and under no top-side courtyard."""
        return self.packer.mask(lvl)[rows, cols] & (self.occ[rows, cols] == 0)

    def origins(self, i: int, h: int, w: int, span: tuple[int, int, int, int]) -> np.ndarray:
        """Origins (rows ``span[0]:span[1]``, columns ``span[2]:span[3]``, inside the board's
        ``ny - h + 1`` by ``nx - w + 1`` origins) where item ``i``'s ``h`` x ``w`` courtyard covers
        only cells :meth:`free` for it: the kept whole-board origins of its level, with those whose
        courtyard meets ``i``'s own recomputed without it (a read-only view of the kept origins when
        none does). Cost: the window test over ``i``'s own courtyard grown by ``h`` x ``w``, plus a
        copy of the window's cells when that meets the window."""
        lvl = self.run.top_level[i]
        r0, r1, c0, c1 = span
        ok = self.maps.get((lvl, h, w))
        if ok is None:
            g = self.g
            ok = self.maps[(lvl, h, w)] = _window_test(self._free(lvl, slice(0, g.ny), slice(0, g.nx)), h, w)
        ok = ok[r0:r1, c0:c1]  # a view: copied only when i's own courtyard meets the window
        slot = self.run.slots[i]
        if slot[0] == "top":
            e0, e1, f0, f1 = slot_cells(self.packer, i, slot)
            a0, a1 = max(r0, e0 - h + 1), min(r1, e1)
            b0, b1 = max(c0, f0 - w + 1), min(c1, f1)
            if a1 > a0 and b1 > b0:
                ok = ok.copy()
                ok[a0 - r0:a1 - r0, b0 - c0:b1 - c0] = _window_test(
                    self.free(i, slice(a0, a1 + h - 1), slice(b0, b1 + w - 1)), h, w)
        return ok

    def pad_reach(self, j: int) -> float:
        """The farthest pad offset (mm, from the origin) of item ``j``'s near-rule package, kept per item."""
        kept = self.reach.get(j)
        if kept is None:
            rule = self.packer.items[j].near
            kept = self.reach[j] = max((math.hypot(dx, dy) for _p, dx, dy, _t in
                                        turned_pads(rule.own_package, 0, "top", rule.level)), default=0.0)
        return kept

    def goal(self, rule: NearRule, at: tuple) -> np.ndarray:
        """:func:`_points` of ``rule``'s target pins with the target at ``at`` (x, y, rotation, side),
        kept per (rule, place): many parts share a target, and the swap search asks once per candidate."""
        key = (id(rule), at)
        kept = self.goals.get(key)
        if kept is None or kept[0] is not rule:
            kept = self.goals[key] = (rule, _points(rule, False, *at, pins=rule.pins))
        return kept[1]

    def move(self, j: int, slot) -> None:
        """Put item ``j`` in ``slot`` (``run.slots`` too)."""
        self._put(j, self.run.slots[j], -1)
        self.run.slots[j] = slot
        self._put(j, slot, 1)
        if self._partners is not None:
            self._partners.moved(j)

    @property
    def partners(self) -> "_Partners":
        """The near rules of the swap partners as arrays (:class:`_Partners`), made on first use."""
        if self._partners is None:
            self._partners = _Partners(self)
        return self._partners

    def free(self, i: int, rows: slice, cols: slice) -> np.ndarray:
        """Cells of the window ``rows`` x ``cols`` that item ``i`` may cover: inside its level's mask
        and under no other top-side courtyard (its own does not count: inside its own courtyard a
        cell is free when only one courtyard covers it). One boolean array per call, no copy of
        the counts."""
        ok = self._free(self.run.top_level[i], rows, cols)
        slot = self.run.slots[i]
        if slot[0] == "top":
            r0, r1, c0, c1 = slot_cells(self.packer, i, slot)
            r0, r1 = max(r0, rows.start), min(r1, rows.stop)
            c0, c1 = max(c0, cols.start), min(c1, cols.stop)
            if r1 > r0 and c1 > c0:
                mine = (slice(r0 - rows.start, r1 - rows.start), slice(c0 - cols.start, c1 - cols.start))
                ok[mine] = self.packer.mask(self.run.top_level[i])[r0:r1, c0:c1] & (self.occ[r0:r1, c0:c1] <= 1)
        return ok


def near_pass(packer: Any, run: Any, fixed: dict) -> None:
    """Move each packed part whose near rule is unmet to its nearest legal slot (module notes).

    ``packer`` and ``run`` are :mod:`pipeline.place`'s packer and packing
    run (``run.slots`` is updated); ``fixed`` its fixed parts. Only top-side
    parts move; fixed parts never do.
    """
    items = packer.items
    board = _TopBoard(packer, run, fixed)
    index = board.index
    movers = sorted((i for i, it in enumerate(items) if it.near is not None and i in run.slots
                     and run.slots[i][0] == "top" and run.top_level.get(i) is not None),
                    key=lambda i: natural_key(items[i].ref))
    for i in movers:
        rule = items[i].near
        target = _where(packer, run, fixed, index[rule.target])
        if target is None or near_distance(rule, _where(packer, run, fixed, i), target) <= rule.within_mm + TOL:
            continue
        goal = board.goal(rule, target)
        here = round(_slot_distance(packer, i, run.slots[i], goal), 6)  # a free slot farther than here or
        swap = _nearest_swap(board, fixed, i, goal, here)
        limit = here if swap is None else max(rule.within_mm + TOL, swap[0])  # than the trade loses
        free = _nearest_slot(board, i, goal, limit)
        if free is not None and free[0] <= limit:
            board.move(i, free[1])
        elif swap is not None:
            j = swap[1]
            si, sj = run.slots[i], run.slots[j]
            board.move(i, sj)
            board.move(j, si)


def _slot_distance(packer, i: int, slot, goal: np.ndarray) -> float:
    """Nearest distance from item ``i``'s pads in ``slot`` to ``goal``: :func:`_points` at the
    slot's centre (the same :func:`board_xy` positions)."""
    x1, y1, x2, y2 = packer.rect(i, slot)
    rule = packer.items[i].near
    cx, cy = (x1 + x2) / 2, (y1 + y2) / 2
    turned = turned_pads(rule.own_package, 90 if slot[1] else 0, slot[0], rule.level)
    own = [board_xy(cx, cy, dx, dy) for _p, dx, dy, _t in turned]
    # numpy's hypot on each pair, as near_distance's array does (the same floats), without building
    # arrays for two to eight pairs: the swap search asks this for every candidate it reads
    return float(min(np.hypot(px - tx, py - ty) for px, py in own for tx, ty in goal.tolist()))


def _far_for(board: _TopBoard, j: int, slot, goal: np.ndarray, limit: float) -> bool:
    """Whether :func:`_slot_distance` of item ``j`` in ``slot`` to ``goal`` surely exceeds ``limit``
    (mm): a lower bound by the triangle inequality, the distance from the slot's centre to the
    nearest goal point less the farthest pad offset of ``j``'s package (a turn keeps the offsets'
    lengths) and 1e-5 mm for the pads' rounding to the nanometre. Cost O(goal points), no pads
    laid out: the swap search rejects most partners with a near rule of their own this way."""
    x1, y1, x2, y2 = board.packer.rect(j, slot)
    cx, cy = (x1 + x2) / 2, (y1 + y2) / 2
    near = min(math.hypot(cx - tx, cy - ty) for tx, ty in goal.tolist())
    return near - board.pad_reach(j) - 1e-5 > limit


def _stands(packer, run, k: int, slot) -> bool:
    """May item ``k`` stand in ``slot`` as far as heights go (its level's free cells cover it)?"""
    lvl = run.top_level.get(k)
    if lvl is None:
        return False
    r0, r1, c0, c1 = slot_cells(packer, k, slot)
    return bool(packer.mask(lvl)[r0:r1, c0:c1].all())


def _swap_candidates(board: _TopBoard, i: int) -> np.ndarray:
    """Every packed top-side part of ``i``'s cell size, ``i`` left out, ascending. Cost O(n)."""
    cand = np.flatnonzero(board.top & (board.wc == board.wc[i]) & (board.hc == board.hc[i]))
    return cand[cand != i]  # top is set only for items in run.slots


def _swap_bounds(board: _TopBoard, i: int, goal: np.ndarray, cand: np.ndarray) -> np.ndarray:
    """For each of the items ``cand``, a lower bound of the distance from ``i``'s pads in its slot to
    ``goal``: :func:`_slot_distance` for all of them at once with numpy (its rounding to the
    nanometre may differ in the last bit), less 1e-9 mm."""
    packer, g = board.packer, board.g
    it = packer.items[i]
    turned = board.turn[cand] != 0
    x = g.x0 + board.col[cand] * g.cell
    y = g.y0 + board.row[cand] * g.cell
    cx = (x + (x + np.where(turned, it.width_mm, it.length_mm))) / 2
    cy = (y + (y + np.where(turned, it.length_mm, it.width_mm))) / 2
    low = np.full(len(cand), np.inf)
    for t in (0, 1):
        sel = np.flatnonzero(turned == bool(t))
        offs = np.array([(dx, dy) for _p, dx, dy, _t in turned_pads(it.near.own_package, 90 * t, "top", it.near.level)],
                        dtype=float).reshape(-1, 2)
        if not len(sel) or not len(offs) or not len(goal):
            continue
        px = np.round(cx[sel, None] + offs[None, :, 0], 6)[:, :, None]  # candidate, pad, goal point
        py = np.round(cy[sel, None] + offs[None, :, 1], 6)[:, :, None]
        low[sel] = np.hypot(px - goal[None, None, :, 0], py - goal[None, None, :, 1]).min(axis=(1, 2))
    return low - 1e-9


def _box_distance(cx: np.ndarray, cy: np.ndarray, box) -> np.ndarray:
    """Distance (mm) from each point (``cx``, ``cy``) to the axis-aligned box ``(x1, y1, x2, y2)``
    (columns of an array, or one box for every point): 0 inside, else to its nearest side or corner;
    at most the distance to any point in the box."""
    b = np.asarray(box, dtype=float)
    ex = np.maximum(np.maximum(b[..., 0] - cx, cx - b[..., 2]), 0.0)
    ey = np.maximum(np.maximum(b[..., 1] - cy, cy - b[..., 3]), 0.0)
    return np.hypot(ex, ey)


def _swap_order(board: _TopBoard, i: int, goal: np.ndarray, drop=None, cut=lambda: math.inf):
    """The swap candidates of ``i`` (:func:`_swap_candidates`) ring by ring, as ``(items, bounds)``
    arrays each in the order of ``np.lexsort((items, bounds))`` (:func:`_swap_bounds`), lazily.

    A ring is read by a cheap lower bound of every candidate's bound (its courtyard centre's
    distance to the goal's bounding box less the farthest pad offset of ``i``'s package and 1e-5 mm
    for the pads' rounding, O(n) vector operations once): first the candidates whose cheap bound is
    within :data:`SWAP_REACH_MM`, then within twice that, and so on, and never one whose cheap
    bound is past ``cut()`` (the caller's best trade so far, mm: such a candidate is never taken).
    A ring yields the candidates read whose bound lies past the earlier rings' reach and within its
    own, so every bound of a ring is at least every bound of the rings before it; the last ring
    (its reach past every cheap bound or past ``cut()``) yields all the rest read. Each
    candidate's bound is computed once, when it is first read, and only when ``drop`` (a function
    of an array of items, True for the ones never to be yielded) keeps it. The caller stops at its
    first bound past the best trade, so most searches sort one ring, not the size class. Cost: O(n)
    array work per ring plus the bounds and sorting of the candidates read."""
    cand = _swap_candidates(board, i)
    g, it = board.g, board.packer.items[i]
    turned = board.turn[cand] != 0
    cx = g.x0 + board.col[cand] * g.cell + np.where(turned, it.width_mm, it.length_mm) / 2
    cy = g.y0 + board.row[cand] * g.cell + np.where(turned, it.length_mm, it.width_mm) / 2
    cheap = _box_distance(cx, cy, (*goal.min(axis=0), *goal.max(axis=0))) - board.pad_reach(i) - 1e-5
    top = float(cheap.max()) if len(cand) else -math.inf
    low = np.full(len(cand), np.nan)
    gone = np.zeros(len(cand), dtype=bool)
    lo_cut, reach = -math.inf, SWAP_REACH_MM
    while True:
        now = cut() + 1e-6
        last = reach >= top or now <= reach
        new = np.flatnonzero(np.isnan(low) & (cheap <= min(reach, now)))
        if drop is not None and len(new):
            out = drop(cand[new])
            gone[new[out]] = True
            low[new[out]] = np.inf
            new = new[~out]
        low[new] = _swap_bounds(board, i, goal, cand[new])
        hi = math.inf if last else reach - 1e-6
        ring = ~np.isnan(low) & ~gone & (low > lo_cut) & (low <= hi)
        order = np.lexsort((cand[ring], low[ring]))
        yield cand[ring][order], low[ring][order]
        if last:
            return
        lo_cut, reach = hi, 2 * reach


class _Partners:
    """The near rules of the swap search's partners as arrays, so a ring of candidates whose own rule
    would surely break in the mover's slot is turned down with a few vector operations instead of
    one :func:`_far_for` per candidate (77 per mover at 16,000 parts, issue 11).

    Per item with a near rule: its target (``tgt``, -1 for none), its limit (``within_mm`` plus
    :data:`TOL`), its farthest pad offset (:meth:`_TopBoard.pad_reach`) and the bounding box of its
    goal points (:meth:`_TopBoard.goal` at the target's place), the last two worked out when the item
    is first a candidate and the box again after its target moved (:meth:`moved`)."""

    def __init__(self, board: _TopBoard) -> None:
        items = board.packer.items
        n = len(items)
        self.board = board
        self.tgt = np.full(n, -1, dtype=np.int64)
        self.limit = np.zeros(n)
        self.length = np.array([it.length_mm for it in items], dtype=float)
        self.width = np.array([it.width_mm for it in items], dtype=float)
        self.reach = np.zeros(n)
        self.box = np.full((n, 4), np.nan)  # goal box (x1, y1, x2, y2); NaN: not worked out yet
        self.by_target: dict[int, list[int]] = {}
        for j, it in enumerate(items):
            if it.near is not None:
                t = board.index[it.near.target]
                self.tgt[j], self.limit[j] = t, it.near.within_mm + TOL
                self.by_target.setdefault(t, []).append(j)

    def moved(self, k: int) -> None:
        """Item ``k`` moved: the goal boxes of the items whose target it is are stale."""
        for j in self.by_target.get(k, ()):
            self.box[j] = np.nan

    def _fill(self, js: np.ndarray) -> None:
        board = self.board
        for j in js.tolist():
            rule = board.packer.items[j].near
            there = _where(board.packer, board.run, board.fixed, int(self.tgt[j]))
            pts = board.goal(rule, there) if there is not None else np.zeros((0, 2))
            # no place or no goal point: the exact test turns the partner down, so does the box
            self.box[j] = (*pts.min(axis=0), *pts.max(axis=0)) if len(pts) else (np.inf, np.inf, -np.inf, -np.inf)
            self.reach[j] = board.pad_reach(j)

    def surely_off(self, i: int, slot, cand: np.ndarray) -> np.ndarray:
        """For each candidate ``j``: True when trading it into ``i``'s ``slot`` surely breaks its own
        near rule (its target is ``i``, or a lower bound of its pads' distance to its goal exceeds its
        limit), False when the exact test (:func:`_far_for`, :func:`_slot_distance`) must decide.
        The bound: the distance from ``j``'s courtyard centre in ``slot`` to its goal's bounding box
        (at most the distance to the nearest goal point) less its farthest pad offset, 1e-5 mm for
        the pads' rounding and 1e-6 mm more for this arithmetic's own rounding: never more than
        :func:`_far_for`'s bound, so it turns down only partners that test turns down. Cost: a few
        vector operations over ``cand`` plus one goal per partner not seen before."""
        out = np.zeros(len(cand), dtype=bool)
        has = np.flatnonzero(self.tgt[cand] >= 0)
        if not len(has):
            return out
        js = cand[has]
        stale = np.isnan(self.box[js, 0])
        if stale.any():
            self._fill(js[stale])
        g = self.board.g
        x = g.x0 + slot[3] * g.cell
        y = g.y0 + slot[2] * g.cell
        dx, dy = (self.width[js], self.length[js]) if slot[1] else (self.length[js], self.width[js])
        cx, cy = x + dx / 2, y + dy / 2
        far = _box_distance(cx, cy, self.box[js]) - self.reach[js] - 1e-5 - 1e-6 > self.limit[js]
        out[has] = far | (self.tgt[js] == i)
        return out


def _nearest_swap(board: _TopBoard, fixed: dict, i: int, goal: np.ndarray, here: float):
    """(distance, j) of the packed top-side part of ``i``'s cell size whose slot brings ``i``'s pads
    nearest ``goal``; a trade keeps both legal when each may stand, by height, in the other's cells
    (the cells are the same); a part with a near rule of its own is taken only when ``i``'s old slot
    still meets it. Candidates are visited by a lower bound of their distance (:func:`_swap_order`)
    and the search stops once the bound passes the best found or ``here`` (a trade no nearer than
    ``here`` is never the answer): the same answer as trying them all. Partners whose own rule
    surely breaks are dropped before their bounds are worked out (:meth:`_Partners.surely_off`).
    ``here``: ``i``'s own distance (mm, rounded as the trades'); None when no trade comes nearer."""
    packer, run, index = board.packer, board.run, board.index
    best = None
    mine = run.slots[i]

    def cut() -> float:  # a trade no nearer than this is never the answer
        return here if best is None else min(best[0], here)

    for ring, lows in _swap_order(board, i, goal, lambda c: board.partners.surely_off(i, mine, c), cut):
        m = int(np.searchsorted(lows, cut() + 1e-6, side="right"))  # bounds past cut: never taken
        last = m < len(ring)  # the later rings' bounds are larger still
        for j, lb in zip(ring[:m].tolist(), lows[:m].tolist()):
            if lb - 1e-6 > cut():
                last = True
                break
            other = packer.items[j].near
            if other is not None:
                there = _where(packer, run, fixed, index[other.target])
                if there is None or index[other.target] == i:
                    continue
                theirs = board.goal(other, there)
                if not len(theirs) or _far_for(board, j, run.slots[i], theirs, other.within_mm + TOL) \
                        or _slot_distance(packer, j, run.slots[i], theirs) > other.within_mm + TOL:
                    continue
            if not (_stands(packer, run, i, run.slots[j]) and _stands(packer, run, j, run.slots[i])):
                continue
            d = round(_slot_distance(packer, i, run.slots[j], goal), 6)
            if best is None or (d, j) < best:
                best = (d, j)
        if last:
            break
    if best is None or best[0] >= here:
        return None
    return best


def _window(g, goal: np.ndarray, reach: float) -> tuple[int, int, int, int]:
    """Grid rows and columns of origins within ``reach`` mm (a box) of the goal points: a courtyard
    outside it has every pad farther than ``reach`` less its own size from the goal."""
    (gx0, gy0), (gx1, gy1) = goal.min(axis=0), goal.max(axis=0)
    c0 = max(0, int((gx0 - reach - g.x0) / g.cell))
    r0 = max(0, int((gy0 - reach - g.y0) / g.cell))
    return (r0, max(r0, int(math.ceil((gy1 + reach - g.y0) / g.cell))),
            c0, max(c0, int(math.ceil((gx1 + reach - g.x0) / g.cell))))


def _scan(ok: np.ndarray, g, goal: np.ndarray, pads: np.ndarray, size: tuple, span,
          at: tuple[int, int] = (0, 0)) -> tuple | None:
    """(distance, row, column) of the free origin in ``span`` (rows, columns) nearest the goal;
    ``ok``'s first cell is the grid's row and column ``at``."""
    r0, r1, c0, c1 = span
    rows, cols = _true_cells(ok[r0:r1, c0:c1])
    if not len(rows):
        return None
    rows, cols = rows + r0 + at[0], cols + c0 + at[1]
    cx = g.x0 + cols * g.cell + size[0] / 2
    cy = g.y0 + rows * g.cell + size[1] / 2
    d = np.full(len(rows), np.inf)
    for px, py in pads:
        for tx, ty in goal:
            d = np.minimum(d, np.hypot(cx + px - tx, cy + py - ty))
    k = int(np.lexsort((cols, rows, np.round(d, 6)))[0])
    return round(float(d[k]), 6), int(rows[k]), int(cols[k])


def _true_cells(ok: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """``np.nonzero(ok)`` for a 2-D mask (the same arrays, row-major order), fast when few rows hold
    a True cell: the rows are found with one ``any`` per row and only those are searched cell by
    cell (a whole-board nonzero was a third of the near pass at 16,000 parts, issue 11)."""
    rows = np.flatnonzero(ok.any(axis=1))
    r, c = np.nonzero(ok[rows])
    return rows[r], c


def _scan_window(board: _TopBoard, i: int, h: int, w: int, goal, pads, size, span) -> tuple | None:
    """:func:`_scan` over the free origins of ``span`` only (:meth:`_TopBoard.origins`)."""
    g = board.g
    r0, r1, c0, c1 = span
    r1, c1 = min(r1, g.ny - h + 1), min(c1, g.nx - w + 1)
    if r1 <= r0 or c1 <= c0:
        return None
    ok = board.origins(i, h, w, (r0, r1, c0, c1))
    return _scan(ok, g, goal, pads, size, (0, ok.shape[0], 0, ok.shape[1]), at=(r0, c0))


def _window_test(free: np.ndarray, h: int, w: int) -> np.ndarray:
    """The packer's own window test (``place._feasible``: origins whose ``h`` x ``w`` window of
    ``free`` is all true), imported when called: :mod:`pipeline.place` imports this module."""
    from .place import _feasible

    return _feasible(free, h, w)


def _nearest_slot(board: _TopBoard, i: int, goal: np.ndarray, limit: float = math.inf):
    """(distance, slot): the free legal top-side slot of item ``i`` whose pads come nearest ``goal``
    (ties: row, column, turn), or None; when that slot is farther than ``limit`` mm, None or a
    slot farther than ``limit``.

    The search looks in a window round the goal first (enough when a slot
    there is within reach of the rule); otherwise in a window holding every
    origin within ``limit``, or with no limit it doubles the window until
    the nearest origin found is nearer than anything outside it can be
    (``reach`` less the courtyard's size) or the window is the board.
    Cost: the cells of the windows, not of the board.
    """
    g, packer = board.g, board.packer
    rule, it = packer.items[i].near, packer.items[i]
    best = None
    h0, w0 = packer.hc[i], packer.wc[i]
    for o, (h, w) in enumerate(((h0, w0), (w0, h0))):
        if h > g.ny or w > g.nx:
            continue
        size = (it.length_mm, it.width_mm) if o == 0 else (it.width_mm, it.length_mm)
        pads = _points(rule, True, 0.0, 0.0, 90 * o, "top")
        reach = rule.within_mm + size[0] + size[1]
        found = _scan_window(board, i, h, w, goal, pads, size, _window(g, goal, reach))
        while found is None or found[0] > rule.within_mm:  # nothing near enough close by: look wider
            # a finite limit: one window holding every origin within it; else double
            reach = max(reach * 2 if math.isinf(limit) else limit + size[0] + size[1] + 1e-5, reach * 1.01)
            span = _window(g, goal, reach)
            whole = span[0] == 0 and span[2] == 0 and span[1] >= g.ny - h + 1 and span[3] >= g.nx - w + 1
            found = _scan_window(board, i, h, w, goal, pads, size, span)
            if whole or (found is not None and found[0] < reach - size[0] - size[1] - 1e-6):
                break
            if reach - size[0] - size[1] - 1e-6 > limit:  # whatever lies outside is farther than limit
                found = None if found is None or found[0] > limit else found
                break
        if found is not None and (found[0], found[1], found[2], o) < (best or (math.inf,)):
            best = (found[0], found[1], found[2], o)
    return None if best is None else (best[0], ("top", best[3], best[1], best[2]))


# --------------------------------------------------------------------------
# what is left unmet
# --------------------------------------------------------------------------
def unmet_rules(items: Sequence[PlaceItem], placements: Sequence[Any]) -> tuple[list[str], list[Finding]]:
    """Near rules the final placement does not meet: ``blocked_by`` sentences (a ``near`` the
    design asked for) and ``place.rule-unmet`` warnings (the decoupling default)."""
    at = {p.ref: (p.x_mm, p.y_mm, p.rotation_deg, p.side) for p in placements}
    blocked: list[str] = []
    notes: list[Finding] = []
    for it in sorted(items, key=lambda it: natural_key(it.ref)):
        rule = it.near
        if rule is None or it.ref not in at or rule.target not in at:
            continue
        d = near_distance(rule, at[it.ref], at[rule.target])
        if d <= rule.within_mm + TOL:
            continue
        pins = f"supply pins {', '.join(rule.pins)}" if rule.pins else "pins"
        text = (f"{it.ref} should have a pad within {_fmt(rule.within_mm)} mm of {rule.target}'s {pins} "
                f"({'near' if rule.why == 'near' else 'decoupling, the default'} rule), but the nearest place "
                f"left for it is {_fmt(d)} mm away")
        if rule.why == "near":
            blocked.append(text + f" (near, {rule.file}): give the board more room around {rule.target} "
                                  "or raise within_mm.")
        else:
            notes.append(Finding("warning", "place.rule-unmet", (it.ref, rule.target),
                                 text + ": give the board more room or fix the capacitor's place with at.",
                                 kind="decoupling"))
    return blocked, notes


def refresh_near_notes(findings: Sequence[Finding], items: Sequence[PlaceItem], placements: Sequence[Any]
                       ) -> list[Finding]:
    """``findings`` with the near-rule warnings recomputed for ``placements`` (the routing step may
    have spread the parts after the placer wrote them)."""
    kept = [f for f in findings if not (f.check == "place.rule-unmet" and len(f.subject) == 2)]
    return kept + unmet_rules(items, placements)[1]
