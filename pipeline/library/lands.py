"""Land patterns: every pad of a package, from the IPC-7351B land equations.

Surface-mount lands come from the component's terminal dimension ranges
(``footprints/terminals.csv``: minimum and maximum, not nominal) and the
solder-joint goals per density level (``footprints/lands.toml``), by the
IPC-7351B equations (REFERENCES.md sections 3 and 8)::

    Z = Lmin + 2 Jt + sqrt(CL^2 + F^2 + P^2)      toe-to-toe extent, rounded up
    G = Smax - 2 Jh - sqrt(CS^2 + F^2 + P^2)      heel-to-heel gap, rounded down
    X = Wmin + 2 Js + sqrt(CW^2 + F^2 + P^2)      land width, rounded up

with ``S = L - 2 T``, ``CS = sqrt(CL^2 + 2 CT^2)`` and ``Smax`` lowered by half
the difference between the plain range ``Smax - Smin`` and ``CS`` (the
statistical S of IPC-7351B; memory). A land is ``(Z - G) / 2`` deep, its centre
``(Z + G) / 4`` from the package centre.

Frame: millimetres, x along the package's length (pin rows, or a chip's
terminal axis), y across, origin at the package centre, seen from the top.
Two-terminal parts have pin 1 at -x. Rows and quads are numbered
anticlockwise from pin 1 at the left end of the lower row: IPC-7351B's zero
orientation (pin 1 upper left, rows vertical) turned a quarter anticlockwise
so that the rows run along x like the body length.

Examples
--------
>>> z, g, x = land_equations((1.50, 1.70), (0.20, 0.50), (0.70, 0.90),
...                          toe=0.35, heel=0.0, side=0.0, f=0.05, p=0.025, round_mm=0.05)
>>> (z, g, x)
(2.45, 0.65, 0.95)
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from pathlib import Path
from typing import Any, Mapping

from pipeline.errors import LibraryError
from pipeline.model import DENSITY_LEVELS, Package, Pad

from ._data import Fields, check_header, csv_number, csv_rows, read_toml
from .courtyards import ceil_to_grid

__all__ = ["Goals", "LandRules", "Terminals", "land_equations", "read_land_rules", "read_terminals",
           "surface_pads", "package_pads", "through_hole_row_pads", "pad_extent", "pads_on_board", "turned_pads", "board_xy",
           "TERMINAL_COLUMNS", "LAYOUTS"]

#: How a package's terminals are arranged (terminals.csv ``layout``).
LAYOUTS = ("ends", "rows", "quad", "tht-rows")

TERMINAL_COLUMNS = (
    "name", "layout", "pin_map", "goals", "span_min_mm", "span_max_mm", "terminal_min_mm",
    "terminal_max_mm", "width_min_mm", "width_max_mm", "tab_width_mm", "tab_length_mm", "source",
)
_EPS = 1e-9


def _floor_to_grid(value: float, grid: float) -> float:
    return round(math.floor(value / grid + 1e-6) * grid, 6)


def land_equations(span: tuple[float, float], terminal: tuple[float, float],
                   width: tuple[float, float], *, toe: float, heel: float, side: float,
                   f: float, p: float, round_mm: float) -> tuple[float, float, float]:
    """IPC-7351B ``(Z, G, X)`` in mm for one pair of opposite terminals.

    ``span`` is the (min, max) toe-to-toe length L, ``terminal`` the (min, max)
    terminal length T, ``width`` the (min, max) terminal width W; ``toe``,
    ``heel``, ``side`` the goals Jt, Jh, Js; ``f`` and ``p`` the fabrication
    and placement tolerances. Z and X are rounded up, G down, to ``round_mm``.
    Cost: constant.
    """
    (lmin, lmax), (tmin, tmax), (wmin, wmax) = span, terminal, width
    cl, ct, cw = lmax - lmin, tmax - tmin, wmax - wmin
    smin, smax = lmin - 2 * tmax, lmax - 2 * tmin
    cs = math.sqrt(cl ** 2 + 2 * ct ** 2)
    smax_stat = smax - ((smax - smin) - cs) / 2
    z = lmin + 2 * toe + math.sqrt(cl ** 2 + f ** 2 + p ** 2)
    g = smax_stat - 2 * heel - math.sqrt(cs ** 2 + f ** 2 + p ** 2)
    x = wmin + 2 * side + math.sqrt(cw ** 2 + f ** 2 + p ** 2)
    return (ceil_to_grid(z, round_mm), max(0.0, _floor_to_grid(g, round_mm)),
            ceil_to_grid(x, round_mm))


@dataclass(frozen=True)
class Goals:
    """Solder-joint goals of one terminal style, mm, per level in DENSITY_LEVELS order."""

    name: str
    toe: tuple[float, float, float]
    heel: tuple[float, float, float]
    side: tuple[float, float, float]
    round_mm: float
    inward: bool
    source: str

    def at(self, level: str) -> tuple[float, float, float]:
        """(outer goal, inner goal, side goal) at ``level``: toe and heel swap when inward."""
        i = DENSITY_LEVELS.index(level)
        toe, heel = self.toe[i], self.heel[i]
        return (heel, toe, self.side[i]) if self.inward else (toe, heel, self.side[i])


@dataclass(frozen=True)
class LandRules:
    """The contents of ``lands.toml``."""

    fabrication_mm: float
    placement_mm: float
    hole_allowance_mm: float
    annular_ring_mm: float
    goals: Mapping[str, Goals]

    def hole(self, lead_mm: float) -> float:
        """Finished hole for a lead of greatest diameter ``lead_mm``, on the 0.05 mm grid."""
        return ceil_to_grid(lead_mm + self.hole_allowance_mm, 0.05)


@dataclass(frozen=True)
class Terminals:
    """One row of ``terminals.csv``: how a package's terminals sit and their ranges, mm."""

    name: str
    layout: str
    pin_map: str
    goals: str
    span: tuple[float, float]
    terminal: tuple[float, float]
    width: tuple[float, float]
    tab_width_mm: float
    tab_length_mm: float
    source: str


