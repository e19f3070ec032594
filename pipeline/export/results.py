"""``findings.json`` and ``fit.json`` (CONTRACT section 4).

Entry points: :func:`findings_list`, :func:`fit_dict` (JSON-ready values,
also what ``--json`` prints) and :func:`findings_json`, :func:`fit_json`
(bytes). Coordinates are millimetres in the drawing's frame, rounded to
0.1 um so files stay byte-identical across platforms.
"""

from __future__ import annotations

from typing import Any, Iterable

from ..model import FitResult, Finding
from ..verdict import Verdict
from .netlist import dump_json

__all__ = ["findings_list", "findings_json", "fit_dict", "fit_json", "outline_coords", "outline_holes"]

_ORDER = {"error": 0, "warning": 1, "info": 2}


def findings_list(findings: Iterable[Finding]) -> list[dict[str, Any]]:
    """Findings as dicts, errors first, otherwise in the order the stages gave them."""
    fs = list(findings)
    ranked = sorted(range(len(fs)), key=lambda i: (_ORDER[fs[i].severity], i))
    return [fs[i].to_dict() for i in ranked]


def findings_json(findings: Iterable[Finding]) -> bytes:
    return dump_json(findings_list(findings))


def _r(v: float) -> float:
    r = round(float(v), 4)
    return 0.0 if r == 0 else r


def outline_coords(geom) -> list[list[float]]:
    """Exterior ring of a (Multi)Polygon as ``[[x, y], ...]`` (largest part), closed."""
    if geom is None or geom.is_empty:
        return []
    if geom.geom_type == "MultiPolygon":
        geom = max(geom.geoms, key=lambda g: g.area)
    return [[_r(x), _r(y)] for x, y in geom.exterior.coords]


def outline_holes(geom) -> list[list[list[float]]]:
    """Interior rings (cut-outs around bosses and posts) of the outline's largest part."""
    if geom is None or geom.is_empty:
        return []
    if geom.geom_type == "MultiPolygon":
        geom = max(geom.geoms, key=lambda g: g.area)
    return [[[_r(x), _r(y)] for x, y in ring.coords] for ring in geom.interiors]


def fit_dict(fit: FitResult, extra: dict[str, Any] | None = None, *, verdict: Verdict | None = None) -> dict[str, Any]:
    """``fit.json`` as a JSON-ready dict; ``verdict`` (the run's overall one) leads when given."""
    d: dict[str, Any] = {"verdict": verdict.to_dict()} if verdict is not None else {}
    d.update({
        "fits": fit.fits,
        "region_area_mm2": _r(fit.region_area_mm2),
        "courtyard_area_mm2": _r(fit.courtyard_area_mm2),
        "estimated_board_area_mm2": _r(fit.estimate.expected_mm2),
        "estimate": {
            "low_mm2": _r(fit.estimate.low_mm2),
            "expected_mm2": _r(fit.estimate.expected_mm2),
            "high_mm2": _r(fit.estimate.high_mm2),
            "rule": fit.estimate.rule,
        },
        "placements": [p.to_dict() for p in fit.placements],
        "board_outline": outline_coords(fit.board_outline),
        "board_outline_holes": outline_holes(fit.board_outline),
        "board_area_mm2": _r(fit.board_outline.area) if fit.board_outline is not None else 0.0,
        "blocked_by": list(fit.blocked_by),
        "unplaced": list(fit.unplaced),
        "wirelength_mm": _r(fit.wirelength_mm),
        "warnings": [w.to_dict() for w in fit.warnings],
    })
    if extra:
        d.update(extra)
    return d


def fit_json(fit: FitResult, extra: dict[str, Any] | None = None, *, verdict: Verdict | None = None) -> bytes:
    return dump_json(fit_dict(fit, extra, verdict=verdict))
