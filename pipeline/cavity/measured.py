"""A measured cavity: the pocket described in a small TOML file instead of a drawing.

For a user with calipers and no CAD program. The file (our own syntax,
README "A measured cavity") gives, in its ``units``:

``units``        ``"mm"`` (default), ``"inch"``, ... as for ``[cavity] units``
``lid_depth``    floor-to-lid depth where no zone says otherwise (default:
                 project.toml ``[cavity] depth_mm``)
``[pocket]``     the free floor: ``size = [w, h]`` with ``corner_radius`` and
                 ``at`` (its lower-left corner, default ``[0, 0]``), or
                 ``points = [[x, y], ...]`` with optional ``radii`` (one per
                 corner, 0 for a sharp one)
``[[boss]]``     a round boss or post: ``center = [x, y]``, ``diameter``;
                 optional ``mount = "M2"``: the board covers the boss and is
                 screwed to it (:mod:`pipeline.mount`)
``[[rib]]``      a rib or ledge: ``at`` and ``size`` (a rectangle), or
                 ``path = [[x, y], ...]`` and ``width`` (a polyline that wide,
                 square ends)
``[[zone]]``     a depth zone: ``depth`` and a rectangle (``at``, ``size``) or
                 ``points``; optional ``name``
``[[wire_entry]]`` where wires come into the cavity: a rectangle (``at``,
                 ``size``) or ``points``; it must overlap the pocket (the
                 layer role ``WIRE-ENTRY`` of a drawing)

Bosses and ribs become keep-outs, zones depth zones, exactly as the layers
of a drawing would (:mod:`pipeline.cavity`). Curves are flattened with
vertices on the true arc and a chord error of at most the chord tolerance
(the sagitta rule of :mod:`pipeline.cavity.convert`). A corner of radius
``r`` between edges meeting at angle ``phi`` is cut back by
``r / tan(phi / 2)`` along each edge (the tangent length of a fillet,
elementary geometry). Measurements that cannot be right (a radius larger
than its sides allow, a boss wholly outside the pocket, a negative depth, a
crossing outline) are refused naming the key and its line.
"""

from __future__ import annotations

import math
from pathlib import Path
from typing import Any

import numpy as np
import shapely
from shapely.geometry import LineString, Polygon, box

from pipeline.errors import CavityError
from pipeline.model import Cavity, DepthZone, Finding, MountMark
from pipeline.mount import screw
from pipeline.tomlsrc import TomlSource, load

from .chain import to_mm
from .convert import arc_points
from .units import MM_PER_UNIT, UNIT_NAMES, unit_code

__all__ = ["read_measured", "MEASURED_SUFFIX"]

#: The file ending by which a project's cavity is read as a measured cavity.
MEASURED_SUFFIX = ".toml"

_TOP = ("units", "lid_depth", "pocket", "boss", "rib", "zone", "wire_entry")
_KEYS = {
    "pocket": ("size", "corner_radius", "at", "points", "radii"),
    "boss": ("center", "diameter", "mount"),
    "rib": ("at", "size", "path", "width"),
    "zone": ("depth", "at", "size", "points", "name"),
    "wire_entry": ("at", "size", "points"),
}


def read_measured(path: Path, *, display_name: str, depth_mm: float, chord_tol_mm: float
                  ) -> tuple[Cavity, list[Finding]]:
    """Read a measured-cavity file into a :class:`~pipeline.model.Cavity` in millimetres.

    ``depth_mm`` is the lid depth when the file gives none; ``chord_tol_mm``
    the largest distance between an arc and its chords, mm.

    Raises
    ------
    CavityError
        Naming the file, the line and the key of a measurement that cannot
        be right.
    """
    src = load(Path(path), display_name, CavityError)
    m = _Measured(src)
    m.known_keys()
    code = unit_code(m.get("units", "mm"), source=src.display, key="units")
    k = MM_PER_UNIT[code]
    tol = chord_tol_mm / k
    lid = m.number("lid_depth", m.get("lid_depth", depth_mm / k), lo=0, lo_open=True) * k
    pocket = m.pocket(tol)
    keepouts = [m.boss(i, b, pocket, tol) for i, b in enumerate(m.items("boss"))]
    keepouts += [m.rib(i, r, pocket) for i, r in enumerate(m.items("rib"))]
    zones = [m.zone(i, z, k) for i, z in enumerate(m.items("zone"))]
    entries = [to_mm(m.wire_entry(i, w, pocket), k) for i, w in enumerate(m.items("wire_entry"))]
    cavity = Cavity(source=src.display, outline=to_mm(pocket, k), keepouts=tuple(to_mm(p, k) for p in keepouts),
                    depth_zones=tuple(zones), board=None, depth_mm=lid, unit_name=UNIT_NAMES[code],
                    mm_per_unit=k, mounts=m.mounts(k), wire_entries=tuple(entries))
    return cavity, []


