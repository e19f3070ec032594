"""Draw the example cavity drawings (invented enclosures) with ezdxf.

Run ``python outlines/draw.py`` to (re)write the ``.dxf`` files next to this
script, or ``python outlines/draw.py DIR`` to write them into ``DIR``. The
output is byte-identical on every run: ezdxf's fixed-metadata option
replaces the creation and update timestamps and the GUIDs with constants,
and handles are assigned in drawing order.

Every drawing declares its units except ``bulge-pocket-r12.dxf`` (DXF R12
has no ``$INSUNITS``: it takes project.toml ``[cavity] units``). The shapes
and their closed-form areas are listed in ``outlines/README.md``; the tests
in ``tests/test_cavity.py`` read every file and check those areas.
"""

from __future__ import annotations

import logging
import math
import sys
from pathlib import Path
from typing import Callable

import ezdxf
from ezdxf import units

from pipeline.export.dxf import document_text, fixed_metadata

HERE = Path(__file__).resolve().parent
#: Bulge of a 90 degree counter-clockwise arc: tan(90 deg / 4).
Q = math.tan(math.pi / 8)


def rounded_rect(x0: float, y0: float, w: float, h: float, r: float) -> list[tuple[float, float, float]]:
    """Closed (x, y, bulge) vertices of a w x h rectangle with corner radius r, CCW."""
    x1, y1 = x0 + w, y0 + h
    return [
        (x0 + r, y0, 0.0), (x1 - r, y0, Q),
        (x1, y0 + r, 0.0), (x1, y1 - r, Q),
        (x1 - r, y1, 0.0), (x0 + r, y1, Q),
        (x0, y1 - r, 0.0), (x0, y0 + r, Q),
    ]


def rect(x0: float, y0: float, x1: float, y1: float) -> list[tuple[float, float]]:
    return [(x0, y0), (x1, y0), (x1, y1), (x0, y1)]


def _new(version: str = "R2010", unit: int | None = units.MM):
    if unit is None:  # R12 has no $INSUNITS: keep ezdxf from logging that it drops them
        log = logging.getLogger("ezdxf")
        level = log.level
        log.setLevel(logging.ERROR)
        try:
            doc = ezdxf.new(version, units=0)
        finally:
            log.setLevel(level)
    else:
        doc = ezdxf.new(version, units=unit)
    return doc, doc.modelspace()


def controller_bay():
    """The demo controller's accessory bay: a 28 x 17 mm pocket, corner radius 3 mm,
    two 4 mm screw bosses, a 3.5 mm wide lid rib (depth 2.0 mm) across it, and
    where the wires come in: through a gap in the lower wall, x 4 to 10 mm."""
    doc, msp = _new()
    for name in ("CAVITY", "KEEPOUT", "DEPTH-2.0", "WIRE-ENTRY"):
        doc.layers.add(name)
    msp.add_lwpolyline(rounded_rect(0, 0, 28, 17, 3), format="xyb", close=True,
                       dxfattribs={"layer": "CAVITY"})
    msp.add_circle((4.5, 12.5), 2.0, dxfattribs={"layer": "KEEPOUT"})
    msp.add_circle((23.5, 4.5), 2.0, dxfattribs={"layer": "KEEPOUT"})
    # the rib runs across the whole lid, so it is drawn past the walls
    msp.add_lwpolyline(rect(12.5, -1, 16, 18), close=True, dxfattribs={"layer": "DEPTH-2.0"})
    # the wires come through the lower wall: the zone straddles it
    msp.add_lwpolyline(rect(4, -1, 10, 2.5), close=True, dxfattribs={"layer": "WIRE-ENTRY"})
    return doc


