"""The cavity from a 3D model of the shell: STL (binary and ASCII), OBJ and 3MF.

Mesh files carry no units and no "up", so the user gives both (project.toml
``[cavity] units`` and ``mesh_up``), and the height of the surface the board
rests on (``mesh_floor``, in the mesh's units along "up") or leaves it to be
found: the floor is the largest upward-facing flat area below the shell's
top (faces whose normal is within :data:`FLAT_COS` of straight up, grouped
by height). A second mesh (``mesh_lid``) is the lid or the other half,
placed as assembled in the same frame.

From the mesh (in millimetres, "up" turned to +z, every coordinate as read)
this module computes, at the board plane (the floor plus
:data:`ABOVE_FLOOR_MM`):

* the free outline: the cross-section of the solid is cut (``trimesh``'s
  plane section, segments joined by shapely and filled even-odd); the
  largest free area enclosed by it is the outline;
* keep-outs: the pieces of solid inside that outline (bosses, posts, ribs
  rising through the board plane);
* the height map: from the board plane up to the first solid above, on a
  grid of cells ``grid_mm`` wide (default :data:`GRID_MM`), computed by
  :mod:`pipeline.cavity.heightmap`; heights are rounded down to
  ``zone_step_mm`` (default :data:`ZONE_STEP_MM`), so a zone never promises
  more room than the model has, and every depth below the deepest becomes a
  depth zone (the smaller depth wins, as for drawn zones). Where nothing is
  above (an open tray), ``[cavity] depth_mm`` applies.

A mesh that is not watertight has its holes filled and its normals made
consistent by ``trimesh`` (a warning says so); one that stays open, an
empty or unreadable file, or no enclosed space at the board plane is
refused naming the file and the reason.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Callable, Mapping

import numpy as np
import shapely
from shapely.geometry import Polygon

from pipeline.errors import CavityError
from pipeline.model import Cavity, DepthZone, Finding

from .heightmap import height_map, zones_from_heights
from .units import MM_PER_UNIT, UNIT_NAMES

__all__ = ["MESH_SUFFIXES", "MeshOptions", "read_mesh", "mesh_settings", "UP_AXES", "GRID_MM", "ZONE_STEP_MM",
           "ABOVE_FLOOR_MM", "FLAT_COS"]

#: File endings read as a shell mesh.
MESH_SUFFIXES = (".stl", ".obj", ".3mf")
#: The names ``mesh_up`` takes: the axis of the mesh that points up.
UP_AXES = ("z", "-z", "y", "-y", "x", "-x")
#: Default height-map grid step, mm.
GRID_MM = 0.2
#: Default depth-zone step, mm: heights are rounded down to a multiple of it.
ZONE_STEP_MM = 0.1
#: The board plane's distance above the floor where the section is cut, mm
#: (just above, so the floor's own faces are not cut).
ABOVE_FLOOR_MM = 0.01
#: Cosine of the largest angle between a face normal and "up" for a flat floor face (about 1.8 deg).
FLAT_COS = 0.9995

Progress = Callable[[str, float], None]


@dataclass(frozen=True)
class MeshOptions:
    """How to read a shell mesh (project.toml ``[cavity]`` keys; README "A cavity from a 3D model").

    ``floor`` is in the mesh's units along ``up``, ``None`` to find it;
    ``lid`` a second mesh placed as assembled; steps in mm.
    """

    up: str = "z"
    floor: float | None = None
    lid: Path | None = None
    grid_mm: float = GRID_MM
    zone_step_mm: float = ZONE_STEP_MM


def read_mesh(path: Path, *, display_name: str, unit_code: int, depth_mm: float,
              options: MeshOptions = MeshOptions(), progress: Progress | None = None
              ) -> tuple[Cavity, list[Finding]]:
    """Read a shell mesh into a :class:`~pipeline.model.Cavity` in millimetres.

    Cost: loading is ``trimesh``'s; the section is linear in the faces; the
    height map is linear in the faces plus the grid cells they cover.

    Raises
    ------
    CavityError
        The file cannot be read as a mesh, is empty, stays open after
        repair, has no floor, or encloses no space at the board plane.
    """
    k = MM_PER_UNIT[unit_code]
    findings: list[Finding] = []
    shell = _load(Path(path), display_name, k, options.up, findings)
    floor = _floor(shell, display_name) if options.floor is None else options.floor * k
    solid = shell
    if options.lid is not None:
        lid = _load(Path(options.lid), str(options.lid), k, options.up, findings)
        import trimesh
        solid = trimesh.util.concatenate([shell, lid])
    if progress:
        progress("mesh loaded", 0.3)
    plane = floor + ABOVE_FLOOR_MM
    outline, keepouts = _section(solid, plane, display_name)
    heights = height_map(solid, floor, plane, outline, keepouts, options.grid_mm)
    if progress:
        progress("height map built", 0.8)
    default, zones = zones_from_heights(heights, options.zone_step_mm, depth_mm)
    findings.append(Finding(
        "info", "cavity.mesh-floor", (display_name,),
        f"Board plane at {floor:.3f} mm along {options.up} ({'found: the largest upward flat area' if options.floor is None else 'as given'}); "
        f"height map on a {options.grid_mm:g} mm grid, depth zones in steps of {options.zone_step_mm:g} mm; "
        f"depth {default:g} mm elsewhere."))
    cavity = Cavity(source=display_name, outline=outline, keepouts=tuple(keepouts),
                    depth_zones=tuple(DepthZone(p, d, f"DEPTH-{d:g}") for d, p in zones),
                    board=None, depth_mm=default, unit_name=UNIT_NAMES[unit_code], mm_per_unit=k)
    return cavity, findings


def _load(path: Path, name: str, k: float, up: str, findings: list[Finding]) -> Any:
    """The mesh in mm with ``up`` turned to +z, repaired where ``trimesh`` can (warned)."""
    import trimesh

    if not path.is_file():
        raise CavityError(name, "no such file")
    if path.stat().st_size == 0:
        raise CavityError(name, "the file is empty")
    try:
        mesh = trimesh.load(str(path), force="mesh", process=True)
    except Exception as exc:  # noqa: BLE001 - any failure of the library is the file's
        raise CavityError(name, f"not a readable {path.suffix.lstrip('.').upper()} mesh ({_short(exc)})") from None
    if not isinstance(mesh, trimesh.Trimesh) or len(mesh.faces) == 0:
        raise CavityError(name, "the file holds no triangles")
    if not np.isfinite(mesh.vertices).all():
        raise CavityError(name, "the mesh has coordinates that are not numbers")
    mesh.apply_transform(_up_matrix(up))
    mesh.apply_scale(k)
    _repair(mesh, name, findings)
    return mesh


def _up_matrix(up: str) -> np.ndarray:
    """The rotation (4 x 4) that turns the axis ``up`` to +z (right-handed, a proper rotation)."""
    m = np.eye(4)
    axis = {"x": 0, "y": 1, "z": 2}[up[-1]]
    sign = -1.0 if up.startswith("-") else 1.0
    if axis == 2:
        if sign < 0:
            m[:3, :3] = np.diag([1.0, -1.0, -1.0])
        return m
    if axis == 1:  # y up: rotate about x by -+90 deg
        m[:3, :3] = [[1, 0, 0], [0, 0, -sign], [0, sign, 0]]
        return m
    m[:3, :3] = [[0, 0, -sign], [0, 1, 0], [sign, 0, 0]]  # x up: rotate about y
    return m


def _repair(mesh: Any, name: str, findings: list[Finding]) -> None:
    """Fill holes and make normals consistent and outward; refuse a mesh that stays open."""
    import trimesh

    if mesh.is_watertight and mesh.is_winding_consistent and mesh.volume > 0:
        return
    was_open = not mesh.is_watertight
    trimesh.repair.fill_holes(mesh)
    trimesh.repair.fix_normals(mesh)
    if not mesh.is_watertight:
        raise CavityError(name, f"the mesh is not closed ({len(mesh.faces)} triangles, holes the mesh "
                          "library could not fill): export the shell as a closed solid")
    what = "had holes (filled) and " if was_open else ""
    findings.append(Finding(
        "warning", "cavity.mesh-repaired", (name,),
        f"The mesh {what}had inconsistent or inward normals; the mesh library repaired it. Check the result."))


def _floor(mesh: Any, name: str) -> float:
    """The height (mm) of the largest upward-facing flat area below the mesh's top."""
    up = mesh.face_normals[:, 2] >= FLAT_COS
    z = mesh.triangles_center[:, 2]
    top = float(mesh.bounds[1, 2])
    keep = up & (z < top - 1e-6 * max(1.0, abs(top)))
    if not keep.any():
        raise CavityError(name, "no floor found: no upward-facing flat area below the top; "
                          "check [cavity] mesh_up or give mesh_floor")
    levels = np.round(z[keep], 4)
    heights, inverse = np.unique(levels, return_inverse=True)
    area = np.bincount(inverse, weights=mesh.area_faces[keep])
    return float(heights[int(np.argmax(area))])


