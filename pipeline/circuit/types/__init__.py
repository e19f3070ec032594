"""Every circuit block type snugboard knows, one file each.

Each module of this package holds ``TYPES``, a tuple of
:class:`~pipeline.circuit.blocktype.BlockType` objects; :data:`BLOCK_TYPES`
collects them by name. Adding a block type is adding a module here (and its
test); nothing else needs an edit.
"""

from __future__ import annotations

import importlib
import pkgutil

from ..blocktype import BlockType

__all__ = ["BLOCK_TYPES"]


def _collect() -> dict[str, BlockType]:
    found: dict[str, BlockType] = {}
    for mod in sorted(m.name for m in pkgutil.iter_modules(__path__)):
        for t in importlib.import_module(f"{__name__}.{mod}").TYPES:
            if t.name in found:  # pragma: no cover - a programming error, caught by the tests
                raise RuntimeError(f"block type {t.name} defined twice")
            found[t.name] = t
    return dict(sorted(found.items()))


#: Block type name -> type, alphabetical.
BLOCK_TYPES: dict[str, BlockType] = _collect()
