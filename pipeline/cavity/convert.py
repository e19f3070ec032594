"""Entity conversion: DXF curves to points in drawing units.

Arcs, circles and bulges are flattened analytically with vertices on the
true curve and a chord error (sagitta ``s = r (1 - cos(theta/2))``) of at
most the tolerance; ellipses and splines with ezdxf's adaptive flattening to
the same distance. Entity geometry is flattened in its own frame and the
points are transformed by the block matrix, so no entity is re-created or
approximated by the library.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Sequence

import numpy as np

from pipeline.errors import CavityError

from .limits import REL_TOL
from .load import short
from .walk import Leaf

__all__ = ["Piece", "CURVES", "convert_leaf", "arc_points"]

_SPLINE_FRAME_VERTEX = 16  # POLYLINE VERTEX flag: spline frame control point (DXF reference)


class MeshPolyline(Exception):
    """A POLYLINE that is a polygon or polyface mesh: not an outline."""


def convert_leaf(leaf: Leaf, tol: float, name: str) -> tuple[np.ndarray, bool]:
    """Points ``(n, 3)`` of one entity in world coordinates (drawing units) and its closure.

    ``tol`` is the chord tolerance in drawing units; inside a block it is
    divided by the block's largest scale factor. Raises
    :class:`MeshPolyline` for a mesh, :class:`CavityError` naming the entity
    for anything that cannot be converted.
    """
    try:
        if leaf.matrix is None:
            return _convert(leaf.entity, tol)
        sigma = _sigma_max(leaf.matrix)
        pts3, closed = _convert(leaf.entity, tol / sigma if sigma > 0 else tol)
        if len(pts3):
            m = leaf.matrix
            pts3 = pts3 @ m[:3, :3] + m[3, :3]
        return pts3, closed
    except (CavityError, MeshPolyline):
        raise
    except EntityProblem as exc:
        raise CavityError(name, f"this entity {exc.reason}", entity=leaf.label,
                          at=_at_in_wcs(exc.at, leaf.matrix)) from None
    except TypeError as exc:
        raise CavityError(name, f"this entity cannot be converted ({type(exc).__name__}: "
                          f"{short(str(exc))})", entity=leaf.label,
                          at=_at_in_wcs(_entity_point(leaf.entity), leaf.matrix)) from None
    except Exception as exc:  # one entity's failure names that entity
        raise CavityError(name, f"this entity cannot be converted ({type(exc).__name__}: "
                          f"{short(str(exc))}); redraw it (duplicate control or fit points "
                          "are a usual cause for splines)", entity=leaf.label,
                          at=_at_in_wcs(_entity_point(leaf.entity), leaf.matrix)) from None


@dataclass
class Piece:
    """A converted entity: its points in drawing units and whether it closes on itself."""

    pts: np.ndarray  # (n, 2) drawing units, WCS
    closed: bool
    label: str
    order: int


class EntityProblem(Exception):
    """An entity that cannot make an outline (raised here, located by the caller)."""

    def __init__(self, reason: str, at: tuple[float, float] | None = None):
        super().__init__(reason)
        self.reason = reason
        self.at = at


def _arc_segments(r: float, span: float, tol: float, full: bool) -> int:
    """Fewest chords for an arc of radius ``r`` and angle ``span`` (rad) whose
    sagitta ``r (1 - cos(step / 2))`` stays at or below ``tol``."""
    if tol >= 2 * r:
        step = math.pi
    else:
        step = 2.0 * math.acos(1.0 - tol / r)
    n = max(1, math.ceil(span / step))
    return max(n, 3) if full else n


def arc_points(cx: float, cy: float, r: float, a0: float, span: float, tol: float,
                full: bool = False) -> np.ndarray:
    n = _arc_segments(r, abs(span), max(tol, r * REL_TOL), full)
    t = a0 + span * np.arange(n + 1) / n
    return np.column_stack([cx + r * np.cos(t), cy + r * np.sin(t)])


def _bulge_polyline(pts: Sequence[tuple[float, float, float]], closed: bool, tol: float) -> np.ndarray:
    """Flatten ``(x, y, bulge)`` vertices; bulge = tan(included angle / 4), CCW positive."""
    out: list[np.ndarray] = []
    n = len(pts)
    if n == 0:
        return np.zeros((0, 2))
    segs = n if closed else n - 1
    out.append(np.array([[pts[0][0], pts[0][1]]], dtype=float))
    for i in range(segs):
        x0, y0, b = pts[i]
        x1, y1, _ = pts[(i + 1) % n]
        chord = math.hypot(x1 - x0, y1 - y0)
        if abs(b) < 1e-12 or chord == 0.0:
            out.append(np.array([[x1, y1]], dtype=float))
            continue
        theta = 4.0 * math.atan(b)
        r = chord / (2.0 * abs(math.sin(theta / 2.0)))
        # centre: chord midpoint moved along the chord's left normal
        nx, ny = -(y1 - y0) / chord, (x1 - x0) / chord
        off = (chord / 2.0) / math.tan(theta / 2.0)
        cx, cy = (x0 + x1) / 2.0 + nx * off, (y0 + y1) / 2.0 + ny * off
        a0 = math.atan2(y0 - cy, x0 - cx)
        arc = arc_points(cx, cy, r, a0, theta, tol)
        arc[-1] = (x1, y1)
        out.append(arc[1:])
    res = np.concatenate(out)
    if closed:
        res = res[:-1]
    return res


def _ocs_to_wcs(ocs, xy: np.ndarray, elevation: float) -> np.ndarray:
    pts = np.column_stack([xy, np.full(len(xy), float(elevation))])
    if not ocs.transform:
        return pts
    basis = np.array([tuple(ocs.ux), tuple(ocs.uy), tuple(ocs.uz)], dtype=float)
    return pts @ basis


def _vec3_array(vs) -> np.ndarray:
    arr = np.array([(v[0], v[1], v[2]) for v in vs], dtype=float)
    return arr.reshape(-1, 3)


def _finite(v: float, what: str) -> float:
    v = float(v)
    if not math.isfinite(v):
        raise EntityProblem(f"has a non-finite {what}")
    return v


def _convert(e, tol: float) -> tuple[np.ndarray, bool]:
    """Entity -> (points (n, 3) in its own WCS/block frame, closed by construction)."""
    return _CONVERTERS[e.dxftype()](e, tol)


def _line(e, tol: float) -> tuple[np.ndarray, bool]:
    s, en = e.dxf.start, e.dxf.end
    return _vec3_array([s, en]), False


def _circle_or_arc(e, tol: float) -> tuple[np.ndarray, bool]:
    c = e.dxf.center
    r = _finite(e.dxf.radius, "radius")
    if r <= 0:
        raise EntityProblem(f"has radius {r:g}: a circle or arc needs a positive radius",
                            (float(c[0]), float(c[1])))
    cx, cy = _finite(c[0], "centre"), _finite(c[1], "centre")
    if e.dxftype() == "CIRCLE":
        xy = arc_points(cx, cy, r, 0.0, 2 * math.pi, tol, full=True)[:-1]
        closed = True
    else:
        a0 = math.radians(_finite(e.dxf.start_angle, "start angle"))
        a1 = math.radians(_finite(e.dxf.end_angle, "end angle"))
        span = (a1 - a0) % (2 * math.pi)
        if span < 1e-12:
            span = 2 * math.pi
        xy = arc_points(cx, cy, r, a0, span, tol)
        closed = False
    return _ocs_to_wcs(e.ocs(), xy, float(c[2])), closed


def _lwpolyline(e, tol: float) -> tuple[np.ndarray, bool]:
    pts = [(float(x), float(y), float(b)) for x, y, b in e.get_points("xyb")]
    if not pts:
        raise EntityProblem("has no vertices")
    for x, y, b in pts:
        if not (math.isfinite(x) and math.isfinite(y) and math.isfinite(b)):
            raise EntityProblem("has a non-finite vertex")
    closed = bool(e.closed)
    xy = _bulge_polyline(pts, closed, tol)
    return _ocs_to_wcs(e.ocs(), xy, float(e.dxf.get("elevation", 0.0) or 0.0)), closed


def _polyline(e, tol: float) -> tuple[np.ndarray, bool]:
    if e.is_polygon_mesh or e.is_poly_face_mesh:
        raise MeshPolyline()
    closed = bool(e.is_closed)
    verts = [v for v in e.vertices if not (int(v.dxf.get("flags", 0)) & _SPLINE_FRAME_VERTEX)]
    if not verts:
        raise EntityProblem("has no vertices")
    if e.is_3d_polyline:
        arr = _vec3_array([v.dxf.location for v in verts])
        if not np.isfinite(arr).all():
            raise EntityProblem("has a non-finite vertex")
        return arr, closed
    pts = []
    for v in verts:
        loc = v.dxf.location
        pts.append((float(loc[0]), float(loc[1]), float(v.dxf.get("bulge", 0.0) or 0.0)))
    if not np.isfinite(np.array(pts)).all():
        raise EntityProblem("has a non-finite vertex")
    elev = e.dxf.get("elevation", None)
    z = float(elev[2]) if elev is not None else float(verts[0].dxf.location[2])
    xy = _bulge_polyline(pts, closed, tol)
    return _ocs_to_wcs(e.ocs(), xy, z), closed


def _ellipse(e, tol: float) -> tuple[np.ndarray, bool]:
    major = e.dxf.major_axis
    ratio = _finite(e.dxf.ratio, "axis ratio")
    size = math.sqrt(sum(float(c) ** 2 for c in major))
    if not math.isfinite(size) or size <= 0 or ratio <= 0:
        c = e.dxf.center
        raise EntityProblem("is degenerate (zero axis)", (float(c[0]), float(c[1])))
    span = (float(e.dxf.end_param) - float(e.dxf.start_param)) % (2 * math.pi)
    full = span < 1e-9 or abs(span - 2 * math.pi) < 1e-9
    arr = _vec3_array(e.flattening(max(tol, size * REL_TOL), segments=16))
    if full and len(arr) > 1:
        arr = arr[:-1] if np.allclose(arr[0], arr[-1], atol=tol) else arr
    return arr, full


def _spline(e, tol: float) -> tuple[np.ndarray, bool]:
    ctrl = _vec3_array(e.control_points) if len(e.control_points) else _vec3_array(e.fit_points)
    if len(ctrl) < 2:
        raise EntityProblem("has fewer than two control or fit points")
    if not np.isfinite(ctrl).all():
        raise EntityProblem("has a non-finite control point")
    size = float(np.max(np.ptp(ctrl, axis=0)))
    arr = _vec3_array(e.flattening(max(tol, size * REL_TOL), segments=4))
    if not np.isfinite(arr).all():
        raise EntityProblem("evaluates to non-finite points")
    # The closed flag is not trusted (some writers set it on splines that
    # do not close): closure is decided from the end points.
    return arr, False


_CONVERTERS = {
    "LINE": _line, "ARC": _circle_or_arc, "CIRCLE": _circle_or_arc, "LWPOLYLINE": _lwpolyline,
    "POLYLINE": _polyline, "ELLIPSE": _ellipse, "SPLINE": _spline,
}
#: The entity types that make outlines.
CURVES = tuple(_CONVERTERS)


def _sigma_max(m: np.ndarray) -> float:
    s = np.linalg.svd(m[:3, :3], compute_uv=False)
    return float(s[0])


def _entity_point(e) -> tuple[float, float] | None:
    """A point to locate an entity that failed to convert (its first defining point)."""
    try:
        for attr in ("start", "center", "insert"):
            if e.dxf.hasattr(attr):
                v = e.dxf.get(attr)
                return float(v[0]), float(v[1])
        for seq in ("control_points", "fit_points"):
            pts = getattr(e, seq, None)
            if pts is not None and len(pts):
                return float(pts[0][0]), float(pts[0][1])
        if e.dxftype() == "LWPOLYLINE" and len(e):
            x, y = e[0][:2]
            return float(x), float(y)
    except Exception:
        return None
    return None


def _at_in_wcs(at: tuple[float, float] | None, m: np.ndarray | None) -> tuple[float, float] | None:
    if at is None or m is None:
        return at
    p = np.array([at[0], at[1], 0.0]) @ m[:3, :3] + m[3, :3]
    return float(p[0]), float(p[1])