def _section(mesh: Any, z: float, name: str) -> tuple[Polygon, list[Polygon]]:
    """The free outline and the keep-outs where the plane at height ``z`` (mm) cuts the solid."""
    from trimesh.intersections import mesh_plane

    segs = mesh_plane(mesh, plane_normal=[0, 0, 1], plane_origin=[0, 0, z])
    if len(segs) == 0:
        raise CavityError(name, f"the board plane at {z:.3f} mm does not cut the shell")
    lines = shapely.multilinestrings(shapely.linestrings(np.round(segs[:, :, :2], 6)))
    solid = shapely.Polygon()
    for ring in shapely.get_parts(shapely.line_merge(shapely.union_all(lines))):
        if ring.is_closed and len(ring.coords) >= 4:
            solid = shapely.symmetric_difference(solid, Polygon(ring.coords))  # even-odd fill of the loops
    filled = shapely.union_all([Polygon(p.exterior) for p in shapely.get_parts(solid)])
    free = [p for p in shapely.get_parts(shapely.difference(filled, solid)) if p.area > 0]
    if not free:
        raise CavityError(name, f"the shell encloses no space at the board plane ({z:.3f} mm): "
                          "check [cavity] mesh_up and mesh_floor")
    biggest = max(free, key=lambda p: p.area)
    outline = Polygon(biggest.exterior)
    keepouts = [p for p in shapely.get_parts(shapely.intersection(solid, outline))
                if isinstance(p, Polygon) and p.area > 0]
    return outline, sorted(keepouts, key=lambda p: (round(p.bounds[0], 6), round(p.bounds[1], 6)))


