"""The board outline for a layout program: ``board-outline.dxf``.

Entry point: :func:`board_outline_dxf`.

What the file holds
-------------------
- Units: millimetres by default, ``$INSUNITS = 4`` and ``$MEASUREMENT = 1``
  (metric), so a layout program imports the outline at true size.
  Coordinates are millimetres in the cavity drawing's frame, unchanged.
  With ``units`` (project.toml ``[board] outline_units = "drawing"``, or a
  unit word such as ``"inch"``) the file is written in the cavity drawing's
  own units (or that unit) instead: coordinates divided by the millimetres
  per unit, ``$INSUNITS`` that unit's code and ``$MEASUREMENT`` 0 (imperial)
  for inch-based units (:data:`pipeline.cavity.units.IMPERIAL_CODES`), so a
  user can copy the outline back into the drawing it came from.
- One closed ``LWPOLYLINE`` for the outline's exterior, counter-clockwise,
  on layer ``BOARD-PROFILE`` (our name; "profile" is the board outline's
  name in the Gerber format's file functions, an open standard). A board with cut-outs (a polygon with holes)
  gets one further closed ``LWPOLYLINE`` per hole on the same layer,
  clockwise, so that a layout program reading "all closed shapes on the edge
  layer" sees the board and its cut-outs. Nothing else is drawn.
- The model-space view and extents frame the board.

Reproducible bytes
------------------
The same outline gives the same bytes in every run and process. Two things
in ezdxf (1.4.5) stand in the way, and both are dealt with here:

- It stamps a file with the clock (``$TDCREATE``, ``$TDUPDATE`` and their
  UTC twins, and its own "created/written by" marker) and with random GUIDs
  (``$FINGERPRINTGUID``, ``$VERSIONGUID``). Its option
  ``ezdxf.options.write_fixed_meta_data_for_testing`` replaces all of these
  by constants (GUIDs of zeros, 2000-01-01). It is a process-wide option, so
  it is switched on only while this module builds and writes its document
  (under a lock) and restored afterwards. The dates written are then
  ezdxf's fixed date or, when a timestamp is given (argument, else the
  ``SOURCE_DATE_EPOCH`` environment variable of the reproducible-builds
  convention), that moment in UTC, in the DXF header's date convention:
  Julian day number plus the fraction of the day.
- It adds one CLASS per entity type in use by iterating a ``set`` of type
  names, so the CLASSES section's order follows the process's string hash
  seed (``PYTHONHASHSEED``). Those classes are registered here first, in
  sorted order.
"""

from __future__ import annotations

import io
import os
import threading
from contextlib import contextmanager
from datetime import datetime, timezone
from typing import Iterator

import shapely
from shapely.geometry import MultiPolygon, Polygon
from shapely.geometry.polygon import orient

from pipeline.cavity.units import IMPERIAL_CODES
from pipeline.dxflib import import_ezdxf

ezdxf = import_ezdxf()
from ezdxf.tools.juliandate import juliandate  # noqa: E402  (after the guarded import)

__all__ = ["board_outline_dxf", "cavity_dxf", "EDGE_LAYER"]

#: Layer of the board edge (our own name; "profile" as in the Gerber format's
#: file function for the board outline).
EDGE_LAYER = "BOARD-PROFILE"

#: Header variables holding dates (DXF header reference: Julian date.fraction).
_DATE_VARS = ("$TDCREATE", "$TDUCREATE", "$TDUPDATE", "$TDUUPDATE")

_LOCK = threading.RLock()


def document_text(doc) -> str:
    """DXF text of ``doc`` that is the same on every run and in every process.

    ezdxf's fixed-metadata option replaces the clock timestamps and random
    GUIDs; and since ezdxf adds a CLASS per entity type in use by iterating a
    set, the CLASSES section's order would follow the string hash seed of
    the process, so those classes are registered first, in sorted order.
    """
    with fixed_metadata():
        if doc.dxfversion > "AC1009":
            for dxftype in sorted(doc.entitydb.dxf_types_in_use()):
                doc.classes.add_class(dxftype)
        stream = io.StringIO()
        doc.write(stream)
    return stream.getvalue()


