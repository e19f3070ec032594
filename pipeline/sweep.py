"""Package-size sweep: the largest passive size that still fits.

Entry point: :func:`sweep_sizes`. It re-runs the fit with every
two-terminal passive of the design (parts whose kind has category
``"passive"`` and two pins: resistors, capacitors, inductors, ferrites) in
each chip size in turn, and reports per size whether everything fits and
by what margin: the answer someone who solders by hand wants ("can I use
0805 everywhere?").

Margin (mm^2): the board's area (the proposed or given outline) minus the
expected board area of :func:`pipeline.area.estimate_area`. Positive means
the routing rule of thumb leaves room to spare; a size can fit (every
courtyard placed) with a negative margin, which means routing will be
tight. ``free_mm2`` is the board area minus the courtyard sum.

A size fits only when its parts place AND the board routes (the routed
verdict of :func:`pipeline.route.route_fit`, independent copper check
clean), unless routing is off (``rules`` None, or ``rules.route`` false):
then placing is enough and each row says routing was skipped.

Cost: one packing per size without the placer's wirelength improvement
(``improve=False``: the verdict does not need it); only the sizes that
place are placed again with the improvement and routed, and a size whose
parts come out exactly as an earlier row's (same courtyards) reuses that
row's routing instead of routing again.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Callable, Sequence

from .area import items_from_design
from .model import BoardOptions, Design, Region
from .place import place_and_fit

__all__ = ["SweepRow", "SweepResult", "sweep_sizes", "two_terminal_passives", "DEFAULT_SIZES"]

Progress = Callable[[str, float], None]

DEFAULT_SIZES = ("0201", "0402", "0603", "0805", "1206")
#: the size label of the sweep's first row: every package as the design gives it
DESIGNED = "design"


@dataclass(frozen=True)
class SweepRow:
    """The fit with every swept passive in one package ``size``; areas in mm^2."""

    size: str
    fits: bool
    courtyard_area_mm2: float
    estimated_board_area_mm2: float
    board_area_mm2: float
    margin_mm2: float
    free_mm2: float
    unplaced: tuple[str, ...]
    courtyard_mm: tuple[float, float]
    placed: bool = True
    routing: str = "skipped"  #: "routed", "open" (placed, not routed) or "skipped" (routing off or not placed)

    def to_dict(self) -> dict[str, Any]:
        return {
            "size": self.size,
            "fits": self.fits,
            "placed": self.placed,
            "routing": self.routing,
            "courtyard_mm": None if self.size == DESIGNED else [round(v, 4) for v in self.courtyard_mm],
            "courtyard_area_mm2": round(self.courtyard_area_mm2, 4),
            "estimated_board_area_mm2": round(self.estimated_board_area_mm2, 4),
            "board_area_mm2": round(self.board_area_mm2, 4),
            "margin_mm2": round(self.margin_mm2, 4),
            "free_mm2": round(self.free_mm2, 4),
            "unplaced": list(self.unplaced),
        }


@dataclass(frozen=True)
class SweepResult:
    """Every size tried, the refs swept, and the largest size that fits.

    ``largest_fitting`` is the fitting size with the largest courtyard
    (``None`` when none fits); ``margin_mm2`` its margin.
    """

    rows: tuple[SweepRow, ...]
    swept: tuple[str, ...]
    largest_fitting: str | None
    margin_mm2: float | None
    designed: SweepRow | None = None  #: the fit with every package as designed (size ``DESIGNED``)
    kept: tuple[str, ...] = ()  #: passives left out of the sweep: the user fixed them in place

    def row(self, size: str) -> SweepRow:
        for r in self.rows:
            if r.size == size:
                return r
        raise KeyError(size)

    def to_dict(self) -> dict[str, Any]:
        return {
            "swept_refs": list(self.swept),
            "largest_fitting": self.largest_fitting,
            "margin_mm2": None if self.margin_mm2 is None else round(self.margin_mm2, 4),
            "margin_definition": "board area minus the expected board area of the routing rule of thumb",
            "kept_refs": list(self.kept),
            "kept_reason": "fixed in place (at = [x, y]): their package stays as designed",
            "sizes": [r.to_dict() for r in ((self.designed,) if self.designed else ()) + self.rows],
        }


def two_terminal_passives(design: Design, library) -> tuple[str, ...]:
    """Refs of fitted parts whose kind has category ``"passive"`` and exactly two pins.

    Kinds declared in the design (``design.kinds``) win over the library's;
    a kind neither knows is not swept.
    """
    own = {k.name.casefold(): k for k in design.kinds}
    out = []
    for part in design.parts:
        if part.dnp:
            continue
        kind = own.get(part.kind.casefold())
        if kind is None:
            if not library.has_kind(part.kind):
                continue
            kind = library.kind(part.kind)
        pins = len(part.pins) if part.pins else len(kind.pins)
        if kind.category == "passive" and pins == 2:
            out.append(part.ref)
    return tuple(out)


def sweep_sizes(design: Design, library, region: Region, board: BoardOptions,
                sizes: Sequence[str] = DEFAULT_SIZES, progress: Progress | None = None,
                user_board=None, rules=None) -> SweepResult:
    """Fit the design with every two-terminal passive at each of ``sizes``.

    Parameters
    ----------
    design, library, region, board
        As for :func:`pipeline.area.items_from_design` and
        :func:`pipeline.place.place_and_fit`.
    sizes : sequence of str
        Package names (EIA inch codes by default).
    progress : callable(message, fraction), optional
    user_board : Polygon, optional
        The user's board outline, passed on to the fit.
    rules : pipeline.route.CopperRules, optional
        Copper rules: a size fits only when it also routes. None (or
        ``rules.route`` false) keeps the placement-only verdict.

    Returns
    -------
    SweepResult
        ``rows`` in the order of ``sizes``; ``designed`` the fit as designed
        (listed first in :meth:`SweepResult.to_dict`); passives the user
        fixed in place are not swept (``kept``). Cost: module docstring.

    Raises
    ------
    UnknownNameError
        A size is not a package of the library (placed at ``sweep: sizes``).
    """
    sizes = tuple(sizes)
    passives = two_terminal_passives(design, library)
    kept = tuple(r for r in passives if design.part(r).fixed is not None)
    swept = tuple(r for r in passives if r not in kept)
    shape = _courtyard_shapes(library, sizes, board.density)
    fitter = _Fitter(design, library, region, board, user_board, rules)
    rows = []
    for n, s in enumerate((DESIGNED, *sizes)):
        if progress is not None:
            progress(f"trying passives in {s}", n / (len(sizes) + 1))
        override = {} if s == DESIGNED else {ref: s for ref in swept}
        rows.append(fitter.row(s, override, shape.get(s, (0.0, 0.0))))
    designed, rows = rows[0], rows[1:]
    best = _largest_fitting(rows, sizes)
    if progress is not None:
        progress("sweep done", 1.0)
    return SweepResult(tuple(rows), swept, best.size if best else None, best.margin_mm2 if best else None,
                       designed, kept)


def _courtyard_shapes(library, sizes: tuple[str, ...], density: str) -> dict[str, tuple[float, float]]:
    """Each size's courtyard (length, width) in mm at ``density``; an unknown size is refused."""
    shape = {}
    for s in sizes:
        cy = library.package(s, file="sweep", key="sizes").courtyard(density)
        shape[s] = (float(cy.length_mm), float(cy.width_mm))
    return shape


