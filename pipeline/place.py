"""Placement that proves the fit: every courtyard on the board, or why not.

Entry point: :func:`place_and_fit`. Also :func:`hpwl` (total half-perimeter
wirelength of placed parts, from :mod:`pipeline.wirelength`) for the benchmark and tests.

The model (millimetres; heights above the board's top face)
------------------------------------------------------------
* **Board.** The proposed outline (:func:`pipeline.outline.propose_outline`)
  or the user's own ``BOARD`` outline. Courtyards must keep
  ``edge_clearance_mm`` from every board edge (and from the edge of the
  usable region, when a user's board pokes out of it): the placement area
  is the board eroded by that distance.
* **Courtyards.** Rectangles of the item's length x width, rotated by 0
  or 90 degrees (180 and 270 give the same rectangle, so the report uses
  0 and 90). Courtyards on one side may touch but not overlap (IPC-7351B:
  courtyards must not overlap; memory, REFERENCES.md section 3).
* **Heights.** A part may stand only where the courtyard lies wholly in
  height zones whose ``max_height_mm`` (depth minus board thickness) is at
  least the part's height. Outside every zone nothing may stand; a region
  with no zones at all has no height limit.
* **Two sides** (``sides = 2``). The cavity floor is taken as flat and the
  lid as what varies (depth zones are lower lids). Bottom-side parts stand
  between the floor and the board, so the board is raised on the tallest
  of them: with a gap ``g`` every top-side part must satisfy
  ``height + g <= max_height_mm`` of its zones, every bottom part
  ``height <= g``, and ``g`` may not exceed the lowest zone's
  ``max_height_mm`` (the raised board must still clear the lid
  everywhere). The placer first tries ``g = 0`` (all parts on top), then
  larger gaps taken from the parts' own heights, and keeps the smallest
  that fits. Bottom-side courtyards obey the same edge clearance.

The method
----------
1. *Grid.* The placement area is rasterised onto square cells (0.05 mm
   when the courtyard sizes allow and the grid stays under
   ``CELL_BUDGET`` cells; IPC-7351B rounds courtyards to 0.05 mm). A cell
   is free only when it lies wholly in the area (exact Minkowski erosion
   by the half cell, :func:`pipeline.outline.cells_inside`), and for each
   height level only when it lies wholly in the zones allowed at that
   level. A courtyard occupies the cells its rectangle covers (rounded up),
   so anything legal on the grid is legal in the plane.
2. *Constructive packing: bottom-left fill* (Chazelle 1983; Baker, Coffman
   and Rivest 1980). Parts are grouped into classes of equal cell size,
   height level and side eligibility, taken largest first. For a class
   the feasible origins of each orientation are one boolean map (a
   sliding-window AND of the free cells, done by doubling in O(cells log
   size)); parts of the class then take, one after another, the origin
   whose top edge is lowest (ties: lowest, then leftmost, then the flatter
   orientation), and each placement clears only the neighbourhood of the
   maps it blocks. Within a class parts go in a connectivity order
   (breadth-first over shared small nets), so connected parts get
   neighbouring slots. Cost: O(classes x cells log s + parts).
   When the area is roomy (at least ``ROOMY`` times the courtyard sum),
   the packing is first tried in a band of columns about
   sqrt(ROOMY x courtyard sum) wide around the area's centroid, which
   keeps the parts in one compact block instead of a strip along the
   bottom edge (shorter nets); if that does not fit, the whole area is
   used.
3. *Improvement: pairwise swaps* (pairwise interchange toward each part's
   optimal region, Goto 1981; :mod:`pipeline.improve`). Parts of the same
   class can trade slots without touching legality. Rounds of candidate
   swaps are evaluated in numpy batches with each net's bounding box
   without the moving part, and the improving swaps that share no net are
   applied together; the budget is a fixed number of candidates per part
   and round, so it grows with the design. Nets with more than
   ``OPT_FANOUT`` parts (ground, supply) are left out of the improvement,
   as placers commonly do, but are counted in the reported wirelength.
   Each near rule (a decoupling capacitor and its IC) counts here as one
   more two-pin net between the part and its target, so the swaps bring
   near parts toward their targets themselves. Then the near pass runs
   (*Rules* below), and the parts it traded away from their nets get a
   *repair*: swaps again, looked for only by those parts and, round after
   round, by the parts sharing a net with one just swapped
   (:mod:`pipeline.improve`), with every near part and target locked so no
   rule comes undone. (Before, the near pass ran after the swaps and each
   capacitor it brought to its IC sent a resistor far from its nets:
   wirelength 0.483 of a random permutation of the slots at 4,000 parts,
   0.408 with the pull and the repair; bench/bench_scale.py.)
   Callers that need only the verdict skip this step (``improve=False``).
4. *Spreading* (:mod:`pipeline.place_spread`: proportional spreading,
   Eisenmann and Johannes, DAC 1998, with greedy legalisation). The
   packed block is spread over the board it is given (at most
   ``place_spread.SPREAD_MAX`` times the courtyard sum), keeping the parts'
   relative order (a near part keeps its offset from its target: the near
   pass runs before it), so tracks find room between the parts. When it
   moved parts, a swap pass over every part runs on the spread slots (until
   a round gains less than ``SPREAD_MIN_GAIN``), then the near pass and its
   repair: on bench/bench_scale.py's 250-part board the wirelength was
   0.405 of a random permutation of the slots packed, 0.457 spread before
   (legalisation farthest first), 0.444 with the legalisation of
   :mod:`pipeline.place_spread` and 0.413 with the swaps on the spread
   slots. Skipped with the improvement.
5. *Self-check.* Every placed courtyard is checked with shapely against the
   exact area, zones and its neighbours (STRtree); a failure would be a
   defect and drops the part with a warning instead of reporting a false
   fit.

*Rules* (:mod:`pipeline.place_rules`): parts the user fixed hold their
cells before step 2; wire pads and connectors are pre-placed at the board
edge by the wire-entry zone and then count as fixed; after the swaps of
step 3 (and again after step 4, with its repair, when the block was
spread) parts with a near rule (decoupling capacitors by default) move next
to their target's pins; without step 3 the near pass runs once after the
packing; rules left unmet go to ``blocked_by`` or a warning.

Everything is deterministic: classes and parts are sorted with refs as
the last key and the improvement breaks ties by index.

References (cited from memory)
------------------------------
B. Chazelle, "The bottom-left bin-packing heuristic: an efficient
implementation", IEEE Trans. Computers C-32(8), 1983.
B. S. Baker, E. G. Coffman, R. L. Rivest, "Orthogonal packings in two
dimensions", SIAM J. Computing 9(4), 1980.
S. Goto, "An efficient algorithm for the two-dimensional placement problem
in electrical circuit layout", IEEE Trans. Circuits and Systems 28(1), 1981.
"""

