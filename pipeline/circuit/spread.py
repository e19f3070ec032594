"""Spread from component tolerances: every corner, a seeded Monte Carlo, the response envelope.

Each R or C value is ``v (1 + u t)``: ``u`` is -1 or +1 at the ``2**n``
corners (:func:`corner_matrix`) and uniform on [-1, 1], independent per
part, in the Monte Carlo (:func:`mc_matrix`, ``numpy.random.default_rng``).
The figures of every row come from one vectorised call of the block type's
``evaluate`` (:func:`eval_matrix`).
"""

from __future__ import annotations

import math
from typing import Mapping

import numpy as np

from ..model import Design, RawTable, Response
from . import formulas as F
from .declare import Decl, declare

__all__ = ["eval_matrix", "corner_matrix", "mc_matrix", "stats", "response", "block_samples"]


def eval_matrix(d: Decl, m: np.ndarray) -> dict[str, np.ndarray]:
    """Figures for each row of ``m`` (columns: ``d.numeric`` order)."""
    with np.errstate(divide="ignore", invalid="ignore"):
        figs = d.btype.evaluate({r: m[..., i] for i, r in enumerate(d.numeric)}, dict(d.settings),
                                dict(d.options))
    shape = m.shape[:-1]
    return {k: np.broadcast_to(np.asarray(v, dtype=float), shape) for k, v in figs.items()}


def corner_matrix(d: Decl) -> np.ndarray:
    """The ``2**n`` tolerance corners as rows of values."""
    return d.values * (1.0 + F.corner_signs(len(d.numeric)) * d.tols)


def mc_matrix(d: Decl, draws: int, seed: int) -> np.ndarray:
    """``draws`` Monte Carlo builds as rows of values."""
    rng = np.random.default_rng(seed)
    return d.values * (1.0 + F.uniform_factors(rng, draws, len(d.numeric)) * d.tols)


def stats(x: np.ndarray) -> tuple[float | None, float | None, float | None]:
    """1st, 50th and 99th percentiles of the finite values (None when there are none)."""
    x = np.asarray(x, dtype=float)
    x = x[np.isfinite(x)]
    if not x.size:
        return None, None, None
    p = np.percentile(x, [1.0, 50.0, 99.0])
    return float(p[0]), float(p[1]), float(p[2])


def _transfer(d: Decl, row: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    return d.btype.transfer({r: float(row[i]) for i, r in enumerate(d.numeric)})


def response(d: Decl, nominal: Mapping[str, float]) -> Response | None:
    """A filter's response: nominal and the envelope over every corner, five decades
    from two below f0, 40 points a decade (None for other blocks)."""
    if not d.btype.response:
        return None
    f0 = nominal["f0"]
    if not (np.isfinite(f0) and f0 > 0):
        return None
    dec0 = math.floor(math.log10(f0)) - 2
    f = np.logspace(dec0, dec0 + 5, 5 * 40 + 1)
    nom, _ = F.response_db(*_transfer(d, d.values), f)
    lo, hi = nom.copy(), nom.copy()
    for row in corner_matrix(d):
        mag, _ = F.response_db(*_transfer(d, row), f)
        lo, hi = np.fmin(lo, mag), np.fmax(hi, mag)
    gain = nominal.get("gain", 1.0)
    f3 = nominal.get("f_3db", f0)
    return Response(tuple(float(x) for x in f), tuple(float(x) for x in nom),
                    tuple(float(x) for x in lo), tuple(float(x) for x in hi),
                    float(f0), float(f3), float(20 * math.log10(abs(gain))))


def block_samples(design: Design, table: RawTable, *, draws: int = 10000, seed: int = 1
                  ) -> dict[str, np.ndarray]:
    """The Monte Carlo builds of one declared block: figure name -> ``(draws,)`` array.

    Each part's value is ``v (1 + u t)`` with ``u`` uniform on [-1, 1]
    (``numpy.random.default_rng(seed)``), independent per part, ``t`` its
    tolerance. :func:`pipeline.circuit.analyse_blocks` summarises exactly
    these samples.
    """
    d = declare(design, table)
    return eval_matrix(d, mc_matrix(d, draws, seed))