def chain_pocket():
    """An L-shaped pocket drawn as loose LINEs and one ARC (a 4 mm fillet on the
    inside corner), in scrambled order and direction, with a keep-out rib drawn
    as four loose LINEs."""
    doc, msp = _new()
    for name in ("CAVITY", "KEEPOUT"):
        doc.layers.add(name)
    a = {"layer": "CAVITY"}
    msp.add_line((50, 18), (50, 0), dxfattribs=a)       # reversed
    msp.add_line((0, 36), (20, 36), dxfattribs=a)       # reversed
    msp.add_line((0, 0), (50, 0), dxfattribs=a)
    msp.add_arc((24, 22), 4, 180, 270, dxfattribs=a)    # from (20, 22) to (24, 18)
    msp.add_line((0, 36), (0, 0), dxfattribs=a)
    msp.add_line((24, 18), (50, 18), dxfattribs=a)      # reversed
    msp.add_line((20, 22), (20, 36), dxfattribs=a)      # reversed
    k = {"layer": "KEEPOUT"}
    msp.add_line((40, 5), (43, 5), dxfattribs=k)
    msp.add_line((43, 13), (43, 5), dxfattribs=k)
    msp.add_line((40, 13), (40, 5), dxfattribs=k)
    msp.add_line((43, 13), (40, 13), dxfattribs=k)
    return doc


def bulge_pocket_r12():
    """A 60 x 24 obround (stadium) pocket as an old-style 2D POLYLINE with bulges,
    DXF R12 without units; a 6 mm boss drawn as a two-vertex bulge circle and a
    DEPTH-4 zone."""
    doc, msp = _new("R12", None)
    for name in ("CAVITY", "KEEPOUT", "DEPTH-4"):
        doc.layers.add(name)
    msp.add_polyline2d([(12, 0, 0), (48, 0, 1), (48, 24, 0), (12, 24, 1)], format="xyb",
                       close=True, dxfattribs={"layer": "CAVITY"})
    msp.add_polyline2d([(27, 12, 1), (33, 12, 1)], format="xyb", close=True,
                       dxfattribs={"layer": "KEEPOUT"})
    msp.add_polyline2d([(40, 4, 0), (50, 4, 0), (50, 20, 0), (40, 20, 0)], format="xyb",
                       close=True, dxfattribs={"layer": "DEPTH-4"})
    return doc


def spline_grip():
    """A 40 x 20 mm pocket whose top edge is a cubic SPLINE (control points
    (40, 20), (30, 30), (10, 30), (0, 20)), joined to three LINEs; an
    elliptical keep-out (semi-axes 6 and 3 mm)."""
    doc, msp = _new()
    for name in ("CAVITY", "KEEPOUT"):
        doc.layers.add(name)
    a = {"layer": "CAVITY"}
    msp.add_line((0, 0), (40, 0), dxfattribs=a)
    msp.add_line((40, 0), (40, 20), dxfattribs=a)
    msp.add_open_spline([(40, 20), (30, 30), (10, 30), (0, 20)], degree=3, dxfattribs=a)
    msp.add_line((0, 20), (0, 0), dxfattribs=a)
    msp.add_ellipse((20, 10), major_axis=(6, 0), ratio=0.5, dxfattribs={"layer": "KEEPOUT"})
    return doc


def inch_pocket():
    """A 1.8 x 1.2 inch pocket with 0.15 inch corners, drawn in inches; a 0.2 inch
    boss and a DEPTH-3 zone 0.4 inch wide along the right side."""
    doc, msp = _new(unit=units.IN)
    for name in ("CAVITY", "KEEPOUT", "DEPTH-3"):
        doc.layers.add(name)
    msp.add_lwpolyline(rounded_rect(0, 0, 1.8, 1.2, 0.15), format="xyb", close=True,
                       dxfattribs={"layer": "CAVITY"})
    msp.add_circle((0.3, 0.3), 0.1, dxfattribs={"layer": "KEEPOUT"})
    msp.add_lwpolyline(rect(1.4, -0.1, 1.9, 1.3), close=True, dxfattribs={"layer": "DEPTH-3"})
    return doc


