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
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Callable, Sequence

from .area import items_from_design
from .model import BoardOptions, Design, Region
from .place import place_and_fit

__all__ = ["SweepRow", "SweepResult", "sweep_sizes", "two_terminal_passives", "DEFAULT_SIZES"]

Progress = Callable[[str, float], None]

DEFAULT_SIZES = ("0201", "0402", "0603", "0805", "1206")


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

    def to_dict(self) -> dict[str, Any]:
        return {
            "size": self.size,
            "fits": self.fits,
            "courtyard_mm": [round(self.courtyard_mm[0], 4), round(self.courtyard_mm[1], 4)],
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
            "sizes": [r.to_dict() for r in self.rows],
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
                user_board=None) -> SweepResult:
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

    Returns
    -------
    SweepResult, rows in the order of ``sizes``.

    Raises
    ------
    UnknownNameError
        A size is not a package of the library (placed at ``sweep: sizes``).
    """
    sizes = tuple(sizes)
    swept = two_terminal_passives(design, library)
    shape = {}
    for s in sizes:
        cy = library.package(s, file="sweep", key="sizes").courtyard(board.density)
        shape[s] = (float(cy.length_mm), float(cy.width_mm))
    rows = []
    for n, s in enumerate(sizes):
        if progress is not None:
            progress(f"trying passives in {s}", n / max(len(sizes), 1))
        items = items_from_design(design, library, board.density, {ref: s for ref in swept})
        fit = place_and_fit(items, region, board, user_board=user_board)
        board_area = float(fit.board_outline.area) if fit.board_outline is not None else 0.0
        rows.append(SweepRow(
            size=s,
            fits=fit.fits,
            courtyard_area_mm2=fit.courtyard_area_mm2,
            estimated_board_area_mm2=fit.estimate.expected_mm2,
            board_area_mm2=board_area,
            margin_mm2=board_area - fit.estimate.expected_mm2,
            free_mm2=board_area - fit.courtyard_area_mm2,
            unplaced=fit.unplaced,
            courtyard_mm=shape[s],
        ))
    fitting = [r for r in rows if r.fits]
    best = max(fitting, key=lambda r: (r.courtyard_mm[0] * r.courtyard_mm[1], -sizes.index(r.size))) \
        if fitting else None
    if progress is not None:
        progress("sweep done", 1.0)
    return SweepResult(tuple(rows), swept, best.size if best else None, best.margin_mm2 if best else None)
