"""The cavity reader's limits and tolerances, one named constant each.

A cavity drawing needs only a few outlines, so a file far larger than that
is refused early with a message naming the limit and how to raise it
(project.toml ``[limits]``, README "Limits").
"""

from __future__ import annotations

from dataclasses import dataclass, fields, replace
from typing import Any, Mapping

__all__ = [
    "JOIN_TOL_MM", "REL_TOL", "MAX_FILE_BYTES", "MAX_ENTITIES", "MAX_VERTICES", "MAX_BLOCK_DEPTH",
    "MIN_PLAUSIBLE_AREA_MM2", "MAX_PLAUSIBLE_SIDE_MM", "Limits",
]

#: End points of loose pieces closer than this (mm) are joined.
JOIN_TOL_MM = 0.01
#: Flattening tolerance floor relative to an entity's size.
REL_TOL = 2e-5
#: Largest file read (bytes); project.toml ``[limits] dxf_bytes``.
MAX_FILE_BYTES = 64 * 1024 * 1024
#: Largest count of entities read, after expanding block references;
#: project.toml ``[limits] dxf_entities``.
MAX_ENTITIES = 250_000
#: Largest count of flattened vertices on role layers; ``[limits] dxf_vertices``.
MAX_VERTICES = 2_000_000
#: Deepest nesting of block references followed.
MAX_BLOCK_DEPTH = 16
#: Outline area below which the outline is implausibly small, mm^2.
MIN_PLAUSIBLE_AREA_MM2 = 25.0
#: Outline side above which the outline is implausibly large, mm.
MAX_PLAUSIBLE_SIDE_MM = 1000.0


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
        """The words every limit message ends with."""
        return f"raise it with {key} = ... in project.toml [limits] if the drawing really needs more"
