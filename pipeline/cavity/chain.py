"""Chaining open pieces into loops, and loops into polygons.

Open pieces on one layer are chained end to end: end points closer than
:data:`~pipeline.cavity.limits.JOIN_TOL_MM` (converted to drawing units) are
one node; every node must join exactly two piece ends. A free end is an
error giving the gap to the nearest other free end; three or more ends at
one node are an error (duplicated or branching entities). This is a linear
walk (``O(n log n)`` for the node search), not a loop search, so it cannot
hang. Each loop becomes a polygon checked with ``shapely.is_valid_reason``.
"""

from __future__ import annotations

import re
from dataclasses import dataclass

import numpy as np
import shapely
from shapely.geometry import Polygon

from pipeline.errors import CavityError

from .convert import Piece
from .limits import JOIN_TOL_MM

__all__ = ["Ring", "chain", "loop_polygon", "one_outline", "fmt_pt", "to_mm"]


@dataclass
class Ring:
    """A closed loop of points in drawing units and the entities that drew it."""

    pts: np.ndarray  # (n, 2), not repeated at the end
    labels: tuple[str, ...]

    @property
    def label(self) -> str:
        if len(self.labels) == 1:
            return self.labels[0]
        return f"{self.labels[0]} and {len(self.labels) - 1} more joined to it"


def fmt_pt(p) -> str:
    return f"({float(p[0]):.6g}, {float(p[1]):.6g})"


def chain(pieces: list[Piece], tol: float, what: str, name: str, mm_per_unit: float) -> list[Ring]:
    """Closed pieces as they are; open pieces joined end to end into loops.

    Raises CavityError for a free end (the gap to the nearest free end) or a
    node where three or more ends meet.
    """
    rings = [Ring(p.pts, (p.label,)) for p in pieces if p.closed]
    opened = [p for p in pieces if not p.closed]
    if not opened:
        return rings
    ends = np.empty((2 * len(opened), 2))
    for i, p in enumerate(opened):
        ends[2 * i] = p.pts[0]
        ends[2 * i + 1] = p.pts[-1]
    members = _nodes(ends, tol)
    _refuse_free_ends(members, ends, opened, what, name, mm_per_unit)
    _refuse_branches(members, ends, opened, what, name)
    return rings + _walk_loops(members, ends, opened)


def _nodes(ends: np.ndarray, tol: float) -> list[list[int]]:
    """End indices grouped into nodes: ends closer than ``tol`` (union-find over a k-d tree)."""
    from scipy.spatial import cKDTree

    parent = np.arange(len(ends))

    def find(i: int) -> int:
        while parent[i] != i:
            parent[i] = parent[parent[i]]
            i = parent[i]
        return int(i)

    tree = cKDTree(ends)
    for a, b in sorted(map(tuple, tree.query_pairs(tol, output_type="ndarray").tolist())):
        ra, rb = find(a), find(b)
        if ra != rb:
            parent[max(ra, rb)] = min(ra, rb)
    node = np.array([find(i) for i in range(len(ends))])
    members: dict[int, list[int]] = {}
    for i, n in enumerate(node.tolist()):
        members.setdefault(n, []).append(i)
    return list(members.values())


