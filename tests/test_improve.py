"""The swap pass: its nearest-slot search against scipy's k-d tree (a general-purpose reference library),
its result against the half-perimeter definition and an exhaustive search on small boards."""

from __future__ import annotations

import itertools

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.spatial import cKDTree

from pipeline import improve
from pipeline.improve import BRUTE_FORCE_SLOTS, SWAP_CANDIDATES, _NearestSlots, improve_swaps


@pytest.mark.parametrize("slots", [2, 5, SWAP_CANDIDATES, 40, BRUTE_FORCE_SLOTS, BRUTE_FORCE_SLOTS + 1, 300])
def test_nearest_slots_agree_with_a_kd_tree(slots):
    rng = np.random.default_rng(slots)
    xy = rng.random((slots, 2)) * 20.0  # random points: no equal distances
    at = rng.random((30, 2)) * 20.0
    k = min(SWAP_CANDIDATES, slots)
    # reference: scipy.spatial.cKDTree.query, k nearest sorted by distance
    want = np.asarray(cKDTree(xy).query(at, k=k)[1]).reshape(30, k)
    assert _NearestSlots(xy).query(at, k).reshape(30, k).tolist() == want.tolist()


def test_equal_distances_go_to_the_earlier_slot():
    xy = np.array([[1.0, 0.0], [-1.0, 0.0], [0.0, 1.0], [0.0, 3.0]])
    assert _NearestSlots(xy).query(np.array([[0.0, 0.0]]), 3).tolist() == [[0, 1, 2]]


# --------------------------------------------------------------------------
# the pass itself, against the half-perimeter definition computed here and an exhaustive search
# --------------------------------------------------------------------------
def _hpwl(nets, pos):
    """Half-perimeter wirelength by its definition (bounding box width + height of each net)."""
    return sum(float(np.ptp(pos[m, 0]) + np.ptp(pos[m, 1])) for m in nets if len(m) >= 2)


def _placed(xy, slot):
    return xy[np.asarray(slot)]


@st.composite
def _boards(draw):
    n = draw(st.integers(4, 24))
    xy = np.array(draw(st.lists(st.tuples(st.integers(0, 40), st.integers(0, 40)), min_size=n, max_size=n)),
                  dtype=float) * 0.5
    parts = list(range(n))
    cut = draw(st.integers(1, n))
    groups = [parts[:cut], parts[cut:]] if cut < n else [parts]
    nets = draw(st.lists(st.lists(st.integers(0, n - 1), min_size=2, max_size=5), min_size=1, max_size=2 * n))
    return xy, groups, nets


@settings(max_examples=60, deadline=None)
@given(_boards())
def test_swaps_keep_groups_and_never_lengthen(board):
    xy, groups, nets = board
    slot = improve_swaps(groups, xy, nets, 32)
    for g in groups:  # a permutation of each group's own slots
        assert sorted(slot[g].tolist()) == sorted(g)
    # the pass only takes improving swaps (module notes, step 4): HPWL by definition, not the pass's own sums
    assert _hpwl(nets, _placed(xy, slot)) <= _hpwl(nets, xy) + 1e-9


@pytest.mark.parametrize("order", list(itertools.permutations(range(3))))
def test_three_parts_on_a_line_reach_the_exhaustive_optimum(order):
    # anchors 0..2 fixed at x = 0, 10, 20; movable parts 3..5 each on a net with one anchor;
    # their slots at x = 1, 11, 21 in a shuffled order: the optimum (exhaustive search over the
    # 6 assignments, computed here) puts each part beside its anchor, total 3 x 1 mm.
    xy = np.array([[0, 0], [10, 0], [20, 0]] + [[1 + 10 * k, 0] for k in order], dtype=float)
    nets = [[0, 3], [1, 4], [2, 5]]
    best = min(_hpwl(nets, xy[[0, 1, 2, *p]]) for p in itertools.permutations([3, 4, 5]))
    slot = improve_swaps([[3, 4, 5]], xy, nets, 32)
    assert _hpwl(nets, _placed(xy, slot)) == pytest.approx(best) == pytest.approx(3.0)


