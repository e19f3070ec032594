"""The read itself: a DXF file to a :class:`pipeline.model.Cavity` in millimetres.

:func:`read_cavity` checks its settings, loads the file, walks the entities
on role layers converting each to points, reports what it skipped, chains
the pieces of each layer into loops and builds the outline, keep-outs,
depth zones and board outline, converting to millimetres last (so every
location in an error message is in drawing units).

Example
-------
>>> import ezdxf, tempfile, pathlib
>>> doc = ezdxf.new(units=ezdxf.units.MM)
>>> _ = doc.modelspace().add_lwpolyline([(0, 0), (40, 0), (40, 20), (0, 20)],
...     close=True, dxfattribs={"layer": "CAVITY"})
>>> p = pathlib.Path(tempfile.mkdtemp()) / "bay.dxf"; doc.saveas(p)
>>> cavity, findings = read_cavity(p, display_name="bay.dxf")
>>> cavity.outline.area, cavity.unit_name, findings
(800.0, 'mm', [])
"""

from __future__ import annotations

import math
from collections import Counter
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Callable, Mapping

import numpy as np
from shapely.geometry import Polygon

from pipeline.errors import CavityError
from pipeline.model import Cavity, DepthZone, Finding

from .chain import Ring, chain, fmt_pt, loop_polygon, one_outline, to_mm
from .convert import CURVES, MeshPolyline, Piece, convert_leaf
from .limits import (CHORD_TOL_MM, DEFAULT_DEPTH_MM, DEFAULT_UNITS, JOIN_TOL_MM, MAX_PLAUSIBLE_SIDE_MM,
                     MIN_PLAUSIBLE_AREA_MM2, Limits)
from .load import LoaderLog, load_dxf, printable, short
from .measured import MEASURED_SUFFIX, read_measured
from .mesh import MESH_SUFFIXES, mesh_settings, read_mesh
from .roles import LayerRoles, parse_layer_map
from .units import drawing_units, unit_code
from .walk import Walker

__all__ = ["read_cavity"]

Progress = Callable[[str, float], None]


def read_cavity(
    path: Path, *, display_name: str | None = None, layer_map: Mapping[str, Any] | None = None,
    default_units: str = DEFAULT_UNITS, depth_mm: float = DEFAULT_DEPTH_MM, chord_tol_mm: float = CHORD_TOL_MM,
    settings_file: str = "project.toml", limits: Limits | None = None, progress: Progress | None = None,
    mesh_options: Mapping[str, Any] | None = None,
) -> tuple[Cavity, list[Finding]]:
    """Read a cavity drawing into millimetre polygons.

    Parameters
    ----------
    path : pathlib.Path
        The DXF file (ASCII or binary, any version ezdxf reads), or a
        measured-cavity file ending in ``.toml``
        (:mod:`pipeline.cavity.measured`).
    display_name : str, optional
        The path as the user wrote it, used in messages (default ``str(path)``).
    layer_map : mapping, optional
        project.toml ``[cavity] layers``: role -> layer name(s); see
        :mod:`pipeline.cavity`.
    default_units : str
        Units of a drawing that declares none (``"mm"``, ``"inch"``, ...).
    depth_mm : float
        Floor-to-lid depth wherever no depth zone says otherwise, mm.
    chord_tol_mm : float
        Largest distance between a curve and its flattened chords, mm.
    settings_file : str
        Name of the settings file in messages about ``layer_map``,
        ``default_units``, ``depth_mm`` and ``chord_tol_mm``.
    limits : Limits, optional
        Size limits (project.toml ``[limits]``; default :mod:`pipeline.cavity.limits`).
    progress : callable, optional
        ``progress(message, fraction)`` now and then.
    mesh_options : mapping, optional
        project.toml's ``[cavity] mesh_*`` keys for a shell mesh (a file
        ending in ``.stl``, ``.obj`` or ``.3mf``, :mod:`pipeline.cavity.mesh`).

    Returns
    -------
    (Cavity, list of Finding)
        Geometry in mm in the drawing's frame; warnings and notes. Cost:
        linear in the entities on role layers (example: the module docstring).

    Raises
    ------
    CavityError
        Unreadable or non-DXF file; a chain whose ends do not meet (with the
        gap); a loop that crosses itself; zero or several CAVITY outlines;
        an open keep-out, depth zone or board outline; a bad ``DEPTH-<mm>``
        layer name or a bad setting; an entity that cannot be converted
        (named with its handle and layer). Locations are in drawing units.
    """
    name = printable(display_name if display_name is not None else str(path))
    roles = parse_layer_map(layer_map, source=settings_file)
    default_code = _check_settings(depth_mm, chord_tol_mm, default_units, settings_file)
    if Path(path).suffix.lower() in MESH_SUFFIXES:
        return _read_mesh(Path(path), name, default_code, float(depth_mm), mesh_settings(mesh_options, settings_file),
                          progress)
    if Path(path).suffix.lower() == MEASURED_SUFFIX:
        return read_measured(Path(path), display_name=name, depth_mm=float(depth_mm), chord_tol_mm=chord_tol_mm)
    return _read_dxf(Path(path), name, roles, default_code, float(depth_mm), chord_tol_mm, progress, limits or Limits())


