"""The one overall verdict of a run, and the exit status that follows from it.

Entry point: :func:`decide`.

Every place that tells the user how the run went (the terminal, ``--json``,
``fit.json``, ``report.html`` and the title of ``fit.svg``) shows the
:class:`Verdict` made here, and the CLI exits with its ``exit_status``: the
rule below is written only here.

Levels
------
``ready``
    The parts fit (or no fit was asked for) and no check found an error or
    a warning: the board is ready to lay out.
``attention``
    The parts fit, but something needs a look; ``reasons`` name each thing.
    A reason of severity ``error`` blocks (exit 1: a missed block target, a
    connection error, nets left unrouted); a warning does not (exit 0).
``does-not-fit``
    Some fitted part finds no place, or a given board outline leaves the
    usable region (exit 1).

Exit status (README "The command", CONTRACT section 4): 0 when nothing
blocks, 1 when the design does not fit or a reason blocks. Bad input (2) and
internal errors (3) never reach a verdict: the CLI maps them from the
exception tree.

Routing: the verdict takes an optional :class:`Routing` (``routed``,
``open`` with the nets left unrouted, or ``skipped`` when switched off).
Without one the verdict is about the placement only and says so in
``scope``; open nets block.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Sequence

from .model import FitResult, Finding
from .order import natural_key

__all__ = ["Routing", "Reason", "Verdict", "decide", "LEVELS"]

LEVELS = ("ready", "attention", "does-not-fit")

#: The headline word of each level, as every output shows it.
_LEVEL_WORDS = {
    "ready": "Ready to lay out",
    "attention": "Fits, needs attention",
    "does-not-fit": "Does not fit",
}
#: How many things a headline names before it counts the rest.
_HEADLINE_ITEMS = 3
#: Checks that state the fit itself; the verdict says it once, not as a reason.
_FIT_CODES = ("fit.fits", "fit.blocked")


@dataclass(frozen=True)
class Routing:
    """What routing said: ``status`` is ``routed``, ``open`` or ``skipped``.

    ``open`` names the nets left unrouted when ``status == "open"``. The
    router's own result (:class:`pipeline.route.router.Routing`) has the same
    two fields and may be passed as it is; this one stands for "skipped".
    """

    status: str
    open: tuple[str, ...] = ()


@dataclass(frozen=True)
class Reason:
    """One thing the verdict names: a finding's check, subject and message.

    ``blocking`` is true for errors: they make the exit status 1.
    """

    severity: str
    check: str
    subject: tuple[str, ...]
    message: str

    @property
    def blocking(self) -> bool:
        return self.severity == "error"

    def to_dict(self) -> dict[str, Any]:
        return {"severity": self.severity, "check": self.check, "subject": list(self.subject),
                "message": self.message, "blocking": self.blocking}


@dataclass(frozen=True)
class Verdict:
    """The overall status of a run, shown the same way everywhere.

    ``headline`` is the one line every output shows; ``scope`` says what
    the verdict covers (placement only, routed, or no fit at all).
    """

    level: str
    headline: str
    scope: str
    reasons: tuple[Reason, ...]
    exit_status: int

    def to_dict(self) -> dict[str, Any]:
        return {"level": self.level, "headline": self.headline, "scope": self.scope,
                "exit_status": self.exit_status, "reasons": [r.to_dict() for r in self.reasons]}


def decide(findings: Sequence[Finding], fit: FitResult | None, *, routing: Any = None,
           fit_asked: bool = True) -> Verdict:
    """The verdict of a run from its findings, its fit and (later) its routing.

    Parameters
    ----------
    findings : sequence of Finding
        Every finding of the run (readers, checks, stages, fit).
    fit : FitResult or None
        The placement verdict; ``None`` when no cavity was given.
    routing : Routing or pipeline.route.router.Routing, optional
        Anything with ``status`` and ``open``; without it the verdict covers
        the placement only.
    fit_asked : bool
        False for ``check``, which never fits: a missing fit is then not a
        thing to name.

    Examples
    --------
    >>> decide([], None, fit_asked=False).level
    'ready'
    >>> v = decide([Finding("error", "block.target-missed", ("lp",), "f0 is 1.2 kHz, target 1 kHz.")], None,
    ...            fit_asked=False)
    >>> v.level, v.exit_status
    ('attention', 1)
    """
    reasons = [Reason(f.severity, f.check, tuple(f.subject), f.message) for f in findings
               if f.severity in ("error", "warning") and f.check not in _FIT_CODES]
    if routing is not None and routing.status == "open":
        nets = sorted(routing.open, key=natural_key)
        reasons.append(Reason("error", "route.open", tuple(nets),
                              f"{len(nets)} net{'s' if len(nets) != 1 else ''} could not be routed on this board."))
    reasons.sort(key=lambda r: 0 if r.blocking else 1)  # stable: the stages' order within each severity
    scope = _scope(fit, routing, fit_asked)
    if fit is not None and not fit.fits:
        level = "does-not-fit"
        total = len(fit.placements) + len(fit.unplaced)
        if fit.unplaced:
            what = (f"{len(fit.unplaced)} of {total} parts find no place "
                    f"({_names(sorted(fit.unplaced, key=natural_key))})")
        else:
            what = fit.blocked_by[0] if fit.blocked_by else "the board does not fit the cavity"
        headline = f"{_LEVEL_WORDS[level]}: {what.rstrip('.')}"
    elif reasons or (fit is None and fit_asked):
        level = "attention"
        if fit is None and fit_asked:
            reasons.append(Reason("info", "fit.no-cavity", (), "No cavity drawing given: the fit was not checked."))
        word = _LEVEL_WORDS[level] if fit is not None else "Needs attention"
        headline = f"{word}: {_things(reasons)}"
    else:
        level = "ready"
        n = len(fit.placements) if fit is not None else 0
        what = f"all {n} fitted parts are placed, no errors or warnings" if fit is not None else \
            "no errors or warnings"
        headline = f"{_LEVEL_WORDS[level]}: {what}"
    blocks = level == "does-not-fit" or any(r.blocking for r in reasons)
    return Verdict(level=level, headline=f"{headline} ({scope}).", scope=scope, reasons=tuple(reasons),
                   exit_status=1 if blocks else 0)


def _scope(fit: FitResult | None, routing: Any, fit_asked: bool) -> str:
    if fit is None:
        return "connections and values only" if not fit_asked else "fit not checked"
    if routing is None:
        return "placement only: routing not checked"
    if routing.status == "routed":
        return "placed and routed"
    if routing.status == "skipped":
        return "placement only: routing switched off"
    return "placed; routing left nets open"


def _things(reasons: Sequence[Reason]) -> str:
    """The things needing attention in a few words: kind of finding and what it concerns."""
    items = []
    for r in reasons:
        words = r.check.replace(".", " ").replace("-", " ")
        subj = f" ({_names(r.subject, 4)})" if r.subject else ""
        tag = "" if r.blocking else f" [{'note' if r.severity == 'info' else r.severity}]"
        items.append(f"{words}{subj}{tag}")
    shown = items[:_HEADLINE_ITEMS]
    rest = len(items) - len(shown)
    return "; ".join(shown) + (f"; and {rest} more" if rest else "")


def _names(refs: Sequence[str], limit: int = 8) -> str:
    refs = list(refs)
    return " ".join(refs[:limit]) + (f" +{len(refs) - limit}" if len(refs) > limit else "")
