"""Analysis of declared blocks: nominal figures, spread, verdicts, retune, and their findings.

Entry point :func:`analyse_blocks` (see :mod:`pipeline.circuit` for the
method and the finding codes).
"""

from __future__ import annotations

import math
from typing import Callable

import numpy as np

from ..model import BlockReport, Design, FigureReport, Finding, Proposal, RolePart
from ..values import format_quantity as fmt
from ..values import format_share
from .blocktype import part_value_text
from .declare import DEFAULT_TOLERANCE, Decl, declare_all
from .retune import retune
from .spread import corner_matrix, eval_matrix, mc_matrix, response, stats

__all__ = ["analyse_blocks", "RETUNE_ABOVE_SHARE"]

Progress = Callable[[str, float], None]

#: Default share of Monte Carlo builds out of target above which a block that passes at nominal
#: values is retuned too (project key ``[analysis] retune_above_share``).
RETUNE_ABOVE_SHARE = 0.01


def _figures(d: Decl, nominal: dict[str, float], draws: int, seed: int
             ) -> tuple[list[FigureReport], np.ndarray | None]:
    """One report per computed figure, and per Monte Carlo build whether it misses any target."""
    corners = eval_matrix(d, corner_matrix(d))
    mc = eval_matrix(d, mc_matrix(d, draws, seed)) if draws > 0 else None
    tmap = {t.figure: t for t in d.targets}
    figs = []
    any_bad = np.zeros(draws, dtype=bool) if mc is not None else None
    for spec in d.btype.figures:
        if spec.name not in nominal:
            continue
        allv = np.append(corners[spec.name], nominal[spec.name])
        allv = allv[~np.isnan(allv)]
        cmin = float(np.min(allv)) if allv.size else math.nan
        cmax = float(np.max(allv)) if allv.size else math.nan
        p01 = p50 = p99 = share = None
        if mc is not None:
            p01, p50, p99 = stats(mc[spec.name])
        t = tmap.get(spec.name)
        passes = None
        if t is not None:
            passes = bool(t.contains(nominal[spec.name]))
            if mc is not None:
                bad = ~t.contains(mc[spec.name])
                any_bad |= bad
                share = float(np.mean(bad))
        figs.append(FigureReport(spec.name, spec.unit, spec.label, nominal[spec.name], t, cmin, cmax,
                                 p01, p50, p99, share, passes))
    return figs, any_bad


def _role_parts(d: Decl) -> tuple[RolePart, ...]:
    tol = dict(zip(d.numeric, zip(d.tols, d.assumed)))
    parts = []
    for role, part in d.roles:
        t, a = tol.get(role, (None, False))
        parts.append(RolePart(role, part.ref, part.kind, part.value if role in tol else None,
                              part.value_text, None if t is None else float(t), bool(a)))
    return tuple(parts)


def analyse_one(d: Decl, draws: int, seed: int, retune_above_share: float = RETUNE_ABOVE_SHARE
                ) -> tuple[BlockReport, list[Finding]]:
    """The report and findings of one declared block.

    A block that misses a target is retuned; so is one that meets every
    target at nominal values but whose Monte Carlo share of builds out of
    target is above ``retune_above_share`` (fraction).
    """
    nominal = {k: float(v) for k, v in eval_matrix(d, d.values).items()}
    figs, any_bad = _figures(d, nominal, draws, seed)
    block_pass = all(f.passes for f in figs if f.passes is not None) if d.targets else None
    share_all = float(np.mean(any_bad)) if (any_bad is not None and d.targets) else None
    proposals: tuple[Proposal, ...] = ()
    if block_pass is False:
        proposals = retune(d, nominal, draws, seed)
    elif block_pass and share_all is not None and share_all > retune_above_share:
        proposals = retune(d, nominal, draws, seed, above_share=share_all)
    report = BlockReport(
        name=d.name, type=d.btype.name, key=d.table.key, parts=_role_parts(d), settings=d.settings,
        options=d.options, figures=tuple(figs), draws=draws, seed=seed, share_out=share_all,
        passes=block_pass, response=response(d, nominal), series=d.series, proposals=proposals,
        assumptions=d.assumptions, note=d.note,
    )
    return report, _findings(d, report, retune_above_share)