def block_bay():
    """The geometry lives in blocks: block POCKET (a 30 x 20 rounded pocket on
    layer 0, so it takes the INSERT's layer CAVITY) holds a nested INSERT of
    block BOSS (a circle of radius 1 on layer 0) scaled 2 on layer KEEPOUT.
    POCKET is inserted at (100, 50) scaled 1.5 and rotated 30 degrees. A
    mirrored keep-out (LWPOLYLINE with extrusion (0, 0, -1)) sits in model
    space."""
    doc, msp = _new()
    for name in ("CAVITY", "KEEPOUT"):
        doc.layers.add(name)
    boss = doc.blocks.new("BOSS")
    boss.add_circle((0, 0), 1.0)
    pocket = doc.blocks.new("POCKET")
    pocket.add_lwpolyline(rounded_rect(0, 0, 30, 20, 3), format="xyb", close=True)
    pocket.add_blockref("BOSS", (6, 6), dxfattribs={"xscale": 2, "yscale": 2, "layer": "KEEPOUT"})
    msp.add_blockref("POCKET", (100, 50), dxfattribs={
        "xscale": 1.5, "yscale": 1.5, "rotation": 30, "layer": "CAVITY"})
    # With extrusion (0, 0, -1) the object coordinate system's x axis runs along
    # WCS -x: OCS x -118..-114 is WCS x 114..118, inside the rotated pocket.
    msp.add_lwpolyline(rect(-118, 70, -114, 74), close=True,
                       dxfattribs={"layer": "KEEPOUT", "extrusion": (0, 0, -1)})
    return doc


def user_layers():
    """A D-shaped pocket (30 x 40 mm rectangle with a half disc of radius 20 mm on
    its right) on the user's own layer names: Outline, Bosses, Ribs and "Lid rib".
    Read it with ``[cavity] layers = { CAVITY = "Outline", KEEPOUT = ["Bosses",
    "Ribs"], DEPTH = { "Lid rib" = 1.5 } }``."""
    doc, msp = _new()
    for name in ("Outline", "Bosses", "Ribs", "Lid rib", "Notes"):
        doc.layers.add(name)
    msp.add_lwpolyline([(0, 0, 0), (30, 0, 1), (30, 40, 0), (0, 40, 0)], format="xyb",
                       close=True, dxfattribs={"layer": "Outline"})
    msp.add_circle((5, 5), 2, dxfattribs={"layer": "Bosses"})
    msp.add_circle((5, 35), 2, dxfattribs={"layer": "Bosses"})
    msp.add_lwpolyline(rect(14, 0, 16, 10), close=True, dxfattribs={"layer": "Ribs"})
    msp.add_lwpolyline(rect(-2, 18, 52, 22), close=True, dxfattribs={"layer": "Lid rib"})
    msp.add_text("accessory bay, lid removed", dxfattribs={"layer": "Notes", "height": 2}
                 ).set_placement((2, 42))
    return doc


DRAWINGS: dict[str, Callable] = {
    "controller-bay.dxf": controller_bay,
    "chain-pocket.dxf": chain_pocket,
    "bulge-pocket-r12.dxf": bulge_pocket_r12,
    "spline-grip.dxf": spline_grip,
    "inch-pocket.dxf": inch_pocket,
    "block-bay.dxf": block_bay,
    "user-layers.dxf": user_layers,
}


def dxf_bytes(doc) -> bytes:
    """The drawing as DXF bytes, identical on every run (see :func:`document_text`)."""
    return document_text(doc).encode(doc.output_encoding, errors="dxfreplace")


def draw_all() -> dict[str, bytes]:
    """Every example drawing: file name -> DXF bytes (identical on every run)."""
    with fixed_metadata():
        return {name: dxf_bytes(make()) for name, make in DRAWINGS.items()}


def main(argv: list[str]) -> int:
    out = Path(argv[1]) if len(argv) > 1 else HERE
    out.mkdir(parents=True, exist_ok=True)
    for name, data in sorted(draw_all().items()):
        tmp = out / (name + ".tmp")
        tmp.write_bytes(data)
        tmp.replace(out / name)
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv))