def read_land_rules(path: Path) -> LandRules:
    """``lands.toml``, checked."""
    src = read_toml(path)
    top = Fields(src, "")
    top.check_keys(src.data, ("fabrication_mm", "fabrication_source", "placement_mm",
                              "placement_source", "through-hole", "goals"),
                   ("fabrication_mm", "fabrication_source", "placement_mm", "placement_source",
                    "through-hole", "goals"))
    for k in ("fabrication_source", "placement_source"):
        top.text(k, src.data[k])
    th = Fields(src, "through-hole")
    th.check_keys(src.data["through-hole"], ("hole_allowance_mm", "hole_source", "annular_ring_mm",
                                             "ring_source"),
                  ("hole_allowance_mm", "hole_source", "annular_ring_mm", "ring_source"))
    tht = src.data["through-hole"]
    goals = {}
    for name, table in sorted(src.data["goals"].items()):
        goals[name] = _read_goals(Fields(src, f"goals.{name}"), name, table)
    return LandRules(
        fabrication_mm=top.number("fabrication_mm", src.data["fabrication_mm"]),
        placement_mm=top.number("placement_mm", src.data["placement_mm"]),
        hole_allowance_mm=th.number("hole_allowance_mm", tht["hole_allowance_mm"]),
        annular_ring_mm=th.number("annular_ring_mm", tht["annular_ring_mm"], strict=True),
        goals=goals,
    )


def _read_goals(f: Fields, name: str, table: Any) -> Goals:
    if not isinstance(table, dict):
        raise f.here("expected a [goals.NAME] table")
    f.check_keys(table, ("toe", "heel", "side", "round_mm", "inward", "source"),
                 ("toe", "heel", "side", "round_mm", "source"))
    triples = {}
    for k in ("toe", "heel", "side"):
        raw = table[k]
        if not isinstance(raw, list) or len(raw) != len(DENSITY_LEVELS):
            raise f.error(k, "expected three numbers: most, nominal, least")
        triples[k] = tuple(f.number(k, v, minimum=None) for v in raw)
    return Goals(name=name, round_mm=f.number("round_mm", table["round_mm"], strict=True),
                 inward=f.flag("inward", table.get("inward", False)),
                 source=f.text("source", table["source"]), **triples)


