"""Walking model space and block references down to the entities that draw.

Block references (INSERT and MINSERT, any scale, rotation, mirroring and
nesting up to :data:`~pipeline.cavity.limits.MAX_BLOCK_DEPTH` levels) are
walked recursively, composing each INSERT's transformation matrix with its
parent's. Entities inside a block on layer ``0`` take the layer of the
INSERT that places them (the DXF rule).
"""

from __future__ import annotations

from collections import Counter
from dataclasses import dataclass
from typing import Any, Iterator

import numpy as np

from pipeline.errors import CavityError
from pipeline.model import Finding

from .limits import MAX_BLOCK_DEPTH, Limits
from .load import printable

__all__ = ["Leaf", "Walker"]


@dataclass
class Leaf:
    """One drawing entity reached by the walk, with its block matrix, layer and message label."""

    entity: Any
    matrix: np.ndarray | None  # 4x4 row-vector matrix, None = identity
    layer: str
    label: str


class Walker:
    """Yields the drawing entities of model space with their block transformation.

    Counts every entity it passes (block references expanded) against
    ``limits.dxf_entities``; ``notes`` collects block references it did not
    follow.
    """

    def __init__(self, doc, name: str, findings: list[Finding], limits: Limits):
        self.doc = doc
        self.limit = limits.dxf_entities
        self.name = name
        self.findings = findings
        self.count = 0
        self.notes: Counter = Counter()

    def _bump(self, n: int = 1) -> None:
        self.count += n
        if self.count > self.limit:
            raise CavityError(self.name, f"the drawing has more than {self.limit} entities "
                              "(block references expanded): save a drawing with only the cavity "
                              f"layers; {Limits.how_to_raise('dxf_entities')}")

    def leaves(self, entities, matrix, inherit: str | None, stack: tuple[str, ...],
               via: str) -> Iterator[Leaf]:
        for e in entities:
            self._bump()
            try:
                t = e.dxftype()
                layer = printable(str(e.dxf.get("layer", "0") or "0"))
            except Exception:
                continue
            if inherit is not None and layer == "0":
                layer = inherit
            if t == "INSERT":
                yield from self._insert(e, matrix, layer, stack, via)
                continue
            label = f"{t} #{printable(e.dxf.get('handle', '?'))}{via} on layer {layer}"
            yield Leaf(e, matrix, layer, label)

    def _insert(self, ins, matrix, layer: str, stack: tuple[str, ...], via: str) -> Iterator[Leaf]:
        raw_name = str(ins.dxf.get("name", ""))
        bname, handle = printable(raw_name), printable(ins.dxf.get("handle", "?"))
        if len(stack) >= MAX_BLOCK_DEPTH:
            self.notes[f"block references nested deeper than {MAX_BLOCK_DEPTH} levels were not "
                       "followed"] += 1
            return
        if bname.casefold() in stack:
            self.notes[f"block {bname!r} refers to itself; the reference was not followed"] += 1
            return
        block = self.doc.blocks.get(raw_name) if raw_name else None
        if block is None:
            self.notes[f"INSERT #{handle} names a missing block {bname!r}"] += 1
            return
        try:
            if block.block is not None and block.block.is_xref:
                self.notes[f"block {bname!r} is an external reference and was not read"] += 1
                return
        except Exception:
            pass
        rows = int(ins.dxf.get("row_count", 1) or 1)
        cols = int(ins.dxf.get("column_count", 1) or 1)
        n_block = len(block)
        if rows * cols * max(n_block, 1) + self.count > self.limit:
            self._bump(rows * cols * max(n_block, 1))
        inserts = [ins] if rows * cols == 1 else list(ins.multi_insert())
        sub_via = f" (block {bname}, INSERT #{handle})" if not via else via
        for vi in inserts:
            m = np.array(list(vi.matrix44().rows()), dtype=float)
            total = m if matrix is None else m @ matrix
            yield from self.leaves(block, total, layer, stack + (bname.casefold(),), sub_via)