class _Measured:
    """The parsed file with located checks of each measurement (drawing units)."""

    def __init__(self, src: TomlSource) -> None:
        self.src = src

    def get(self, key: str, default: Any = None) -> Any:
        return self.src.data.get(key, default)

    def fail(self, key: str, reason: str) -> CavityError:
        return self.src.error(key, reason, CavityError)

    def known_keys(self) -> None:
        for key in self.src.data:
            if key not in _TOP:
                raise self.fail(key, f"unknown key {key!r}; expected one of: {', '.join(_TOP)}")
        if "pocket" not in self.src.data:
            raise self.fail("pocket", "no [pocket]: give its size = [w, h] or its points = [[x, y], ...]")
        for table in _KEYS:
            for i, body in enumerate(self.items(table) if table != "pocket" else [self.get("pocket")]):
                where = table if table == "pocket" else f"{table}[{i}]"
                if not isinstance(body, dict):
                    raise self.fail(where, f"[{table}] must be a table")
                for key in body:
                    if key not in _KEYS[table]:
                        raise self.fail(f"{where}.{key}", f"unknown key {key!r}; expected one of: "
                                        f"{', '.join(_KEYS[table])}")

    def items(self, table: str) -> list[dict]:
        v = self.get(table, [])
        if not isinstance(v, list):
            raise self.fail(table, f"write each {table} as [[{table}]]")
        return v

    def number(self, key: str, v: Any, **kw: Any) -> float:
        return float(self.src.number(key, v, CavityError, **kw))

    def point(self, key: str, v: Any) -> tuple[float, float]:
        if not isinstance(v, list) or len(v) != 2:
            raise self.fail(key, f"expected a point [x, y], found {v!r}")
        return self.number(key, v[0]), self.number(key, v[1])

    def points(self, key: str, v: Any, least: int) -> list[tuple[float, float]]:
        if not isinstance(v, list) or len(v) < least:
            raise self.fail(key, f"expected a list of at least {least} points [[x, y], ...], found {v!r}")
        return [self.point(key, p) for p in v]

    def rectangle(self, where: str, body: dict) -> Polygon:
        x, y = self.point(f"{where}.at", body.get("at", [0, 0]))
        if "size" not in body:
            raise self.fail(where, "give size = [w, h] (with at = [x, y] for its lower-left corner)")
        w, h = (self.number(f"{where}.size", v, lo=0, lo_open=True) for v in self.point(f"{where}.size", body["size"]))
        return box(x, y, x + w, y + h)

    def simple(self, key: str, poly: Polygon) -> Polygon:
        if not poly.is_valid or poly.area <= 0:
            raise self.fail(key, f"the outline crosses or touches itself ({shapely.is_valid_reason(poly)}): "
                            "list the corners in order around it")
        return poly

    def pocket(self, tol: float) -> Polygon:
        body = self.get("pocket")
        if "points" in body:
            pts = self.points("pocket.points", body["points"], 3)
            radii = body.get("radii", [0] * len(pts))
            if not isinstance(radii, list) or len(radii) != len(pts):
                raise self.fail("pocket.radii", f"give one radius per corner ({len(pts)}), 0 for a sharp one")
            radii = [self.number("pocket.radii", r, lo=0) for r in radii]
            self.simple("pocket.points", Polygon(pts))
            return self.simple("pocket.points", Polygon(_rounded_polygon(pts, radii, tol, self)))
        if "radii" in body:
            raise self.fail("pocket.radii", "radii go with points; a rectangle takes corner_radius")
        rect = self.rectangle("pocket", body)
        x0, y0, x1, y1 = rect.bounds
        r = self.number("pocket.corner_radius", body.get("corner_radius", 0), lo=0)
        if r > min(x1 - x0, y1 - y0) / 2:
            raise self.fail("pocket.corner_radius", f"a corner radius of {r:g} is more than half the "
                            f"shorter side ({min(x1 - x0, y1 - y0):g})")
        corners = [(x0, y0), (x1, y0), (x1, y1), (x0, y1)]
        return Polygon(_rounded_polygon(corners, [r] * 4, tol, self))

    def boss(self, i: int, body: dict, pocket: Polygon, tol: float) -> Polygon:
        where = f"boss[{i}]"
        cx, cy = self.point(f"{where}.center", body.get("center"))
        d = self.number(f"{where}.diameter", body.get("diameter"), lo=0, lo_open=True)
        circle = Polygon(arc_points(cx, cy, d / 2, 0.0, 2 * math.pi, tol, full=True)[:-1])
        if not circle.intersects(pocket):
            raise self.fail(f"{where}.center", f"the boss at ({cx:g}, {cy:g}) lies wholly outside the pocket")
        return circle

    def mounts(self, k: float) -> tuple[MountMark, ...]:
        """A mount mark for every boss with ``mount = "M2"`` (its screw size), centre in mm."""
        out = []
        for i, body in enumerate(self.items("boss")):
            if "mount" in body:
                key = f"boss[{i}].mount"
                s = screw(body["mount"], self.src.display, key, self.src.line(f"boss.{i}.mount"))
                cx, cy = self.point(f"boss[{i}].center", body.get("center"))
                out.append(MountMark(i, s.name, (cx * k, cy * k), self.src.display, key,
                                     self.src.line(f"boss.{i}.mount")))
        return tuple(out)

    def polygon(self, where: str, body: dict) -> Polygon:
        """A table's ``points`` (a simple polygon of three or more) or, without them, its rectangle keys."""
        if "points" in body:
            return self.simple(f"{where}.points", Polygon(self.points(f"{where}.points", body["points"], 3)))
        return self.rectangle(where, body)

    def rib(self, i: int, body: dict, pocket: Polygon) -> Polygon:
        where = f"rib[{i}]"
        if "path" in body:
            path = self.points(f"{where}.path", body["path"], 2)
            w = self.number(f"{where}.width", body.get("width"), lo=0, lo_open=True)
            shape = LineString(path).buffer(w / 2, cap_style="flat", join_style="mitre")
        else:
            shape = self.rectangle(where, body)
        if not shape.intersects(pocket):
            raise self.fail(where, "the rib lies wholly outside the pocket")
        return shape

    def wire_entry(self, i: int, body: dict, pocket: Polygon) -> Polygon:
        where = f"wire_entry[{i}]"
        shape = self.polygon(where, body)
        if not shape.intersects(pocket):
            raise self.fail(where, "the wire-entry zone lies wholly outside the pocket: draw it where the "
                            "wires come in, overlapping the pocket")
        return shape

    def zone(self, i: int, body: dict, k: float) -> DepthZone:
        where = f"zone[{i}]"
        depth = self.number(f"{where}.depth", body.get("depth"), lo=0)
        shape = self.polygon(where, body)
        name = self.src.text(f"{where}.name", body.get("name", f"zone {i + 1}"), CavityError)
        return DepthZone(to_mm(shape, k), depth * k, name)


