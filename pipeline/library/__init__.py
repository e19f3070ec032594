"""The generic footprint library and the part kinds, read from ``footprints/``.

Everything here is data-driven: ``footprints/packages.csv`` lists packages
(body, land extent, height, pins, pitch, sources), ``footprints/families.toml``
describes parametric families (``header-1xN-2.54``, ``pad-Dmm``) that are
expanded on demand, ``footprints/courtyard.toml`` holds the IPC-7351B
courtyard excess per density level, and ``footprints/kinds.toml`` the part
kinds with their pins and pin roles. ``footprints/README.md`` documents the
formats and the policies behind the numbers.

The package's modules, one job each: ``_data`` (reading CSV and TOML with
places), ``courtyards`` (excess table and courtyard rule), ``packages``
(rows and families), ``lands`` (IPC-7351B land patterns and
:func:`pads_on_board`, which puts a placed part's pads on the board), ``kinds``
(part kinds), ``catalogue`` (the :class:`Library` lookups and :func:`load_library`).

Lengths are millimetres. Density levels are ``"most"`` (IPC-7351B level A),
``"nominal"`` (B) and ``"least"`` (C): :data:`pipeline.model.DENSITY_LEVELS`.

Examples
--------
>>> lib = load_library()
>>> lib.package("so-8").name
'SOIC-8'
>>> lib.package("1608").name
'0603'
>>> cy = courtyard(lib.package("0603"), "nominal")
>>> (cy.length_mm, cy.width_mm)
(2.95, 1.45)
>>> [p.name for p in lib.pins_for(lib.kind("header"), lib.package("header-1x3-2.54"))]
['1', '2', '3']
"""

from pipeline.errors import UnknownNameError
from pipeline.model import DENSITY_LEVELS as LEVELS

from .catalogue import DEFAULT_ROOT, Library, load_library
from .courtyards import CourtyardRule, ceil_to_grid, courtyard, courtyard_size, normalize_level
from .kinds import CATEGORIES, VALUE_UNITS, pin_mismatch
from .lands import land_equations, pads_on_board
from .packages import PACKAGE_COLUMNS, PackageFamily, PackageInfo

__all__ = [
    "DEFAULT_ROOT",
    "LEVELS",
    "CATEGORIES",
    "VALUE_UNITS",
    "PACKAGE_COLUMNS",
    "CourtyardRule",
    "PackageFamily",
    "PackageInfo",
    "Library",
    "UnknownNameError",
    "load_library",
    "courtyard",
    "courtyard_size",
    "ceil_to_grid",
    "normalize_level",
    "pin_mismatch",
    "land_equations",
    "pads_on_board",
]
