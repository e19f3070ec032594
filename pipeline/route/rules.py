"""Copper rules: track width, clearance, vias, layers, copper areas, currents.

Entry points: :class:`CopperRules` (the frozen rules), :func:`read_copper`
(the ``[copper]`` table of project.toml to rules), :func:`width_for_current`
(IPC-2221 conductor sizing) and :func:`layer_names`.

Defaults (common practice for small-batch fabrication, REFERENCES.md
section 4): tracks and gaps of 0.2 mm (the "conservative" 0.2 / 0.2 of
common practice; 0.15 / 0.15 is typical), vias of 0.6 mm pad on a 0.3 mm
drill (common practice, from memory; a 0.15 mm annular ring), copper 0.25
mm from the board edge (outer layers; 0.4 mm on inner layers), no via in
a surface pad (a via in a pad wicks solder away in hand assembly).

Conductor sizing (IPC-2221B, 2012, section 6.2, the conductor-sizing chart
carried over from IPC-D-275; the closed form is the usual curve fit of that
chart, constants from memory, REFERENCES.md section 9)::

    I = k * dT**0.44 * A**0.725

``I`` in amperes, ``dT`` the temperature rise in degC, ``A`` the conductor
cross-section in square mils, ``k = 0.048`` for outer layers and ``0.024``
for inner layers. The width is ``A`` over the copper thickness; 1 oz/ft^2 of
copper is 35 um = 1.378 mil thick.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from ..errors import ProjectError

__all__ = ["CopperRules", "read_copper", "width_for_current", "layer_names", "COPPER_KEYS",
           "IPC2221_K_OUTER", "IPC2221_K_INNER", "MIL_MM", "OZ_THICKNESS_MIL"]

#: IPC-2221B conductor-sizing curve fit (REFERENCES.md section 9; constants from memory).
IPC2221_K_OUTER = 0.048
IPC2221_K_INNER = 0.024
IPC2221_DT_EXP = 0.44
IPC2221_AREA_EXP = 0.725
#: 1 mil = 0.0254 mm (definition of the inch); 1 oz/ft^2 copper = 1.378 mil (REFERENCES.md section 9).
MIL_MM = 0.0254
OZ_THICKNESS_MIL = 1.378

#: copper layers the router knows, by count (names are ours).
_LAYERS = {1: ("top",), 2: ("top", "bottom"), 4: ("top", "inner1", "inner2", "bottom")}

#: keys of the [copper] table of project.toml.
COPPER_KEYS = ("route", "track_width_mm", "clearance_mm", "via_diameter_mm", "via_drill_mm",
               "edge_clearance_mm", "inner_edge_clearance_mm", "vias_in_pads", "areas", "currents",
               "temperature_rise_c", "copper_oz", "time_budget_s")


def layer_names(count: int) -> tuple[str, ...]:
    """Copper layer names, top first, for 1, 2 or 4 layers.

    >>> layer_names(4)
    ('top', 'inner1', 'inner2', 'bottom')
    """
    return _LAYERS[count]


def width_for_current(amps: float, *, rise_c: float = 10.0, copper_oz: float = 1.0,
                      outer: bool = True) -> float:
    """Track width (mm) that carries ``amps`` with a rise of ``rise_c`` degC.

    IPC-2221B chart relation (see the module docstring): the cross-section
    ``A = (I / (k dT^0.44))^(1 / 0.725)`` square mils, width ``A / t`` with
    ``t = copper_oz x 1.378`` mil. Cost O(1).

    >>> round(width_for_current(1.0), 2)
    0.3
    """
    k = IPC2221_K_OUTER if outer else IPC2221_K_INNER
    area_mil2 = (amps / (k * rise_c ** IPC2221_DT_EXP)) ** (1.0 / IPC2221_AREA_EXP)
    return area_mil2 / (copper_oz * OZ_THICKNESS_MIL) * MIL_MM


@dataclass(frozen=True)
class CopperRules:
    """The copper rules the router and the checker work to (millimetres).

    ``areas`` pairs a net with the layer it fills as a copper area (a plane
    on an inner layer, a pour on an outer one); a layer given to a net is
    not used for other nets' tracks. ``currents`` pairs a net with its
    current (A); its tracks get :func:`width_for_current` when that is wider
    than ``track_width_mm``. ``time_budget_s`` bounds all routing attempts
    together (default 180 s, our choice: the demo routes in about a second,
    the 60-part board of ``bench/bench_route.py`` needs about a minute of
    CPU over its spreading attempts).
    """

    layers: int = 2
    track_width_mm: float = 0.2
    clearance_mm: float = 0.2
    via_diameter_mm: float = 0.6
    via_drill_mm: float = 0.3
    edge_clearance_mm: float = 0.25
    inner_edge_clearance_mm: float = 0.4
    vias_in_pads: bool = False
    areas: tuple[tuple[str, str], ...] = ()
    currents: tuple[tuple[str, float], ...] = ()
    temperature_rise_c: float = 10.0
    copper_oz: float = 1.0
    time_budget_s: float = 180.0
    route: bool = True

    @property
    def layer_names(self) -> tuple[str, ...]:
        return layer_names(self.layers)

    @property
    def pitch_mm(self) -> float:
        """The routing grid pitch: one track and one gap."""
        return self.track_width_mm + self.clearance_mm

    @property
    def annular_ring_mm(self) -> float:
        return (self.via_diameter_mm - self.via_drill_mm) / 2.0

    def area_layer(self, net: str) -> str | None:
        for n, layer in self.areas:
            if n == net:
                return layer
        return None

    def net_width(self, net: str | None) -> float:
        """The track width of ``net``: the rule's width, or wider for its current."""
        for n, amps in self.currents:
            if n == net:
                return max(self.track_width_mm, width_for_current(
                    amps, rise_c=self.temperature_rise_c, copper_oz=self.copper_oz))
        return self.track_width_mm