def _short(exc: BaseException) -> str:
    text = str(exc).strip().splitlines()[0] if str(exc).strip() else type(exc).__name__
    return text[:120]


def mesh_settings(table: Mapping[str, Any] | None, source: str) -> MeshOptions:
    """:class:`MeshOptions` from project.toml's ``[cavity] mesh_*`` keys, each checked naming its key."""
    t = dict(table or {})
    d = MeshOptions()
    up = t.get("mesh_up", d.up)
    if up not in UP_AXES:
        raise CavityError(source, f"expected one of {', '.join(UP_AXES)}, got {up!r}", key="cavity.mesh_up")
    floor = t.get("mesh_floor")
    lid = t.get("mesh_lid")
    return MeshOptions(
        up=up,
        floor=None if floor in (None, "find") else _number(floor, "cavity.mesh_floor", source, positive=False),
        lid=None if lid is None else Path(lid),
        grid_mm=_number(t.get("mesh_grid_mm", d.grid_mm), "cavity.mesh_grid_mm", source, positive=True),
        zone_step_mm=_number(t.get("mesh_zone_step_mm", d.zone_step_mm), "cavity.mesh_zone_step_mm", source,
                             positive=True))


def _number(value: Any, key: str, source: str, *, positive: bool) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value):
        raise CavityError(source, f"expected a number, got {value!r}", key=key)
    if positive and value <= 0:
        raise CavityError(source, f"expected a positive number of mm, got {value!r}", key=key)
    return float(value)