def read_terminals(path: Path, rules: LandRules) -> dict[str, Terminals]:
    """``terminals.csv`` by package name, checked."""
    header_line, header, rows = csv_rows(path)
    check_header(path, header_line, header, TERMINAL_COLUMNS)
    out: dict[str, Terminals] = {}
    for line, cells in rows:
        if len(cells) != len(TERMINAL_COLUMNS):
            raise LibraryError(str(path), f"row has {len(cells)} fields, expected "
                               f"{len(TERMINAL_COLUMNS)}", line=line)
        row = dict(zip(TERMINAL_COLUMNS, cells))
        name = row["name"]
        if row["layout"] not in LAYOUTS:
            raise LibraryError(str(path), f"unknown layout '{row['layout']}' (use "
                               f"{', '.join(LAYOUTS)})", line=line, key=f"{name}.layout")
        if row["layout"] != "tht-rows" and row["goals"] not in rules.goals:
            raise LibraryError(str(path), f"unknown goals '{row['goals']}' (known in lands.toml: "
                               f"{', '.join(sorted(rules.goals))})", line=line, key=f"{name}.goals")
        num = {c: csv_number(row[c], path, line, f"{name}.{c}", strict=False)
               for c in TERMINAL_COLUMNS[4:12]}
        for lo, hi in (("span_min_mm", "span_max_mm"), ("terminal_min_mm", "terminal_max_mm"),
                       ("width_min_mm", "width_max_mm")):
            if num[hi] < num[lo]:
                raise LibraryError(str(path), f"{hi} is below {lo}", line=line, key=f"{name}.{hi}")
        if not row["source"]:
            raise LibraryError(str(path), "source must not be empty", line=line, key=f"{name}.source")
        out[name] = Terminals(
            name=name, layout=row["layout"], pin_map=row["pin_map"], goals=row["goals"],
            span=(num["span_min_mm"], num["span_max_mm"]),
            terminal=(num["terminal_min_mm"], num["terminal_max_mm"]),
            width=(num["width_min_mm"], num["width_max_mm"]),
            tab_width_mm=num["tab_width_mm"], tab_length_mm=num["tab_length_mm"],
            source=row["source"])
    return out


# ------------------------------------------------------------------ geometry
def _row_places(pin_map: str, pin_count: int) -> tuple[list[str], list[str]]:
    """(lower row left to right, upper row left to right) pin texts; '-' is an empty place."""
    if pin_map:
        lower, upper = (part.split() for part in pin_map.split("/"))
        return lower, list(reversed(upper))
    half = pin_count // 2
    lower = [str(i) for i in range(1, half + 1)]
    upper = [str(i) for i in range(pin_count, half, -1)]  # left to right: N .. half+1
    return lower, upper


def surface_pads(t: Terminals, pin_count: int, pitch: float, rules: LandRules,
                 level: str) -> tuple[Pad, ...]:
    """The surface-mount pads of a package with terminals ``t`` at density ``level``."""
    goal = rules.goals[t.goals]
    outer, inner, side = goal.at(level)
    z, g, x = land_equations(t.span, t.terminal, t.width, toe=outer, heel=inner, side=side,
                             f=rules.fabrication_mm, p=rules.placement_mm, round_mm=goal.round_mm)
    depth, centre = round((z - g) / 2, 6), round((z + g) / 4, 6)
    if t.layout == "ends":
        return (Pad("1", -centre, 0.0, "rect", depth, x), Pad("2", centre, 0.0, "rect", depth, x))
    if t.layout == "rows":
        return _row_pads(t, pin_count, pitch, depth, centre, x, rules, goal, level)
    return _quad_pads(t, pin_count, pitch, depth, centre, x)


