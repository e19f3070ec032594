"""Courtyards: the IPC-7351B excess per density level and the courtyard rule.

Courtyard rule (IPC-7351B, REFERENCES.md section 3): the smallest rectangle
around body and lands, grown by the level's excess on every side, rounded up
to the 0.05 mm grid::

    length = ceil_grid(max(body_length, land_length) + 2 * excess)
    width  = ceil_grid(max(body_width,  land_width)  + 2 * excess)

Lengths are millimetres. The excess table is ``footprints/courtyard.toml``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from pathlib import Path

from pipeline.errors import LibraryError, UnknownNameError
from pipeline.model import DENSITY_LEVELS, Courtyard, Package

from ._data import Fields, read_toml

__all__ = ["CourtyardRule", "ceil_to_grid", "courtyard_size", "normalize_level", "courtyard",
           "read_courtyard"]

_GRID_EPS = 1e-6
_LEVEL_ALIASES = {
    "most": "most", "a": "most", "m": "most",
    "nominal": "nominal", "b": "nominal", "n": "nominal",
    "least": "least", "c": "least", "l": "least",
}


def ceil_to_grid(value: float, grid: float = 0.05) -> float:
    """Round ``value`` (mm) up to the next multiple of ``grid`` (mm).

    A value already on the grid (within 1e-6 grid steps of float noise) is kept.

    >>> ceil_to_grid(2.80)
    2.8
    >>> ceil_to_grid(2.81)
    2.85
    """
    steps = math.ceil(value / grid - _GRID_EPS)
    return round(steps * grid, 6)


def courtyard_size(
    body_length: float,
    body_width: float,
    land_length: float,
    land_width: float,
    excess: float,
    grid: float = 0.05,
) -> tuple[float, float]:
    """Courtyard length and width, mm: body and lands plus ``excess`` a side.

    The smallest rectangle around body and lands (both centred on the
    package origin) grown by ``excess`` on every side and rounded up to
    ``grid`` (IPC-7351B; REFERENCES.md section 3).

    >>> courtyard_size(1.6, 0.8, 2.3, 0.8, 0.25)
    (2.8, 1.3)
    """
    length = ceil_to_grid(max(body_length, land_length) + 2.0 * excess, grid)
    width = ceil_to_grid(max(body_width, land_width) + 2.0 * excess, grid)
    return length, width


def normalize_level(level: str, *, file: str = "density level", **where: object) -> str:
    """The canonical density level for ``level``.

    Accepts ``most`` / ``nominal`` / ``least`` and the IPC-7351B letters
    ``A`` / ``B`` / ``C``, in any case. Anything else raises
    :class:`~pipeline.errors.UnknownNameError` at ``file`` (and ``line=``,
    ``key=`` when given).

    >>> normalize_level("B")
    'nominal'
    """
    key = str(level).strip().casefold()
    if key in _LEVEL_ALIASES:
        return _LEVEL_ALIASES[key]
    raise UnknownNameError(
        file,
        f"unknown density level '{level}': use most, nominal or least (IPC-7351B A, B, C)",
        name=str(level), suggestions=DENSITY_LEVELS, **where,
    )


def courtyard(package: Package, level: str) -> Courtyard:
    """The IPC-7351B courtyard of ``package`` at density ``level``.

    ``level`` as :func:`normalize_level` accepts. Same as
    ``package.courtyard(normalize_level(level))``.

    >>> from pipeline.library import load_library
    >>> courtyard(load_library().package("SOIC-8"), "least").width_mm
    6.75
    """
    return package.courtyard(normalize_level(level))


@dataclass(frozen=True)
class CourtyardRule:
    """One row of the courtyard-excess table: excess per side per level, mm."""

    name: str
    most: float
    nominal: float
    least: float
    applies_to: str
    source: str

    def excess(self, level: str) -> float:
        """Excess per side at ``level`` (``most``, ``nominal``, ``least``)."""
        return float(getattr(self, normalize_level(level)))


def read_courtyard(path: Path) -> tuple[float, tuple[CourtyardRule, ...]]:
    """The courtyard grid (mm) and the excess rules of ``courtyard.toml``."""
    src = read_toml(path)
    data = src.data
    top = Fields(src, "")
    top.check_keys(data, ("grid_mm", "grid_source", "excess"), ("grid_mm", "grid_source", "excess"))
    grid = top.number("grid_mm", data["grid_mm"], minimum=0.0, strict=True)
    top.text("grid_source", data["grid_source"])
    excess = data["excess"]
    if not isinstance(excess, dict) or not excess:
        raise LibraryError(str(path), "expected [excess.NAME] tables", key="excess")
    rules = []
    for name in sorted(excess):
        table = excess[name]
        f = Fields(src, f"excess.{name}")
        if not isinstance(table, dict):
            raise f.here("expected a table")
        f.check_keys(table, DENSITY_LEVELS + ("applies_to", "source"), DENSITY_LEVELS + ("source",))
        vals = {lv: f.number(lv, table[lv]) for lv in DENSITY_LEVELS}
        rules.append(CourtyardRule(
            name=name, most=vals["most"], nominal=vals["nominal"], least=vals["least"],
            applies_to=f.text("applies_to", table.get("applies_to", ""), required=False),
            source=f.text("source", table["source"]),
        ))
    return grid, tuple(rules)