def _read_mesh(path: Path, name: str, default_code: int, depth_mm: float, options: Any,
               progress: Progress | None) -> tuple[Cavity, list[Finding]]:
    """A shell mesh's cavity (:mod:`pipeline.cavity.mesh`), with the plausibility notes of its outline."""
    cavity, findings = read_mesh(path, display_name=name, unit_code=default_code, depth_mm=depth_mm,
                                 options=options, progress=progress)
    return cavity, findings + _plausibility(cavity.outline, cavity.unit_name, name)


def _read_dxf(path: Path, name: str, roles: LayerRoles, default_code: int, depth_mm: float,
              chord_tol_mm: float, progress: Progress | None, limits: Limits) -> tuple[Cavity, list[Finding]]:
    """A DXF drawing's cavity; the DXF library's own messages become one ``cavity.loader`` note.

    Cost: linear in the entities on role layers (block inserts expanded).
    """
    findings: list[Finding] = []
    with LoaderLog() as log:
        cavity = _read(path, name, roles, default_code, depth_mm, chord_tol_mm, findings, progress, limits)
    if log.messages:
        findings.append(Finding(
            "info", "cavity.loader", (name,),
            f"The DXF library reported {len(log.messages)} message(s) while reading the drawing "
            f"(first: {short(log.messages[0])})."))
    if progress:
        progress("cavity read", 1.0)
    return cavity, findings


def _check_settings(depth_mm: Any, chord_tol_mm: Any, default_units: str, settings_file: str) -> int:
    """Refuse a bad depth or tolerance naming its key; the ``$INSUNITS`` code of ``default_units``."""
    for key, what, v in (("cavity.depth_mm", "depth", depth_mm),
                         ("cavity.chord_tolerance_mm", "chord tolerance", chord_tol_mm)):
        if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v) or v <= 0:
            raise CavityError(settings_file, f"{what} must be a positive number of mm, got {v!r}",
                              key=key)
    return unit_code(default_units, source=settings_file, key="cavity.units")


@dataclass
class _Collected:
    """What the walk over the drawing found, before chaining."""

    groups: dict[tuple[str, str], list[Piece]] = field(default_factory=dict)
    depth_of: dict[tuple[str, str], float] = field(default_factory=dict)
    ignored_layers: dict[str, int] = field(default_factory=dict)
    ignored_types: Counter = field(default_factory=Counter)
    degenerate: list[tuple[str, str]] = field(default_factory=list)  # (role, label)
    not_flat: list[str] = field(default_factory=list)


