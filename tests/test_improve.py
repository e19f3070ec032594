"""The swap pass's nearest-slot search against scipy's k-d tree (a general-purpose reference library)."""

from __future__ import annotations

import numpy as np
import pytest
from scipy.spatial import cKDTree

from pipeline.improve import BRUTE_FORCE_SLOTS, SWAP_CANDIDATES, _NearestSlots


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
