"""A project to start from: ``snugboard new DIR``.

Entry points: :func:`starter_files` (the files, as bytes) and
:func:`write_starter` (into an empty or new folder, all or nothing).

The starter is a small, complete project that runs clean (exit 0): a
commented ``project.toml``, a design of two wire pads, an LED with its
resistor and an RC low-pass between two more pads (each a declared block
with targets it meets), and a cavity drawing of a 30 x 20 mm pocket with a
screw boss and a lid rib, written with the deterministic DXF writer of
:mod:`pipeline.export.dxf`. A newcomer edits it instead of starting from a
blank page. The values are IEC 60063 E-series values; the LED block's
current, (3.3 V - 2.0 V) / 270 ohm = 4.8 mA, and the low-pass corner,
1 / (2 pi x 10 kohm x 100 nF) = 159 Hz, are within their targets.
"""

from __future__ import annotations

import os
from pathlib import Path

from .errors import ProjectError

__all__ = ["starter_files", "write_starter", "PROJECT_TOML", "DESIGN_TOML", "CAVITY_FILE"]

CAVITY_FILE = "cavity.dxf"

PROJECT_TOML = """\
# snugboard project: every path is relative to this file. README.md ("The project folder")
# lists every key; the ones below are the ones most projects change.
[project]
name = "my-board"
design = "design.toml"            # the sized design (TOML here; a SPICE netlist .cir works too)
cavity = "cavity.dxf"             # the free floor of your enclosure: layers CAVITY, KEEPOUT, DEPTH-<mm>

[board]
layers = 2                        # copper layers
thickness_mm = 0.8                # common stock: 0.4 0.6 0.8 1.0 1.2 1.6 2.0
sides = 1                         # 1: parts on top only; 2: both sides
density = "nominal"               # IPC-7351B level: "most", "nominal" or "least"
edge_clearance_mm = 0.5           # part courtyard to board edge
wall_clearance_mm = 0.3           # board edge to cavity wall and keep-outs

[cavity]
depth_mm = 5.0                    # floor to lid wherever no DEPTH-<mm> zone says otherwise
units = "mm"                      # only used when the drawing declares no units

[order]
boards = 10                       # boards to build: the BOM orders for this many
spares_percent = 10               # extra parts per line, rounded up
"""

DESIGN_TOML = """\
# A small design that passes every check: edit the parts and nets to your own.
# `snugboard kinds` lists the part kinds and their pins, `snugboard packages` the packages.
[design]
name = "My board"
revision = "A"

# --- wires from the enclosure's own board -------------------------------
[parts.P1]
kind = "wire-pad"
package = "pad-1.5mm"
note = "3.3 V supply in"

[parts.P2]
kind = "wire-pad"
package = "pad-1.5mm"
note = "ground"

[parts.P3]
kind = "wire-pad"
package = "pad-1.5mm"
note = "signal in"

[parts.P4]
kind = "wire-pad"
package = "pad-1.5mm"
note = "filtered signal out"

# --- a status LED --------------------------------------------------------
[parts.R1]
kind = "resistor"
value = "270"
package = "0603"
tolerance = "1%"
rating = "0.1W"

[parts.D1]
kind = "led"
package = "0603"
rating = "5V"

# --- an RC low-pass on the signal ----------------------------------------
[parts.R2]
kind = "resistor"
value = "10k"
package = "0603"
tolerance = "1%"
rating = "0.1W"

[parts.C1]
kind = "capacitor"
value = "100n"
package = "0603"
tolerance = "10%"
rating = "16V"
note = "X7R"

[nets]                            # net = ["REF.PIN", ...]; pins by number or name
VCC = ["P1.1", "R1.1"]
LED_A = ["R1.2", "D1.A"]
GND = ["P2.1", "D1.K", "C1.2"]
SIG_IN = ["P3.1", "R2.1"]
SIG_OUT = ["R2.2", "C1.1", "P4.1"]

[voltages]                        # declared net voltages feed the rating checks
VCC = "3.3V"

[blocks.status_led]               # what a group of parts is meant to do: checked with tolerances
type = "led-resistor"
parts = { R = "R1", led = "D1" }
vf = "2.0V"
targets = { current = "3mA .. 6mA" }

[blocks.smoothing]
type = "rc-lowpass"
parts = { R = "R2", C = "C1" }
targets = { f0 = "159Hz +/- 20%" }
"""


def _cavity_dxf() -> bytes:
    """A 30 x 20 mm pocket (corner radius 2 mm), one 3.6 mm screw boss, a 3 mm lid rib 2.5 mm deep."""
    import math

    import ezdxf
    from ezdxf import units

    from .export.dxf import document_text, fixed_metadata

    q = math.tan(math.pi / 8)  # bulge of a 90 degree counter-clockwise arc: tan(90 deg / 4)
    w, h, r = 30.0, 20.0, 2.0
    corners = [(r, 0, 0), (w - r, 0, q), (w, r, 0), (w, h - r, q), (w - r, h, 0), (r, h, q), (0, h - r, 0), (0, r, q)]
    with fixed_metadata():  # ezdxf stamps a document when it is made, too: both inside
        doc = ezdxf.new("R2010", units=units.MM)
        for name in ("CAVITY", "KEEPOUT", "DEPTH-2.5"):
            doc.layers.add(name)
        msp = doc.modelspace()
        msp.add_lwpolyline(corners, format="xyb", close=True, dxfattribs={"layer": "CAVITY"})
        msp.add_circle((25.0, 15.0), 1.8, dxfattribs={"layer": "KEEPOUT"})
        msp.add_lwpolyline([(20.0, -1.0), (23.0, -1.0), (23.0, 21.0), (20.0, 21.0)], close=True,
                           dxfattribs={"layer": "DEPTH-2.5"})
        return document_text(doc).encode(doc.output_encoding)


def starter_files() -> dict[str, bytes]:
    """The starter project's files by name; the same bytes on every call."""
    return {"project.toml": PROJECT_TOML.encode(), "design.toml": DESIGN_TOML.encode(),
            CAVITY_FILE: _cavity_dxf()}


def write_starter(folder: str | os.PathLike) -> list[Path]:
    """Write the starter project into ``folder`` (new, or an empty folder), all files or none.

    The files go through the output writer (:func:`pipeline.export.atomic.write_all`,
    without its manifest: the folder is the user's project, not an output set).

    Raises
    ------
    ProjectError
        ``folder`` exists and is not an empty folder: nothing is written.
    OutputError
        The folder cannot be written.
    """
    from .export.atomic import write_all

    path = Path(folder)
    if path.exists() and (not path.is_dir() or any(path.iterdir())):
        what = "is not a folder" if not path.is_dir() else "already holds files"
        raise ProjectError(str(folder), f"{what}; `snugboard new` writes only into a new or empty folder")
    return write_all(path, starter_files(), manifest=False)
