"""Natural order for references, pin numbers, net and package names.

One sort key used by every stage and writer, so that lists read the way
people number parts: ``R2`` before ``R10``, ``U1.2`` before ``U1.10``.
Letters compare without regard to case; two names that differ only in case
are ordered by their exact text, so the order is total and deterministic.

>>> sorted(["R10", "R2", "C1", "R1", "r1", "R1a"], key=natural_key)
['C1', 'R1', 'r1', 'R1a', 'R2', 'R10']
"""

from __future__ import annotations

import re
from functools import lru_cache

__all__ = ["natural_key"]

_DIGITS = re.compile(r"(\d+)")


@lru_cache(maxsize=1 << 17)  # the same refs, pins and nets are sorted by many writers (issue 11)
def natural_key(text: str) -> tuple:
    """Sort key: digit runs compare as numbers, other runs case-folded; exact text breaks ties."""
    runs = tuple((0, int(t), "") if t.isdigit() else (1, 0, t.casefold()) for t in _DIGITS.split(text) if t)
    return runs + ((-1, 0, text),)