# --------------------------------------------------------------------------
# Findings
# --------------------------------------------------------------------------
def _summary(d: Decl, rep: BlockReport, title: str, subj: tuple[str, ...]) -> Finding:
    figs = []
    for f in rep.figures:
        txt = f"{f.name} {fmt(f.nominal, f.unit)}"
        if f.p01 is not None and f.p99 is not None and f.corner_min != f.corner_max:
            txt += f" (1st..99th pct {fmt(f.p01, f.unit)} .. {fmt(f.p99, f.unit)})"
        figs.append(txt)
    tail = ""
    if rep.share_out is not None:
        tail = f"; {format_share(rep.share_out)} of {rep.draws} builds miss a target"
    return Finding("info", "block.summary", subj, f"{title} ({d.btype.name}): " + ", ".join(figs) + tail + ".")


def _target_findings(d: Decl, rep: BlockReport, title: str, subj: tuple[str, ...]) -> list[Finding]:
    out: list[Finding] = []
    if not d.targets:
        out.append(Finding("info", "block.no-targets", subj,
                           f"{title} declares no targets, so only its figures are reported; add "
                           f"targets = {{ {d.btype.figures[0].name} = \"... ±...%\" }} to check them."))
    spread_bad = []
    for f in rep.figures:
        if f.target is None:
            continue
        rng_txt = f"{fmt(f.target.lo, f.unit)} .. {fmt(f.target.hi, f.unit)}"
        if f.passes:
            out.append(Finding("info", "block.target-met", subj,
                               f"{title}: {f.name} is {fmt(f.nominal, f.unit)}, inside its target "
                               f"{f.target.text} ({rng_txt})."))
        else:
            out.append(Finding("error", "block.target-missed", subj,
                               f"{title}: {f.name} is {fmt(f.nominal, f.unit)}, outside its target "
                               f"{f.target.text} ({rng_txt})."))
        corner_out = not (f.target.contains(f.corner_min) and f.target.contains(f.corner_max))
        if f.passes and ((f.share_out or 0) > 0 or corner_out):
            spread_bad.append(f)
    if spread_bad:
        bits = [f"{f.name} {format_share(f.share_out)} of builds out, corners "
                f"{fmt(f.corner_min, f.unit)} .. {fmt(f.corner_max, f.unit)}" for f in spread_bad]
        total = f"{format_share(rep.share_out)} of {rep.draws} Monte Carlo builds" if rep.share_out is not None \
            else "the tolerance corners"
        out.append(Finding("warning", "block.spread", subj,
                           f"{title}: component tolerances put it out of target in {total} "
                           f"(uniform within tolerance): " + "; ".join(bits) + "."))
    return out


def _retune_findings(d: Decl, rep: BlockReport, title: str, subj: tuple[str, ...],
                     above_share: float) -> list[Finding]:
    ser = dict(d.series)
    which = f"{ser['resistor']} resistors and {ser['capacitor']} capacitors"
    if rep.passes and rep.proposals:       # retuned for its spread
        p = rep.proposals[0]
        vals = ", ".join(f"{ref} = {part_value_text(v, kind)}" for (r, ref, v), kind
                         in zip(p.values, d.kinds) if ref in p.changed)
        return [Finding("info", "block.retune", subj,
                        f"{title}: {format_share(rep.share_out)} of builds miss a target, more than the "
                        f"{format_share(above_share)} allowed ([analysis] retune_above_share); with "
                        f"{which}, {vals} meets every target and {format_share(p.share_out)} of builds miss.")]
    if rep.passes is not False:
        return []
    good = [p for p in rep.proposals if p.passes]
    if not good:
        return [Finding("warning", "block.retune-none", subj,
                        f"{title}: no combination of {which} within a decade of the present "
                        f"values meets every target; widen the series or revisit the targets.")]
    p = good[0]
    vals = ", ".join(f"{ref} = {part_value_text(v, kind)}" for (r, ref, v), kind
                     in zip(p.values, d.kinds) if ref in p.changed)
    figs = ", ".join(f"{k} {fmt(v, d.unit(k))}" for k, v in p.figures
                     if k in {t.figure for t in d.targets})
    return [Finding("info", "block.retune", subj,
                    f"{title}: with {which}, {vals or 'the present values'} meets every "
                    f"target ({figs}).")]