from __future__ import annotations

import bisect
import math
from collections import deque
from dataclasses import dataclass, field
from typing import Callable, Iterable, Sequence

import numpy as np
import shapely
from shapely.geometry import Polygon, box
from shapely.geometry.base import BaseGeometry
from shapely.geometry.polygon import orient

from .area import estimate_area
from .errors import DesignError, ProjectError
from .findings_group import listed
from . import place_rules, place_spread
from .improve import MIN_GAIN, improve_swaps
from .model import BoardOptions, FitResult, Finding, PlaceItem, Placement, Region
from .mount import mount_keepout, raised_heads, with_mount_holes
from .order import natural_key
from .outline import QUAD_SEGS, cells_inside, polygons_of, propose_outline
from .values import format_mm as _fmt
from .wirelength import hpwl

__all__ = ["place_and_fit", "hpwl", "CELL_BUDGET", "OPT_FANOUT"]

Progress = Callable[[str, float], None]

#: Most grid cells a placement grid may have.
CELL_BUDGET = 9_000_000
#: Grid sizes tried, mm (the smallest that divides every courtyard and keeps within the budget).
CELL_SIZES = (0.05, 0.1, 0.2, 0.25, 0.5, 1.0)
#: Nets with more parts than this are left out of the swap improvement.
OPT_FANOUT = 32
#: Geometric tolerance of the self-check, mm.
TOL = 1e-6
#: Most bottom-gap values tried with sides = 2.
MAX_GAPS = 8
#: A board at least this many times the courtyard sum first gets a compact block of parts.
ROOMY = 2.5
#: The swap pass on the spread slots stops after a round gaining less than this share of the HPWL (our
#: choice: 1e-3 and 0 gave the same 0.413 of a random permutation on bench/bench_scale.py's 250-part board,
#: 1e-2 gave 0.420; boards of at most place_spread.SPREAD_PARTS parts only, so the rounds are cheap).
SPREAD_MIN_GAIN = 1e-3


# --------------------------------------------------------------------------
# helpers
# --------------------------------------------------------------------------


def _area(v: float) -> str:
    return f"{v:.1f}" if v < 100 else f"{v:.0f}"


def _inset(geom: BaseGeometry, d: float) -> BaseGeometry:
    """Points at least ``d`` from the outside of ``geom`` (polygon arcs kept outside the true circle)."""
    if geom.is_empty or d <= 0:
        return geom
    return geom.buffer(-d / math.cos(math.pi / (4 * QUAD_SEGS)), quad_segs=QUAD_SEGS)


def _window_and(a: np.ndarray, n: int, axis: int) -> np.ndarray:
    """``out[i] = all(a[i : i + n])`` along ``axis`` (doubling; O(size log n))."""
    length = a.shape[axis]
    if n > length:
        shape = list(a.shape)
        shape[axis] = 0
        return np.zeros(shape, dtype=bool)
    if n <= 1:
        return a

    def cut(x, lo, hi):
        return x[lo:hi] if axis == 0 else x[:, lo:hi]

    b = a
    k = 1
    while 2 * k <= n:
        m = b.shape[axis]
        b = cut(b, 0, m - k) & cut(b, k, m)
        k *= 2
    m = length - n + 1
    s = n - k
    if s == 0:
        return np.ascontiguousarray(cut(b, 0, m))
    return cut(b, 0, m) & cut(b, s, s + m)


def _feasible(free: np.ndarray, h: int, w: int) -> np.ndarray:
    """Origins ``(row, col)`` whose ``h x w`` window of ``free`` is all true."""
    return np.ascontiguousarray(_window_and(_window_and(free, w, 1), h, 0))


def _next_true(flat: np.ndarray, p: int) -> int:
    n = flat.size
    step = 4096
    while p < n:
        e = min(n, p + step)
        seg = flat[p:e]
        k = int(seg.argmax())
        if seg[k]:
            return p + k
        p = e
        step *= 2
    return -1


# --------------------------------------------------------------------------
# packing on a grid
# --------------------------------------------------------------------------
@dataclass
class _Grid:
    x0: float
    y0: float
    cell: float
    nx: int
    ny: int


@dataclass
class _Run:
    gap: float
    slots: dict = field(default_factory=dict)  # item -> (side, orient, row, col)
    unplaced: list = field(default_factory=list)
    cols: tuple | None = None
    classes: dict = field(default_factory=dict)  # key -> list of items
    class_of: dict = field(default_factory=dict)
    top_level: dict = field(default_factory=dict)  # item -> level index or None
    bottom_ok: dict = field(default_factory=dict)

    @property
    def placed(self) -> int:
        return len(self.slots)


def _choose_cell(bounds, dims: Sequence[float], budget: int) -> float:
    minx, miny, maxx, maxy = bounds
    span = max(maxx - minx, 1e-9) * max(maxy - miny, 1e-9)
    c_min = math.sqrt(span / budget)
    for c in CELL_SIZES:
        if c < c_min:
            continue
        if all(abs(d / c - round(d / c)) < 1e-6 for d in dims):
            return c
    return max(CELL_SIZES[0], c_min)


