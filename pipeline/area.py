"""Area estimate: what the parts need, before any placement.

Entry points: :func:`items_from_design` (the fitted parts of a design as
placer items, with courtyards from the footprint library) and
:func:`estimate_area` (courtyard sum and a board-area range).

The rule of thumb (common practice, figures from memory; no single
published source)
----------------------------------------------------------------------
A board needs its parts' courtyards plus room to route between them. The
routing room is taken as a fraction of the courtyard sum that grows with
the pins a part has on average and shrinks with the copper layers::

    A_c     = sum of courtyard areas (length x width), mm^2
    p       = total pins / number of parts            (pins per part)
    f_pins  = sqrt(p / 2)                             (1 for two-terminal parts)
    f_layer = layers / 2                              (1 for a two-layer board)
    A(k)    = A_c * (1 + k * f_pins / f_layer)

with ``k = 0.25`` (low), ``0.5`` (expected) and ``1.0`` (high). For a
two-layer board of chip passives the expected area is 1.5 x the courtyard
sum, the usual "one and a half to two times the component area" of hand
layouts; a single layer doubles the routing room, four layers halve it;
an all-SOIC-8 design (p = 8) on two layers gets 2 x. The estimate rises
with the pin count and falls with the layer count, never the other way.
"""

from __future__ import annotations

import math
from typing import Mapping, Sequence

from .errors import DesignError, ProjectError
from .model import DENSITY_LEVELS, AreaEstimate, Design, PlaceItem

__all__ = ["items_from_design", "estimate_area", "ROUTING_K", "RULE"]

#: Routing-room factors k for the low / expected / high estimate (common practice, memory).
ROUTING_K = (0.25, 0.5, 1.0)

RULE = (
    "board area = courtyard sum x (1 + k x sqrt(pins per part / 2) / (layers / 2)), "
    "k = 0.25 low, 0.5 expected, 1.0 high (common practice rule of thumb, from memory)"
)


def items_from_design(design: Design, library, density: str,
                      package_override: Mapping[str, str] | None = None) -> tuple[PlaceItem, ...]:
    """The fitted parts of ``design`` as placer items.

    Parameters
    ----------
    design : Design
    library : Library
        Anything with ``package(name) -> Package`` (pipeline.library).
    density : str
        IPC-7351B density level: ``"most"``, ``"nominal"`` or ``"least"``.
    package_override : mapping of ref -> package name, optional
        Packages to use instead of the design's (the package-size sweep).

    Returns
    -------
    tuple of PlaceItem, in the design's part order, dnp parts left out.
    Courtyard length x width are the package's courtyard at ``density``
    (mm), the height its seated height (mm), ``nets`` the sorted names of
    the nets the part is on, ``pin_count`` the part's pins; the placement
    rules attached (:func:`pipeline.place_rules.attach_rules`). Cost:
    linear in parts and pins.

    Raises
    ------
    DesignError
        A part's package is not in the library (names the part's key).
    ProjectError
        ``density`` is not a density level.
    """
    if density not in DENSITY_LEVELS:
        raise ProjectError("project.toml", f"density {density!r} is not one of {', '.join(DENSITY_LEVELS)}",
                           key="board.density")
    override = dict(package_override or {})
    nets_of = _nets_of(design)
    seen: dict[tuple[str, str], tuple] = {}  # (package, kind) -> what _item looked up for them
    items = [_item(design, part, library, density, override.get(part.ref, part.package), nets_of, seen)
             for part in design.parts if not part.dnp]
    from .place_rules import attach_rules  # where parts must sit (edge, near)
    return attach_rules(items, design, library, density)


def _nets_of(design: Design) -> dict[str, set[str]]:
    """Ref -> the names of the nets its pins are on."""
    nets_of: dict[str, set[str]] = {}
    for net in design.nets:
        for pin in net.pins:
            nets_of.setdefault(pin.ref, set()).add(net.name)
    return nets_of


def _item(design: Design, part, library, density: str, package: str, nets_of: dict[str, set[str]],
          seen: dict[tuple[str, str], tuple]) -> PlaceItem:
    """One part as a placer item, in ``package``'s courtyard at ``density`` (mm).

    ``seen`` keeps the package, courtyard (mm) and library height (mm) of each package and kind
    pair once looked up without error, so the library is asked once per pair, not per part."""
    looked = seen.get((package, part.kind))
    if looked is None:
        where = dict(line=part.line or None, key=f"parts.{part.ref}.package")
        pkg = library.package(package, file=design.source, **where)
        try:
            cy = pkg.courtyard(density)
        except KeyError:
            raise DesignError(design.source, f"package {pkg.name!r} has no {density!r} courtyard", **where) from None
        looked = seen[(package, part.kind)] = (pkg, float(cy.length_mm), float(cy.width_mm),
                                               float(library.part_height(part.kind, pkg)[0]))
    pkg, length, width, height = looked
    return PlaceItem(
        ref=part.ref,
        length_mm=length,
        width_mm=width,
        height_mm=float(part.height_mm) if part.height_mm is not None else height,
        nets=tuple(sorted(nets_of.get(part.ref, ()))),
        pin_count=len(part.pins) if part.pins else int(getattr(pkg, "pin_count", 2) or 2),
        package=pkg.name,
        fixed=part.fixed,
    )


def estimate_area(items: Sequence[PlaceItem], layers: int) -> AreaEstimate:
    """Courtyard sum and a low / expected / high board-area estimate, mm^2.

    Parameters
    ----------
    items : sequence of PlaceItem
    layers : int
        Copper layers, 1 or more.

    Returns
    -------
    AreaEstimate with ``rule`` stating the rule of thumb (module notes).

    Raises
    ------
    ProjectError
        ``layers`` below 1.

    Examples
    --------
    Four two-terminal parts of 2 x 1 mm on two layers: A_c = 8 mm^2,
    f_pins = 1, f_layer = 1.

    >>> from pipeline.model import PlaceItem
    >>> it = [PlaceItem(f"R{i}", 2.0, 1.0, 0.5, ()) for i in range(4)]
    >>> e = estimate_area(it, 2)
    >>> e.courtyard_area_mm2, e.low_mm2, e.expected_mm2, e.high_mm2
    (8.0, 10.0, 12.0, 16.0)
    """
    if isinstance(layers, bool) or not isinstance(layers, int) or layers < 1:
        raise ProjectError("project.toml", f"layers must be a whole number of at least 1, not {layers!r}",
                           key="board.layers")
    items = list(items)
    a_c = math.fsum(float(i.length_mm) * float(i.width_mm) for i in items)
    if not items:
        return AreaEstimate(0.0, 0.0, 0.0, 0.0, RULE)
    pins = sum(max(int(i.pin_count), 1) for i in items) / len(items)
    f_pins = math.sqrt(pins / 2.0)
    f_layer = layers / 2.0
    low, exp, high = (a_c * (1.0 + k * f_pins / f_layer) for k in ROUTING_K)
    return AreaEstimate(a_c, low, exp, high, RULE)