def _findings(d: Decl, rep: BlockReport, above_share: float) -> list[Finding]:
    subj = (d.table.key, *sorted(p.ref for _, p in d.roles))
    title = f"Block '{d.name}'"
    out = [_summary(d, rep, title, subj)]
    out += [Finding("info", "block.assumption", subj, f"{title}: {a}.") for a in d.assumptions]
    out += d.btype.checks(d, rep, title, subj)
    out += _target_findings(d, rep, title, subj)
    out += _retune_findings(d, rep, title, subj, above_share)
    return out


def _assumed_tolerances(decls: list[Decl]) -> list[Finding]:
    """One ``block.tolerance-assumed`` per part without a tolerance, by ref."""
    assumed: dict[str, tuple[str, float]] = {}
    for d in decls:
        byrole = dict(d.roles)
        for role, kind in zip(d.numeric, d.kinds):
            if byrole[role].tolerance is None:
                assumed.setdefault(byrole[role].ref, (kind, DEFAULT_TOLERANCE[kind]))
    out = []
    for ref in sorted(assumed):
        kind, t = assumed[ref]
        out.append(Finding("info", "block.tolerance-assumed", (ref,),
                           f"{ref} states no tolerance; the block analysis assumes "
                           f"{t * 100:g} % as usual for a {kind} without one."))
    return out


def analyse_blocks(design: Design, *, draws: int = 10000, seed: int = 1,
                   retune_above_share: float = RETUNE_ABOVE_SHARE, progress: Progress | None = None
                   ) -> tuple[tuple[BlockReport, ...], tuple[Finding, ...]]:
    """Analyse every ``[blocks.NAME]`` table of ``design``.

    Parameters
    ----------
    design : Design
        The sized design; ``design.stages`` holds the declarations.
    draws : int
        Monte Carlo builds per block (0 skips the Monte Carlo).
    seed : int
        Seed of ``numpy.random.default_rng``; each block starts from it, so
        a block's spread does not depend on the other blocks.
    retune_above_share : float
        A block meeting its targets at nominal values is retuned when more
        than this share (fraction) of its Monte Carlo builds miss one.
    progress : callable, optional
        ``progress(message, fraction)`` after each block.

    Returns
    -------
    (reports, findings)
        One :class:`~pipeline.model.BlockReport` per block in design order,
        and findings (see :mod:`pipeline.circuit` for codes).

    Raises
    ------
    DesignError
        A bad declaration, naming its key: unknown type, unknown or missing
        role, a ref not in the design or of the wrong kind, bad target text,
        an unknown series or an unresolvable voltage.

    Examples
    --------
    >>> from pipeline.model import Design, Part, RawTable
    >>> r = Part("R1", "resistor", "0603", (), value=1e3, tolerance=0.01)
    >>> c = Part("C1", "capacitor", "0603", (), value=159.155e-9, tolerance=0.05)
    >>> t = RawTable("rc", (("type", "rc-lowpass"), ("parts", {"R": "R1", "C": "C1"}),
    ...              ("targets", {"f0": "1kHz ±10%"})), "d.toml", "blocks.rc")
    >>> reps, _ = analyse_blocks(Design("x", "A", "d.toml", (r, c), (), (t,)), draws=1000)
    >>> round(reps[0].figure("f0").nominal), reps[0].passes
    (1000, True)
    """
    if draws < 0:
        raise ValueError("draws must be >= 0")  # a programming error: project.py bounds draws
    decls = declare_all(design)
    reports: list[BlockReport] = []
    findings: list[Finding] = []
    for i, d in enumerate(decls):
        rep, fs = analyse_one(d, draws, seed, retune_above_share)
        reports.append(rep)
        findings += fs
        if progress is not None:
            progress(f"block {d.name}", (i + 1) / len(decls))
    findings += _assumed_tolerances(decls)
    return tuple(reports), tuple(findings)
