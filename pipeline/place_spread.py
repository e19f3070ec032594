"""Room for routing: the packed block of parts spread over the board it is given.

Entry point: :func:`spread_block` (called by :mod:`pipeline.place` at one
line, after the swap improvement and the near pass; when it moved parts the
placer swaps again on the spread slots, then runs the near pass again).

Why. The bottom-left packing (:mod:`pipeline.place`) leaves the parts in
one compact block, courtyard against courtyard, and the free board around
it unused; tracks then crowd between the pins of neighbouring parts. On
the 60-part board of bench/bench_route.py such compact placements leave
nets open at board sizes where the same parts spread over the board route
(bench/README.md, section "Routing").

Method: proportional spreading, then greedy legalisation on the packer's
grid. Each movable part's courtyard centre is mapped linearly from the
block's bounding box onto the target box (the placement area's bounding
box, no larger than :data:`SPREAD_MAX` times the courtyard sum around the
block's centre), keeping the parts' relative order: the spreading step of
force-directed placement with the density target met by a linear map
instead of forces (H. Eisenmann and F. M. Johannes, "Generic global
placement and floorplanning", DAC 1998; the same proportional spreading is
the "cell shifting" of FastPlace, N. Viswanathan and C. C.-N. Chu, ISPD
2004; both cited from memory). The targets are then legalised greedily
(Tetris-style legalisation, from memory: D. Hill, US patent 6,370,673,
2002): every movable part is lifted off the grid, then the parts go one by
one, larger courtyards first (they need the larger holes; with the small
parts first the 250-part board of bench/bench_scale.py left no hole for an
IC) and, within a size, in order of their target's distance from the
block's centre, farthest first. Each takes the slot nearest its target
when those cells are free cells of its height level; else the free legal
origin nearest its target, found from a sliding-window test of the free
cells in a window about the target that doubles until it holds one no
farther than its half-size (or is the whole grid). A linear map that
scales both axes by at least 1 leaves the targets apart, so most parts
keep their target and their neighbours (before, each part took the free
origin nearest its target while the parts not yet moved still stood in
the block: 131 of 239 parts ended more than 0.5 mm from their targets on
that board, and the wirelength rose from 0.431 of a random permutation at
the targets to 0.457). Should a part find no free origin at all, every
part goes back to its packed slot and the block stays as packed.

A part with a near rule (a decoupling capacitor by default,
:mod:`pipeline.place_rules`) does not follow the linear map: its goal keeps
its offset from its target part's goal (the near pass runs before the
spreading as well as after it), so the spreading does not pull it away
from the pins it must stay near.

Legal means what the packer means: the courtyard's cells lie in the free
cells of the part's height level (placement area and height zones) and
overlap no other courtyard on its side; the placer's shapely self-check
still checks the result. Only top-side packed parts move; fixed parts
(the user's, and the edge parts of :mod:`pipeline.place_rules`) and
bottom-side parts stay. Orientation and cell size stay, so the packing
classes and the near pass's trades are unchanged.

Cost: O(window cells) per part whose target is taken, up to O(grid cells); boards with more
than :data:`SPREAD_PARTS` movable parts, or whose block already spans the
target box within :data:`SPREAD_MIN_SCALE`, are left as packed.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np

from .place_rules import slot_cells, top_occupancy

__all__ = ["spread_block", "spreads", "SPREAD_MAX", "SPREAD_PARTS", "SPREAD_MIN_SCALE"]

#: the target box holds at most this many times the courtyard sum (our choice: long tracks and a large
#: routing grid cost more than the room gains beyond it; bench/README.md "Routing").
SPREAD_MAX = 4.0
#: more movable parts than this are left as packed (cost guard: O(grid cells) per part; our choice).
SPREAD_PARTS = 400
#: a block already spanning the target box within this factor on both axes is left as packed (our choice).
SPREAD_MIN_SCALE = 1.05


def spread_block(packer: Any, run: Any, fixed: dict, courtyard_mm2: float) -> int:
    """Spread ``run``'s top-side packed parts over the placement area (module notes); returns how many moved.

    ``packer`` and ``run`` are :mod:`pipeline.place`'s packer and packing
    run (``run.slots`` is updated in place); ``fixed`` its fixed parts;
    ``courtyard_mm2`` the courtyard sum, mm².
    """
    if not spreads(run, fixed):
        return 0
    movers = _movers(run, fixed)
    target = _targets(packer, run, movers, courtyard_mm2)
    if target is None:
        return 0
    occ = top_occupancy(packer, run, fixed)
    before = {i: run.slots[i] for i in movers}
    for i in movers:  # every mover lifted: only the fixed parts and the parts already moved block
        r0, r1, c0, c1 = slot_cells(packer, i, before[i])
        occ[r0:r1, c0:c1] -= 1
    mid = np.mean([target[i] for i in movers], axis=0)
    size = {i: packer.hc[i] * packer.wc[i] for i in movers}
    order = sorted(movers, key=lambda i: (-size[i], -round(math.dist(target[i], mid), 6), i))
    for i in order:  # large parts first (they need the larger holes), each size from the outside in
        if _take(packer, run, i, _at_goal(packer, before[i], i, target[i]), occ):
            continue
        new = _nearest_origin(packer, run, i, before[i], target[i], occ)  # its goal is taken or off its cells
        if new is None or not _take(packer, run, i, new, occ):
            run.slots.update(before)  # no room left for it: the block stays as packed
            return 0
    return sum(run.slots[i] != before[i] for i in movers)


def _at_goal(packer, slot, i: int, goal: tuple[float, float]):
    """The slot (same side and turn) whose courtyard centre is nearest ``goal`` (mm)."""
    g = packer.grid
    side, o, _, _ = slot
    h, w = (packer.hc[i], packer.wc[i]) if o == 0 else (packer.wc[i], packer.hc[i])
    return (side, o, int(round((goal[1] - g.y0) / g.cell - h / 2)), int(round((goal[0] - g.x0) / g.cell - w / 2)))


def _take(packer, run, i: int, slot, occ: np.ndarray) -> bool:
    """Put part ``i`` at ``slot`` when its cells are free cells of its height level; say whether it was."""
    g = packer.grid
    r0, r1, c0, c1 = slot_cells(packer, i, slot)
    if r0 < 0 or c0 < 0 or r1 > g.ny or c1 > g.nx:
        return False
    if not packer.mask(run.top_level[i])[r0:r1, c0:c1].all() or occ[r0:r1, c0:c1].any():
        return False
    occ[r0:r1, c0:c1] += 1
    run.slots[i] = slot
    return True


def spreads(run: Any, fixed: dict) -> bool:
    """Whether :func:`spread_block` will consider moving ``run``'s parts: 2 to :data:`SPREAD_PARTS` movers.

    A caller that prepares the parts for the spreading (the near pass) asks first, so a
    large board, left as packed, is not prepared for nothing. Cost: one pass over the slots.
    """
    return 2 <= len(_movers(run, fixed)) <= SPREAD_PARTS


def _movers(run: Any, fixed: dict) -> list:
    """The parts the spreading may move: top side, not fixed, on a placement level."""
    return [i for i, s in run.slots.items() if s[0] == "top" and i not in fixed and run.top_level.get(i) is not None]


def _targets(packer, run, movers: list, courtyard_mm2: float) -> dict | None:
    """Each part's target centre: the block's bounding box (of the courtyards) mapped linearly onto the
    target box, per axis where the box is wider (None: the block already spans the target box)."""
    rects = np.array([packer.rect(i, run.slots[i]) for i in movers])
    bx0, by0 = rects[:, 0].min(), rects[:, 1].min()
    bx1, by1 = rects[:, 2].max(), rects[:, 3].max()
    ax0, ay0, ax1, ay1 = packer.area.bounds
    shrink = min(1.0, math.sqrt(SPREAD_MAX * courtyard_mm2 / max((ax1 - ax0) * (ay1 - ay0), 1e-9)))
    tw, th = (ax1 - ax0) * shrink, (ay1 - ay0) * shrink
    tx0 = min(max((bx0 + bx1 - tw) / 2, ax0), ax1 - tw)  # centred on the block, inside the area's box
    ty0 = min(max((by0 + by1 - th) / 2, ay0), ay1 - th)
    sx, sy = tw / max(bx1 - bx0, 1e-9), th / max(by1 - by0, 1e-9)
    if sx < SPREAD_MIN_SCALE and sy < SPREAD_MIN_SCALE:
        return None
    cx, cy = (rects[:, 0] + rects[:, 2]) / 2, (rects[:, 1] + rects[:, 3]) / 2
    tx = tx0 + (cx - bx0) * sx if sx >= SPREAD_MIN_SCALE else cx
    ty = ty0 + (cy - by0) * sy if sy >= SPREAD_MIN_SCALE else cy
    target = {i: (float(x), float(y)) for i, x, y in zip(movers, tx, ty)}
    return _keep_near(packer, movers, target, dict(zip(movers, zip(cx, cy))))


def _keep_near(packer, movers: list, target: dict, centre: dict) -> dict:
    """A part with a near rule (a decoupling capacitor) keeps its packed offset from its target part:
    its goal moves with the target's (or stays, when the target is fixed), so spreading does not pull
    it away from the pins it must stay near (pipeline/place_rules.py)."""
    index = {it.ref: n for n, it in enumerate(packer.items)}
    out = dict(target)
    for i in movers:
        rule = packer.items[i].near
        j = index.get(rule.target) if rule is not None else None
        if j is None or j == i:
            continue
        if j in target:
            out[i] = (target[j][0] + centre[i][0] - centre[j][0], target[j][1] + centre[i][1] - centre[j][1])
        else:
            out[i] = centre[i]
    return out


def _nearest_origin(packer, run, i: int, slot, goal: tuple[float, float], occ: np.ndarray):
    """The free legal origin (same side and turn) nearest ``goal``, or None when there is none: searched in
    a window about the goal that doubles until it holds a free origin no farther than its own half-size
    (or the whole grid); ties: row, then column."""
    from .place import _feasible  # the packer's own window test (imported here: place imports us)

    g = packer.grid
    side, o, _, _ = slot
    h, w = (packer.hc[i], packer.wc[i]) if o == 0 else (packer.wc[i], packer.hc[i])
    gr = (goal[1] - g.y0) / g.cell - h / 2
    gc = (goal[0] - g.x0) / g.cell - w / 2
    reach = 2 * max(h, w)
    mask = packer.mask(run.top_level[i])
    while True:
        r0, c0 = max(0, int(gr) - reach), max(0, int(gc) - reach)
        r1, c1 = min(g.ny - h, int(gr) + reach), min(g.nx - w, int(gc) + reach)
        whole = r0 == 0 and c0 == 0 and r1 >= g.ny - h and c1 >= g.nx - w
        if r1 >= r0 and c1 >= c0:
            free = mask[r0:r1 + h, c0:c1 + w] & (occ[r0:r1 + h, c0:c1 + w] == 0)
            rows, cols = np.nonzero(_feasible(free, h, w))
            if len(rows):
                d = np.round(np.hypot(rows + r0 - gr, cols + c0 - gc), 6)
                k = int(np.lexsort((cols, rows, d))[0])
                if whole or d[k] <= reach - 1:
                    return (side, o, int(rows[k]) + r0, int(cols[k]) + c0)
        if whole:
            return None
        reach *= 2