def _read(path: Path, name: str, roles: LayerRoles, default_code: int, depth_mm: float,
          chord_tol_mm: float, findings: list[Finding], progress: Progress | None,
          limits: Limits) -> Cavity:
    if progress:
        progress("reading the cavity drawing", 0.0)
    doc, scan = load_dxf(path, name, findings, limits)
    declared = _declared_units(doc) if scan is None or scan.has_header else None
    unit_name, k = drawing_units(declared, default_code, name, findings)
    walker = Walker(doc, name, findings, limits)
    found = _collect_pieces(walker, roles, chord_tol_mm / k, k, limits, progress)
    findings += _skipped_findings(found, walker, name)
    if progress:
        progress("joining outlines", 0.92)
    cavity_rings = _loops(found, "CAVITY", name, k)
    if not cavity_rings:
        raise _no_outline(doc, found, roles, name, findings)
    outline = one_outline([(p, r) for p, r, _ in cavity_rings], "cavity outline", name)
    board_rings = _loops(found, "BOARD", name, k)
    board = one_outline([(p, r) for p, r, _ in board_rings], "board outline", name) \
        if board_rings else None
    floor = Polygon(outline.exterior.coords)
    keepouts = []
    for p, ring, _layer in _loops(found, "KEEPOUT", name, k):
        if not p.intersects(floor):
            findings.append(_outside_finding(name, "keep-out", ring))
        keepouts.append(to_mm(p, k))
    zones = []
    for p, ring, layer in _loops(found, "DEPTH", name, k):
        if not p.intersects(floor):
            findings.append(_outside_finding(name, f"depth zone on layer {layer}", ring))
        zones.append(DepthZone(to_mm(p, k), found.depth_of[("DEPTH", layer)], layer))
    entries = _wire_entries(found, roles, floor, name, k)
    if board is not None and not board.intersects(floor):
        findings.append(Finding(
            "warning", "cavity.outside", (name,),
            f"The board outline at {fmt_pt(board.exterior.coords[0])} (drawing units) lies "
            "outside the cavity outline."))
    outline_mm = to_mm(outline, k)
    findings += _plausibility(outline_mm, unit_name, name)
    return Cavity(source=name, outline=outline_mm, keepouts=tuple(keepouts), depth_zones=tuple(zones),
                  board=to_mm(board, k) if board is not None else None, depth_mm=depth_mm,
                  unit_name=unit_name, mm_per_unit=k, wire_entries=entries)


def _wire_entries(found: _Collected, roles: LayerRoles, floor: Polygon, name: str,
                  k: float) -> tuple[Polygon, ...]:
    """The closed loops of the WIRE-ENTRY role (mm); each must reach the cavity outline.

    Raises
    ------
    CavityError
        A zone lies wholly outside the cavity outline (it would steer wire
        pads nowhere), naming the entity; or project.toml maps WIRE-ENTRY to
        layers the drawing has nothing on, naming the key.
    """
    loops = _loops(found, "WIRE-ENTRY", name, k)
    if not loops and roles.wire_entry is not None:
        raise CavityError(name, f"project.toml maps WIRE-ENTRY to layer(s) {', '.join(roles.wire_entry)}, "
                          "but the drawing has no closed outline on them: draw the zone where wires "
                          "come in, or fix the layer name", key="cavity.layers.WIRE-ENTRY")
    out = []
    for p, ring, _layer in loops:
        if not p.intersects(floor):
            raise CavityError(name, f"the wire-entry zone {ring.label} at {fmt_pt(ring.pts[0])} (drawing "
                              "units) lies wholly outside the cavity outline: draw it where the wires "
                              "come in, overlapping the cavity", entity=ring.label)
        out.append(to_mm(p, k))
    return tuple(out)


def _declared_units(doc) -> int:
    """The drawing's ``$INSUNITS`` code (0 when absent, -1 when not a number)."""
    try:
        return int(doc.header.get("$INSUNITS", 0) or 0)
    except (TypeError, ValueError):
        return -1


