"""The cavity reader's limits and tolerances, one named constant each.

A cavity drawing needs only a few outlines, so a file far larger than that
is refused early with a message naming the limit and how to raise it
(project.toml ``[limits]``, README "Limits").
"""

from __future__ import annotations

from dataclasses import dataclass, fields, replace
from typing import Any, Mapping

from pipeline.errors import limit_hint

__all__ = [
    "JOIN_TOL_MM", "REL_TOL", "MAX_FILE_BYTES", "MAX_ENTITIES", "MAX_VERTICES", "MAX_BLOCK_DEPTH",
    "MAX_COORDINATE_MM",
    "MIN_PLAUSIBLE_AREA_MM2", "MAX_PLAUSIBLE_SIDE_MM", "Limits", "DEFAULTS",
    "DEFAULT_DEPTH_MM", "CHORD_TOL_MM", "DEFAULT_UNITS",
]

#: End points of loose pieces closer than this (mm) are joined.
JOIN_TOL_MM = 0.01
#: Flattening tolerance floor relative to an entity's size.
REL_TOL = 2e-5
#: Largest file read (bytes); project.toml ``[limits] dxf_bytes``.
MAX_FILE_BYTES = 64 * 1024 * 1024
#: Largest count of entities read: records in the ENTITIES and BLOCKS
#: sections of the raw file, and entities after expanding block references;
#: project.toml ``[limits] dxf_entities``. Building a drawing costs about
#: 0.2 ms per entity in ezdxf, so this bounds a read to tens of seconds.
MAX_ENTITIES = 100_000
#: Largest count of flattened vertices on role layers; ``[limits] dxf_vertices``.
MAX_VERTICES = 2_000_000
#: Largest distance of a drawing point from the drawing's origin, mm
#: (10 km): beyond it the drawing is refused, naming the entity, before
#: its coordinates can overflow an area or lose the 0.01 mm joining
#: tolerance to rounding (a double carries about 16 digits);
#: ``[limits] cavity_coordinate_mm``.
MAX_COORDINATE_MM = 10_000_000
#: Deepest nesting of block references followed.
MAX_BLOCK_DEPTH = 16
#: Outline area below which the outline is implausibly small, mm^2.
MIN_PLAUSIBLE_AREA_MM2 = 25.0
#: Outline side above which the outline is implausibly large, mm.
MAX_PLAUSIBLE_SIDE_MM = 1000.0
#: Floor-to-lid depth wherever no depth zone says otherwise, mm (CONTRACT section 1;
#: project.toml ``[cavity] depth_mm``).
DEFAULT_DEPTH_MM = 5.0
#: Largest distance between a curve and its flattened chords, mm (``[cavity] chord_tolerance_mm``).
CHORD_TOL_MM = 0.02
#: Units of a drawing that declares none (``[cavity] units``).
DEFAULT_UNITS = "mm"


@dataclass(frozen=True)
class Limits:
    """The limits one read works under; each field is a ``[limits]`` key.

    Examples
    --------
    >>> Limits.from_table({"dxf_entities": 10}).dxf_entities
    10
    >>> Limits().dxf_bytes == MAX_FILE_BYTES
    True
    """

    dxf_bytes: int = MAX_FILE_BYTES
    dxf_entities: int = MAX_ENTITIES
    dxf_vertices: int = MAX_VERTICES
    cavity_coordinate_mm: int = MAX_COORDINATE_MM

    @classmethod
    def from_table(cls, table: Mapping[str, Any] | None) -> "Limits":
        """The defaults with the keys of ``table`` that name a field of this class.

        Keys of other readers in the same table are left alone; the values
        are checked by the project-file reader.
        """
        names = {f.name for f in fields(cls)}
        return replace(cls(), **{k: v for k, v in (table or {}).items() if k in names})

    @staticmethod
    def how_to_raise(key: str) -> str:
        """The words every limit message ends with (the one wording, :func:`pipeline.errors.limit_hint`)."""
        return limit_hint(key)


#: ``[limits]`` key in project.toml -> default value.
DEFAULTS = {f.name: f.default for f in fields(Limits)}
