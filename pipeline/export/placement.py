"""``placement.csv``: where each part sits, for the layout program and the assembler.

Entry point: :func:`placement_csv`. One row per placed part in natural ref
order; columns (our headings) ``part``, ``centre_x_mm``, ``centre_y_mm``
(the courtyard centre, drawing frame), ``turn_deg`` (counter-clockwise:
0, 90, 180 or 270) and ``board_side`` (top or bottom).
"""

from __future__ import annotations

from typing import Iterable

from ..model import Placement
from ..order import natural_key
from .csvcell import csv_bytes

__all__ = ["placement_csv", "HEADER"]

HEADER = ("part", "centre_x_mm", "centre_y_mm", "turn_deg", "board_side")


def placement_csv(placements: Iterable[Placement]) -> bytes:
    """The placement table as CSV bytes (deterministic)."""
    rows = [(p.ref, f"{p.x_mm:.4f}", f"{p.y_mm:.4f}", p.rotation_deg, p.side)
            for p in sorted(placements, key=lambda p: natural_key(p.ref))]
    return csv_bytes(HEADER, rows)