def test_only_movers_look_for_swaps():
    # parts 1 and 2 want each other's slots; with neither a mover nothing moves, with either both do
    xy = np.array([[0.0, 0.0], [10.0, 0.0], [1.0, 0.0], [20.0, 0.0]])
    nets = [[0, 1], [3, 2]]
    assert improve_swaps([[1, 2]], xy, nets, 32, movers=[0, 3]).tolist() == [0, 1, 2, 3]
    assert improve_swaps([[1, 2]], xy, nets, 32, movers=[2]).tolist() == [0, 2, 1, 3]
    assert improve_swaps([[1, 2]], xy, nets, 32).tolist() == [0, 2, 1, 3]


def test_nets_over_the_fanout_are_left_out():
    xy = np.array([[0.0, 0.0], [10.0, 0.0], [1.0, 0.0]])
    assert improve_swaps([[1, 2]], xy, [[0, 1]], 1).tolist() == [0, 1, 2]


# --------------------------------------------------------------------------
# cost guard: the shared-net lookups of the move costs (counted, not timed)
# --------------------------------------------------------------------------
def _random_board(seed, n=300):
    rng = np.random.default_rng(seed)
    xy = rng.random((n, 2)) * 50.0
    nets = [rng.choice(n, size=int(rng.integers(2, 5)), replace=False).tolist() for _ in range(n)]
    return xy, nets


@pytest.mark.parametrize("seed", [1, 7, 23])
def test_shared_net_lookups_skip_lengthened_nets_with_the_same_result(seed, monkeypatch):
    # A net holding the other part of a swap never lengthens, so only the rows below _LONGER are
    # looked up. Reference: _LONGER = inf looks up every row (the masking as first written);
    # the slots must be the same and the lookups (counted here) far fewer: measured 136,462 of
    # 290,024 for seed 7 (0.47), so 0.6 leaves room yet fails if the filter is lost.
    xy, nets = _random_board(seed)
    looked = [0]
    has = improve._Pins.has

    def counting(self, net, item):
        looked[0] += len(net)
        return has(self, net, item)

    monkeypatch.setattr(improve._Pins, "has", counting)
    slot = improve_swaps([list(range(len(xy)))], xy, nets, 32)
    filtered = looked[0]
    looked[0] = 0
    monkeypatch.setattr(improve, "_LONGER", np.inf)
    every = improve_swaps([list(range(len(xy)))], xy, nets, 32)
    assert slot.tolist() == every.tolist()
    assert 0 < filtered < 0.6 * looked[0]


@pytest.mark.parametrize("seed", [3, 11])
def test_kept_candidate_slots_give_the_same_swaps_with_fewer_queries(seed, monkeypatch):
    # A part whose target did not change keeps the candidate slots of its last query (the slots never
    # move). Reference: the pass with every part queried every round (the kept targets forgotten
    # before each round); the slots must be the same and the queried points (counted) fewer.
    xy, nets = _random_board(seed, n=200)
    asked = [0]
    query = _NearestSlots.query

    def counting(self, at, k):
        asked[0] += len(at)
        return query(self, at, k)

    monkeypatch.setattr(_NearestSlots, "query", counting)
    groups = [list(range(0, 200, 2)), list(range(1, 200, 2))]
    kept = improve_swaps(groups, xy, nets, 32, min_gain=0.0)
    with_cache = asked[0]
    asked[0] = 0
    real = improve._candidates

    def forgetting(st, tgt):
        st.target[:] = np.nan
        return real(st, tgt)

    monkeypatch.setattr(improve, "_candidates", forgetting)
    assert improve_swaps(groups, xy, nets, 32, min_gain=0.0).tolist() == kept.tolist()
    assert with_cache < asked[0]
