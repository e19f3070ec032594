"""Size and count limits of the SPICE reader: one constant each, here only.

Each limit is checked while reading, as the count grows, before the
expensive work: a small file cannot make the reader run for minutes or fill
memory. A project raises a limit with its key in the ``[limits]`` table of
``project.toml`` (README, "Limits"); :class:`SpiceLimits` carries the values
one reading uses.
"""

from __future__ import annotations

from dataclasses import dataclass


#: Largest SPICE file (the design, an included file) read, in bytes.
FILE_BYTES = 50_000_000
#: Most ``.include`` / ``.lib`` splices in one reading, counted as they are
#: made (a file included twice counts twice; 25 files each including the
#: next twice would be 2^24 splices).
INCLUDE_SPLICES = 1_000
#: Most element lines elaborated in one reading, counted as subcircuit
#: instances are flattened (the flattened netlist's size).
EXPANSION_PARTS = 100_000
#: Deepest nesting of an expression (brackets, signs, ``^`` chains) and
#: longest chain of parameters defined by one another.
EXPRESSION_DEPTH = 1_000

#: Deepest nesting of subcircuit instances flattened (fixed: the expansion
#: limit above bounds the work, this one the reader's call depth).
SUBCKT_DEPTH = 50

#: ``[limits]`` key in project.toml -> default value.
DEFAULTS = {
    "spice_file_bytes": FILE_BYTES,
    "spice_include_splices": INCLUDE_SPLICES,
    "spice_expansion_parts": EXPANSION_PARTS,
    "expression_depth": EXPRESSION_DEPTH,
}


@dataclass(frozen=True)
class SpiceLimits:
    """The limits one :func:`pipeline.spice.read_spice` call enforces (defaults above)."""

    file_bytes: int = FILE_BYTES
    include_splices: int = INCLUDE_SPLICES
    expansion_parts: int = EXPANSION_PARTS
    expression_depth: int = EXPRESSION_DEPTH

    @classmethod
    def from_table(cls, table: dict[str, int]) -> "SpiceLimits":
        """From ``[limits]`` values keyed as in :data:`DEFAULTS` (missing keys keep their default)."""
        got = {k: int(table.get(k, v)) for k, v in DEFAULTS.items()}
        return cls(got["spice_file_bytes"], got["spice_include_splices"], got["spice_expansion_parts"],
                   got["expression_depth"])