@dataclass
class _Fitter:
    """The design fitted again with other passive sizes; routing is reused for identical placer items."""

    design: Design
    library: Any
    region: Region
    board: BoardOptions
    user_board: Any
    rules: Any
    routed: dict = field(default_factory=dict)  # placer items -> routing status

    def row(self, size: str, override: dict[str, str], courtyard_mm: tuple[float, float]) -> SweepRow:
        """The row of one size: placed without the improvement pass (the verdict does not need it), then routed."""
        items = items_from_design(self.design, self.library, self.board.density, override)
        fit = place_and_fit(items, self.region, self.board, user_board=self.user_board, improve=False)
        routing = self._routing(items) if fit.fits else "skipped"
        board_area = float(fit.board_outline.area) if fit.board_outline is not None else 0.0
        return SweepRow(
            size=size,
            fits=fit.fits and routing != "open",
            placed=fit.fits,
            routing=routing,
            courtyard_area_mm2=fit.courtyard_area_mm2,
            estimated_board_area_mm2=fit.estimate.expected_mm2,
            board_area_mm2=board_area,
            margin_mm2=board_area - fit.estimate.expected_mm2,
            free_mm2=board_area - fit.courtyard_area_mm2,
            unplaced=fit.unplaced,
            courtyard_mm=courtyard_mm,
        )

    def _routing(self, items) -> str:
        """``"skipped"`` with routing off, else ``"routed"`` or ``"open"`` (once per distinct items)."""
        if self.rules is None or not self.rules.route:
            return "skipped"
        if items not in self.routed:
            self.routed[items] = _routes(items, self.region, self.board, self.design, self.library, self.rules,
                                         self.user_board)
        return self.routed[items]


def _largest_fitting(rows: Sequence[SweepRow], sizes: tuple[str, ...]) -> SweepRow | None:
    """The fitting row with the largest courtyard area (ties: the earlier size); None when none fits."""
    fitting = [r for r in rows if r.fits]
    if not fitting:
        return None
    return max(fitting, key=lambda r: (r.courtyard_mm[0] * r.courtyard_mm[1], -sizes.index(r.size)))


def _routes(items, region: Region, board: BoardOptions, design: Design, library, rules, user_board) -> str:
    """``"routed"`` or ``"open"``: the parts placed with the improvement pass and routed (spread as needed)."""
    from .route import ROUTED, route_fit

    fit = place_and_fit(items, region, board, user_board=user_board)
    if not fit.fits:  # placed without the improvement pass but not with it: not proven either
        return "open"
    _, out = route_fit(fit, items, region, board, design, library, rules, user_board=user_board)
    return "routed" if out.verdict.status == ROUTED else "open"
