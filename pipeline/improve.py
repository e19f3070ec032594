"""Wirelength improvement by rounds of independent pairwise swaps, evaluated in batches.

Entry point: :func:`improve_swaps`. Parts that may trade slots without
touching legality (the placer's classes: same cell size, height level and
side) swap places when that lowers the half-perimeter wirelength (HPWL).

The method (pairwise interchange toward the optimal region)
-----------------------------------------------------------
Pairwise interchange is the classic placement improvement (Goto 1981);
each part is moved toward its *optimal region*, the median of the
bounding-box edges of its nets without it (Goto 1981; Sherwani,
*Algorithms for VLSI Physical Design Automation*, section 5.5), where its
own HPWL is smallest. One *round*:

1. For every pin (part ``i`` on net ``k``) the bounding box of net ``k``
   without ``i`` comes from the two smallest and two largest member
   coordinates of each net (one sort of all pins by net then coordinate).
2. Each part's target is the median of its nets' box edges (one sort of
   all edges; no per-part ``np.median``); the ``SWAP_CANDIDATES`` slots of
   its class nearest the target (a k-d tree per class, queried in one
   batch; a class of at most ``BRUTE_FORCE_SLOTS`` slots uses one
   distance matrix instead, so small boards do not import scipy) are its
   candidate swaps. The slots never move, so a part whose target did not change since its
   last query keeps the candidate slots found then (only the others are queried again).
3. Every candidate swap ``(i, j)`` is evaluated at once with numpy: the
   change of HPWL of every net of ``i`` when ``i`` moves to ``j``'s slot,
   plus the same for ``j``; nets holding both parts do not change and are
   masked out, so the figure is exact.
4. Improving swaps are taken best first while they touch no net another
   taken swap touches; such swaps do not interact, so all are applied
   together and the HPWL falls by exactly the sum of their gains.

Rounds repeat until a round gains less than ``MIN_GAIN`` of the HPWL or
``MAX_ROUNDS`` rounds have run. Each round evaluates ``SWAP_CANDIDATES``
swaps per movable part, so the budget grows with the design, and costs
O(P log P) for P pins (the sorts) plus O(n k log n) for the k-d tree
queries: the whole pass is O(R (P log P + n log n)) for R rounds.

*Repair* (``movers`` given): after a few parts were moved by something
else (the placer's near pass trades parts away from their nets), only those
parts look for a swap in the first round, and in each later round only the
parts that share a net with a part just swapped: the other parts' targets
did not change, so they are not looked at again (*don't-look bits*,
Bentley 1992). Rounds go on until one takes no swap (or ``MAX_ROUNDS``);
each costs the sorts of all pins plus the candidates of the parts looked
at, O(P log P + m k log n) for m of them.

Nets with more than ``fanout`` parts (ground, supplies) are left out, as
placers commonly do.

References (cited from memory)
------------------------------
S. Goto, "An efficient algorithm for the two-dimensional placement problem
in electrical circuit layout", IEEE Trans. Circuits and Systems 28(1), 1981.
N. Sherwani, Algorithms for VLSI Physical Design Automation, 3rd ed.,
Kluwer 1999, chapter 5 (placement; iterative improvement).
J. L. Bentley, "Fast algorithms for geometric traveling salesman
problems", ORSA J. Computing 4(4), 1992 (don't-look bits).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable, Iterable, Sequence

import numpy as np

__all__ = ["improve_swaps", "MAX_ROUNDS", "MIN_GAIN", "SWAP_CANDIDATES"]

Progress = Callable[[str, float], None]

#: Most rounds of the pass (a repair's rounds included).
MAX_ROUNDS = 30
#: A round gaining less than this share of the HPWL ends a pass over every part (not a repair).
#: (1 %: at 16,000 parts the rounds after that gained 0.5 % each and took 40 % of the pass; going
#: on with don't-look rounds there shortened the demo's nets so far that it needed spreading to
#: route. bench/bench_scale.py measures the wirelength against random permutations.)
MIN_GAIN = 1e-2
#: Candidate slots looked at per part and round.
SWAP_CANDIDATES = 12
#: Classes of at most this many slots find their candidates from a distance matrix (no k-d tree).
BRUTE_FORCE_SLOTS = 64
#: A net's HPWL change above this (mm) is a real lengthening, never rounding (coordinates of a board,
#: at most metres, carry rounding near 1e-12 mm); only rows below it may hold the other part.
_LONGER = 1e-6


class _Pins:
    """Pins of the nets as flat arrays, grouped by net and by part (CSR)."""

    def __init__(self, nets: Sequence[Sequence[int]], n: int):
        sizes = np.array([len(m) for m in nets], dtype=np.int64)
        self.net = np.repeat(np.arange(len(nets)), sizes)
        self.item = np.fromiter((i for m in nets for i in m), dtype=np.int64, count=int(sizes.sum()))
        self.net_start = np.concatenate(([0], np.cumsum(sizes)[:-1])) if len(nets) else np.zeros(0, np.int64)
        self.net_end = self.net_start + sizes - 1
        by_item = np.argsort(self.item, kind="stable")
        self.by_item = by_item  # pin indices grouped by part
        self.deg = np.bincount(self.item, minlength=n)
        self.item_start = np.concatenate(([0], np.cumsum(self.deg)[:-1]))
        # membership of (net, part) for masking shared nets: sorted keys
        self.n = n
        self.keys = np.sort(self.net * n + self.item)

    def has(self, net: np.ndarray, item: np.ndarray) -> np.ndarray:
        """Is part ``item`` on net ``net`` (elementwise)?"""
        k = net * self.n + item
        pos = np.searchsorted(self.keys, k)
        pos = np.minimum(pos, len(self.keys) - 1)
        return self.keys[pos] == k


def _without_self(pins: _Pins, v: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Per pin: smallest and largest coordinate of its net without that pin; and per net the span."""
    order = np.lexsort((v[pins.item], pins.net))  # pins of a net together, by coordinate
    s = v[pins.item][order]
    lo1 = s[pins.net_start]
    lo2 = s[pins.net_start + 1]
    hi1 = s[pins.net_end]
    hi2 = s[pins.net_end - 1]
    first = np.empty(len(order), dtype=bool)
    first[:] = False
    first[order[pins.net_start]] = True
    last = np.zeros(len(order), dtype=bool)
    last[order[pins.net_end]] = True
    k = pins.net
    lo = np.where(first, lo2[k], lo1[k])
    hi = np.where(last, hi2[k], hi1[k])
    return lo, hi, hi1 - lo1