def _rounded_polygon(pts: list[tuple[float, float]], radii: list[float], tol: float,
                     m: _Measured) -> np.ndarray:
    """The polygon's vertices with each corner ``i`` rounded to radius ``radii[i]`` (a fillet)."""
    n = len(pts)
    p = np.asarray(pts, dtype=float)
    cut = [0.0] * n
    out: list[np.ndarray] = []
    for i in range(n):
        a, c, b = p[i - 1], p[i], p[(i + 1) % n]
        u, v = a - c, b - c
        lu, lv = float(np.hypot(*u)), float(np.hypot(*v))
        if lu == 0 or lv == 0:
            raise m.fail("pocket.points", f"corner {i + 1} repeats its neighbour")
        u, v = u / lu, v / lv
        phi = math.acos(max(-1.0, min(1.0, float(u @ v))))
        if radii[i] == 0 or phi >= math.pi - 1e-12:
            out.append(c[None, :])
            continue
        d = radii[i] / math.tan(phi / 2)
        cut[i] = d
        centre = c + (u + v) / float(np.hypot(*(u + v))) * (radii[i] / math.sin(phi / 2))
        t1, t2 = c + u * d, c + v * d
        a1 = math.atan2(t1[1] - centre[1], t1[0] - centre[0])
        a2 = math.atan2(t2[1] - centre[1], t2[0] - centre[0])
        span = (a2 - a1 + math.pi) % (2 * math.pi) - math.pi
        out.append(arc_points(float(centre[0]), float(centre[1]), radii[i], a1, span, tol))
    for i in range(n):
        side = float(np.hypot(*(p[(i + 1) % n] - p[i])))
        if cut[i] + cut[(i + 1) % n] > side * (1 + 1e-12):
            key = "pocket.corner_radius" if "corner_radius" in m.get("pocket") else "pocket.radii"
            raise m.fail(key, f"the corner radii at corners {i + 1} and {(i + 1) % n + 1} need "
                         f"{cut[i] + cut[(i + 1) % n]:g} of the side between them, which is only {side:g} long")
    return np.concatenate(out)