def board_outline_dxf(outline: Polygon, *, timestamp: int | None = None,
                      units: tuple[int, float] = (4, 1.0)) -> bytes:
    """Write a board outline as a DXF drawing, in millimetres unless told otherwise.

    Parameters
    ----------
    outline : shapely Polygon
        The board outline in mm (drawing frame). Holes become cut-outs. A
        MultiPolygon of exactly one polygon is accepted as that polygon.
    timestamp : int, optional
        Seconds since 1970-01-01 UTC to write as the drawing's creation and
        update date. Default: ``SOURCE_DATE_EPOCH`` from the environment when
        it is set to a whole number, else ezdxf's fixed date (2000-01-01).
        Never the clock.
    units : (int, float)
        ``($INSUNITS code, millimetres per unit)`` to write in; default
        millimetres ``(4, 1.0)``.

    Returns
    -------
    bytes
        The DXF file (R2013, UTF-8, ``\\n`` line ends).

    Raises
    ------
    ValueError
        When ``outline`` is not one non-empty, valid polygon. The outline is
        made by the pipeline (proposed, or the user's ``BOARD`` layer already
        checked by the cavity reader), so this is a caller's error, not bad
        user input.

    Examples
    --------
    >>> from shapely.geometry import box
    >>> data = board_outline_dxf(box(0, 0, 30, 20))
    >>> data == board_outline_dxf(box(0, 0, 30, 20))
    True
    >>> b"BOARD-PROFILE" in data and b"LWPOLYLINE" in data
    True
    """
    poly = _one_polygon(outline)
    return _layers_dxf([(EDGE_LAYER, [poly])], units, _timestamp(timestamp))


def cavity_dxf(cavity, *, timestamp: int | None = None) -> bytes:
    """A cavity (:class:`~pipeline.model.Cavity`, mm) as a drawing on snugboard's layer roles.

    Written in the units the cavity was given in (``$INSUNITS``): the floor
    outline and its holes on ``CAVITY``, keep-outs on ``KEEPOUT``, each depth
    zone on ``DEPTH-<mm>``, a given board on ``BOARD`` and the wire-entry
    zones on ``WIRE-ENTRY``, every shape as
    closed polylines, so the file reads back as the same cavity and can be
    refined in any CAD program. Reproducible bytes as :func:`board_outline_dxf`.
    """
    from pipeline.cavity import cavity_units

    depths: dict[float, list] = {}
    for z in cavity.depth_zones:
        depths.setdefault(float(z.depth_mm), []).append(z.polygon)
    layers = [("CAVITY", [cavity.outline]), ("KEEPOUT", list(cavity.keepouts))]
    layers += [(f"DEPTH-{d:g}", polys) for d, polys in sorted(depths.items())]
    if cavity.board is not None:
        layers.append(("BOARD", [cavity.board]))
    if cavity.wire_entries:
        layers.append(("WIRE-ENTRY", list(cavity.wire_entries)))
    return _layers_dxf(layers, cavity_units(cavity), _timestamp(timestamp))