def _collect_pieces(walker: Walker, roles: LayerRoles, tol: float, k: float, limits: Limits,
                    progress: Progress | None) -> _Collected:
    """Convert every entity on a role layer to a piece, grouped by (role, layer), in drawing order.

    ``tol`` is the chord tolerance in drawing units, ``k`` the millimetres
    per drawing unit.
    """
    name = walker.name
    join_tol = JOIN_TOL_MM / k
    msp = walker.doc.modelspace()
    total = max(len(msp), 1)
    found = _Collected()
    role_cache: dict[str, tuple[str, float | None] | None] = {}
    n_vertices = order = top = 0
    for leaf in walker.leaves(msp, None, None, (), ""):
        order += 1
        if leaf.matrix is None:
            top += 1
            if progress and top % 2000 == 0:
                progress("converting drawing entities", min(0.9, top / total))
        layer = leaf.layer
        if layer not in role_cache:
            role_cache[layer] = roles.role_of(layer, name)
        role = role_cache[layer]
        t = leaf.entity.dxftype()
        if role is None:
            found.ignored_layers[layer] = found.ignored_layers.get(layer, 0) + 1
            continue
        if t not in CURVES:
            found.ignored_types[(t, layer)] += 1
            continue
        try:
            pts3, closed = convert_leaf(leaf, tol, name)
        except MeshPolyline:
            found.ignored_types[("POLYLINE mesh", layer)] += 1
            continue
        _check_coordinates(pts3, k, limits, name, leaf.label)
        n_vertices += len(pts3)
        if n_vertices > limits.dxf_vertices:
            raise CavityError(name, f"the role layers flatten to more than {limits.dxf_vertices} "
                              "vertices: simplify the drawing or check its units; "
                              f"{Limits.how_to_raise('dxf_vertices')}", entity=leaf.label)
        if len(pts3) and float(np.ptp(pts3[:, 2])) > max(tol, join_tol):
            found.not_flat.append(leaf.label)
        xy = np.ascontiguousarray(pts3[:, :2])
        if len(xy) < 2 or float(np.max(np.ptp(xy, axis=0))) <= join_tol:
            found.degenerate.append((role[0], leaf.label))
            continue
        if not closed and float(np.hypot(*(xy[0] - xy[-1]))) <= join_tol and len(xy) > 2:
            xy, closed = xy[:-1], True
        key = (role[0], layer)
        if role[0] == "DEPTH":
            found.depth_of[key] = float(role[1])
        found.groups.setdefault(key, []).append(Piece(xy, closed, leaf.label, order))
    return found


def _check_coordinates(pts3: np.ndarray, k: float, limits: Limits, name: str, label: str) -> None:
    """Refuse an entity with a non-finite point or one beyond ``limits.cavity_coordinate_mm``."""
    if not np.isfinite(pts3).all():
        raise CavityError(name, "this entity has non-finite coordinates", entity=label)
    if not len(pts3):
        return
    far = int(np.argmax(np.abs(pts3[:, :2]).max(axis=1)))
    reach = float(np.abs(pts3[far, :2]).max()) * k
    if reach > limits.cavity_coordinate_mm:
        raise CavityError(
            name, f"this entity reaches {reach:.3g} mm from the drawing's origin, beyond the "
            f"{limits.cavity_coordinate_mm:g} mm snugboard reads: wrong units or a damaged file are "
            f"the usual causes; move the cavity near the origin; "
            f"{Limits.how_to_raise('cavity_coordinate_mm')}", entity=label,
            at=(float(pts3[far, 0]), float(pts3[far, 1])))


def _skipped_findings(found: _Collected, walker: Walker, name: str) -> list[Finding]:
    """Warnings for what the walk did not read: block references, layers, entity types, zero sizes."""
    out = []
    for note, count in sorted(walker.notes.items()):
        out.append(Finding("warning", "cavity.blocks", (name,),
                           f"{note} ({count} time(s))." if count > 1 else f"{note}."))
    if found.ignored_layers:
        names = sorted(found.ignored_layers, key=lambda s: (s.casefold(), s))
        out.append(Finding(
            "warning", "cavity.ignored-layers", tuple(names),
            f"Layers ignored (no cavity role): {', '.join(names)}; map them in project.toml "
            "[cavity] layers if they hold the cavity, keep-outs or depth zones."))
    if found.ignored_types:
        desc = ", ".join(f"{t} x{n} on layer {lay}" for (t, lay), n in sorted(found.ignored_types.items()))
        out.append(Finding(
            "warning", "cavity.ignored-entities", tuple(sorted({t for t, _ in found.ignored_types})),
            f"Entities not read on role layers ({desc}): only lines, arcs, circles, ellipses, "
            "splines and polylines make outlines."))
    if found.degenerate:
        labels = [label for _, label in found.degenerate]
        out.append(Finding(
            "warning", "cavity.degenerate", tuple(labels[:20]),
            f"{len(labels)} entity(ies) of zero size were skipped (first: {labels[0]})."))
    if found.not_flat:
        out.append(Finding(
            "warning", "cavity.not-flat", tuple(found.not_flat[:20]),
            f"{len(found.not_flat)} entity(ies) are not parallel to the XY plane and were projected "
            f"onto it (first: {found.not_flat[0]}): draw the cavity flat in plan view."))
    return out


