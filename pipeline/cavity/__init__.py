"""Read the cavity drawing (DXF) into millimetre polygons.

One entry function, :func:`read_cavity`, turns a DXF drawing of the free
space inside an enclosure into a :class:`pipeline.model.Cavity`: the floor
outline, the keep-outs, the depth zones and (optionally) the user's own board
outline, all as shapely polygons in millimetres in the drawing's own frame.
Problems with the drawing raise :class:`pipeline.errors.CavityError` naming the
file, the entity and a point in drawing units; everything the user should
know but that does not stop the run comes back as warning findings.

Layer roles
-----------
Layer names are compared without regard to case.

==============  ==========================================================
``CAVITY``      exactly one closed outline: the free floor area. Further
                closed loops on the layer that lie wholly inside it are
                holes (posts drawn on the floor); a loop outside it, or one
                that crosses or touches it, is an error ("several
                outlines"), as is a loop inside a hole.
``KEEPOUT``     closed shapes where no board may be. Every loop is filled.
``DEPTH-<mm>``  closed shapes where floor-to-lid depth is ``<mm>``
                millimetres whatever the drawing's units (``DEPTH-1.5``,
                also ``DEPTH-1,5`` and ``DEPTH-1.5mm``); every loop is
                filled. ``DEPTH-0`` is allowed (the lid touches the floor).
``BOARD``       optional: the user's own board outline, read like
                ``CAVITY`` (one outline, inner loops are holes).
``WIRE-ENTRY``  optional: closed shapes where wires enter the cavity
                (:mod:`pipeline.place_rules` puts wire pads and
                connectors there); a loop wholly outside the cavity
                outline is an error.
==============  ==========================================================

``layer_map`` (project.toml's ``[cavity] layers``) maps the user's layer
names onto the roles: ``{"CAVITY": "Outline", "KEEPOUT": ["Bosses", "Ribs"],
"DEPTH": {"Lid rib": 1.5}}``. A role that is mapped takes only the named
layers (so with ``KEEPOUT`` mapped, a layer called ``KEEPOUT`` is ignored);
a role that is not mapped keeps its default name. ``CAVITY``, ``KEEPOUT``
and ``BOARD`` take a layer name or a list of names, ``DEPTH`` a table of
layer name to depth in mm. Entities inside a block on layer ``0`` take the
layer of the INSERT that places them (the DXF rule). Every other layer is
ignored and named in one warning.

Geometry read
-------------
LINE, ARC, CIRCLE, ELLIPSE (and elliptical arcs), SPLINE, LWPOLYLINE and
2D/3D POLYLINE (bulges are arcs), in model space and inside block
references (INSERT and MINSERT, any scale, rotation, mirroring and nesting
up to :data:`~pipeline.cavity.limits.MAX_BLOCK_DEPTH` levels). Mirrored entities (extrusion
``(0, 0, -1)``) are converted from their object coordinate system. Entities
not parallel to the XY plane are projected onto it (a warning says so).
Other entity types on role layers (text, hatches, dimensions, points,
3D faces, meshes) are not read and are named in a warning.

Modules
-------
``roles`` the layer roles and project.toml's layer map; ``units`` the
``$INSUNITS`` table; ``limits`` the size limits and tolerances; ``load``
loading and recovery; ``walk`` model space and block references; ``convert``
entity conversion; ``chain`` chaining pieces into loops and polygons;
``read`` the read itself.

Method
------
1. The file is loaded strictly (``ezdxf.readfile``) and audited; if that
   fails on the file's structure, the recovering loader
   (``ezdxf.recover.readfile``) is used. Every repair becomes a
   ``cavity.repaired`` warning.
2. Block references are walked recursively, composing each INSERT's
   transformation matrix with its parent's; entity geometry is
   flattened in its own frame and the points are transformed, so no
   entity is re-created or approximated by the library.
3. Arcs, circles and bulges are flattened analytically with vertices on
   the true curve and a chord error (sagitta ``s = r (1 - cos(theta/2))``)
   of at most ``chord_tol_mm``; ellipses and splines with ezdxf's adaptive
   flattening to the same distance. The tolerance is converted to drawing
   units and divided by the largest scale factor of the block
   transformation. For entities larger than 1 m it is relaxed to
   1/50,000 of their size (:data:`~pipeline.cavity.limits.REL_TOL`) so that a drawing in the wrong
   units cannot produce millions of vertices.
4. Open pieces on one layer are chained end to end: end points closer than
   :data:`~pipeline.cavity.limits.JOIN_TOL_MM` (0.01 mm, converted to drawing units) are one node;
   every node must join exactly two piece ends. A free end is an error
   giving the gap to the nearest other free end; three or more ends at one
   node are an error (duplicated or branching entities). This is a linear
   walk (``O(n log n)`` for the node search), not a loop search, so it
   cannot hang. Pieces are never joined across layers.
5. Each loop becomes a polygon and is checked with
   ``shapely.is_valid_reason``; a loop that crosses or touches itself is an
   error located where it does.
6. Geometry is converted to millimetres last, so every location in an error
   message is in drawing units.

Units
-----
``$INSUNITS`` gives the drawing units (:data:`~pipeline.cavity.units.MM_PER_UNIT`, exact
definitions: 1 in = 25.4 mm since the 1959 international yard and pound
agreement, 1 ft = 12 in, 1 mil = 0.001 in, SI prefixes for metric units). A
drawing with ``$INSUNITS`` 0 or missing (every R12 file) takes
``default_units`` (project.toml ``[cavity] units``) and an info finding says
so.

Limits
------
Files over :data:`~pipeline.cavity.limits.MAX_FILE_BYTES`, more than
:data:`~pipeline.cavity.limits.MAX_ENTITIES` entities after expanding block
references or more than :data:`~pipeline.cavity.limits.MAX_VERTICES`
flattened vertices are refused with a message (a cavity drawing needs only a
few outlines). Clipped block references (XCLIP) are read unclipped.
"""

from __future__ import annotations

from .limits import (
    JOIN_TOL_MM,
    MAX_BLOCK_DEPTH,
    MAX_ENTITIES,
    MAX_FILE_BYTES,
    MAX_PLAUSIBLE_SIDE_MM,
    MAX_VERTICES,
    MIN_PLAUSIBLE_AREA_MM2,
    REL_TOL,
    Limits,
)
from .roles import LayerRoles, parse_layer_map
from .units import MM_PER_UNIT, UNIT_NAMES, cavity_units, unit_code


def __getattr__(name: str):
    """``read_cavity`` is imported on first use: it brings the DXF and geometry libraries, which
    a command that only reads the project file's limits or layer map must not pay for."""
    if name == "read_cavity":
        from .read import read_cavity
        return read_cavity
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")

__all__ = [
    "read_cavity",
    "parse_layer_map",
    "LayerRoles",
    "Limits",
    "MM_PER_UNIT",
    "UNIT_NAMES",
    "unit_code",
    "cavity_units",
    "JOIN_TOL_MM",
    "REL_TOL",
    "MAX_FILE_BYTES",
    "MAX_ENTITIES",
    "MAX_VERTICES",
    "MAX_BLOCK_DEPTH",
    "MIN_PLAUSIBLE_AREA_MM2",
    "MAX_PLAUSIBLE_SIDE_MM",
]
