"""Build the demo controller's bay as a shell mesh (binary STL) with trimesh.

Run ``python outlines/shell.py`` to (re)write ``controller-bay.stl`` next to
this script, or ``python outlines/shell.py DIR`` to write it into ``DIR``.
The shape is the bay of ``controller-bay.dxf`` as a solid: a closed box
whose void is the 28 x 17 mm pocket with 3 mm corners, floor at z = 0 and
lid at z = 6 mm; two 4 mm bosses standing from floor to lid at (4.5, 12.5)
and (23.5, 4.5); a lid rib x 12.5..16 across the pocket, 2 mm above the
floor (its bottom at z = 2 mm: 2 mm of room under it). Curves are flattened with a chord error
below the 0.02 mm chord tolerance (sagitta r (1 - cos(pi / n)) for n
segments per turn). The bytes are identical on every run: the STL header
is a fixed text and trimesh writes the triangles in a fixed order.
"""

from __future__ import annotations

import math
import sys
from pathlib import Path

import numpy as np
import shapely
import trimesh

HERE = Path(__file__).resolve().parent
NAME = "controller-bay.stl"
W, H, R, LID = 28.0, 17.0, 3.0, 6.0  # pocket (mm), corner radius, floor-to-lid depth
BOSSES = ((4.5, 12.5), (23.5, 4.5))
BOSS_D = 4.0
RIB_X, RIB_UNDER = (12.5, 16.0), 2.0  # the rib's x range and the room under it, mm
WALL = 2.0
CHORD_TOL = 0.02  # mm, the project's default chord tolerance


def _segments(r: float) -> int:
    """Segments per full turn so the sagitta r (1 - cos(pi / n)) stays below CHORD_TOL."""
    n = math.pi / math.acos(1 - CHORD_TOL / r)
    return 4 * math.ceil(n / 4)


def _prism(poly: shapely.Polygon, z0: float, z1: float) -> trimesh.Trimesh:
    """A closed prism over a convex polygon from z0 to z1, normals outward (fan-triangulated caps)."""
    ring = np.asarray(shapely.orient_polygons(poly).exterior.coords)[:-1]  # counter-clockwise
    n = len(ring)
    verts = np.vstack([np.column_stack([ring, np.full(n, z0)]), np.column_stack([ring, np.full(n, z1)])])
    i = np.arange(1, n - 1)
    bottom = np.column_stack([np.zeros(n - 2, int), i + 1, i])
    top = np.column_stack([np.full(n - 2, n), n + i, n + i + 1])
    a = np.arange(n)
    b = (a + 1) % n
    sides = np.vstack([np.column_stack([a, b, n + b]), np.column_stack([a, n + b, n + a])])
    return trimesh.Trimesh(verts, np.vstack([bottom, top, sides]), process=False)


def build() -> trimesh.Trimesh:
    """The bay as one mesh (closed components: the shell with its void, the bosses, the rib)."""
    outer = _prism(shapely.box(-WALL, -WALL, W + WALL, H + WALL), -WALL, LID + WALL)
    pocket = shapely.box(R, R, W - R, H - R).buffer(R, quad_segs=_segments(R) // 4)
    void = _prism(pocket, 0.0, LID)
    void.invert()
    parts = [outer, void]
    for x, y in BOSSES:
        boss = trimesh.creation.cylinder(radius=BOSS_D / 2, height=LID, sections=_segments(BOSS_D / 2))
        boss.apply_translation((x, y, LID / 2))
        parts.append(boss)
    parts.append(_prism(shapely.box(RIB_X[0], 0.0, RIB_X[1], H), RIB_UNDER, LID))
    return trimesh.util.concatenate(parts)


def stl_bytes() -> bytes:
    """The bay as binary STL bytes, identical on every run."""
    data = bytearray(trimesh.exchange.stl.export_stl(build()))
    data[:80] = b"snugboard demo controller bay, mm, z up".ljust(80, b" ")
    return bytes(data)


def main(argv: list[str]) -> int:
    out = Path(argv[1]) if len(argv) > 1 else HERE
    out.mkdir(parents=True, exist_ok=True)
    tmp = out / (NAME + ".tmp")
    tmp.write_bytes(stl_bytes())
    tmp.replace(out / NAME)
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv))