_WHAT = {"CAVITY": "cavity outline", "BOARD": "board outline", "KEEPOUT": "keep-out on layer {}",
         "WIRE-ENTRY": "wire-entry zone on layer {}",
         "DEPTH": "depth zone on layer {}"}


def _loops(found: _Collected, role: str, name: str, k: float) -> list[tuple[Polygon, Ring, str]]:
    """Every loop of ``role``'s layers as (polygon in drawing units, ring, layer), layers in drawing order."""
    join_tol = JOIN_TOL_MM / k
    out = []
    for key in sorted((kk for kk in found.groups if kk[0] == role),
                      key=lambda kk: found.groups[kk][0].order):
        what = _WHAT[role].format(key[1])
        for ring in chain(found.groups[key], join_tol, what, name, k):
            out.append((loop_polygon(ring, what, name, join_tol), ring, key[1]))
    return out


def _no_outline(doc, found: _Collected, roles: LayerRoles, name: str,
                findings: list[Finding]) -> CavityError:
    """The error for a drawing without a closed outline on the cavity layer(s), saying what it has."""
    cav_names = ("layer(s) " + ", ".join(roles.cavity)) if roles.cavity else "layer CAVITY"
    zero = [label for role, label in found.degenerate if role == "CAVITY"]
    if zero:
        return CavityError(
            name, f"no closed outline on {cav_names}: its {len(zero)} entity(ies) are all of zero size "
            f"({'; '.join(zero[:4])}{'; ...' if len(zero) > 4 else ''}): draw the free floor area as "
            "one closed outline of non-zero size", entity=zero[0])
    layer_names = sorted({printable(str(la.dxf.name)) for la in doc.layers}, key=str.casefold)
    used = sorted(set(found.ignored_layers) | {kk[1] for kk in found.groups}, key=str.casefold)
    where = ("no entities" if not used else "entities on layers " + ", ".join(used))
    damaged = ("; the file is damaged and was read with the recovering loader"
               if any(f.check == "cavity.repaired" for f in findings) else "")
    return CavityError(
        name, f"no closed outline on {cav_names} (the drawing has {where}; its layer table "
        f"lists {', '.join(layer_names[:12]) or 'none'}{damaged}): draw the free floor area as "
        "one closed outline on that layer, or map your layer in project.toml [cavity] layers")


def _plausibility(outline_mm: Polygon, unit_name: str, name: str) -> list[Finding]:
    """A warning when the outline's size in mm is implausible for an enclosure (wrong units)."""
    x0, y0, x1, y1 = outline_mm.bounds
    w, h, area = x1 - x0, y1 - y0, outline_mm.area
    if area >= MIN_PLAUSIBLE_AREA_MM2 and max(w, h) <= MAX_PLAUSIBLE_SIDE_MM:
        return []
    return [Finding(
        "warning", "cavity.implausible-size", (name,),
        f"The cavity outline is {w:.4g} x {h:.4g} mm ({area:.4g} mm^2) read in {unit_name}, "
        "implausible for an enclosure: wrong units are the usual cause; check the drawing's "
        "units ($INSUNITS) or [cavity] units.")]


def _outside_finding(name: str, what: str, ring: Ring) -> Finding:
    p = ring.pts[0]
    return Finding(
        "warning", "cavity.outside", (name, ring.label),
        f"The {what} {ring.label} at {fmt_pt(p)} (drawing units) lies wholly outside the cavity "
        "outline and has no effect: check its position or layer.")