def _layers_dxf(layers: list[tuple[str, list]], units: tuple[int, float], stamp: datetime | None) -> bytes:
    """Closed polylines of every polygon (exterior CCW, holes CW) on its layer, in ``units``."""
    code, mm_per_unit = units
    polys = [(layer, orient(p, sign=1.0)) for layer, geoms in layers for g in geoms for p in shapely.get_parts(g)]
    if mm_per_unit != 1.0:
        polys = [(layer, shapely.transform(p, lambda c: c / mm_per_unit)) for layer, p in polys]
    with fixed_metadata():
        doc = ezdxf.new("R2013", units=code)
        doc.header["$MEASUREMENT"] = 0 if code in IMPERIAL_CODES else 1
        doc.header["$LUNITS"] = 2  # decimal lengths
        for layer, _ in layers:
            doc.layers.add(layer, color=7)
        msp = doc.modelspace()
        for layer, poly in polys:
            for ring in (poly.exterior, *poly.interiors):
                msp.add_lwpolyline(_ring_points(ring), format="xy", close=True, dxfattribs={"layer": layer})
        minx, miny, maxx, maxy = (float(v) for v in shapely.union_all([p for _, p in polys]).bounds)
        msp.dxf.extmin = (minx, miny, 0.0)
        msp.dxf.extmax = (maxx, maxy, 0.0)
        span = max(maxx - minx, maxy - miny, 1.0)
        doc.set_modelspace_vport(height=1.2 * span, center=((minx + maxx) / 2, (miny + maxy) / 2))
        text = document_text(doc)
        encoding = doc.output_encoding
    if stamp is not None:
        text = _set_header_values(text, {name: repr(juliandate(stamp)) for name in _DATE_VARS})
    return text.encode(encoding)


# --------------------------------------------------------------------------
# helpers
# --------------------------------------------------------------------------
def _one_polygon(outline) -> Polygon:
    geom = outline
    if isinstance(geom, MultiPolygon) and len(geom.geoms) == 1:
        geom = geom.geoms[0]
    if not isinstance(geom, Polygon):
        raise ValueError(f"a board outline must be one polygon, not {geom.geom_type}")
    if geom.is_empty or geom.area <= 0.0:
        raise ValueError("a board outline must not be empty")
    if not geom.is_valid:
        raise ValueError(f"the board outline is not a valid polygon: {shapely.is_valid_reason(geom)}")
    return geom


def _ring_points(ring) -> list[tuple[float, float]]:
    """Ring vertices without the repeated closing vertex; -0.0 written as 0.0."""
    pts = [(float(x) + 0.0, float(y) + 0.0) for x, y in ring.coords]
    if len(pts) > 1 and pts[0] == pts[-1]:
        pts.pop()
    return pts


def _timestamp(timestamp: int | None) -> datetime | None:
    """The UTC moment to write, or ``None`` for ezdxf's fixed date."""
    if timestamp is None:
        env = os.environ.get("SOURCE_DATE_EPOCH", "").strip()
        if not env.isdigit():  # unset or not a whole number: ignored, as the convention says
            return None
        timestamp = int(env)
    stamp = datetime.fromtimestamp(int(timestamp), tz=timezone.utc)
    return stamp.replace(tzinfo=None)


@contextmanager
def fixed_metadata() -> Iterator[None]:
    """Switch ezdxf's constant-metadata option on while documents are made and written.

    ezdxf stamps a document with the clock when it is created and again when
    it is written; both must happen inside this block. The option is
    process-wide, so a lock keeps two threads from interleaving.
    """
    with _LOCK:
        before = ezdxf.options.write_fixed_meta_data_for_testing
        ezdxf.options.write_fixed_meta_data_for_testing = True
        try:
            yield
        finally:
            ezdxf.options.write_fixed_meta_data_for_testing = before


def _set_header_values(text: str, values: dict[str, str]) -> str:
    """Replace the value of each named header variable in ASCII DXF ``text``.

    Works on the tag stream (group code line, value line) of the HEADER
    section only; each variable must occur exactly once.
    """
    lines = text.split("\n")
    seen: dict[str, int] = {}
    in_header = False
    i = 0
    while i + 1 < len(lines):
        code, value = lines[i].strip(), lines[i + 1]
        if code == "2" and value == "HEADER":
            in_header = True
        elif code == "0" and value == "ENDSEC" and in_header:
            break
        elif in_header and code == "9" and value in values and i + 3 < len(lines):
            lines[i + 3] = values[value]
            seen[value] = seen.get(value, 0) + 1
        i += 2
    missing = sorted(k for k in values if seen.get(k) != 1)
    if missing:  # ezdxf changed how it writes its header: fail loudly, never write a half-set date
        raise RuntimeError(f"DXF header variables not found exactly once: {', '.join(missing)}")
    return "\n".join(lines)
