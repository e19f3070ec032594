"""Findings of one kind grouped into one finding that lists the parts (issue 10 item 7).

Entry point: :func:`group_findings`, applied once to the final list of a run's
findings (:func:`pipeline.project.run`) and of ``check``
(:func:`pipeline.project.check_design`), before the verdict and the outputs,
so the terminal, ``--json``, ``findings.json`` and ``report.html`` all show
the same grouped finding and ``run`` and ``check`` agree.

What is grouped
---------------
Only the kinds in :data:`KINDS` (their codes: :data:`GROUPED_CODES`, the one
list). A kind is a code and one kind of message of it, named by the step that
makes the finding (:attr:`pipeline.model.Finding.kind`: ``"decoupling"``,
``"edge"``, ...), so the grouping never reads a message's wording; a grouped
finding has no kind, so it is never taken for a member again. Findings of one
``(code, kind, severity)`` that number two or more become one finding:

* ``subject``: the parts' refs, once each, in natural order
  (:func:`pipeline.order.natural_key`): the full list, which
  ``findings.json`` and ``--json`` carry;
* ``message``: how many parts, the kind's one sentence and the parts listed
  (with the rest of each one's subject in brackets where the kind says so:
  ``C5 (U2)``, a capacitor and its IC), shortened past
  :data:`LIST_LIMIT` with "and N more", in one sentence (CONTRACT section 4);
* ``severity`` and ``check`` (the code) as the members had them, so the
  verdict's level and the exit status do not change.

A kind with one finding keeps it as it is. The grouped finding stands where
the first member of its group stood; every other finding keeps its place.

Left apart on purpose (decided per code): findings whose separate location or
figures are the help (a reader's file and line: ``spice.*``,
``design.duplicate-pin``; drawing entities: ``cavity.*``, ``region.*``; each
part's own figures: ``ratings.*``, ``values.off-series``; pins and nets:
``connect.unconnected-pin``, ``connect.single-pin-net``, ...); block findings
(they name blocks and their figures, shown in the blocks' sections); and
findings that are one already (``values.series``, ``ratings.missing``,
``fit.bottom-side``).

Cost: O(n log n) for n findings (one pass to sort them into kinds, a natural
sort of each group's refs). Method: common practice (a compiler's
"N similar warnings" summary); no published source.

Examples
--------
>>> from pipeline.model import Finding
>>> fs = [Finding("error", "connect.unconnected-part", (r,), f"{r} (resistor) is connected to nothing: "
...               "add it to nets or remove it.", kind="unconnected-part") for r in ("R10", "R2")]
>>> [(g.subject, g.message) for g in group_findings(fs)]  # doctest: +NORMALIZE_WHITESPACE
[(('R2', 'R10'), '2 parts are connected to nothing: R2, R10; add each to its nets or remove it.')]
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Iterable

from .model import Finding
from .order import natural_key

__all__ = ["Kind", "KINDS", "GROUPED_CODES", "LIST_LIMIT", "group_findings", "listed"]

#: How many parts a grouped message names before it counts the rest ("and N more").
LIST_LIMIT = 12


@dataclass(frozen=True)
class Kind:
    """One kind of message of a code that is grouped.

    A finding is of this kind when its code is ``code``, its ``kind`` is
    ``name`` and it names a part (its first subject, the ref); with
    ``brackets`` the rest of its subject (the part it goes with, or its nets)
    is listed after the ref in brackets (``C5 (U2)``). ``sentence`` is the
    grouped message, with ``{n}`` (how many parts) and ``{parts}`` (the list).
    """

    code: str
    name: str
    sentence: str
    brackets: bool = False

    def matches(self, f: Finding) -> bool:
        """Whether ``f`` is a finding of this kind."""
        return f.check == self.code and f.kind == self.name and bool(f.subject)

    def label(self, f: Finding) -> str:
        """How a member is listed: its ref, and the rest of its subject in brackets where asked."""
        ref, rest = f.subject[0], f.subject[1:]
        return f"{ref} ({', '.join(rest)})" if self.brackets and rest else ref


#: The grouped kinds, one home: each code's kinds of message and their grouped sentence. The
#: steps that make these findings name the kind (pipeline/place_rules.py: unmet_rules,
#: pin_edge_parts; pipeline/check.py; pipeline/ratings.py); tests/test_findings_group.py makes them
#: through the real steps, so a kind left unnamed fails there instead of going ungrouped unnoticed.
KINDS: tuple[Kind, ...] = (
    Kind("place.rule-unmet", "decoupling",
         "{n} decoupling capacitors are farther from their IC's supply pins than the default rule allows "
         "(the IC in brackets): {parts}; give the board more room, or fix their places with at.",
         brackets=True),
    Kind("place.rule-unmet", "edge",
         "{n} parts should sit at the board edge, nearest the wire entry where one is drawn (edge rule), "
         "but no room is left there for them: {parts}; give the board more edge room, or fix their places "
         "with at."),
    Kind("connect.no-decoupling", "no-decoupling",
         "{n} ICs have no capacitor across their supply nets (in brackets): {parts}; common practice is "
         "a ceramic capacitor close to each IC's supply pins.", brackets=True),
    Kind("connect.unconnected-part", "unconnected-part",
         "{n} parts are connected to nothing: {parts}; add each to its nets or remove it."),
    Kind("values.zero", "zero",
         "{n} capacitors or inductors have the value 0, which is no part: {parts}; give each its real "
         "value, or remove it (a link is a 0 ohm resistor)."),
)

#: The codes whose findings may be grouped (the codes of :data:`KINDS`, in table order).
GROUPED_CODES: tuple[str, ...] = tuple(dict.fromkeys(k.code for k in KINDS))


def listed(names: Iterable[str], limit: int = LIST_LIMIT, sep: str = ", ") -> str:
    """``names`` joined by ``sep``, the first ``limit`` of them and "and N more" past that (the one
    rule for a list of parts in a message; the finding's subject keeps them all).

    >>> listed(["R1", "R2", "R3"], limit=2)
    'R1, R2 and 1 more'
    >>> listed(["R1 needs 0.1 W", "R2 needs 0.2 W"], sep="; ")
    'R1 needs 0.1 W; R2 needs 0.2 W'
    """
    names = list(names)
    if len(names) <= limit:
        return sep.join(names)
    return sep.join(names[:limit]) + f" and {len(names) - limit} more"


def _kind_of(f: Finding) -> Kind | None:
    if f.check not in GROUPED_CODES:
        return None
    return next((k for k in KINDS if k.matches(f)), None)


def _grouped(kind: Kind, members: list[Finding]) -> Finding:
    """One finding for ``members`` (two or more findings of ``kind`` and one severity)."""
    members = sorted(members, key=lambda f: (natural_key(f.subject[0]), [natural_key(s) for s in f.subject]))
    refs = tuple(dict.fromkeys(f.subject[0] for f in members))
    labels = list(dict.fromkeys(kind.label(f) for f in members))
    return Finding(members[0].severity, kind.code, refs,
                   kind.sentence.format(n=len(refs), parts=listed(labels)))


def group_findings(findings: Iterable[Finding]) -> tuple[Finding, ...]:
    """``findings`` with each kind of :data:`KINDS` that has two or more findings of one severity
    made into one finding (module notes); everything else unchanged and in its place.

    Deterministic: the result depends only on the findings and their order. Cost: O(n log n).
    """
    findings = list(findings)
    groups: dict[tuple[Kind, str], list[int]] = {}  # (kind, severity) -> positions of its findings
    for i, f in enumerate(findings):
        kind = _kind_of(f)
        if kind is not None:
            groups.setdefault((kind, f.severity), []).append(i)
    out: dict[int, Finding] = dict(enumerate(findings))
    for (kind, _), at in groups.items():
        if len(at) > 1:
            for i in at[1:]:
                del out[i]
            out[at[0]] = _grouped(kind, [findings[i] for i in at])  # where its first member stood
    return tuple(out[i] for i in sorted(out))