def _row_pads(t: Terminals, pin_count: int, pitch: float, depth: float, centre: float,
              x: float, rules: LandRules, goal: Goals, level: str) -> tuple[Pad, ...]:
    pads = []
    lower, upper = _row_places(t.pin_map, pin_count)
    for row, y in ((lower, -centre), (upper, centre)):
        for i, token in enumerate(row):
            if token == "-":
                continue
            px = round((i - (len(row) - 1) / 2) * pitch, 6)
            width, land_depth, py = x, depth, y
            if token.endswith("*"):  # a wide tab: the side equation on the tab's width
                token = token[:-1]
                _, _, width = land_equations(
                    t.span, t.terminal, (t.tab_width_mm, t.tab_width_mm), toe=0, heel=0,
                    side=goal.at(level)[2], f=rules.fabrication_mm, p=rules.placement_mm,
                    round_mm=goal.round_mm)
                if t.tab_length_mm > 0:  # a deep tab land (TO-252): its outer edge at the toe
                    land_depth = t.tab_length_mm
                    py = math.copysign(round(centre + depth / 2 - land_depth / 2, 6), y)
            pads.append(Pad(token, px, py, "rect", width, land_depth))
    pads.sort(key=lambda p: int(p.number))
    if t.tab_width_mm > 0 and t.tab_length_mm > 0 and "*" not in t.pin_map:  # a no-lead EP
        pads.append(Pad("EP", 0.0, 0.0, "rect", t.tab_width_mm, t.tab_length_mm))
    return tuple(pads)


def _quad_pads(t: Terminals, pin_count: int, pitch: float, depth: float, centre: float,
               x: float) -> tuple[Pad, ...]:
    n = pin_count // 4
    pads = []
    along = [round((i - (n - 1) / 2) * pitch, 6) for i in range(n)]
    for k in range(pin_count):
        side, i = divmod(k, n)
        if side == 0:    # lower side, left to right
            pad = Pad(str(k + 1), along[i], -centre, "rect", x, depth)
        elif side == 1:  # right side, bottom to top
            pad = Pad(str(k + 1), centre, along[i], "rect", depth, x)
        elif side == 2:  # upper side, right to left
            pad = Pad(str(k + 1), -along[i], centre, "rect", x, depth)
        else:            # left side, top to bottom
            pad = Pad(str(k + 1), -centre, -along[i], "rect", depth, x)
        pads.append(pad)
    if t.tab_width_mm > 0:
        pads.append(Pad("EP", 0.0, 0.0, "rect", t.tab_width_mm, t.tab_length_mm or t.tab_width_mm))
    return tuple(pads)


def package_pads(t: Terminals, pin_count: int, pitch: float,
                 rules: LandRules) -> tuple[tuple[str, tuple[Pad, ...]], ...]:
    """``(level, pads)`` for every density level of a package with terminals ``t``.

    Through-hole rows take a hole from the greatest lead width
    (:meth:`LandRules.hole`) and a round land of that hole plus the annular
    ring on each side, the same at every level.
    """
    if t.layout == "tht-rows":
        drill = rules.hole(t.width[1])
        pads = through_hole_row_pads(pin_count, 2, pitch, t.span[1],
                                     round(drill + 2 * rules.annular_ring_mm, 6), drill,
                                     anticlockwise=True)
        return tuple((lv, pads) for lv in DENSITY_LEVELS)
    return tuple((lv, surface_pads(t, pin_count, pitch, rules, lv)) for lv in DENSITY_LEVELS)


def through_hole_row_pads(pin_count: int, rows: int, pitch: float, row_spacing: float,
                          pad_mm: float, drill_mm: float, *, anticlockwise: bool) -> tuple[Pad, ...]:
    """Round through-hole pads in one or two rows along x; pin 1 square (common practice).

    Two rows are numbered anticlockwise (a DIP) or across, odd pins in the lower
    row (a two-row pin header, common practice) when ``anticlockwise`` is false.
    """
    per_row = pin_count // rows if rows else 0
    pads = []
    for k in range(pin_count):
        if rows == 1:
            i, y = k, 0.0
        elif anticlockwise:
            i, y = (k, -row_spacing / 2) if k < per_row else (pin_count - 1 - k, row_spacing / 2)
        else:
            i, y = k // 2, (-row_spacing / 2 if k % 2 == 0 else row_spacing / 2)
        x = round((i - (per_row - 1) / 2) * pitch, 6)
        pads.append(Pad(str(k + 1), x, round(y, 6), "rect" if k == 0 else "circle", pad_mm, pad_mm,
                        drill_mm))
    return tuple(pads)


