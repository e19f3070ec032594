"""Retune: preferred values (IEC 60063 series) that bring a block onto its targets.

Entry point :func:`retune`.
"""

from __future__ import annotations

import math
from itertools import combinations
from typing import Mapping

import numpy as np

from .. import values as _values
from ..model import Proposal
from .declare import Decl
from .spread import eval_matrix, mc_matrix

__all__ = ["retune", "MAX_PROPOSALS"]

#: Practical value range searched by retune (ohm, F).
_BOUNDS = {"resistor": (1.0, 100e6), "capacitor": (1e-12, 1e-3)}
#: Proposals kept per block.
MAX_PROPOSALS = 5
#: Candidates meeting every target whose Monte Carlo share is computed when a passing block is
#: retuned for its spread.
SPREAD_POOL = 40
_HOLD_BAND = 0.2          # untargeted figures pull toward their present value (+-20 %)


def _series_grid(series: str, lo: float, hi: float) -> np.ndarray:
    g = np.asarray(_values.series_values(series, lo, hi), dtype=float)
    return np.unique(g[np.isfinite(g) & (g > 0)])


def _score(d: Decl, figs: Mapping[str, np.ndarray], holds: Mapping[str, float]
           ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(target error, total ranking score, passes) per candidate."""
    shape = next(iter(figs.values())).shape
    err = np.zeros(shape)
    ok = np.ones(shape, dtype=bool)
    for t in d.targets:
        x = figs[t.figure]
        e = ((x - t.aim) / t.half) ** 2
        err = err + np.where(np.isfinite(e), e, np.inf)
        ok &= t.contains(x)
    total = err.copy()
    for name, v in holds.items():
        e = ((figs[name] - v) / (_HOLD_BAND * abs(v))) ** 2
        total = total + np.where(np.isfinite(e), e, 1e6)
    return err, total, ok


def _holds(d: Decl, nominal: Mapping[str, float]) -> dict[str, float]:
    """Untargeted figure groups whose first figure is held near its present value."""
    targeted = {t.figure for t in d.targets}
    holds = {}
    for group in d.btype.holds:
        k = group[0]
        if not targeted.intersection(group) and k in nominal and np.isfinite(nominal[k]) and nominal[k] != 0:
            holds[k] = nominal[k]
    return holds


def _grids(d: Decl) -> tuple[list[np.ndarray], dict[str, np.ndarray]]:
    """Per numeric role its series from a tenth to ten times its value; per kind the whole series."""
    series = dict(d.series)
    grids, wides = [], {}
    for v, kind in zip(d.values, d.kinds):
        lo_b, hi_b = _BOUNDS[kind]
        wide = _series_grid(series[kind], lo_b, hi_b)
        g = wide[(wide >= v / 10.0 * (1 - 1e-9)) & (wide <= v * 10.0 * (1 + 1e-9))]
        if g.size == 0:
            g = wide[[int(np.argmin(np.abs(np.log(wide / v))))]]
        grids.append(g)
        wides.setdefault(kind, wide)
    return grids, wides


class _Ranker:
    """Ranks candidate rows: all targets met first (fewest changed parts), then the score."""

    def __init__(self, d: Decl, holds: Mapping[str, float]) -> None:
        self.d, self.holds = d, holds

    def __call__(self, m: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        d = self.d
        err, total, ok = _score(d, eval_matrix(d, m), self.holds)
        total = total + 0.01 * np.sum(np.log(m / d.values[None, :]) ** 2, axis=1)
        changed = np.sum(~np.isclose(m, d.values[None, :], rtol=1e-9, atol=0.0), axis=1)
        keys = [m[:, j] for j in range(m.shape[1] - 1, -1, -1)] + [total, np.where(ok, changed, 0), ~ok]
        return np.lexsort(keys), err, ok, total


def _search(d: Decl, grids: list[np.ndarray], wides: Mapping[str, np.ndarray],
            nominal: Mapping[str, float], rank: _Ranker) -> np.ndarray:
    """Pairwise grid search from the snapped present values; returns every candidate kept."""
    n = len(d.numeric)
    start = np.array([g[int(np.argmin(np.abs(np.log(g / v))))] for g, v in zip(grids, d.values)])
    pool = [start[None, :]]
    best = start
    seeds = d.btype.retune_seeds(d, grids, wides, best, nominal)
    if seeds is not None and len(seeds):
        pool.append(seeds)
        order, *_ = rank(seeds)
        best = seeds[order[0]]
    groups = list(combinations(range(n), 2)) if n > 1 else [(0,)]
    for _ in range(4):
        for g in groups:
            mesh = np.meshgrid(*[grids[i] for i in g], indexing="ij")
            m = np.repeat(best[None, :], mesh[0].size, axis=0)
            for col, arr in zip(g, mesh):
                m[:, col] = arr.ravel()
            order, *_ = rank(m)
            pool.append(m[order[:16]])
        allm = np.vstack(pool)
        order, *_ = rank(allm)
        new_best = allm[order[0]]
        if np.array_equal(new_best, best):
            break
        best = new_best
    return np.vstack(pool)


def _share_out(d: Decl, row: np.ndarray, mc: np.ndarray | None) -> float | None:
    """Monte Carlo share of builds of ``row`` (same relative draws) missing some target."""
    if mc is None:
        return None
    fm = eval_matrix(d, row * (mc / d.values))
    bad = np.zeros(len(mc), dtype=bool)
    for t in d.targets:
        bad |= ~t.contains(fm[t.figure])
    return float(np.mean(bad))


def _spread_order(d: Decl, cand: np.ndarray, order: np.ndarray, ok: np.ndarray, mc: np.ndarray | None,
                  present_share: float) -> np.ndarray:
    """Candidates meeting every target, ranked by their Monte Carlo share out (then by rank),
    keeping those below ``present_share``."""
    passing = order[ok[order]]
    pool = passing[_distinct(d, cand[passing], SPREAD_POOL)]
    shares = [(_share_out(d, cand[i], mc), pos) for pos, i in enumerate(pool)]
    better = sorted((s, pos) for s, pos in shares if s is not None and s < present_share)
    return np.array([pool[pos] for _, pos in better[:MAX_PROPOSALS]], dtype=int)


def _mirror_key(d: Decl, row: np.ndarray, figs: Mapping[str, np.ndarray], j: int) -> tuple:
    """Candidates with the same values per part kind and the same figures are mirrors
    (equal-role parts swapped, e.g. R1 and R2 of a unity-gain Sallen-Key): one proposal."""
    values = tuple(sorted((k, float(f"{v:.9g}")) for k, v in zip(d.kinds, row)))
    return values, tuple((k, float(f"{float(v[j]):.9g}")) for k, v in sorted(figs.items()))


def _distinct(d: Decl, rows: np.ndarray, limit: int) -> list[int]:
    """Indices of the first ``limit`` rows that are not mirrors of an earlier row."""
    figs = eval_matrix(d, rows)
    seen, keep = set(), []
    for j, row in enumerate(rows):
        key = _mirror_key(d, row, figs, j)
        if key not in seen:
            seen.add(key)
            keep.append(j)
            if len(keep) == limit:
                break
    return keep


def retune(d: Decl, nominal: Mapping[str, float], draws: int, seed: int, *,
           above_share: float | None = None) -> tuple[Proposal, ...]:
    """Preferred-value combinations ranked by combined error on every target.

    Method: each R or C may take the values of its series from a tenth to
    ten times its present value. Starting from the present values snapped to
    the series, every pair of parts is searched on its full grid (a
    broadcast numpy evaluation) with the others held, keeping the best 16 of
    each; the best found becomes the new start, for up to four rounds.
    A block type may seed the search (Sallen-Key: for every capacitor pair,
    the resistor pair that solves f0 and Q exactly, snapped to the series).
    Candidates are ranked: those meeting every target first, and among them
    the fewest changed parts; then by the combined error, the sum over
    targets of ((figure - aim) / allowed error)^2, plus two weak pulls:
    figures with no target (``BlockType.holds``) toward their present value
    (a +-20 % band counts 1) and every value toward its present one
    (0.01 (ln ratio)^2, so a similar design is preferred to a rescaled one).

    Mirror candidates (equal-role parts swapped, same figures) count once.
    With ``above_share`` (a block that passes at nominal values but whose
    Monte Carlo share of builds out of target exceeds it) the best
    :data:`SPREAD_POOL` candidates meeting every target are re-ranked by
    their own share out, and only those below the present share are kept.

    Cost: O(rounds x pairs x grid^2) figure evaluations, about
    4 x 15 x 193^2 for a six-part E96 block (a quarter of a second); an
    E96 x E12 unity-gain Sallen-Key takes some 20 ms; the spread re-ranking
    adds SPREAD_POOL x draws evaluations.
    """
    grids, wides = _grids(d)
    rank = _Ranker(d, _holds(d, nominal))
    cand = np.unique(_search(d, grids, wides, nominal, rank), axis=0)
    cand = cand[~np.all(np.isclose(cand, d.values[None, :], rtol=1e-12, atol=0.0), axis=1)]
    if not len(cand):
        return ()
    order, err, ok, _ = rank(cand)
    mc = mc_matrix(d, draws, seed) if draws > 0 else None
    if above_share is None:
        top = order[_distinct(d, cand[order], MAX_PROPOSALS)]
    else:
        top = _spread_order(d, cand, order, ok, mc, above_share)
    rows = cand[top]
    if not len(rows):
        return ()
    figs = eval_matrix(d, rows)
    return tuple(Proposal(
        values=tuple((r, d.ref(r), float(x)) for r, x in zip(d.numeric, row)),
        figures=tuple((f.name, float(figs[f.name][j])) for f in d.btype.figures if f.name in figs),
        error=float(err[top[j]]),
        passes=bool(ok[top[j]]),
        share_out=_share_out(d, row, mc),
        changed=tuple(d.ref(r) for r, x, v in zip(d.numeric, row, d.values)
                      if not math.isclose(x, v, rel_tol=1e-9)),
    ) for j, row in enumerate(rows))
