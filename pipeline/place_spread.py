"""Room for routing: the packed block of parts spread over the board it is given.

Entry point: :func:`spread_block` (called by :mod:`pipeline.place` at one
line, after the swap improvement and before the near pass).

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
2002): parts in order of their target's distance from the block's centre,
farthest first (they free the room the inner parts move into), each to the
free legal origin nearest its target, found from a summed-area table of the
blocked cells (F. C. Crow, SIGGRAPH 1984, from memory) in a window holding
both its current origin and its target, so a part never moves to a worse
place than where it stands: its own slot is always legal.

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

Cost: O(window cells) per moved part, up to O(grid cells); boards with more
than :data:`SPREAD_PARTS` movable parts, or whose block already spans the
target box within :data:`SPREAD_MIN_SCALE`, are left as packed.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np

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
    occ = _occupied(packer, run, fixed)
    mid = np.mean([target[i] for i in movers], axis=0)
    order = sorted(movers, key=lambda i: (-round(math.dist(target[i], mid), 6), i))
    moved = 0
    for i in order:
        slot = run.slots[i]
        r0, r1, c0, c1 = _cells(packer, i, slot)
        occ[r0:r1, c0:c1] -= 1
        new = _nearest_origin(packer, run, i, slot, target[i], occ)
        r0, r1, c0, c1 = _cells(packer, i, new)
        occ[r0:r1, c0:c1] += 1
        moved += new != slot
        run.slots[i] = new
    return moved


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


def _cells(packer, i: int, slot) -> tuple[int, int, int, int]:
    """Rows and columns ``[r0, r1) x [c0, c1)`` a slot's courtyard covers on the grid."""
    _, o, row, col = slot
    h, w = (packer.hc[i], packer.wc[i]) if o == 0 else (packer.wc[i], packer.hc[i])
    return row, row + h, col, col + w


def _occupied(packer, run, fixed: dict) -> np.ndarray:
    """Courtyards covering each top-side cell (packed and fixed parts)."""
    from .place_rules import cells_of

    g = packer.grid
    occ = np.zeros((g.ny, g.nx), dtype=np.int16)
    for i, slot in run.slots.items():
        if slot[0] == "top":
            r0, r1, c0, c1 = _cells(packer, i, slot)
            occ[r0:r1, c0:c1] += 1
    for side, rect in fixed.values():
        if side == "top":
            r0, r1, c0, c1 = cells_of(g, rect)
            occ[r0:r1, c0:c1] += 1
    return occ


def _nearest_origin(packer, run, i: int, slot, goal: tuple[float, float], occ: np.ndarray):
    """The free legal origin (same side and turn) nearest ``goal`` in the window holding the current
    origin and the goal; ties: row, then column. The current origin is legal, so there is one."""
    g = packer.grid
    side, o, row, col = slot
    h, w = (packer.hc[i], packer.wc[i]) if o == 0 else (packer.wc[i], packer.hc[i])
    gr = (goal[1] - g.y0) / g.cell - h / 2
    gc = (goal[0] - g.x0) / g.cell - w / 2
    r0 = max(0, min(row, int(math.floor(gr))) - h)
    c0 = max(0, min(col, int(math.floor(gc))) - w)
    r1 = min(g.ny - h, max(row, int(math.ceil(gr))) + h)
    c1 = min(g.nx - w, max(col, int(math.ceil(gc))) + w)
    from .place import _feasible  # the packer's own window test (imported here: place imports us)

    free = packer.mask(run.top_level[i])[r0:r1 + h, c0:c1 + w] & (occ[r0:r1 + h, c0:c1 + w] == 0)
    ok = _feasible(free, h, w)
    rows, cols = np.nonzero(ok)
    d = np.round(np.hypot(rows + r0 - gr, cols + c0 - gc), 6)
    k = int(np.lexsort((cols, rows, d))[0])
    return (side, o, int(rows[k]) + r0, int(cols[k]) + c0)
