"""The independent copper check of a ``routes.json`` document.

Entry point: :func:`check_copper`. It reads only the document (a dict as
:func:`json.load` gives it) and shares no code with the router
(:mod:`pipeline.route`), so that a fault in one is not hidden by the same
fault in the other.

What it checks (millimetres; ``TOL`` absorbs the file's 0.1 um rounding)
----------------------------------------------------------------------
* **No shorts, clearance kept**: on each layer, any two pieces of copper of
  different nets (an unconnected pad counts as a net of its own) are at
  least ``rules.clearance_mm`` apart; touching or overlapping is a short.
  Distances are exact: a track is its centre line grown by half its width
  with round ends and joins, so its gap to another piece is the distance
  of the centre line minus the half width (same for a via's centre and
  radius); pads and copper areas are polygons.
* **Every net one connected piece holding all its pads**: copper of one
  net joins where it touches or overlaps on a layer; layers join only
  through vias and pads on several layers (through-hole). A net whose pads
  fall in more than one piece is open; copper joined to none of its net's
  pads is stray.
* **Inside the board**: all copper inside the outline at least
  ``rules.edge_clearance_mm`` from its edge and from every hole; on an
  inner layer (any but the first and last of ``layers``) at least
  ``rules.inner_edge_clearance_mm`` when the document gives it (an
  extension key; else the outer figure). Copper on several layers (vias,
  through-hole pads) keeps the largest figure of its layers.
* **Sizes**: tracks at least ``rules.min_track_width_mm`` wide, drills at
  least ``rules.min_drill_mm``, via annular ring at least
  ``rules.min_annular_ring_mm``.

Each problem carries a position (the middle of the shortest gap, the
overlap, or the piece concerned). Cost O(n log n) with an STRtree for n
pieces of copper plus the pairs that are near.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import shapely
from shapely.geometry import LineString, Point, Polygon

__all__ = ["CopperProblem", "CopperCheck", "check_copper", "TOL"]

#: slack (mm) on every distance rule: the file rounds coordinates to 0.0001 mm.
TOL = 1e-3


@dataclass(frozen=True)
class CopperProblem:
    """One failed rule: ``kind`` (short, clearance, open, stray, edge, hole,
    size, format), the nets and layer concerned, a position and a sentence."""

    kind: str
    nets: tuple[str, ...]
    layer: str
    x: float
    y: float
    message: str

    def to_dict(self) -> dict[str, Any]:
        return {"kind": self.kind, "nets": list(self.nets), "layer": self.layer,
                "x": round(self.x, 4), "y": round(self.y, 4), "message": self.message}


@dataclass(frozen=True)
class CopperCheck:
    """The verdict of the check: clean when there are no problems."""

    problems: tuple[CopperProblem, ...]

    @property
    def clean(self) -> bool:
        return not self.problems

    def except_open(self, nets) -> tuple[CopperProblem, ...]:
        """The problems other than the opens of ``nets`` (the nets a router said it left open)."""
        skip = set(nets)
        return tuple(p for p in self.problems if not (p.kind == "open" and set(p.nets) <= skip))


@dataclass(frozen=True)
class _Piece:
    net: str            # "" + pad name for an unconnected pad
    layers: tuple[str, ...]
    core: Any           # shapely geometry
    grow: float         # half width / radius added to the core
    what: str           # for messages: "track", "via", "pad R1.2", "area"
    is_pad: bool


def check_copper(doc: dict) -> CopperCheck:
    """Check a ``routes.json`` document; see the module docstring."""
    try:
        board, holes, layers, rules, pieces = _read(doc)
    except (KeyError, TypeError, ValueError, IndexError) as exc:
        return CopperCheck((CopperProblem("format", (), "", 0.0, 0.0, f"routes document unreadable: {exc!r}"),))
    problems = _sizes(doc, rules)
    problems += _gaps(pieces, layers, rules["clearance_mm"])
    problems += _inside(pieces, board, holes, _edge_rules(layers, rules))
    problems += _connected(pieces)
    problems.sort(key=lambda p: (p.kind, p.nets, p.layer, round(p.x, 4), round(p.y, 4), p.message))
    return CopperCheck(tuple(problems))


def _ring(points) -> Polygon:
    return Polygon([(float(x), float(y)) for x, y in points])


def _read(doc: dict):
    board = _ring(doc["board_outline"])
    holes = [_ring(h) for h in doc["holes"]]
    layers = tuple(doc["layers"])
    rules = {k: float(doc["rules"][k]) for k in ("clearance_mm", "edge_clearance_mm", "min_track_width_mm",
                                                  "min_annular_ring_mm", "min_drill_mm")}
    rules["inner_edge_clearance_mm"] = float(doc["rules"].get("inner_edge_clearance_mm", rules["edge_clearance_mm"]))
    pieces: list[_Piece] = []
    for p in doc["pads"]:
        name = f"{p['ref']}.{p['pin']}"
        net = p["net"] if p["net"] is not None else "(unconnected " + name + ")"
        pieces.append(_Piece(net, tuple(p["layers"]), _ring(p["polygon"]), 0.0, f"pad {name}", True))
    for t in doc["tracks"]:
        pts = [(float(x), float(y)) for x, y in t["points"]]
        core = LineString(pts) if len(set(pts)) > 1 else Point(pts[0])
        pieces.append(_Piece(t["net"], (t["layer"],), core, float(t["width_mm"]) / 2, "track", False))
    for v in doc["vias"]:
        pieces.append(_Piece(v["net"], layers, Point(float(v["x"]), float(v["y"])), float(v["diameter_mm"]) / 2,
                             "via", False))
    for a in doc["areas"]:
        poly = Polygon(a["polygon"], [list(h) for h in a["holes"]])
        pieces.append(_Piece(a["net"], (a["layer"],), poly, 0.0, "copper area", False))
    return board, holes, layers, rules, pieces


def _sizes(doc: dict, rules: dict) -> list[CopperProblem]:
    out = []
    for t in doc["tracks"]:
        if float(t["width_mm"]) < rules["min_track_width_mm"] - TOL:
            x, y = t["points"][0]
            out.append(CopperProblem("size", (t["net"],), t["layer"], x, y,
                                     f"track {t['width_mm']} mm wide, under the {rules['min_track_width_mm']} mm minimum"))
    for v in doc["vias"]:
        ring = (float(v["diameter_mm"]) - float(v["drill_mm"])) / 2
        if float(v["drill_mm"]) < rules["min_drill_mm"] - TOL or ring < rules["min_annular_ring_mm"] - TOL:
            out.append(CopperProblem("size", (v["net"],), "", v["x"], v["y"],
                                     f"via {v['diameter_mm']} / {v['drill_mm']} mm breaks the drill or annular-ring minimum"))
    return out


def _gap(a: _Piece, b: _Piece) -> float:
    return shapely.distance(a.core, b.core) - a.grow - b.grow


def _where(a: _Piece, b: _Piece) -> tuple[float, float]:
    line = shapely.shortest_line(a.core, b.core)
    c = line.interpolate(0.5, normalized=True)
    return c.x, c.y


def _gaps(pieces: list[_Piece], layers, clearance: float) -> list[CopperProblem]:
    out = []
    reach = max((p.grow for p in pieces), default=0.0)
    for layer in layers:
        here = [p for p in pieces if layer in p.layers]
        tree = shapely.STRtree([p.core for p in here])
        for i, a in enumerate(here):
            for j in tree.query(a.core, predicate="dwithin", distance=clearance + a.grow + reach):
                b = here[int(j)]
                if int(j) <= i or a.net == b.net:
                    continue
                gap = _gap(a, b)
                if gap < clearance - TOL:
                    x, y = _where(a, b)
                    kind = "short" if gap <= 0 else "clearance"
                    out.append(CopperProblem(kind, tuple(sorted((a.net, b.net))), layer, x, y,
                                             f"{a.what} of {a.net} and {b.what} of {b.net} are {max(gap, 0):.3f} mm "
                                             f"apart on {layer} (clearance {clearance:g} mm)"))
    return out


def _edge_rules(layers: tuple[str, ...], rules: dict[str, float]) -> dict[str, float]:
    """Copper-to-edge figure per layer: the outer one on the first and last layer, the inner one between."""
    outer, inner = rules["edge_clearance_mm"], rules["inner_edge_clearance_mm"]
    edges = {name: outer if k in (0, len(layers) - 1) else inner for k, name in enumerate(layers)}
    edges[""] = outer     # a layer the document does not list: the outer figure
    return edges


def _inside(pieces: list[_Piece], board: Polygon, holes: list[Polygon], edges: dict[str, float]) -> list[CopperProblem]:
    out = []
    for p in pieces:
        edge = max(edges.get(name, edges[""]) for name in p.layers)
        copper = p.core.buffer(p.grow) if p.grow else p.core
        lay = ",".join(p.layers)
        if not board.contains(p.core) or _gap_to(p, board.exterior) < edge - TOL:
            c = shapely.shortest_line(p.core, board.exterior).interpolate(0.5, normalized=True)
            out.append(CopperProblem("edge", (p.net,), lay, c.x, c.y,
                                     f"{p.what} of {p.net} is closer than {edge:g} mm to the board edge or outside it"))
        for h in holes:
            if copper.intersects(h) or _gap_to(p, h) < edge - TOL:
                c = shapely.shortest_line(p.core, h.exterior).interpolate(0.5, normalized=True)
                out.append(CopperProblem("hole", (p.net,), lay, c.x, c.y,
                                         f"{p.what} of {p.net} is in a hole or closer than {edge:g} mm to it"))
    return out


def _gap_to(p: _Piece, geo) -> float:
    return shapely.distance(p.core, geo) - p.grow


def _joined(a: _Piece, b: _Piece) -> bool:
    """Copper of one net joins where it overlaps (polygons: where they meet)."""
    if a.grow == 0 and b.grow == 0:
        return bool(a.core.intersects(b.core))
    return _gap(a, b) < -1e-9


def _connected(pieces: list[_Piece]) -> list[CopperProblem]:
    parent = list(range(len(pieces)))

    def find(i: int) -> int:
        while parent[i] != i:
            parent[i] = parent[parent[i]]
            i = parent[i]
        return i

    tree = shapely.STRtree([p.core for p in pieces])
    reach = max((p.grow for p in pieces), default=0.0)
    for i, a in enumerate(pieces):
        for j in tree.query(a.core, predicate="dwithin", distance=a.grow + reach):
            b = pieces[int(j)]
            if int(j) > i and a.net == b.net and set(a.layers) & set(b.layers) and _joined(a, b):
                parent[find(i)] = find(int(j))
    out = []
    nets: dict[str, list[int]] = {}
    for i, p in enumerate(pieces):
        nets.setdefault(p.net, []).append(i)
    for net, idx in sorted(nets.items()):
        pad_groups = sorted({find(i) for i in idx if pieces[i].is_pad})
        if len(pad_groups) > 1:
            # the piece with most copper is "the rest"; each other group is reported at its first pad
            size = {g: sum(1 for i in idx if find(i) == g) for g in pad_groups}
            main = max(pad_groups, key=lambda g: (size[g], -min(i for i in idx if find(i) == g)))
            for g in (g for g in pad_groups if g != main):
                first = min(i for i in idx if find(i) == g and pieces[i].is_pad)
                c = pieces[first].core.centroid
                out.append(CopperProblem("open", (net,), ",".join(pieces[first].layers), c.x, c.y,
                                         f"net {net} is open: {pieces[first].what} is not joined to the rest"))
        for i in idx:
            if not pieces[i].is_pad and find(i) not in pad_groups:
                c = pieces[i].core.centroid if pieces[i].what != "track" else Point(pieces[i].core.coords[0])
                out.append(CopperProblem("stray", (net,), ",".join(pieces[i].layers), c.x, c.y,
                                         f"a {pieces[i].what} of {net} touches none of the net's pads"))
    return out
