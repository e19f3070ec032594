"""``routes.json``: the routed copper in a format anyone can check.

Entry points: :func:`routes_dict` (JSON-ready values) and
:func:`routes_json` (bytes). Millimetres in the drawing's frame, rounded to
0.1 um; keys in the order of the format (issue 9): ``status``,
``board_outline``, ``holes``, ``layers``, ``pads``, ``tracks``, ``vias``,
``areas``, ``rules``, ``open``. A track's copper is its centre line grown
by half its width with round ends and joins. Lists are sorted, so equal
inputs give equal bytes.
"""

from __future__ import annotations

from typing import Any

from ..route.board import RouteBoard
from ..route.router import Routing
from ..route.rules import CopperRules
from .netlist import dump_json
from .results import outline_coords, outline_holes

__all__ = ["routes_dict", "routes_json"]


def _r(v: float) -> float:
    r = round(float(v), 4)
    return 0.0 if r == 0 else r


def _rules(rules: CopperRules) -> dict[str, float]:
    """The issue's five rule keys, plus ``inner_edge_clearance_mm`` on a board with inner layers."""
    out = {"clearance_mm": _r(rules.clearance_mm), "edge_clearance_mm": _r(rules.edge_clearance_mm),
           "min_track_width_mm": _r(rules.track_width_mm), "min_annular_ring_mm": _r(rules.annular_ring_mm),
           "min_drill_mm": _r(rules.via_drill_mm)}
    if len(rules.layer_names) > 2:
        out["inner_edge_clearance_mm"] = _r(rules.inner_edge_clearance_mm)
    return out


def routes_dict(board: RouteBoard, rules: CopperRules, routing: Routing | None) -> dict[str, Any]:
    """The ``routes.json`` document; ``routing`` ``None`` gives status ``"skipped"`` (pads, no copper)."""
    pads = [{"ref": p.ref, "pin": p.pin, "net": p.net, "layers": list(p.layers),
             "polygon": outline_coords(p.polygon)} for p in board.pads]
    doc: dict[str, Any] = {
        "status": routing.status if routing is not None else "skipped",
        "board_outline": outline_coords(board.outline),
        "holes": [outline_coords(h) for h in board.holes],
        "layers": list(rules.layer_names),
        "pads": pads,
        "tracks": [], "vias": [], "areas": [],
        "rules": _rules(rules),
        "open": [],
    }
    if routing is None:
        return doc
    doc["tracks"] = [{"net": t.net, "layer": t.layer, "width_mm": _r(t.width_mm),
                      "points": [[_r(x), _r(y)] for x, y in t.points]} for t in routing.tracks]
    doc["vias"] = [{"net": v.net, "x": _r(v.x), "y": _r(v.y), "diameter_mm": _r(v.diameter_mm),
                    "drill_mm": _r(v.drill_mm)} for v in routing.vias]
    doc["areas"] = [{"net": a.net, "layer": a.layer, "polygon": outline_coords(a.polygon),
                     "holes": outline_holes(a.polygon)} for a in routing.areas]
    doc["open"] = list(routing.open)
    return doc


def routes_json(board: RouteBoard, rules: CopperRules, routing: Routing | None) -> bytes:
    return dump_json(routes_dict(board, rules, routing))


#: DXF layers of the copper drawing (our own names): one per copper layer, vias, drills.
COPPER_LAYER = "SNUG-CU-{}"
AREA_LAYER = "SNUG-AREA-{}"
VIA_LAYER = "SNUG-VIA"
DRILL_LAYER = "SNUG-DRILL"


def routes_dxf(board: RouteBoard, rules: CopperRules, routing: Routing, *, timestamp: int | None = None) -> bytes:
    """The copper as DXF beside the board outline (millimetres, drawing frame).

    Tracks are open ``LWPOLYLINE`` centre lines with the track width as
    their constant width on ``SNUG-CU-<LAYER>``; copper areas closed
    ``LWPOLYLINE`` rings (outline, then holes) on ``SNUG-AREA-<LAYER>``; vias
    ``CIRCLE`` s of the via diameter on ``SNUG-VIA`` and of the drill on
    ``SNUG-DRILL``; the board edge as in ``board-outline.dxf``. Bytes are
    reproducible (:func:`pipeline.export.dxf.document_text`).
    """
    import ezdxf

    from . import dxf as dxf_out

    with dxf_out.fixed_metadata():
        doc = ezdxf.new("R2013", units=ezdxf.units.MM)
        doc.header["$MEASUREMENT"] = 1
        msp = doc.modelspace()
        names = [dxf_out.EDGE_LAYER, VIA_LAYER, DRILL_LAYER]
        names += [COPPER_LAYER.format(n.upper()) for n in rules.layer_names]
        names += [AREA_LAYER.format(n.upper()) for n in rules.layer_names]
        for name in names:
            doc.layers.add(name)
        edge = {"layer": dxf_out.EDGE_LAYER}
        msp.add_lwpolyline(_xy(board.outline.exterior.coords), format="xy", close=True, dxfattribs=edge)
        for h in board.holes:
            msp.add_lwpolyline(_xy(h.exterior.coords), format="xy", close=True, dxfattribs=edge)
        for t in routing.tracks:
            msp.add_lwpolyline(_xy(t.points), format="xy", dxfattribs={
                "layer": COPPER_LAYER.format(t.layer.upper()), "const_width": _r(t.width_mm)})
        for a in routing.areas:
            attribs = {"layer": AREA_LAYER.format(a.layer.upper())}
            for ring in (a.polygon.exterior, *a.polygon.interiors):
                msp.add_lwpolyline(_xy(ring.coords), format="xy", close=True, dxfattribs=attribs)
        for v in routing.vias:
            msp.add_circle((_r(v.x), _r(v.y)), _r(v.diameter_mm / 2), dxfattribs={"layer": VIA_LAYER})
            msp.add_circle((_r(v.x), _r(v.y)), _r(v.drill_mm / 2), dxfattribs={"layer": DRILL_LAYER})
        text = dxf_out.document_text(doc)
        encoding = doc.output_encoding
    stamp = dxf_out._timestamp(timestamp)
    if stamp is not None:
        from ezdxf.tools.juliandate import juliandate
        text = dxf_out._set_header_values(text, {name: repr(juliandate(stamp)) for name in dxf_out._DATE_VARS})
    return text.encode(encoding)


def _xy(points) -> list[tuple[float, float]]:
    pts = [(_r(x), _r(y)) for x, y in points]
    return pts[:-1] if len(pts) > 2 and pts[0] == pts[-1] else pts