def _targets(pins: _Pins, movable: np.ndarray, ex: list[np.ndarray]) -> np.ndarray:
    """Median of the box edges of each movable part's nets without it (the optimal region), (m, 2)."""
    out = np.empty((len(movable), 2))
    deg = pins.deg[movable]
    cnt = 2 * deg
    start = np.concatenate(([0], np.cumsum(cnt)[:-1]))
    grp = np.repeat(np.arange(len(movable)), cnt)
    local = np.arange(int(cnt.sum())) - start[grp]
    pin = pins.by_item[pins.item_start[movable][grp] + local // 2]
    for axis in (0, 1):
        lo, hi = ex[2 * axis], ex[2 * axis + 1]
        vals = np.where(local % 2 == 0, lo[pin], hi[pin])
        order = np.lexsort((vals, grp))
        sv = vals[order]
        a = sv[start + (cnt - 1) // 2]
        b = sv[start + cnt // 2]
        out[:, axis] = (a + b) / 2
    return out


def _move_cost(pins: _Pins, who: np.ndarray, tx: np.ndarray, ty: np.ndarray, other: np.ndarray,
               ex: list[np.ndarray], span: np.ndarray) -> np.ndarray:
    """Change of HPWL of ``who``'s nets when it moves to ``(tx, ty)``; nets holding ``other`` count 0."""
    deg = pins.deg[who]
    total = int(deg.sum())
    if total == 0:
        return np.zeros(len(who))
    rep = np.repeat(np.arange(len(who)), deg)
    start = np.concatenate(([0], np.cumsum(deg)[:-1]))
    pin = pins.by_item[pins.item_start[who][rep] + np.arange(total) - start[rep]]
    net = pins.net[pin]
    x, y = tx[rep], ty[rep]
    new = (np.maximum(ex[1][pin], x) - np.minimum(ex[0][pin], x)
           + np.maximum(ex[3][pin], y) - np.minimum(ex[2][pin], y))
    d = new - span[net]
    # A net holding ``other`` never lengthens (the mover lands inside the net's box without it; up to
    # rounding, as ``new`` and ``span`` add their terms in another order), so only the rows below
    # ``_LONGER`` are looked up: the same figures for about half the membership tests.
    neg = np.flatnonzero(d < _LONGER)
    d[neg[pins.has(net[neg], other[rep[neg]])]] = 0.0
    return np.bincount(rep, weights=d, minlength=len(who))


class _NearestSlots:
    """The ``k`` slots nearest each query point, nearest first: a k-d tree for large classes
    (:class:`scipy.spatial.cKDTree`, imported only then), one distance matrix for small ones
    (ties by slot order), so a small board never imports scipy."""

    def __init__(self, xy: np.ndarray):
        self.xy = xy
        if len(xy) > BRUTE_FORCE_SLOTS:
            from scipy.spatial import cKDTree
            self.tree = cKDTree(xy)

    def query(self, at: np.ndarray, k: int) -> np.ndarray:
        if len(self.xy) > BRUTE_FORCE_SLOTS:
            return self.tree.query(at, k=k)[1]
        d = ((at[:, None, :] - self.xy[None, :, :]) ** 2).sum(axis=2)
        return np.argsort(d, axis=1, kind="stable")[:, :k]


def _pick(pairs: np.ndarray, gain: np.ndarray, nets_of: list[list[int]]) -> list[int]:
    """Improving swaps, best first (one per moving part), sharing no net or part with one already taken."""
    keep = gain < -1e-9
    idx = np.flatnonzero(keep)
    if not len(idx):
        return []
    order = idx[np.lexsort((idx, gain[idx], pairs[idx, 0]))]
    first = np.ones(len(order), dtype=bool)
    first[1:] = pairs[order[1:], 0] != pairs[order[:-1], 0]
    best = order[first]
    best = best[np.lexsort((best, gain[best]))]
    taken = []
    used_item: set[int] = set()
    used_net: set[int] = set()  # set tests run in C: no Python loop per net
    for p, i, j in zip(best.tolist(), pairs[best, 0].tolist(), pairs[best, 1].tolist()):
        if i in used_item or j in used_item:
            continue
        if not (used_net.isdisjoint(nets_of[i]) and used_net.isdisjoint(nets_of[j])):
            continue
        used_net.update(nets_of[i])
        used_net.update(nets_of[j])
        used_item.add(i)
        used_item.add(j)
        taken.append(p)
    return taken


@dataclass
class _Swaps:
    """The pass's working state: pins, slots, each group's occupants and nearest-slot search."""

    pins: _Pins
    nets_of: list[list[int]]  # per part: its nets (indices into the kept nets)
    n_nets: int
    pos: np.ndarray  # (n, 2) position of each part, mm (moves with it)
    slot: np.ndarray  # slot each part is in (a part index of the start)
    group_of: np.ndarray
    occupant: list[np.ndarray]  # per group: the part in each of its slots (slot order = group order)
    where: np.ndarray  # index of a part's slot inside its group
    trees: list
    eligible: np.ndarray  # (n,) bool: in a group of two or more and on a kept net
    movable: np.ndarray  # parts that look for a swap this round (the other side may be any group member)
    # kept between rounds: per part the target of its last query and the slots (group order) of
    # its candidates then (the slots never move, so the same target has the same candidates)
    target: np.ndarray = None  # (n, 2), NaN: not asked yet
    near: np.ndarray = None  # (n, SWAP_CANDIDATES) slot indices inside the group


def _setup(groups: Sequence[Sequence[int]], xy: np.ndarray, opt: list[list[int]],
           movers: Iterable[int] | None) -> _Swaps:
    """The state at the start: every part in its own slot; one nearest-slot search per group."""
    n = len(xy)
    pins = _Pins(opt, n)
    nets_of: list[list[int]] = [[] for _ in range(n)]
    for k, m in enumerate(opt):
        for i in m:
            nets_of[i].append(k)
    pos = np.array(xy, dtype=float)
    group_of = np.full(n, -1)
    occupant, trees = [], []
    where = np.zeros(n, dtype=np.int64)
    for g, members in enumerate(groups):
        members = np.asarray(members, dtype=np.int64)
        group_of[members] = g
        occupant.append(members.copy())
        where[members] = np.arange(len(members))
        trees.append(_NearestSlots(pos[members]) if len(members) > 1 else None)
    eligible = (group_of >= 0) & (pins.deg > 0)
    eligible &= np.array([g >= 0 and trees[g] is not None for g in group_of], dtype=bool)
    st = _Swaps(pins, nets_of, len(opt), pos, np.arange(n), group_of, occupant, where, trees, eligible,
                np.zeros(0, dtype=np.int64), np.full((n, 2), np.nan), np.zeros((n, SWAP_CANDIDATES), dtype=np.int64))
    _look_at(st, None if movers is None else np.fromiter(movers, dtype=np.int64))
    return st


def _look_at(st: _Swaps, parts: np.ndarray | None) -> None:
    """Make ``parts`` (all when None) the movable parts of the next round, the eligible ones only."""
    if parts is None:
        st.movable = np.flatnonzero(st.eligible)
        return
    may = np.zeros(len(st.eligible), dtype=bool)
    may[parts] = True
    st.movable = np.flatnonzero(may & st.eligible)


def _neighbours(st: _Swaps, parts: np.ndarray) -> np.ndarray:
    """``parts`` and every part sharing a kept net with one of them (the don't-look bits reset)."""
    hit = np.zeros(st.n_nets, dtype=bool)
    for i in parts.tolist():
        hit[st.nets_of[i]] = True
    return np.union1d(parts, st.pins.item[hit[st.pins.net]])


def _candidates(st: _Swaps, tgt: np.ndarray) -> np.ndarray:
    """Candidate swaps ``(i, j)``: each movable part with the occupants of the ``SWAP_CANDIDATES``
    slots of its group nearest its target (step 2 of the module notes). The slots never move, so
    a part whose target is the one of its last query keeps its slots: only the parts whose target
    changed are queried again (the same answer as querying every part)."""
    gmov = st.group_of[st.movable]
    moved = ~np.all(st.target[st.movable] == tgt, axis=1)  # NaN (never asked) compares unequal
    pairs = []
    for g in np.unique(gmov):
        here = gmov == g
        sel = st.movable[here]
        k = min(SWAP_CANDIDATES, len(st.occupant[g]))
        ask = moved[here]
        if ask.any():
            who = sel[ask]
            st.near[who, :k] = np.asarray(st.trees[g].query(tgt[here][ask], k)).reshape(len(who), k)
        pairs.append(np.stack((np.repeat(sel, k), st.occupant[g][st.near[sel, :k]].reshape(-1)), axis=1))
    st.target[st.movable] = tgt
    pairs = np.concatenate(pairs)
    return pairs[pairs[:, 0] != pairs[:, 1]]


def _apply(st: _Swaps, a: np.ndarray, b: np.ndarray) -> None:
    """Swap the parts ``a[k]`` and ``b[k]`` (same group, pairwise disjoint) between their slots."""
    pos, slot, where = st.pos, st.slot, st.where
    pos[a], pos[b] = pos[b].copy(), pos[a].copy()
    slot[a], slot[b] = slot[b].copy(), slot[a].copy()
    wa, wb = where[a].copy(), where[b].copy()
    where[a], where[b] = wb, wa
    for g, x, y, u, v in zip(st.group_of[a], a, b, wa, wb):
        st.occupant[g][v], st.occupant[g][u] = x, y


def _round(st: _Swaps) -> tuple[float, float, np.ndarray]:
    """One round (steps 1 to 4 of the module notes): (HPWL before it, its gain) in mm, and the parts
    it swapped."""
    pins, pos = st.pins, st.pos
    ex_x = _without_self(pins, pos[:, 0])
    ex_y = _without_self(pins, pos[:, 1])
    ex = [ex_x[0], ex_x[1], ex_y[0], ex_y[1]]
    span = ex_x[2] + ex_y[2]
    pairs = _candidates(st, _targets(pins, st.movable, ex))
    i, j = pairs[:, 0], pairs[:, 1]
    gain = (_move_cost(pins, i, pos[j, 0], pos[j, 1], j, ex, span)
            + _move_cost(pins, j, pos[i, 0], pos[i, 1], i, ex, span))
    taken = _pick(pairs, gain, st.nets_of)
    if taken:
        _apply(st, pairs[taken, 0], pairs[taken, 1])
    return float(span.sum()), -float(gain[taken].sum()) if taken else 0.0, pairs[taken].reshape(-1)


def improve_swaps(groups: Sequence[Sequence[int]], xy: np.ndarray, nets: Sequence[Sequence[int]],
                  fanout: int, progress: Progress | None = None, *,
                  movers: Iterable[int] | None = None, min_gain: float = MIN_GAIN) -> np.ndarray:
    """Swap parts between slots of their group to lower the half-perimeter wirelength.

    Parameters
    ----------
    groups : sequence of sequences of int
        Parts (indices into ``xy``) that may trade slots; each part in at
        most one group. A part in no group never moves.
    xy : (n, 2) array
        Slot centres, mm; part ``i`` starts in slot ``i``.
    nets : sequence of sequences of int
        Nets as part indices (duplicates ignored); nets of more than
        ``fanout`` parts or fewer than two are left out.
    fanout : int
    progress : callable(message, fraction), optional
    movers : iterable of int, optional
        Only these parts look for a swap (any part of their group may be
        the other side of it); all parts when None. A repair after a few
        parts were moved looks at those only: a round then costs the sorts
        of all pins plus the candidates of the movers.
    min_gain : float
        A pass over every part stops after a round gaining less than this
        share of the HPWL (default :data:`MIN_GAIN`).

    Returns
    -------
    numpy.ndarray of int
        ``slot[i]``: the slot (a part index of the start) part ``i`` ends in.

    Notes
    -----
    Method and cost in the module notes. Deterministic: no randomness, ties
    broken by index.

    Examples
    --------
    Two parts on a net with a third, swapped so that the nearer slot goes
    to the connected part:

    >>> xy = np.array([[0.0, 0.0], [10.0, 0.0], [1.0, 0.0]])
    >>> improve_swaps([[1, 2]], xy, [[0, 1]], 32).tolist()
    [0, 2, 1]
    """
    n = len(xy)
    opt = [m for m in (sorted(set(m)) for m in nets) if 2 <= len(m) <= fanout]
    if not opt or n < 2:
        return np.arange(n)
    st = _setup(groups, xy, opt, movers)
    for rnd in range(MAX_ROUNDS):
        if not len(st.movable):
            break
        total, got, swapped = _round(st)
        if progress is not None:
            progress("improving wirelength", (rnd + 1) / MAX_ROUNDS)
        if not len(swapped) or (movers is None and got < min_gain * total):
            break  # a pass over every part runs rounds while they pay
        if movers is not None:  # a repair: only the parts next to a swap look again (don't-look bits)
            _look_at(st, _neighbours(st, swapped))
    return st.slot