def _refuse_free_ends(members: list[list[int]], ends: np.ndarray, opened: list[Piece], what: str,
                      name: str, mm_per_unit: float) -> None:
    """A node with one end is a gap: name it and the nearest other free end."""
    from scipy.spatial import cKDTree

    free = sorted(m[0] for m in members if len(m) == 1)
    if not free:
        return
    if len(free) == 1:
        i = free[0]
        raise CavityError(name, f"the {what} is not closed: this end meets nothing (each end "
                          "must meet exactly one other end)", entity=opened[i // 2].label,
                          at=(float(ends[i][0]), float(ends[i][1])))
    fp = ends[free]
    dist, idx = cKDTree(fp).query(fp, k=2)
    best = min(range(len(free)), key=lambda k: (round(float(dist[k, 1]), 12), free[k]))
    i, j = free[best], free[int(idx[best, 1])]
    if j < i:
        i, j = j, i
    gap = float(np.hypot(*(ends[i] - ends[j])))
    other = ("its own other end" if i // 2 == j // 2 else f"the nearest free end, of "
             f"{opened[j // 2].label},")
    raise CavityError(
        name,
        f"the {what} is not closed: its ends do not meet; {other} is at {fmt_pt(ends[j])}, "
        f"a gap of {gap:.6g} drawing units ({gap * mm_per_unit:.4g} mm); join them in the "
        f"drawing (ends closer than {JOIN_TOL_MM} mm are joined, larger gaps are never closed)",
        entity=opened[i // 2].label, at=(float(ends[i][0]), float(ends[i][1])))


def _refuse_branches(members: list[list[int]], ends: np.ndarray, opened: list[Piece], what: str,
                     name: str) -> None:
    """A node with three or more ends is a branch or a duplicated entity."""
    branches = sorted((m for m in members if len(m) > 2), key=lambda m: m[0])
    if not branches:
        return
    m = branches[0]
    labels = sorted({opened[k // 2].label for k in m}, key=lambda s: s)
    raise CavityError(
        name,
        f"{len(m)} entity ends meet at one point of the {what} ({'; '.join(labels[:4])}"
        f"{'; ...' if len(labels) > 4 else ''}): an outline must be one loop without branches; "
        "remove duplicated, overlapping or crossing entities",
        entity=opened[m[0] // 2].label, at=(float(ends[m[0]][0]), float(ends[m[0]][1])))


def _walk_loops(members: list[list[int]], ends: np.ndarray, opened: list[Piece]) -> list[Ring]:
    """Every node joins exactly two ends: follow piece to partner piece until back at the start."""
    partner = np.empty(len(ends), dtype=int)
    for a, b in members:
        partner[a], partner[b] = b, a
    used = np.zeros(len(opened), dtype=bool)
    rings = []
    for start in range(len(opened)):
        if used[start]:
            continue
        parts: list[np.ndarray] = []
        labels: list[str] = []
        k = start
        forward = True
        while not used[k]:
            used[k] = True
            p = opened[k]
            pts = p.pts if forward else p.pts[::-1]
            parts.append(pts if not parts else pts[1:])
            labels.append(p.label)
            exit_end = 2 * k + (1 if forward else 0)
            nxt = int(partner[exit_end])
            k, forward = nxt // 2, (nxt % 2 == 0)
        ring = np.concatenate(parts)[:-1]
        rings.append(Ring(ring, tuple(labels)))
    return rings


_LOC = re.compile(r"\[\s*([-+0-9.eE]+)\s+([-+0-9.eE]+)")


def loop_polygon(ring: Ring, what: str, name: str, tol: float) -> Polygon:
    pts = ring.pts
    if len(pts) > 1:
        keep = np.ones(len(pts), dtype=bool)
        keep[1:] = np.any(pts[1:] != pts[:-1], axis=1)
        pts = pts[keep]
        if len(pts) > 1 and np.all(pts[0] == pts[-1]):
            pts = pts[:-1]
    at = (float(ring.pts[0][0]), float(ring.pts[0][1]))
    if len(pts) < 3:
        raise CavityError(name, f"the {what} encloses no area", entity=ring.label, at=at)
    poly = Polygon(pts)
    if not poly.is_valid:
        reason = shapely.is_valid_reason(poly)
        m = _LOC.search(reason)
        loc = (float(m.group(1)), float(m.group(2))) if m else at
        kind = reason.split("[")[0].strip()
        raise CavityError(name, f"the {what} crosses or touches itself here ({kind}): "
                          "redraw it as one simple loop", entity=ring.label, at=loc)
    if poly.area <= tol * tol:
        raise CavityError(name, f"the {what} encloses no area", entity=ring.label, at=at)
    return poly


def one_outline(polys: list[tuple[Polygon, Ring]], what: str, name: str) -> Polygon:
    """The largest loop is the outline; loops wholly inside it are holes.

    Refuses a loop outside or across the outline and holes that overlap or
    nest, naming the first such loop in order of decreasing area. Cost
    ``O(n log n)`` in the number of loops: containment is one vectorised
    test against the prepared outline and overlapping holes are found with
    a sort-tile-recursive tree (``shapely.STRtree``) instead of comparing
    every pair.
    """
    order = sorted(range(len(polys)), key=lambda i: (-polys[i][0].area, i))
    outer, outer_ring = polys[order[0]]
    inner = [polys[i] for i in order[1:]]
    if not inner:
        return outer
    geoms = np.array([p for p, _ in inner], dtype=object)
    shapely.prepare(outer)
    outside = np.flatnonzero(~shapely.contains_properly(outer, geoms))
    first_out = int(outside[0]) if len(outside) else len(inner)
    later, earlier = _overlapping_holes(geoms)
    first_overlap = int(later) if later is not None else len(inner)
    if first_out < len(inner) and first_out <= first_overlap:
        p, ring = inner[first_out]
        raise CavityError(name, _outside_reason(outer, outer_ring, p, what), entity=ring.label,
                          at=(float(ring.pts[0][0]), float(ring.pts[0][1])))
    if later is not None:
        ring, qring = inner[later][1], inner[earlier][1]
        raise CavityError(
            name, f"this loop lies inside or across the hole {qring.label} of the {what}: "
            "several outlines (holes may not overlap or nest)", entity=ring.label,
            at=(float(ring.pts[0][0]), float(ring.pts[0][1])))
    result = Polygon(outer.exterior.coords, [h.exterior.coords for h, _ in inner])
    if not result.is_valid:  # holes are pairwise disjoint and inside: should not happen
        reason = shapely.is_valid_reason(result)
        m = _LOC.search(reason)
        raise CavityError(name, f"the {what} and its holes do not form a valid area ({reason})",
                          entity=outer_ring.label,
                          at=(float(m.group(1)), float(m.group(2))) if m else None)
    return result


def _outside_reason(outer: Polygon, outer_ring: Ring, p: Polygon, what: str) -> str:
    if outer.intersects(p):
        return (f"this loop crosses or touches the {what} of {outer_ring.label}: the layer "
                f"must hold exactly one outline (loops wholly inside it are holes)")
    return (f"this is a second, separate {what} (the first is {outer_ring.label}): "
            f"the layer must hold exactly one outline (loops wholly inside it are holes)")


def _overlapping_holes(geoms: np.ndarray) -> tuple[int | None, int | None]:
    """``(later, earlier)``: the first hole (in order) that meets an earlier one, and the first it meets."""
    tree = shapely.STRtree(geoms)
    a, b = tree.query(geoms, predicate="intersects")
    mask = b < a
    if not mask.any():
        return None, None
    a, b = a[mask], b[mask]
    later = int(a.min())
    return later, int(b[a == later].min())


def to_mm(geom, k: float):
    """``geom`` scaled by ``k`` millimetres per drawing unit."""
    if k == 1.0:
        return geom
    return shapely.transform(geom, lambda c: c * k)
