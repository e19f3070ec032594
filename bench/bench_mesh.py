"""Benchmark (issue 14): reading a 500,000-triangle shell mesh and building its height map at 0.2 mm.

Prints the time and the peak memory (``tracemalloc``, numpy's buffers included) of
``read_cavity`` on the mesh beside those of loading the same file with ``trimesh.load`` alone,
and their ratios. Target: at most 3 x the bare load.

Run: ``.venv/bin/python bench/bench_mesh.py [TRIANGLES]`` (default 500,000).

The shell is a controller-sized closed box (120 x 60 x 20 mm outside, 2 mm walls) with a void,
two bosses and a rib under the lid (each rooted inside a wall, so no vertex of one part
lies on another's surface), each face subdivided (``trimesh.remesh.subdivide``, each
triangle into four) until the mesh holds at least the asked triangles.
"""

from __future__ import annotations

import sys
import tempfile
import time
import tracemalloc
from pathlib import Path

import trimesh

from pipeline.cavity import read_cavity


def shell(triangles: int) -> trimesh.Trimesh:
    outer = trimesh.creation.box((120, 60, 20))
    inner = trimesh.creation.box((116, 56, 16))
    inner.invert()
    parts = [outer, inner]
    for x in (-40.0, 40.0):
        boss = trimesh.creation.cylinder(radius=2.5, height=16.5, sections=240)  # 1,956 base faces x 4^4 = 500,736 triangles
        boss.apply_translation((x, 10, -0.75))  # from inside the bottom wall up to 0.5 mm under the lid
        parts.append(boss)
    rib = trimesh.creation.box((1.5, 55, 4))
    rib.apply_translation((0, 0, 6.5))  # rooted in the lid, 3.5 mm below it
    parts.append(rib)
    mesh = trimesh.util.concatenate(parts)
    while len(mesh.faces) < triangles:
        v, f = trimesh.remesh.subdivide(mesh.vertices, mesh.faces)
        mesh = trimesh.Trimesh(v, f, process=False)
    return mesh


def measure(fn):
    tracemalloc.start()
    t = time.perf_counter()
    result = fn()
    elapsed = time.perf_counter() - t
    peak = tracemalloc.get_traced_memory()[1]
    tracemalloc.stop()
    return result, elapsed, peak


def main(argv: list[str]) -> int:
    triangles = int(argv[1]) if len(argv) > 1 else 500_000
    with tempfile.TemporaryDirectory() as d:
        path = Path(d) / "shell.stl"
        mesh = shell(triangles)
        mesh.export(path)
        print(f"shell: {len(mesh.faces):,} triangles, {path.stat().st_size / 1e6:.1f} MB binary STL")
        _, t_load, m_load = measure(lambda: trimesh.load(str(path), force="mesh"))
        (cavity, _), t_ours, m_ours = measure(lambda: read_cavity(path, display_name="shell.stl"))
    print(f"bare trimesh.load:          {t_load:7.2f} s  peak {m_load / 1e6:7.1f} MB")
    print(f"read_cavity (0.2 mm grid):  {t_ours:7.2f} s  peak {m_ours / 1e6:7.1f} MB")
    print(f"ratio: time {t_ours / t_load:.2f} x, peak memory {m_ours / m_load:.2f} x (target at most 3 x)")
    print(f"result: outline {cavity.outline.area:.1f} mm2, {len(cavity.keepouts)} keep-outs, "
          f"zones {[z.depth_mm for z in cavity.depth_zones]}, depth {cavity.depth_mm:g} mm")
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv))
