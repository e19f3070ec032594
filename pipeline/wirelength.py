"""Half-perimeter wirelength: the one formula for how long a net will be, before it is routed.

A net's half-perimeter wirelength (HPWL) is half the perimeter of the
bounding box of its points (pin centres, or part centres), millimetres::

    HPWL = (max x - min x) + (max y - min y)

It is the usual placement estimate of a net's length: a lower bound on any
rectilinear connection of the points, and equal to the shortest one for two
and three points (the rectilinear Steiner tree of three points spans their
bounding box: M. Hanan, "On Steiner's problem with rectangular distance",
SIAM J. Appl. Math. 14(2), 1966; the estimate itself is common practice in
placement, from memory). The placer (:func:`hpwl`), the orientation pass
(pin centres) and the router (the order it routes nets in) all use
:func:`half_perimeter`.

Examples
--------
>>> half_perimeter([0.0, 3.0, 1.0], [0.0, 1.0, 4.0])
7.0
>>> hpwl([[0, 1, 2], [1]], [0.0, 3.0, 1.0], [0.0, 1.0, 4.0])
7.0
"""

from __future__ import annotations

from typing import Iterable, Sequence

__all__ = ["half_perimeter", "hpwl"]


def half_perimeter(xs: Sequence[float], ys: Sequence[float]) -> float:
    """``(max xs - min xs) + (max ys - min ys)``, mm; 0 for fewer than two points. Cost O(points)."""
    if len(xs) < 2:
        return 0.0
    return float((max(xs) - min(xs)) + (max(ys) - min(ys)))


def hpwl(nets: Iterable[Sequence[int]], xs: Sequence[float], ys: Sequence[float]) -> float:
    """Total half-perimeter wirelength (mm) of ``nets`` (lists of indices into ``xs`` and ``ys``);
    a net of fewer than two members adds nothing. Cost O(members)."""
    total = 0.0
    for m in nets:
        total += half_perimeter([xs[i] for i in m], [ys[i] for i in m])
    return total
