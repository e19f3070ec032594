"""The router: negotiated-congestion maze routing on every layer, with vias.

Entry point: :func:`route_board`. It either completes every connection or
names the open nets and where the congestion is. Whatever it returns is
re-checked by the independent copper checker (:mod:`pipeline.copper`)
before anyone calls a board routed.

Method
------
* **Grid** (:mod:`pipeline.route.grid`): nodes at the pitch track width +
  clearance on every copper layer, with exact owner tests against pads,
  holes and the board edge. Tracks run along grid lines; a via joins all
  layers at a grid point.
* **Connections**: a net grows as a tree (Prim's order: the unconnected
  pad nearest to the connected ones next); each step is an A* search (P.
  E. Hart, N. J. Nilsson and B. Raphael, "A formal basis for the heuristic
  determination of minimum cost paths", IEEE Trans. SSC 4(2), 1968) from
  every node of the tree and the connected pads to the next pad, with the
  Manhattan distance to that pad's nodes, weighted by
  ``search.HEURISTIC_WEIGHT``, as its heuristic (weighted A*: a path costs
  at most that factor x the least, for far fewer expansions). Each
  layer prefers one direction (horizontal on top, vertical below: common
  practice), a via costs ``VIA_COST`` steps.
* **Pin escape** (:mod:`pipeline.route.escape`): a pad the grid leaves on
  a small island (tight gaps off the grid between other pads) gets an
  any-angle track out of it, found by Lee's maze routing (C. Y. Lee,
  1961) on a fine lattice and tested exactly; its end node becomes the
  pad's terminal.
* **Negotiated congestion** (PathFinder: L. McMurchie and C. Ebeling,
  "PathFinder: a negotiation-based performance-driven router for FPGAs",
  FPGA 1995): nets may first share nodes; a node's cost is
  ``step x (1 + history) x (1 + present x sharers)``. After each round the
  history of shared nodes grows by ``HISTORY_STEP``, the present factor
  grows by ``PRESENT_GROWTH``, and the connections that share are ripped
  up and routed again (partial rip-up: a net keeps its other paths),
  until nothing is shared, ``MAX_ROUNDS`` pass or the time budget runs
  out, or a connection is found to have no path at all (then no
  negotiation can complete the board). Nets still sharing then are
  ripped up and routed once more one at a time with sharing forbidden
  (the classic sequential rip-up-and-reroute pass); those that still
  share are dropped (most shared first) and reported open with the
  shared places as the congestion.
* **Clearance model**: a track node or via claims the nodes around it that
  another net's copper may not use (none for two plain tracks: the pitch
  already holds the clearance; the 8 neighbours of a via; more around wide
  tracks). Two nets conflict where one's copper stands on the other's
  claim.
* **Large boards** (more than ``COARSE_PARTS`` parts): every net is
  first routed globally on coarse tiles with negotiated congestion
  (:mod:`pipeline.route.coarse`), and each detailed search keeps to its
  net's corridor (the tiles of its global route grown by ``CORRIDOR_GROW``), so a
  search costs what its corridor holds, not the whole board. Nets the
  global router cannot fit are reported open with the overfull tile
  borders as the congestion; so are nets the time budget never reached.
* **Time budget**: the clock is read before each pad's pin escape (escapes
  stop at ``ESCAPE_SHARE`` of the budget), each net of global routing
  (which stops at ``COARSE_SHARE`` of what is left), each net of each
  negotiation round and each net of the last pass. When it runs out, the
  nets never reached are open, the last pass gives the nets it did not
  reach their negotiated copper back, and nets that still share are
  dropped (most shared first), so whatever was routed legally is kept.
  Past the budget: at most one step (one pad's escape or one net's
  routing), plus the copper areas and the grid, which are not cut short.
* **Copper areas**: a net given a layer fills it (board less edge
  clearance, holes and other nets' copper grown by the clearance); each of
  its pads not on that layer routes to the nearest via site.

Deterministic: nets, pads and neighbours are visited in fixed orders and
heap ties break on insertion order; only the time budget (checked between
nets) can make a slower machine stop earlier. Cost per A* search
O(V log V) over the nodes of a window around the connection.
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass
from typing import Callable

import numpy as np
import shapely
from shapely.geometry import LineString, Point

from .board import RouteBoard, RoutePad
from .coarse import COARSE_PARTS, COARSE_SHARE, TILE_PITCHES, capacities, plan_corridors
from .escape import ESCAPE_REACH, escape, island
from .grid import BLOCKED, FREE, Grid, add_copper, as_polygons, build_grid, edge_rule
from .rules import CopperRules
from .search import astar as search_astar
from .search import moves
from ..wirelength import half_perimeter

__all__ = ["Track", "Via", "Area", "Routing", "route_board", "VIA_COST", "MAX_ROUNDS"]

VIA_COST = 4.0           #: a via, in grid steps (our choice)
OFF_DIRECTION = 1.5      #: a step against the layer's preferred direction (our choice)
MAX_ROUNDS = 40          #: negotiation rounds at most
PRESENT_START = 1.0      #: PathFinder's first present-sharing factor (our choice, measured: 0.5 took 21 rounds on the demo, 40 and 1 net open on the 60-part board at 1.2 mm spread)
PRESENT_GROWTH = 1.3     #: its growth per round (our choice, measured: 1.6 left the demo's compact placement open)
HISTORY_STEP = 0.8       #: history added to a shared node per round
WINDOW = 12              #: grid steps around a connection's box searched first
AREA_MARGIN = 0.005      #: extra gap (mm) where copper areas are cut: buffer arcs are chords
STUB_CELL = 2.0          #: side (mm) of the buckets pin-access stubs are filed in
ESCAPE_PASSES = 3        #: rounds of pin escapes (each on the grid with the escapes before it)
ESCAPE_SHARE = 0.5       #: share of the time budget pin escapes may use (our choice: on the 2,000-part board of
                         #: bench/bench_route.py unbounded escapes took more than the whole budget; at 0.3 they
                         #: stopped with pads untried while 40 negotiation rounds then took a third of it)
HARD = 1e6               #: the present-sharing factor of the last rip-up-and-reroute pass (sharing forbidden)
DOT = 1e-3               #: length (mm) of the track that stands for a single node of copper

Progress = Callable[[str, float], None]


@dataclass(frozen=True)
class Track:
    """A track: centre line (two or more points, mm), copper = line grown by half the width."""

    net: str
    layer: str
    width_mm: float
    points: tuple[tuple[float, float], ...]


@dataclass(frozen=True)
class Via:
    net: str
    x: float
    y: float
    diameter_mm: float
    drill_mm: float


@dataclass(frozen=True)
class Area:
    """A copper area of ``net`` on ``layer`` (a shapely Polygon with holes)."""

    net: str
    layer: str
    polygon: object


@dataclass(frozen=True)
class Routing:
    """What the router made: copper, the open nets, and where it was crowded.

    ``status`` is ``"routed"`` (every connection made) or ``"open"``.
    ``congestion`` lists up to ten ``(x, y)`` places (mm) where nets still
    shared when the router gave up, most shared first.
    """

    status: str
    board: RouteBoard
    rules: CopperRules
    tracks: tuple[Track, ...]
    vias: tuple[Via, ...]
    areas: tuple[Area, ...]
    open: tuple[str, ...]
    congestion: tuple[tuple[float, float], ...]
    rounds: int

    @property
    def wirelength_mm(self) -> float:
        return sum(LineString(t.points).length for t in self.tracks)


# --------------------------------------------------------------------------
class _Net:
    __slots__ = ("name", "k", "pads", "width", "area", "grid", "terms", "paths", "vias", "core", "claim",
                 "failed", "stubs", "halo", "dead", "halo_key", "corridor", "tried", "gaps")

    def __init__(self, name, k, pads, width, area):
        self.name, self.k, self.pads, self.width, self.area = name, k, pads, width, area
        self.grid: Grid | None = None
        self.terms: list[list[int]] = []
        self.paths: list[list[int]] = []
        self.vias: list[int] = []
        self.core: set[int] = set()
        self.claim: set[int] = set()
        self.failed = False
        self.dead = False     # a connection has no path at all (not a matter of congestion)
        self.stubs: list[tuple[int, str, LineString]] = []
        self.halo: list[tuple[int, int]] = []
        self.halo_key: tuple = ()
        self.corridor = None  # plane cells (bytearray, 1 = usable) the detailed search keeps to, or None
        self.tried = False    # routed at least once (a net the time budget never reached is open)
        self.gaps: list[list[float]] | None = None   # distances between pad centroids (route_tree's order)


def route_board(board: RouteBoard, rules: CopperRules, *, progress: Progress | None = None,
                time_budget_s: float | None = None, coarse: bool | None = None,
                clock: Callable[[], float] | None = None) -> Routing:
    """Route ``board`` under ``rules``; see the module docstring.

    ``time_budget_s`` defaults to ``rules.time_budget_s``; ``coarse`` routes
    globally on tiles first (:mod:`pipeline.route.coarse`), by default when
    the board has more than ``COARSE_PARTS`` parts. ``clock`` (seconds,
    monotonic; default :func:`time.monotonic`; tests pass a counter) is read before each pad's pin escape,
    each net's global and detailed routing and each net of the last pass,
    so routing ends within the budget plus the slack of one such step
    (plus building the grid and the copper areas, which are not cut short).
    When the budget runs out, the nets routed so far that share no copper
    are kept and the rest reported open.
    """
    if coarse is None:
        coarse = len({p.ref for p in board.pads}) > COARSE_PARTS
    router = _Router(board, rules, progress, rules.time_budget_s if time_budget_s is None else time_budget_s,
                     clock or time.monotonic)
    router.coarse = coarse
    return router.run()


class _Router:
    def __init__(self, board: RouteBoard, rules: CopperRules, progress, budget, clock):
        self.board, self.rules, self.progress, self.clock = board, rules, progress, clock
        now = clock()
        self.deadline = now + budget
        self.escape_deadline = now + ESCAPE_SHARE * budget
        self.escape_failed: set[tuple[int, int]] = set()   # (net, pad) whose escape found no way out
        self.layers = rules.layer_names
        netpads = board.nets()
        self.names = tuple(netpads)
        self.nets = [_Net(n, k, netpads[n], rules.net_width(n), rules.area_layer(n))
                     for k, n in enumerate(self.names)]
        self.wmax = max([n.width for n in self.nets] + [rules.track_width_mm])
        self._grids: dict[float, Grid] = {}
        self.coarse = False   # route globally on tiles first (route_board sets it)
        self._moves: dict = {}  # (grid, net index, corridor) -> the steps a net may take (search.moves)

    def late(self, deadline: float | None = None) -> bool:
        """Whether the clock has passed ``deadline`` (default: the budget's end); one clock read."""
        return self.clock() > (self.deadline if deadline is None else deadline)

    # ---------------------------------------------------------------- setup
    def grid(self, width: float) -> Grid:
        key = round(width, 9)
        if key not in self._grids:
            g = build_grid(self.board, self.rules, width, self.layers, self.names)
            for li, name in enumerate(self.layers):  # a layer given to a copper area carries no tracks
                if any(layer == name for _, layer in self.rules.areas):
                    off = li * g.nx * g.ny
                    g.node[off:off + g.nx * g.ny] = [BLOCKED] * (g.nx * g.ny)
            self._grids[key] = g
        return self._grids[key]

    def setup(self) -> None:
        buckets: dict = {}
        for width in sorted({n.width for n in self.nets}):
            self.grid(width)
        for _ in range(ESCAPE_PASSES):   # an escape may cut off another pad: look again on the new grid
            if not self.escapes(buckets):
                break
        p = self.rules.pitch_mm
        rv = self.rules.via_diameter_mm / 2
        self.via_halo = _offsets(rv + max(rv, self.wmax / 2) + self.rules.clearance_mm, p)
        for net in self.nets:
            net.grid = self.grid(net.width)
            net.terms = [self.terminals(net.grid, net, pad) for pad in net.pads]
            for pi, layer, line in net.stubs:
                net.terms[pi] = [self.node_at(net.grid, layer, line.coords[-1])]
            net.halo = _offsets(net.width / 2 + self.wmax / 2 + self.rules.clearance_mm, p)
            net.dead = self.cut_off(net)
        n_nodes = len(self.layers) * self.nets[0].grid.nx * self.nets[0].grid.ny if self.nets else 0
        self.core_occ = [0] * n_nodes
        self.claim_occ = [0] * n_nodes
        self.hist = [0.0] * n_nodes
        # copper of other nets near each node (per halo shape) and near each via site (all layers),
        # kept up to date by commit() so that a search step reads one number instead of summing
        # (counts as numpy arrays, updated there; read as lists by the searches: see costs())
        self.near = {}
        for net in self.nets:
            net.halo_key = tuple(net.halo)
            self.near.setdefault(net.halo_key, np.zeros(n_nodes, dtype=np.int64))
        self.via_near = np.zeros(n_nodes // len(self.layers) if self.layers else 0, dtype=np.int64)
        self._read: dict = {}   # the lists of near and via_near read by searches, until the next commit
        prefer = len(self.layers) - len(self.rules.areas) > 1
        self.steps = ([1.0 if not prefer or li % 2 == 0 else OFF_DIRECTION for li in range(len(self.layers))],
                      [1.0 if not prefer or li % 2 == 1 else OFF_DIRECTION for li in range(len(self.layers))])

    def escapes(self, buckets: dict) -> int:
        """Pin escapes (:meth:`stub`) for the pads the current grid leaves on small islands; how many made.

        A pad whose escape found no way out is not tried again (later
        escapes only add copper, so it would find none); the clock is read
        before each pad and escapes stop at ``ESCAPE_SHARE`` of the budget
        (the pads left route on the grid alone, or stay open).
        """
        made = 0
        for net in self.nets:
            if len(net.pads) < 2:
                continue
            g = self.grid(net.width)
            have = {pi for pi, *_ in net.stubs}
            terms = [self.terminals(g, net, pad) for pad in net.pads]
            for pi, pad in enumerate(net.pads):
                if pi in have or (net.area and net.area in pad.layers) or (net.k, pi) in self.escape_failed:
                    continue
                if self.late(self.escape_deadline):
                    return 0
                others = {n for q, t in enumerate(terms) if q != pi for n in t}
                cut = island(g, net.k, terms[pi], others)
                stub = None if cut is None else self.stub(g, net, pad, cut, others, buckets)
                if cut is not None and stub is None:
                    self.escape_failed.add((net.k, pi))
                if stub is not None:
                    net.stubs.append((pi, *stub))
                    geo = stub[1].buffer(net.width / 2 + 0.002)
                    _bucket_add(buckets, net.name, stub[0], geo)
                    for width, other in self._grids.items():   # copper every grid keeps clear of
                        add_copper(other, self.rules, width, net.k, stub[0], geo)
                    made += 1
        return made

    def cut_off(self, net: _Net) -> bool:
        """Whether a pad of ``net`` (a tree net) sits on a grid island away from the net's other pads:
        then no search can join it (:func:`pipeline.route.escape.island`, O(``ISLAND``) per pad),
        and it is open without spending a search on the whole board."""
        if net.area or len(net.terms) < 2:
            return False
        for pi, terms in enumerate(net.terms):
            others = {n for q, t in enumerate(net.terms) if q != pi for n in t}
            if terms and island(net.grid, net.k, terms, others) is not None:
                return True
        return False

    def node_at(self, g: Grid, layer: str, xy) -> int:
        i = round((xy[0] - g.x0) / g.pitch)
        j = round((xy[1] - g.y0) / g.pitch)
        return (self.layers.index(layer) * g.ny + j) * g.nx + i

    def terminals(self, g: Grid, net: _Net, pad: RoutePad) -> list[int]:
        """Nodes where a track of ``net`` overlaps ``pad`` (by at least 0.01 mm); one vectorised
        shapely distance call over the nodes of the pad's box."""
        reach = max(net.width / 2 - 0.01, 0.0)
        x0, y0, x1, y1 = pad.polygon.bounds
        i0, i1 = max(0, math.ceil((x0 - reach - g.x0) / g.pitch)), min(g.nx - 1, math.floor((x1 + reach - g.x0) / g.pitch))
        j0, j1 = max(0, math.ceil((y0 - reach - g.y0) / g.pitch)), min(g.ny - 1, math.floor((y1 + reach - g.y0) / g.pitch))
        if i1 < i0 or j1 < j0:
            return []
        jj, ii = np.mgrid[j0:j1 + 1, i0:i1 + 1]
        ii, jj = ii.ravel(), jj.ravel()
        close = shapely.distance(shapely.points(g.x0 + ii * g.pitch, g.y0 + jj * g.pitch), pad.polygon) <= reach
        out = []
        for li, name in enumerate(self.layers):
            if name not in pad.layers:
                continue
            for i, j in zip(ii[close].tolist(), jj[close].tolist()):
                n = (li * g.ny + j) * g.nx + i
                if g.node[n] in (FREE, net.k):
                    out.append(n)
        return out

    def stub(self, g: Grid, net: _Net, pad: RoutePad, cut: set[int], others: set[int], taken: dict) -> tuple[str, LineString] | None:
        """Pin escape: an any-angle track from inside ``pad`` to a node off its island ``cut``.

        For a pad the grid leaves cut off from the rest of its net
        (:func:`pipeline.route.escape.island`); the track comes from Lee's
        maze routing on a fine lattice (:func:`pipeline.route.escape.escape`),
        clear of other nets' pads (found through an STRtree) and of the
        escapes already made (``taken``, by ``STUB_CELL`` bucket). Layers
        are tried in order; ``None`` when none has a way out.
        """
        pads = self.board.pads
        if not hasattr(self, "_pad_tree"):
            self._pad_tree = shapely.STRtree([p.polygon for p in pads])
        w, s = net.width, self.rules.clearance_mm
        half = w / 2 + s
        window = pad.polygon.buffer(ESCAPE_REACH + half, join_style="mitre")
        near = self._pad_tree.query(window, predicate="intersects")
        edge = (self.board.outline, self.board.holes)
        for li, name in enumerate(self.layers):
            if name not in pad.layers:
                continue
            obstacles = [pads[q].polygon for q in sorted(near) if pads[q].net != net.name and name in pads[q].layers]
            obstacles += [geo for other, lay, geo in _bucket_near(taken, window.bounds, 0.0)
                          if other != net.name and lay == name]
            line = escape(pad.polygon, li, g, net.k, cut, others, obstacles, edge, half,
                          w / 2 + edge_rule(self.rules, name, len(self.layers)))
            if line is not None:
                return name, line
        return None

    # ---------------------------------------------------------------- occupancy
    def claims(self, net: _Net) -> tuple[set[int], set[int]]:
        """``(core, claim)`` of ``net``: the nodes its copper stands on, and those plus every node
        within its halo (same layer) and within the via halo of its vias (every layer)."""
        g = net.grid
        plane = g.nx * g.ny
        core: set[int] = set()
        for path in net.paths:
            core.update(path)
        claim = set(core)
        claim.update(_around(g, core, net.halo).tolist())
        for site in net.vias:
            for li in range(len(self.layers)):
                core.add(li * plane + site)
                claim.add(li * plane + site)
        claim.update(_around(g, net.vias, self.via_halo, len(self.layers)).tolist())
        return core, claim

    def commit(self, net: _Net, sign: int) -> None:
        """Add (``sign`` +1) or take away (-1) ``net``'s copper in the occupancy counts the searches
        read: ``core_occ``, ``claim_occ``, ``near`` (per halo shape) and ``via_near``. Cost
        O(core x halo) numpy work plus O(claim) list updates; the lists the searches read are made
        again on the next search (:meth:`read_counts`), once per reroute instead of once per commit."""
        if sign > 0:
            net.core, net.claim = self.claims(net)
        core_occ = self.core_occ
        for n in net.core:
            core_occ[n] += sign
        if net.core:
            g = net.grid
            plane = g.nx * g.ny
            for halo, near in self.near.items():
                near += sign * np.bincount(_around(g, net.core, halo), minlength=near.size)
            self.via_near += sign * np.bincount(_around(g, [n % plane for n in net.core], self.via_halo),
                                                minlength=self.via_near.size)
            self._read.clear()
        claim_occ = self.claim_occ
        for n in net.claim:
            claim_occ[n] += sign

    def read_counts(self, halo) -> list[int]:
        """``near[halo]`` (``via_near`` for None) as a list, the form a search reads fastest; made
        once after each commit that changed them."""
        if halo not in self._read:
            self._read[halo] = (self.via_near if halo is None else self.near[halo]).tolist()
        return self._read[halo]

    def shared(self) -> tuple[set[int], list[_Net]]:
        """Nodes where one net's copper stands on another's claim, and the nets involved."""
        bad = {n for net in self.nets for n in net.core if self.claim_occ[n] >= 2}
        return bad, [net for net in self.nets if net.claim & bad]

    # ---------------------------------------------------------------- routing
    def run(self) -> Routing:
        self.setup()
        order = sorted(self.nets, key=lambda n: (_pads_span(n.pads), n.name))
        plan = self.plan() if self.coarse and self.nets else None
        if plan is not None:
            order = [n for n in order if n.name not in plan.open]
        todo = order
        present = PRESENT_START
        rounds = 0
        bad: set[int] = set()
        for rounds in range(1, MAX_ROUNDS + 1):
            for idx, net in enumerate(todo):
                if self.late():
                    break
                self.reroute(net, present, bad if rounds > 1 else None)
                if self.progress:
                    self.progress(f"routing: round {rounds}, {net.name}", min(0.99, (rounds - 1 + idx / len(todo)) / 8))
            bad, involved = self.shared()
            if not bad or self.late() or (not self.coarse and any(n.dead for n in self.nets)):
                break   # done, out of time, or a connection has no path at all: negotiating cannot help
            for n in bad:
                self.hist[n] += HISTORY_STEP
            present *= PRESENT_GROWTH
            todo = [n for n in order if n in involved]
        for net in self.nets:
            net.failed = net.failed or not net.tried   # the budget ran out before this net was routed
        places = bad
        if bad and not any(n.dead for n in self.nets):
            self.settle([n for n in order if n in involved])
            bad = self.shared()[0]
        congestion = self.resolve(places, bad)
        if plan is not None:
            congestion = tuple(dict.fromkeys(plan.congestion + congestion))[:10]
        return self.result(rounds, congestion)

    def plan(self):
        """Global routing on tiles: each net's corridor; the nets it leaves open are not routed in detail."""
        now = self.clock()
        g = self.nets[0].grid
        tile = TILE_PITCHES
        ntx, nty = -(-g.nx // tile), -(-g.ny // tile)
        caph, capv = capacities(g.node, g.ex, g.ey, g.nx, g.ny, len(self.layers), tile)
        plane = g.nx * g.ny
        net_tiles = {}
        for net in sorted(self.nets, key=lambda n: n.name):
            if net.area or net.dead or any(not t for t in net.terms):
                continue
            tiles = [((t[0] % plane) // g.nx // tile) * ntx + (t[0] % g.nx) // tile for t in net.terms]
            net_tiles[net.name] = list(dict.fromkeys(tiles))
        plan = plan_corridors(net_tiles, caph, capv, ntx, nty, tile, g.pitch, (g.x0, g.y0),
                              (PRESENT_START, PRESENT_GROWTH, HISTORY_STEP),
                              now + COARSE_SHARE * max(self.deadline - now, 0.0), self.progress, clock=self.clock)
        for net in self.nets:
            if net.name in plan.open:
                net.failed = net.tried = True
            net.corridor = plan.mask(net.name, g.nx, g.ny)
        return plan

    def reroute(self, net: _Net, present: float, bad: set[int] | None = None) -> None:
        """Rip ``net`` up and route it again; with ``bad`` (shared nodes) only the connections whose
        copper or claim touches them are ripped up (partial rip-up; tree nets only)."""
        net.tried = True
        keep = self.kept_paths(net, bad) if bad is not None and not net.area and not net.failed else []
        if net.paths or net.vias:
            self.commit(net, -1)
        net.paths, net.vias, net.failed = [], [], net.dead
        if net.dead:
            pass
        elif any(not t for t, pad in zip(net.terms, net.pads) if not (net.area and net.area in pad.layers)):
            net.failed = net.dead = True
        elif net.area:
            self.route_to_area(net, present)
        else:
            for path in keep:
                self.add_path(net, path)
            self.route_tree(net, present)
        if net.failed:
            net.paths, net.vias = [], []
        self.commit(net, +1)

    def kept_paths(self, net: _Net, bad: set[int]) -> list[list[int]]:
        """The paths of ``net`` clear of ``bad`` (neither on it nor claiming it), in routing order,
        each still joined to what is kept before it (its first node on a kept path or a pad)."""
        g = net.grid
        plane = g.nx * g.ny
        held: set[int] = {n for t in net.terms for n in t}
        out = []
        for path in net.paths:
            if path[0] not in held or bad.intersection(path):
                continue
            claim = set(path)
            claim.update(_around(g, path, net.halo).tolist())
            sites = [a % plane for a, b in zip(path, path[1:]) if a // plane != b // plane]
            claim.update(_around(g, sites, self.via_halo, len(self.layers)).tolist())
            if claim & bad:
                continue
            out.append(path)
            held.update(path)
        return out

    def route_tree(self, net: _Net, present: float) -> None:
        """Grow ``net``'s tree (Prim's order) from its first pad and the paths it already has; each
        pad joined by an A* search to it and everything already joined to it."""
        parts = self.pieces(net)
        done = [parts[0]]
        tree: set[int] = set(parts[0][1])
        gap = self.pad_gaps(net)
        todo = parts[1:]
        while todo:
            joined = [d for part in done for d in part[0]]
            nxt = min(todo, key=lambda c: (min(gap[q][d] for q in c[0] for d in joined), c[0]))
            path = self.astar(net, tree, set(nxt[1]), present)
            if path is None and net.corridor is not None:   # the corridor may miss a way the tiles hide
                path = self.outside_corridor(net, tree, set(nxt[1]), present)
            if path is None:
                net.failed = net.dead = True
                return
            self.add_path(net, path)
            tree.update(path)
            tree.update(nxt[1])
            todo.remove(nxt)
            done.append(nxt)

    def pad_gaps(self, net: _Net) -> list[list[float]]:
        """Distances (mm) between the centroids of ``net``'s pads, ``[q][d]``; one vectorised shapely
        call on the net's first tree, kept for its later ones. Cost O(pads^2)."""
        if net.gaps is None:
            cents = shapely.centroid(np.array([p.polygon for p in net.pads], dtype=object))
            net.gaps = shapely.distance(cents[:, None], cents[None, :]).tolist()
        return net.gaps

    def outside_corridor(self, net: _Net, sources: set[int], targets: set[int], present: float) -> list[int] | None:
        """A search without the net's corridor, in the box of ``sources`` and ``targets`` grown by
        ``WINDOW`` (not the whole board: its cost stays that of the net's own box). A tile border's
        capacity counts grid edges that other nets' pads own, so a corridor can miss a way the board has."""
        return self._search(net, sources, targets, present, _box(net.grid, sources | targets, WINDOW), None)

    def pieces(self, net: _Net) -> list[tuple[tuple[int, ...], set[int]]]:
        """The pads of ``net`` grouped by the paths it has: ``[(pad indices, nodes), ...]``, the group
        of pad 0 first, then by lowest pad (each pad alone when it has no paths)."""
        owner = {}
        groups: list[list] = []
        for q, terms in enumerate(net.terms):
            groups.append([[q], set(terms)])
            for n in terms:
                owner.setdefault(n, q)
        root = list(range(len(groups)))

        def find(q):
            while root[q] != q:
                q = root[q]
            return q

        for path in net.paths:
            a = find(owner[path[0]]) if path[0] in owner else None
            ends = {find(owner[n]) for n in (path[-1],) if n in owner}
            for b in ends:
                if a is not None and a != b:
                    root[b] = a
                    groups[a][0] += groups[b][0]
                    groups[a][1] |= groups[b][1]
            if a is not None:
                groups[a][1].update(path)
                for n in path:
                    owner.setdefault(n, a)
        out = [(tuple(sorted(groups[q][0])), groups[q][1]) for q in range(len(groups)) if find(q) == q]
        return sorted(out, key=lambda c: c[0])

    def route_to_area(self, net: _Net, present: float) -> None:
        for pad, terms in zip(net.pads, net.terms):
            if net.area in pad.layers:
                continue
            path = self.astar(net, set(terms), None, present)
            if path is None:
                net.failed = net.dead = True
                return
            self.add_path(net, path)
            net.vias.append(path[-1] % (net.grid.nx * net.grid.ny))

    def add_path(self, net: _Net, path: list[int]) -> None:
        plane = net.grid.nx * net.grid.ny
        net.paths.append(path)
        for a, b in zip(path, path[1:]):
            if a // plane != b // plane:
                net.vias.append(a % plane)

    def astar(self, net: _Net, sources: set[int], targets: set[int] | None, present: float) -> list[int] | None:
        """Least-cost path from ``sources`` to ``targets`` (to any via site when ``targets`` is None)."""
        g = net.grid
        if targets is not None:
            box = _box(g, sources | targets, WINDOW)
            path = self._search(net, sources, targets, present, box, net.corridor)
            if path is not None or box == (0, 0, g.nx - 1, g.ny - 1):
                return path
        return self._search(net, sources, targets, present, (0, 0, g.nx - 1, g.ny - 1), net.corridor)

    def _search(self, net, sources, targets, present, box, mask=None):
        """A* (:func:`pipeline.route.search.astar`) inside ``box`` and the plane cells ``mask`` marks.

        With ``targets`` None it is Dijkstra's search for the nearest usable
        via site. The steps ``net`` may take (:func:`pipeline.route.search.moves`)
        are built on its first search: the grid and its corridor do not change
        while it is routed.
        """
        key = (id(net.grid), net.k, id(mask))
        bits = self._moves.get(key)
        if bits is None:
            bits = self._moves[key] = moves(net.grid, net.k, mask)
        costs = (present, self.hist, self.claim_occ, self.read_counts(net.halo_key), self.read_counts(None))
        return search_astar(net.grid, bits, sources, targets, box, costs, self.steps, VIA_COST)

    # ---------------------------------------------------------------- ending
    def settle(self, nets: list[_Net]) -> None:
        """Rip up and reroute, sharing forbidden: the last step when negotiation has not converged.

        The nets still sharing are ripped up and routed again one at a time
        (shortest first) at a present-sharing factor of ``HARD``, so each
        takes a path clear of every other net's copper when one exists; a
        net whose best path still shares is ripped up and left open (the
        classic sequential rip-up-and-reroute pass after negotiation).
        When the budget runs out first, the nets not reached get their
        negotiated copper back (:meth:`resolve` then drops those that share).
        """
        saved = [(net, net.paths, net.vias) for net in nets]
        for net in nets:
            self.drop(net)
        for q, net in enumerate(nets):
            if self.late():
                for other, paths, vias in saved[q:]:
                    other.paths, other.vias, other.failed = paths, vias, False
                    self.commit(other, +1)
                return
            self.reroute(net, HARD)
            if net.failed or self.shares(net):
                self.drop(net)

    def shares(self, net: _Net) -> bool:
        """Whether ``net``'s copper stands on another net's claim or another net's copper on its own."""
        core_occ, claim_occ = self.core_occ, self.claim_occ
        return (any(claim_occ[n] >= 2 for n in net.core)
                or any(core_occ[n] >= (2 if n in net.core else 1) for n in net.claim))

    def drop(self, net: _Net) -> None:
        """Rip ``net`` up and mark it open."""
        self.commit(net, -1)
        net.paths, net.vias, net.core, net.claim, net.failed = [], [], set(), set(), True

    def resolve(self, places: set[int], bad: set[int]) -> tuple[tuple[float, float], ...]:
        """Drop sharing nets (most shared first) until nothing in ``bad`` is shared; return the crowded
        places (``places``: where nets shared when negotiation stopped), most shared first."""
        g0 = self.nets[0].grid if self.nets else None
        places = sorted(places, key=lambda n: (-self.hist[n], n))
        congestion = []
        for n in places:
            xy = g0.xy(n)
            if xy not in congestion:
                congestion.append(xy)
        while bad:
            counts = [(len(net.claim & bad) + len(net.core & bad), net.name, net) for net in self.nets]
            _, _, worst = max(counts, key=lambda t: (t[0], t[1]))
            self.drop(worst)
            # dropping a net only frees nodes: what stays shared is a subset (shared() without the full sweep)
            bad = {n for n in bad if self.core_occ[n] >= 1 and self.claim_occ[n] >= 2}
        return tuple(congestion[:10])

    def result(self, rounds: int, congestion) -> Routing:
        tracks: list[Track] = []
        vias: list[Via] = []
        for net in self.nets:
            if net.failed:
                continue
            g = net.grid
            plane = g.nx * g.ny
            for path in net.paths:
                for layer, pts in _runs(g, path, plane, self.layers):
                    if len(pts) >= 2:
                        tracks.append(Track(net.name, layer, net.width, pts))
            for _, layer, line in net.stubs:
                tracks.append(Track(net.name, layer, net.width, tuple(line.coords)))
            for site in sorted(set(net.vias)):
                x, y = g.xy(site)
                vias.append(Via(net.name, x, y, self.rules.via_diameter_mm, self.rules.via_drill_mm))
        areas = self.areas(tracks, vias)
        open_ = tuple(sorted(n.name for n in self.nets if n.failed))
        tracks.sort(key=lambda t: (t.net, t.layer, t.points))
        vias.sort(key=lambda v: (v.net, v.x, v.y))
        return Routing("open" if open_ else "routed", self.board, self.rules, tuple(tracks), tuple(vias),
                       tuple(areas), open_, congestion, rounds)

    def areas(self, tracks: list[Track], vias: list[Via]) -> list[Area]:
        out = []
        s = self.rules.clearance_mm + AREA_MARGIN
        for netname, layer in self.rules.areas:
            edge = (self.rules.edge_clearance_mm if layer in ("top", "bottom") else self.rules.inner_edge_clearance_mm)
            region = self.board.outline.buffer(-(edge + AREA_MARGIN), join_style="mitre")
            cut = [h.buffer(edge + AREA_MARGIN) for h in self.board.holes]
            cut += [p.polygon.buffer(s) for p in self.board.pads if p.net != netname and layer in p.layers]
            cut += [Point(v.x, v.y).buffer(v.diameter_mm / 2 + s) for v in vias if v.net != netname]
            cut += [LineString(t.points).buffer(t.width_mm / 2 + s) for t in tracks
                    if t.net != netname and t.layer == layer]
            if cut:
                region = region.difference(shapely.union_all(cut))
            mine = [p.polygon for p in self.board.pads if p.net == netname and layer in p.layers]
            mine += [Point(v.x, v.y) for v in vias if v.net == netname]
            for poly in sorted(as_polygons(region), key=lambda q: (-q.area, q.bounds)):
                if any(poly.intersects(m) for m in mine):
                    out.append(Area(netname, layer, poly))
        return out


def _runs(g: Grid, path: list[int], plane: int, layers) -> list[tuple[str, tuple]]:
    """A path split at its layer changes, each run as corner points only."""
    out = []
    run = [path[0]]
    for a, b in zip(path, path[1:]):
        if a // plane != b // plane:
            out.append(run)
            run = [b]
        else:
            run.append(b)
    out.append(run)
    result = []
    for r in out:
        pts = [g.xy(n) for n in r]
        if len(pts) == 1 and len(out) == 1:   # a pad reached on a node of another pad: a dot of copper
            pts.append((pts[0][0] + DOT, pts[0][1]))
        keep = [pts[0]] + [pts[q] for q in range(1, len(pts) - 1)
                           if (pts[q][0] - pts[q - 1][0]) * (pts[q + 1][1] - pts[q][1])
                           != (pts[q][1] - pts[q - 1][1]) * (pts[q + 1][0] - pts[q][0])] + pts[-1:]
        result.append((layers[r[0] // plane], tuple(keep) if len(pts) > 1 else ()))
    return result


def _around(g: Grid, nodes, offsets, layers: int = 0) -> np.ndarray:
    """The nodes at ``offsets`` (grid steps ``(di, dj)``) from each of ``nodes`` that lie on the grid,
    with repeats (one per pair): on each node's own layer, or with ``layers`` > 0 at those plane
    places on every one of the ``layers`` layers. Cost O(len(nodes) x len(offsets)), vectorised."""
    n = np.fromiter(nodes, dtype=np.int64, count=len(nodes))
    off = np.asarray(offsets, dtype=np.int64).reshape(-1, 2)
    plane = g.nx * g.ny
    rest = n % plane
    ii = (rest % g.nx)[:, None] + off[:, 0]
    jj = (rest // g.nx)[:, None] + off[:, 1]
    ok = (ii >= 0) & (ii < g.nx) & (jj >= 0) & (jj < g.ny)
    at = (jj * g.nx + ii)[ok]
    if layers:
        return (np.arange(layers, dtype=np.int64)[:, None] * plane + at).ravel()
    return ((n // plane)[:, None] * plane + jj * g.nx + ii)[ok]


def _offsets(radius: float, pitch: float) -> list[tuple[int, int]]:
    """Grid offsets (not 0, 0) closer than ``radius`` (mm)."""
    r = int(math.ceil(radius / pitch))
    return [(di, dj) for dj in range(-r, r + 1) for di in range(-r, r + 1)
            if (di or dj) and math.hypot(di, dj) * pitch < radius - 1e-9]


def _bucket_add(buckets: dict, net: str, layer: str, geo) -> None:
    """File ``geo`` under every ``STUB_CELL`` square its box touches."""
    x0, y0, x1, y1 = geo.bounds
    for cx in range(math.floor(x0 / STUB_CELL), math.floor(x1 / STUB_CELL) + 1):
        for cy in range(math.floor(y0 / STUB_CELL), math.floor(y1 / STUB_CELL) + 1):
            buckets.setdefault((cx, cy), []).append((net, layer, geo))


def _bucket_near(buckets: dict, bounds, reach: float) -> list:
    """The geometries filed near ``bounds`` grown by ``reach`` (each once, in filing order)."""
    x0, y0, x1, y1 = bounds
    out: dict[int, tuple] = {}
    for cx in range(math.floor((x0 - reach) / STUB_CELL), math.floor((x1 + reach) / STUB_CELL) + 1):
        for cy in range(math.floor((y0 - reach) / STUB_CELL), math.floor((y1 + reach) / STUB_CELL) + 1):
            for item in buckets.get((cx, cy), ()):
                out.setdefault(id(item[2]), item)
    return list(out.values())


def _pads_span(pads) -> float:
    cs = [p.polygon.centroid for p in pads]
    return half_perimeter([c.x for c in cs], [c.y for c in cs])


def _box(g: Grid, nodes: set[int], margin: int) -> tuple[int, int, int, int]:
    plane = g.nx * g.ny
    iis = [n % g.nx for n in nodes]
    jjs = [(n % plane) // g.nx for n in nodes]
    return (max(0, min(iis) - margin), max(0, min(jjs) - margin),
            min(g.nx - 1, max(iis) + margin), min(g.ny - 1, max(jjs) + margin))
