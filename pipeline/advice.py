"""Advice for a board that does not fit, tried before it is given.

Entry point: :func:`tried_advice`.

The placer says why parts find no place and suggests changes. Two of them
are settings of the project file, and so can be tried: a two-sided board
(``[board] sides = 2``) and a thinner board (a thinner common stock
thickness). :func:`tried_advice` re-runs the placement with each change
through the placer's entry function (:func:`pipeline.place.place_and_fit`,
on the region re-derived by :func:`pipeline.region.usable_region` for a
new thickness) and keeps a suggestion only if it places more parts; the
untried wording of the placer is replaced by what the trial showed.

A fact that is not a blocker is dropped from ``blocked_by``: the usable area
against the routing estimate, when the board was at least as large as the
expected estimate (the parts then failed for height or shape, not for area;
the figures stay in ``fit.json``).

Cost: one placement per change tried (at most two), only when the board
does not fit.
"""

from __future__ import annotations

import dataclasses
import re
from typing import Callable, Sequence

from .model import BoardOptions, Cavity, FitResult, PlaceItem

__all__ = ["tried_advice", "UNTRIED"]

Progress = Callable[[str, float], None]

#: The placer's suggestions of project settings, as it words them, and the
#: wording kept when the setting is taken out (the rest is not a setting).
#: tests/test_verdict.py checks that the placer still words them so.
UNTRIED = (
    (re.compile(r"Use smaller packages, a two-sided board \(sides = 2\), or a larger cavity\."),
     "Use smaller packages or a larger cavity."),
    (re.compile(r"use a lower package, a thinner board or a deeper cavity\."),
     "use a lower package or a deeper cavity."),
)
#: The placer's closing area sentence (a fact, a blocker only when area is short).
_AREA_FACT = re.compile(r"^The usable board area is .* after clearances; the parts' courtyards take ")


def tried_advice(fit: FitResult, items: Sequence[PlaceItem], cavity: Cavity, board: BoardOptions,
                 thicknesses: Sequence[float], *, progress: Progress | None = None) -> FitResult:
    """``fit`` with ``blocked_by`` holding only advice that a re-run showed to help.

    Parameters
    ----------
    fit : FitResult
        The placement as run; returned unchanged when it fits.
    items, cavity, board
        What that placement was run with.
    thicknesses : sequence of float
        Common stock thicknesses (mm); the thinnest below ``board.thickness_mm``
        is tried.
    """
    if fit.fits:
        return fit
    reasons = [_untried_removed(r) for r in fit.blocked_by if not _area_plentiful(r, fit)]
    trials: list[tuple[str, BoardOptions]] = []
    if board.sides == 1:
        trials.append(("a two-sided board (sides = 2)", dataclasses.replace(board, sides=2)))
    thinner = [t for t in thicknesses if t < board.thickness_mm - 1e-9]
    if thinner:
        t = min(thinner)
        trials.append((f"a {t:g} mm board (thickness_mm = {t:g})", dataclasses.replace(board, thickness_mm=t)))
    before = len(fit.unplaced)
    for what, changed in trials:
        after = _unplaced_with(items, cavity, changed, progress)
        if after is None or after >= before:
            continue
        gain = "every part is placed" if after == 0 else f"{before - after} more of the {before} parts left out are placed"
        reasons.append(f"Tried {what}: {gain}.")
    return dataclasses.replace(fit, blocked_by=tuple(reasons) or fit.blocked_by[:1])


def _untried_removed(reason: str) -> str:
    for pattern, kept in UNTRIED:
        reason = pattern.sub(kept, reason)
    return reason


def _area_plentiful(reason: str, fit: FitResult) -> bool:
    board = float(fit.board_outline.area) if fit.board_outline is not None else 0.0
    return bool(_AREA_FACT.match(reason)) and board >= fit.estimate.expected_mm2 and bool(fit.unplaced)


def _unplaced_with(items: Sequence[PlaceItem], cavity: Cavity, board: BoardOptions,
                   progress: Progress | None) -> int | None:
    """Parts left unplaced with ``board``; None when that board cannot even be set up."""
    from .errors import SnugboardError
    from .place import place_and_fit
    from .region import usable_region

    try:
        region, _ = usable_region(cavity, board)
        trial = place_and_fit(items, region, board, user_board=cavity.board, progress=progress,
                              improve=False)  # verdict only
    except SnugboardError:
        return None
    return len(trial.unplaced) if trial.fits or trial.unplaced else None