class _Packer:
    """Bottom-left fill of classes of equal rectangles on a boolean grid."""

    def __init__(self, items: Sequence[PlaceItem], area: BaseGeometry, zones, rank: Sequence[int],
                 budget: int = CELL_BUDGET, fixed: dict | None = None):
        self.items = items
        self.fixed = dict(fixed or {})  # item -> (side, (x1, y1, x2, y2)) of a part the user fixed
        self.area = area
        self.rank = rank
        dims = [d for it in items for d in (it.length_mm, it.width_mm)]
        minx, miny, maxx, maxy = area.bounds
        c = _choose_cell(area.bounds, dims, budget)
        nx = max(1, int(math.ceil((maxx - minx) / c - 1e-9)))
        ny = max(1, int(math.ceil((maxy - miny) / c - 1e-9)))
        self.grid = _Grid(minx, miny, c, nx, ny)
        g = self.grid
        self.base = cells_inside(area, g.x0, g.y0, c, nx, ny)
        # height levels: zone heights ascending; level k = zones with max >= heights[k]
        self.zones = [(float(z.max_height_mm), z.polygon) for z in zones if not z.polygon.is_empty]
        self.heights = sorted({h for h, _ in self.zones})
        self._masks: dict[int, np.ndarray] = {}
        self.wc = [max(1, int(math.ceil(it.length_mm / c - 1e-9))) for it in items]
        self.hc = [max(1, int(math.ceil(it.width_mm / c - 1e-9))) for it in items]

    # -- masks -------------------------------------------------------------
    def zone_union(self, k: int) -> BaseGeometry:
        polys = [p for h, p in self.zones if h >= self.heights[k]]
        u = shapely.union_all(polys)
        # heal hairline seams between neighbouring zones
        return u.buffer(1e-7, join_style="mitre").buffer(-1e-7, join_style="mitre")

    def mask(self, k: int) -> np.ndarray:
        """Free cells at height level ``k`` (before any part is placed)."""
        if not self.zones:
            return self.base
        if k not in self._masks:
            g = self.grid
            self._masks[k] = self.base & cells_inside(self.zone_union(k), g.x0, g.y0, g.cell, g.nx, g.ny)
        return self._masks[k]

    def level(self, height: float) -> int | None:
        """Smallest level whose zones allow ``height``; None when none does."""
        if not self.zones:
            return 0
        k = bisect.bisect_left(self.heights, height - 1e-9)
        return k if k < len(self.heights) else None

    @property
    def lowest_zone(self) -> float:
        return self.heights[0] if self.heights else math.inf

    # -- one packing ---------------------------------------------------------
    def band(self, width: float) -> tuple[int, int] | None:
        """Cell columns of a band ``width`` mm wide centred on the area's centroid (None: the band
        would be nearly as wide as the area)."""
        g = self.grid
        n = int(math.ceil(width / g.cell))
        if n >= 0.8 * g.nx:
            return None
        mid = int(round((self.area.centroid.x - g.x0) / g.cell))
        lo = min(max(0, mid - n // 2), g.nx - n)
        return (lo, lo + n)

    def run(self, gap: float, sides: int, progress: Progress | None = None,
            frac: tuple[float, float] = (0.0, 1.0), cols: tuple[int, int] | None = None) -> _Run:
        """One bottom-left packing with bottom gap ``gap`` (module notes, step 2), in column band ``cols``."""
        run = self._classes(gap, sides)
        run.cols = cols
        occ = self._occupancy(sides, gap)
        bottom_mask = self.mask(self.level(gap) or 0) if "bottom" in occ else None
        n_items = max(len(self.items), 1)
        done = 0
        for ci, (key, members) in enumerate(run.classes.items()):
            bot, w0, h0, lvl = key
            sides_here = ([("top", self.mask(lvl))] if lvl >= 0 else []) + \
                ([("bottom", bottom_mask)] if bot and bottom_mask is not None else [])
            maps = [m for side, base in sides_here for m in self._maps(side, base & ~occ[side], cols, w0, h0)]
            self._place_class(run, members, maps, occ)
            done += len(members)
            if progress is not None and (ci % 4 == 0 or ci == len(run.classes) - 1):
                progress("placing parts", frac[0] + (frac[1] - frac[0]) * done / n_items)
        return run

    def _classes(self, gap: float, sides: int) -> _Run:
        """A fresh run with the packing classes (equal cell size, level, side), largest first, members
        in connectivity order."""
        run = _Run(gap)
        classes: dict[tuple, list[int]] = {}
        for i, it in enumerate(self.items):
            lvl = self.level(it.height_mm + gap)
            bot = sides == 2 and gap > 0 and it.height_mm <= gap + 1e-9
            run.top_level[i] = lvl
            run.bottom_ok[i] = bot
            if i not in self.fixed:
                classes.setdefault((bot, self.wc[i], self.hc[i], -1 if lvl is None else lvl), []).append(i)
        for members in classes.values():
            members.sort(key=lambda i: self.rank[i])

        def order(key):
            bot, w, h, lvl = key
            return (bot, -(w * h), -max(w, h), -min(w, h), -lvl, w, h)

        run.classes = {k: classes[k] for k in sorted(classes, key=order)}
        run.class_of = {i: k for k, members in run.classes.items() for i in members}
        return run

    def _occupancy(self, sides: int, gap: float) -> dict[str, np.ndarray]:
        """Occupied cells per side before the packing: the fixed parts' cells."""
        g = self.grid
        occ = {"top": np.zeros((g.ny, g.nx), dtype=bool)}
        if sides == 2 and gap > 0:
            occ["bottom"] = np.zeros((g.ny, g.nx), dtype=bool)
        for side, rect in self.fixed.values():  # fixed parts hold their cells first
            if side in occ:
                r0, r1, c0, c1 = place_rules.cells_of(g, rect)
                occ[side][r0:r1, c0:c1] = True
        return occ

    @staticmethod
    def _maps(side: str, free: np.ndarray, cols, w0: int, h0: int) -> list:
        """Feasible-origin maps ``[side, orient, h, w, F, flat F, pointer, row offset]`` of one class."""
        if cols is not None:
            free[:, :cols[0]] = False
            free[:, cols[1]:] = False
        # rows below the lowest free cell hold no origin: leave them out of the maps
        rows_free = free.any(axis=1)
        r0 = int(rows_free.argmax()) if rows_free.any() else free.shape[0]
        free = free[r0:]
        out = []
        for o, h, w in [(0, h0, w0)] + ([(1, w0, h0)] if w0 != h0 else []):
            F = _feasible(free, h, w)
            out.append([side, o, h, w, F, F.reshape(-1), 0, r0])
        return out

    @staticmethod
    def _lowest(maps: list, side_name: str):
        """The origin whose top edge is lowest among the maps of one side (ties: row, column, flatter)."""
        best = None
        for m in maps:
            if m[0] != side_name or m[4].size == 0:
                continue
            p = _next_true(m[5], m[6])
            m[6] = p if p >= 0 else m[5].size
            if p < 0:
                continue
            row, col = divmod(p, m[4].shape[1])
            row += m[7]
            cand = (row + m[2], row, col, m[2], m[1])
            if best is None or cand < best[0]:
                best = (cand, m, row, col)
        return best

    def _place_class(self, run: _Run, members: list, maps: list, occ: dict) -> None:
        """Bottom-left fill of one class's members (top side first); the rest go to ``run.unplaced``."""
        for pos, i in enumerate(members):
            best = self._lowest(maps, "top") or self._lowest(maps, "bottom")
            if best is None:
                run.unplaced.extend(members[pos:])
                return
            _, m, row, col = best
            side, o, h, w = m[0], m[1], m[2], m[3]
            occ[side][row:row + h, col:col + w] = True
            run.slots[i] = (side, o, row, col)
            for mm in maps:  # origins whose window now overlaps this courtyard
                if mm[0] != side or mm[4].size == 0:
                    continue
                hh, ww, r0 = mm[2], mm[3], mm[7]
                mm[4][max(0, row - r0 - hh + 1):max(0, row - r0 + h), max(0, col - ww + 1):col + w] = False

    # -- geometry of a slot --------------------------------------------------
    def rect(self, i: int, slot) -> tuple[float, float, float, float]:
        side, o, row, col = slot
        g = self.grid
        it = self.items[i]
        dx, dy = (it.length_mm, it.width_mm) if o == 0 else (it.width_mm, it.length_mm)
        x = g.x0 + col * g.cell
        y = g.y0 + row * g.cell
        return (x, y, x + dx, y + dy)

    def static_fit(self, i: int, k: int | None) -> bool:
        """Does item ``i`` fit anywhere at level ``k`` (None: ignoring heights) on an empty board?"""
        base = self.base if k is None else self.mask(k)
        w, h = self.wc[i], self.hc[i]
        for hh, ww in ((h, w), (w, h)):
            F = _feasible(base, hh, ww)
            if F.size and F.any():
                return True
        return False


# --------------------------------------------------------------------------
# connectivity
# --------------------------------------------------------------------------
def _nets(items: Sequence[PlaceItem]) -> list[list[int]]:
    """Nets as sorted lists of item indices (two or more members), in name order."""
    members: dict[str, set[int]] = {}
    for i, it in enumerate(items):
        for n in it.nets:
            members.setdefault(n, set()).add(i)
    return [sorted(members[n]) for n in sorted(members) if len(members[n]) >= 2]


def _rank(items: Sequence[PlaceItem], nets: list[list[int]]) -> list[int]:
    """Breadth-first order over shared small nets, started at the parts with most pins."""
    n = len(items)
    nbr: list[dict[int, float]] = [dict() for _ in range(n)]
    for m in nets:
        if len(m) > OPT_FANOUT:
            continue
        w = 1.0 / (len(m) - 1)
        for a in m:
            for b in m:
                if a != b:
                    nbr[a][b] = nbr[a].get(b, 0.0) + w
    keys = [natural_key(it.ref) for it in items]
    start = sorted(range(n), key=lambda i: (-items[i].pin_count, keys[i]))
    rank = [0] * n
    seen = [False] * n
    r = 0
    for s in start:
        if seen[s]:
            continue
        seen[s] = True
        q = deque([s])
        while q:
            a = q.popleft()
            rank[a] = r
            r += 1
            for b in sorted(nbr[a], key=lambda b: (-nbr[a][b], keys[b])):
                if not seen[b]:
                    seen[b] = True
                    q.append(b)
    return rank


def _near_pairs(items: Sequence[PlaceItem]) -> list[tuple[int, int]]:
    """(part, target) item indices of every near rule whose target is among ``items``."""
    index = {it.ref: k for k, it in enumerate(items)}
    return [(i, index[it.near.target]) for i, it in enumerate(items)
            if it.near is not None and it.near.target in index]


def _improve(packer: _Packer, run: _Run, nets: list[list[int]], progress: Progress | None, *,
             pull: bool = False, locked: Iterable[int] = (), movers: Iterable[int] | None = None,
             min_gain: float = MIN_GAIN) -> None:
    """Swaps inside classes that lower the wirelength (module notes, step 3; :mod:`pipeline.improve`).

    ``pull``: each near rule counts as a two-pin net between the part and its target, so the swaps
    bring near parts toward their targets themselves and a part the near pass trades away from its
    target's side lands nearer its own nets.
    ``locked`` parts keep their slots; only ``movers`` (all when None) look for a swap.
    """
    placed = sorted(run.slots)
    if len(placed) < 2:
        return
    at = {i: n for n, i in enumerate(placed)}
    xy = np.empty((len(placed), 2))
    for n, i in enumerate(placed):
        x1, y1, x2, y2 = packer.rect(i, run.slots[i])
        xy[n] = ((x1 + x2) / 2, (y1 + y2) / 2)
    groups: dict[tuple, list[int]] = {}
    locked = set(locked)
    for n, i in enumerate(placed):
        if i not in locked:
            groups.setdefault(run.class_of[i], []).append(n)
    live = [[at[i] for i in m if i in at] for m in nets]
    if pull:
        live += [[at[i], at[t]] for i, t in _near_pairs(packer.items) if i in at and t in at]
    slot = improve_swaps(list(groups.values()), xy, live, OPT_FANOUT, progress,
                         movers=None if movers is None else [at[i] for i in movers if i in at], min_gain=min_gain)
    old = [run.slots[i] for i in placed]
    for n, i in enumerate(placed):
        run.slots[i] = old[int(slot[n])]


def _near_and_repair(packer: _Packer, run: _Run, fixed: dict, nets: list[list[int]],
                     progress: Progress | None) -> None:
    """The near pass, then swaps again for the parts it traded away (only they and their net
    neighbours look for a swap) with every near part and target locked, so no rule comes undone
    (module notes, step 3)."""
    before = dict(run.slots)
    place_rules.near_pass(packer, run, fixed)
    locked = {k for pair in _near_pairs(packer.items) for k in pair}
    moved = [i for i in sorted(run.slots) if run.slots[i] != before[i] and i not in locked]
    if moved:
        _improve(packer, run, nets, progress, locked=locked, movers=moved)


# --------------------------------------------------------------------------
# entry point
# --------------------------------------------------------------------------
def _check_inputs(items: Sequence[PlaceItem], board: BoardOptions) -> None:
    if board.sides not in (1, 2):
        raise ProjectError("project.toml", f"sides must be 1 or 2, not {board.sides!r}", key="board.sides")
    for name in ("edge_clearance_mm", "min_inside_radius_mm", "thickness_mm"):
        v = getattr(board, name)
        if not isinstance(v, (int, float)) or not math.isfinite(v) or v < 0:
            raise ProjectError("project.toml", f"{name} must be a number of 0 or more, not {v!r}",
                               key=f"board.{name}")
    seen = set()
    for it in items:
        for name in ("length_mm", "width_mm", "height_mm"):
            v = getattr(it, name)
            if not isinstance(v, (int, float)) or not math.isfinite(v) or v < 0 or (v == 0 and name != "height_mm"):
                raise DesignError("design", f"courtyard {name} must be a positive number, not {v!r}", ref=it.ref)
        if it.ref in seen:
            raise DesignError("design", "the part is listed twice", ref=it.ref)
        seen.add(it.ref)


def place_and_fit(items: Sequence[PlaceItem], region: Region, board: BoardOptions, *,
                  user_board: BaseGeometry | None = None, progress: Progress | None = None,
                  improve: bool = True, spread: bool = True) -> FitResult:
    """Place every item's courtyard on a board inside ``region``, or say what blocks it.

    Model, method and the cost of each step: the module notes.

    Parameters
    ----------
    items : sequence of PlaceItem
        The fitted parts (:func:`pipeline.area.items_from_design`).
    region : Region
        Usable board region and height zones, mm.
    board : BoardOptions
        ``edge_clearance_mm``, ``sides``, ``layers`` (for the estimate),
        ``outline`` and ``min_inside_radius_mm`` (for the proposed outline).
    user_board : Polygon, optional
        The user's own outline (layer ``BOARD``); one outside the region does not fit.
    progress : callable(message, fraction), optional
    improve : bool
        Run the wirelength improvement and the spreading (steps 3 and 4).
        Callers that need only the verdict (the size sweep, the smallest-board
        screen) pass False: fit, unplaced parts and board do not depend on it.
    spread : bool
        With ``improve``, spread the packed block over the room left (step 4).
        False keeps the packing as packed (the density benchmark measures the
        packing itself; the spreading only uses room a fit leaves).

    Returns
    -------
    FitResult
        ``fits`` when every item is placed (and a user's board lies in the
        region); ``placements`` by ref (natural order); ``blocked_by`` plain
        sentences naming what to change; ``wirelength_mm`` the total
        half-perimeter wirelength; ``warnings`` findings.

    Examples
    --------
    >>> from shapely.geometry import box
    >>> from pipeline.model import HeightZone
    >>> reg = Region(box(0, 0, 20, 10), (HeightZone(box(0, 0, 20, 10), 3.0),), 0.8)
    >>> items = [PlaceItem("R1", 2.8, 1.3, 0.5, ("A",)), PlaceItem("R2", 2.8, 1.3, 0.5, ("A",))]
    >>> fit = place_and_fit(items, reg, BoardOptions())
    >>> fit.fits, [p.ref for p in fit.placements]
    (True, ['R1', 'R2'])
    """
    items = tuple(items)
    _check_inputs(items, board)
    estimate = estimate_area(items, board.layers)
    if progress is not None:
        progress("proposing the board outline", 0.0)
    outline, where, blocked, warnings = _board(region, board, user_board)
    area = _placement_area(where, region, board)
    nets = _nets(items)
    if items and area.is_empty:
        out = _Outcome(unplaced=sorted((it.ref for it in items), key=natural_key), blocked=[
            f"Nothing is left to place parts on: the board area is {_area(where.area)} mm² and keeping "
            f"{_fmt(board.edge_clearance_mm)} mm from its edges leaves no room."])
    else:
        out = _pack_and_check(items, area, region, board, estimate, nets, improve, progress,
                              spread) if items else _Outcome()
    if progress is not None:
        progress("placement done", 1.0)
    return _fit_result(items, region, estimate, outline, nets, out, blocked + out.blocked, warnings + out.warnings)


def _placement_area(where: BaseGeometry, region: Region, board: BoardOptions) -> BaseGeometry:
    """Where courtyards may stand: the board inside the region less the edge clearance and the
    mounting screws' keep-outs (pipeline/mount.py: no courtyard on a head's ring or over a boss)."""
    area = _inset(where, board.edge_clearance_mm) if not where.is_empty else where
    area = shapely.union_all([p for p in polygons_of(area)]) if not area.is_empty else Polygon()
    if region.mounts:
        area = area.difference(mount_keepout(region.mounts))
    return area


def _fit_result(items, region: Region, estimate, outline, nets, out: "_Outcome", blocked: list,
                warnings: list) -> FitResult:
    """The :class:`FitResult` of a packing outcome, with the verdict's closing notes."""
    fits = not out.unplaced and not blocked
    board_area = float(outline.area) if outline is not None else 0.0
    _verdict_notes(items, fits, board_area, estimate, blocked, warnings)
    return FitResult(
        fits=fits,
        region_area_mm2=float(region.area_mm2),
        courtyard_area_mm2=float(estimate.courtyard_area_mm2),
        estimate=estimate,
        placements=tuple(out.placements),
        board_outline=outline,
        blocked_by=tuple(blocked),
        unplaced=tuple(out.unplaced),
        wirelength_mm=_placed_wirelength(items, nets, out.placements),
        warnings=tuple(warnings),
    )


@dataclass
class _Outcome:
    """What the packing step hands back to :func:`place_and_fit`."""

    placements: list = field(default_factory=list)
    unplaced: list = field(default_factory=list)
    blocked: list = field(default_factory=list)
    warnings: list = field(default_factory=list)


def _board(region: Region, board: BoardOptions, user_board: BaseGeometry | None):
    """The board outline, the part of it inside the region, and its findings (step: the board)."""
    warnings: list[Finding] = []
    blocked: list[str] = []
    board_region = region.board_region
    if user_board is not None and not user_board.is_empty:
        outline = orient(user_board, 1.0) if user_board.geom_type == "Polygon" else user_board
        outside = outline.difference(board_region) if board_region is not None else outline
        if outside.area > 1e-6:
            c = outside.representative_point()
            blocked.append(
                f"The board outline you gave reaches {_area(outside.area)} mm² outside the usable region "
                f"(cavity minus wall clearance and keep-outs), near ({_fmt(c.x)}, {_fmt(c.y)}) mm: "
                f"shrink it there or remove the BOARD outline to have one proposed.")
        where = outline.intersection(board_region) if board_region is not None else outline
        return with_mount_holes(outline, region.mounts, blocked), where, blocked, warnings
    outline = with_mount_holes(propose_outline(region, (), board), region.mounts, blocked)
    pieces = [p for p in polygons_of(board_region) if p.area > 1e-3]
    if len(pieces) > 1:
        warnings.append(Finding(
            "warning", "fit.region-split", (),
            f"The usable region is in {len(pieces)} separate pieces; the proposed board uses the largest "
            f"({_area(outline.area)} mm² of {_area(sum(p.area for p in pieces))} mm²)."))
    return outline, outline, blocked, warnings


def _tries(items, packer: _Packer, area: BaseGeometry, board: BoardOptions, estimate) -> list:
    """(bottom gap, column band or None) to try in turn (module notes: two sides, compact block)."""
    gaps = [0.0]
    if board.sides == 2:
        hs = sorted({float(it.height_mm) for it in items if 0 < it.height_mm <= packer.lowest_zone + 1e-9})
        if len(hs) > MAX_GAPS - 1:
            pick = np.unique(np.linspace(0, len(hs) - 1, MAX_GAPS - 1).round().astype(int))
            hs = [hs[k] for k in pick]
        gaps += hs
    tries: list[tuple[float, tuple[int, int] | None]] = []
    if estimate.courtyard_area_mm2 * ROOMY <= area.area:
        longest = max(max(it.length_mm, it.width_mm) for it in items)
        cols = packer.band(max(math.sqrt(ROOMY * estimate.courtyard_area_mm2), 1.5 * longest))
        if cols is not None:
            tries.append((0.0, cols))
    return tries + [(gp, None) for gp in gaps]


def _best_run(packer: _Packer, tries: list, sides: int, progress: Progress | None) -> _Run:
    """Pack each try until one places every part; the one placing most (then lowest gap) wins."""
    best = None
    for gi, (gp, cols) in enumerate(tries):
        lo = 0.05 + 0.75 * gi / len(tries)
        run = packer.run(gp, sides, progress, (lo, lo + 0.75 / len(tries)), cols)
        if best is None or (run.placed, -run.gap) > (best.placed, -best.gap):
            best = run
        if not run.unplaced:
            break
    return best


def _pack_and_check(items, area, region: Region, board: BoardOptions, estimate, nets, improve: bool,
                    progress: Progress | None, spread: bool = True) -> _Outcome:
    """Steps 1 to 5 of the module notes: grid, packing, improvement, spreading, self-check."""
    refs = [it.ref for it in items]
    out = _Outcome()
    fixed = _fixed_parts(items, region, board)
    items, fixed, out.warnings = place_rules.pin_edge_parts(items, fixed, area, region)  # edge rule first
    packer = _Packer(items, area, region.zones, _rank(items, nets), fixed=fixed)
    tries = _tries(items, packer, area, board, estimate)
    low = max((items[i].height_mm for i, (side, _) in fixed.items() if side == "bottom"), default=0.0)
    tries = [t for t in tries if t[0] >= low - 1e-9] or [(low, None)]  # bottom parts fixed: raise the board
    run = _best_run(packer, tries, board.sides, progress)
    if improve:  # swaps pulling near parts toward their targets: the near pass's trades go less far
        _improve(packer, run, nets, progress, pull=True)
        _near_and_repair(packer, run, fixed, nets, progress)
        if spread and place_spread.spreads(run, fixed):  # a near part keeps its offset from its target
            if place_spread.spread_block(packer, run, fixed, estimate.courtyard_area_mm2):  # room for routing
                _improve(packer, run, nets, progress, min_gain=SPREAD_MIN_GAIN)  # swaps on the spread slots
                _near_and_repair(packer, run, fixed, nets, progress)  # for any rule the spreading undid
    else:
        place_rules.near_pass(packer, run, fixed)
    rects = {i: packer.rect(i, run.slots[i]) for i in run.slots}
    rects.update({i: r for i, (_, r) in fixed.items()})
    sides = {i: s[0] for i, s in run.slots.items()} | {i: sd for i, (sd, _) in fixed.items()}
    idx = sorted(rects, key=lambda i: natural_key(refs[i]))
    bad = _self_check(packer, sides, rects, run.gap)
    if bad:
        out.warnings.append(Finding(
            "warning", "fit.self-check", tuple(refs[i] for i in sorted(bad)),
            f"The placement self-check rejected {len(bad)} placed parts; they are reported as unplaced."))
    keep = [i for i in idx if i not in bad]
    courts = shapely.box(*np.array([rects[i] for i in keep]).reshape(-1, 4).T)  # one call, not one per part
    for i, court in zip(keep, courts):
        x1, y1, x2, y2 = rects[i]
        f = items[i].fixed
        rot = f.rotation_deg if i in fixed else (90 if run.slots[i][1] else 0)
        x, y = (f.x_mm, f.y_mm) if i in fixed else ((x1 + x2) / 2, (y1 + y2) / 2)
        out.placements.append(Placement(refs[i], x, y, rot, sides[i], court))
    not_placed = sorted(set(run.unplaced) | (bad - set(fixed)))
    out.unplaced = sorted([refs[i] for i in not_placed] + [refs[i] for i in sorted(bad & set(fixed))],
                          key=natural_key)
    for i in sorted(bad & set(fixed), key=lambda i: natural_key(refs[i])):
        out.blocked.append(
            f"{refs[i]} is fixed at ({_fmt(items[i].fixed.x_mm)}, {_fmt(items[i].fixed.y_mm)}) mm (at, "
            f"{items[i].fixed.file}), but its courtyard there leaves the board area (after the "
            f"{_fmt(board.edge_clearance_mm)} mm edge clearance) or the height the lid allows for "
            f"{_fmt(items[i].height_mm)} mm: move it or choose a lower package.")
    out.blocked += _diagnose(packer, run, not_placed, region, board)
    unmet, notes = place_rules.unmet_rules(items, out.placements)
    out.blocked += unmet
    out.warnings += notes
    out.blocked += raised_heads(region.mounts, region.zones, run.gap)
    bottom = [p.ref for p in out.placements if p.side == "bottom"]
    if run.gap > 0 and bottom:
        out.warnings.append(Finding(
            "info", "fit.bottom-side", tuple(bottom),
            f"{len(bottom)} parts go on the bottom side; the board then sits {_fmt(run.gap)} mm above the "
            f"floor on them, which leaves that much less height for the top side."))
    return out


def _fixed_rect(it: PlaceItem) -> tuple[float, float, float, float]:
    """The courtyard rectangle of a fixed part (180 and 270 degrees give the 0 and 90 rectangles)."""
    f = it.fixed
    dx, dy = (it.length_mm, it.width_mm) if f.rotation_deg in (0, 180) else (it.width_mm, it.length_mm)
    return (f.x_mm - dx / 2, f.y_mm - dy / 2, f.x_mm + dx / 2, f.y_mm + dy / 2)


def _fixed_parts(items, region: Region, board: BoardOptions) -> dict:
    """Fixed parts as ``item -> (side, rect)``, checked against the region (the board comes later).

    Raises
    ------
    DesignError
        A fixed courtyard reaches outside the usable region (cavity, wall
        clearance, keep-outs), two fixed parts overlap on one side, or a part
        is fixed on the bottom of a one-sided board; the message names the
        design file, the part's line and the key.
    """
    fixed = {i: (it.fixed.side, _fixed_rect(it)) for i, it in enumerate(items) if it.fixed is not None}
    usable = region.board_region.buffer(TOL, join_style="mitre") if region.board_region is not None else None
    seen: list[tuple[int, BaseGeometry]] = []
    for i, (side, r) in sorted(fixed.items(), key=lambda kv: natural_key(items[kv[0]].ref)):
        it, f = items[i], items[i].fixed
        where = dict(line=f.line or None, ref=it.ref)
        if side == "bottom" and board.sides != 2:
            raise DesignError(f.file or "design", "the part is fixed on the bottom side, but the board has one "
                              "side (set [board] sides = 2 in project.toml)", key=f"parts.{it.ref}.side", **where)
        court = box(*r)
        if usable is None or not usable.covers(court):
            raise DesignError(f.file or "design", f"the courtyard fixed at ({_fmt(f.x_mm)}, {_fmt(f.y_mm)}) mm "
                              f"reaches outside the usable region (the cavity less its wall clearance and "
                              f"keep-outs)", key=f"parts.{it.ref}.at", **where)
        if region.mounts and court.intersection(mount_keepout(region.mounts)).area > 1e-9:
            raise DesignError(f.file or "design", f"the courtyard fixed at ({_fmt(f.x_mm)}, {_fmt(f.y_mm)}) mm "
                              "stands on a mounting screw's head ring or its boss", key=f"parts.{it.ref}.at", **where)
        for j, other in seen:
            if fixed[j][0] == side and court.intersection(other).area > 1e-9:
                raise DesignError(f.file or "design", f"its fixed courtyard overlaps {items[j].ref}'s, also fixed "
                                  f"on the {side} side", key=f"parts.{it.ref}.at", **where)
        seen.append((i, court))
    return fixed


def _placed_wirelength(items, nets: list[list[int]], placements) -> float:
    """Half-perimeter wirelength over all nets of the placed parts, mm."""
    if not placements:
        return 0.0
    at = {p.ref: (p.x_mm, p.y_mm) for p in placements}
    xs = [at.get(it.ref, (0.0, 0.0))[0] for it in items]
    ys = [at.get(it.ref, (0.0, 0.0))[1] for it in items]
    live = [[i for i in m if items[i].ref in at] for m in nets]
    return float(hpwl(live, xs, ys))


def _verdict_notes(items, fits: bool, board_area: float, estimate, blocked: list, warnings: list) -> None:
    """The closing sentence of a failed fit, or the tight-routing warning of a fit."""
    if not fits:
        blocked.append(
            f"The usable board area is {_area(board_area)} mm² after clearances; the parts' courtyards "
            f"take {_area(estimate.courtyard_area_mm2)} mm² and, with room to route, need about "
            f"{_area(estimate.expected_mm2)} mm² ({_area(estimate.low_mm2)} to {_area(estimate.high_mm2)}).")
    elif items and estimate.expected_mm2 > board_area:
        warnings.append(Finding(
            "warning", "fit.tight", (),
            f"Every part fits, but the board's {_area(board_area)} mm² is less than the "
            f"{_area(estimate.expected_mm2)} mm² the routing rule of thumb suggests: routing may be hard; "
            f"consider more layers or smaller packages."))


def _prepared(geom: BaseGeometry) -> BaseGeometry:
    """``geom`` prepared (shapely.prepare: an index of its edges, the same exact predicates; covers
    of 16,000 boxes by the 16,000-part bench board's area took 0.03 s instead of 0.22 s)."""
    shapely.prepare(geom)
    return geom


def _self_check(packer: _Packer, sides: dict, rects: dict, gap: float) -> set[int]:
    """Items whose courtyard breaks a rule when checked exactly with shapely (the area and zones
    prepared: O(boxes x log edges))."""
    if not rects:
        return set()
    idx = list(rects)
    boxes = shapely.box(*np.array([rects[i] for i in idx]).T)
    bad: set[int] = set()
    ok = shapely.covers(_prepared(packer.area.buffer(TOL, join_style="mitre")), boxes)
    bad |= {i for i, good in zip(idx, ok) if not good}
    if packer.zones:
        by_level: dict[int, list[int]] = {}
        for n, i in enumerate(idx):
            side = sides[i]
            h = packer.items[i].height_mm + (gap if side == "top" else 0.0)
            if side == "bottom":
                h = max(gap, 0.0)
            lvl = packer.level(h)
            if lvl is None:
                bad.add(i)
                continue
            by_level.setdefault(lvl, []).append(n)
        for lvl, ns in by_level.items():
            allowed = _prepared(packer.zone_union(lvl).buffer(TOL, join_style="mitre"))
            okz = shapely.covers(allowed, boxes[ns])
            bad |= {idx[n] for n, good in zip(ns, okz) if not good}
    for side in ("top", "bottom"):
        ns = [n for n, i in enumerate(idx) if sides[i] == side]
        if len(ns) < 2:
            continue
        sub = boxes[ns]
        tree = shapely.STRtree(sub)
        a, b = tree.query(sub, predicate="intersects")
        keep = a < b
        a, b = a[keep], b[keep]
        if len(a):
            inter = shapely.area(shapely.intersection(sub[a], sub[b]))
            for x, y, v in zip(a, b, inter):
                if v > 1e-9:
                    bad.add(idx[ns[int(y)]])
    return bad


def _diagnose(packer: _Packer, run: _Run, not_placed: Sequence[int], region: Region,
              board: BoardOptions) -> list[str]:
    """Plain sentences for the parts that found no place."""
    if not not_placed:
        return []
    items = packer.items
    out: list[str] = []
    too_tall: list[int] = []
    too_big: list[int] = []
    no_zone_room: list[int] = []
    no_room: list[int] = []
    static: dict[tuple, str] = {}
    for i in not_placed:
        key = run.class_of.get(i)
        lvl = run.top_level.get(i)
        if lvl is None and not run.bottom_ok.get(i):
            too_tall.append(i)
            continue
        if key not in static:
            if not packer.static_fit(i, None):
                static[key] = "big"
            elif lvl is not None and not packer.static_fit(i, lvl) and not run.bottom_ok.get(i):
                static[key] = "zone"
            else:
                static[key] = "room"
        {"big": too_big, "zone": no_zone_room, "room": no_room}[static[key]].append(i)

    def refs(ids):
        return listed(sorted((items[i].ref for i in ids), key=natural_key))

    deepest = packer.heights[-1] if packer.heights else math.inf
    for i in sorted(too_tall, key=lambda i: (-items[i].height_mm, natural_key(items[i].ref))):
        it = items[i]
        raised = f" with the board raised {_fmt(run.gap)} mm on bottom-side parts" if run.gap > 0 else ""
        out.append(
            f"{it.ref} is {_fmt(it.height_mm)} mm tall, but the deepest part of the cavity leaves only "
            f"{_fmt(deepest - run.gap)} mm above a {_fmt(region.thickness_mm)} mm board{raised}: "
            f"use a lower package, a thinner board or a deeper cavity.")
    for i in sorted(too_big, key=lambda i: natural_key(items[i].ref)):
        it = items[i]
        out.append(
            f"{it.ref}'s courtyard ({_fmt(it.length_mm)} x {_fmt(it.width_mm)} mm) is larger than any "
            f"place on the board in both orientations (after the {_fmt(board.edge_clearance_mm)} mm edge "
            f"clearance): it cannot fit whatever else is placed.")
    if no_zone_room:
        hmin = min(items[i].height_mm for i in no_zone_room)
        out.append(
            f"{refs(no_zone_room)}: no part of the board where the lid leaves at least "
            f"{_fmt(hmin + run.gap)} mm above it is large enough for the courtyard; move them to lower "
            f"packages or make the deep area larger.")
    if no_room:
        area = sum(items[i].length_mm * items[i].width_mm for i in no_room)
        out.append(
            f"No room left for {len(no_room)} part{'s' if len(no_room) != 1 else ''} after placing the "
            f"others: {refs(no_room)} ({_area(area)} mm² of courtyard). Use smaller packages, "
            + ("a two-sided board (sides = 2), " if board.sides == 1 else "")
            + "or a larger cavity.")
    return out