# --------------------------------------------------------------------------
def read_copper(src: Any, table: dict, layers: int) -> CopperRules:
    """The ``[copper]`` table of ``src`` (a :class:`~pipeline.tomlsrc.TomlSource`).

    ``layers`` is ``[board] layers``; routing needs 1, 2 or 4. Bad values
    raise :class:`~pipeline.errors.ProjectError` naming the key and line.
    """
    d = CopperRules()

    def num(key: str, lo: float, hi: float) -> float:
        v = table.get(key, getattr(d, key))
        if isinstance(v, bool) or not isinstance(v, (int, float)) or not lo < v <= hi:
            raise src.error(f"copper.{key}", f"expected a number above {lo:g} and at most {hi:g}, found {v!r}",
                            ProjectError)
        return float(v)

    def flag(key: str) -> bool:
        v = table.get(key, getattr(d, key))
        if not isinstance(v, bool):
            raise src.error(f"copper.{key}", f"expected true or false, found {v!r}", ProjectError)
        return v

    route = flag("route")
    if route and layers not in _LAYERS:
        raise src.error("board.layers", f"routing needs 1, 2 or 4 copper layers, found {layers}; "
                        "set [copper] route = false to skip routing", ProjectError)
    names = _LAYERS.get(layers, ())
    rules = CopperRules(
        layers=layers, route=route, vias_in_pads=flag("vias_in_pads"),
        track_width_mm=num("track_width_mm", 0, 10), clearance_mm=num("clearance_mm", 0, 10),
        via_diameter_mm=num("via_diameter_mm", 0, 10), via_drill_mm=num("via_drill_mm", 0, 10),
        edge_clearance_mm=num("edge_clearance_mm", -1e-12, 10),
        inner_edge_clearance_mm=num("inner_edge_clearance_mm", -1e-12, 10),
        temperature_rise_c=num("temperature_rise_c", 0, 200), copper_oz=num("copper_oz", 0, 20),
        time_budget_s=num("time_budget_s", 0, 86400),
        areas=_pairs(src, table, "areas", lambda k, v: _area_layer(src, k, v, names)),
        currents=_pairs(src, table, "currents", lambda k, v: _current(src, k, v)),
    )
    taken = [layer for _, layer in rules.areas]
    for net, layer in rules.areas:
        if taken.count(layer) > 1:
            raise src.error(f"copper.areas.{net}", f"layer {layer} is given to more than one net", ProjectError)
    if rules.via_drill_mm >= rules.via_diameter_mm:
        raise src.error("copper.via_drill_mm", f"the drill ({rules.via_drill_mm:g} mm) must be smaller than the "
                        f"via pad ({rules.via_diameter_mm:g} mm)", ProjectError)
    return rules


def _pairs(src: Any, table: dict, key: str, check) -> tuple:
    body = table.get(key, {})
    if not isinstance(body, dict):
        raise src.error(f"copper.{key}", "expected a table of net = value", ProjectError)
    return tuple(sorted((str(k), check(f"copper.{key}.{k}", v)) for k, v in body.items()))


def _area_layer(src: Any, key: str, v: Any, names: tuple[str, ...]) -> str:
    if not isinstance(v, str) or v not in names:
        raise src.error(key, f"expected one of the copper layers {', '.join(names)}, found {v!r}", ProjectError)
    return v


def _current(src: Any, key: str, v: Any) -> float:
    if isinstance(v, bool) or not isinstance(v, (int, float)) or not 0 < v <= 100:
        raise src.error(key, f"expected a current in amperes above 0 and at most 100, found {v!r}", ProjectError)
    return float(v)