def pad_extent(pads: tuple[Pad, ...]) -> tuple[float, float]:
    """Length (x) and width (y) of the smallest centred rectangle holding every pad, mm."""
    half_x = max((abs(p.x_mm) + p.width_mm / 2 for p in pads), default=0.0)
    half_y = max((abs(p.y_mm) + p.height_mm / 2 for p in pads), default=0.0)
    return round(2 * half_x, 6), round(2 * half_y, 6)


def turned_pads(package: Package, rotation_deg: float, side: str,
                level: str = "nominal") -> tuple[tuple[Pad, float, float, int], ...]:
    """The pads of ``package`` turned and mirrored as placed, before the move.

    One ``(pad, dx, dy, rotation)`` per pad of density ``level``: the pad's
    offset from the part origin on the board (mm, not rounded) and whether it
    now stands turned by 90 degrees. The part is turned ``rotation_deg``
    anticlockwise (a multiple of 90) seen from the top; a part on the
    ``"bottom"`` side is first mirrored in x (it is seen through the board).
    It depends on the package, rotation, side and level only, so it is kept
    per such key after the first call (callers place thousands of parts of a
    few packages: the router's pads, the near pass, the orientation pass);
    the package is kept beside its pads, so a key's id is never another
    package's. Cost: one pass over the pads the first time, O(1) after.
    """
    key = (id(package), rotation_deg, side, level)
    kept = _TURNED.get(key)
    if kept is not None and kept[0] is package:
        return kept[1]
    quarter = round(rotation_deg / 90.0)
    if abs(quarter * 90.0 - rotation_deg) > 1e-9:
        raise ValueError(f"rotation {rotation_deg} is not a multiple of 90 degrees")
    if side not in ("top", "bottom"):
        raise ValueError(f"side must be 'top' or 'bottom', not {side!r}")
    cos, sin = ((1, 0), (0, 1), (-1, 0), (0, -1))[quarter % 4]
    out = []
    for p in package.pads_at(level):
        px = -p.x_mm if side == "bottom" else p.x_mm
        out.append((p, px * cos - p.y_mm * sin, px * sin + p.y_mm * cos, (p.rotation + 90 * (quarter % 2)) % 180))
    _TURNED[key] = (package, tuple(out))
    return _TURNED[key][1]


#: :func:`turned_pads` per (package id, rotation, side, level), the package kept beside to check the id
_TURNED: dict[tuple, tuple] = {}


def board_xy(x: float, y: float, dx: float, dy: float) -> tuple[float, float]:
    """A pad's board position (mm, to 1 nm) from the part origin (``x``, ``y``) and its
    :func:`turned_pads` offset."""
    return round(x + dx, 6), round(y + dy, 6)


def pads_on_board(package: Package, x: float, y: float, rotation_deg: float, side: str,
                  level: str = "nominal") -> tuple[Pad, ...]:
    """The pads of a part of ``package`` placed at (``x``, ``y``) mm on the board.

    The part's origin goes to (x, y); it is turned ``rotation_deg`` anticlockwise
    (a multiple of 90) seen from the top; a part on the ``"bottom"`` side is
    first mirrored in x (it is seen through the board). Each pad keeps its own
    width and height; ``rotation`` says whether it now stands turned by 90
    degrees. Pads are those of density ``level`` (:func:`turned_pads`, then
    :func:`board_xy`). Cost: one pass over the pads.

    >>> from pipeline.library import load_library
    >>> [(p.number, p.x_mm, p.y_mm, p.rotation) for p in
    ...  pads_on_board(load_library().package("0603"), 10.0, 5.0, 90, "top")]
    [('1', 10.0, 4.225, 90), ('2', 10.0, 5.775, 90)]
    """
    out = []
    for p, dx, dy, turned in turned_pads(package, rotation_deg, side, level):
        bx, by = board_xy(x, y, dx, dy)
        out.append(replace(p, x_mm=bx, y_mm=by, rotation=turned))
    return tuple(out)
