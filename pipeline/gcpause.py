"""Pause Python's cyclic garbage collector while a stage builds many long-lived objects.

CPython frees most objects by reference counting; the cyclic collector runs
besides it, triggered by allocation counts (``gc.get_threshold()``: a young
collection every 700 net allocations, an older one every 10 of those). A
reader that builds a large design allocates hundreds of thousands of dicts,
tuples and dataclass instances that all stay alive, so each collection
traverses a growing heap and finds nothing to free: at 16,000 parts about a
third of the CPU time of reading, checking and building the graph (issue 11,
measured with the collector off and on). The Python documentation allows
turning automatic collection off where a program creates no reference cycles
("gc — Garbage Collector interface": ``gc.disable``); the readers and graph
builders here create none, and the collector runs again on leaving, so any
cycle made meanwhile is still collected.

>>> import gc
>>> with paused_gc():
...     gc.isenabled()
False
>>> gc.isenabled()
True
"""

from __future__ import annotations

import gc
from contextlib import contextmanager
from typing import Iterator

__all__ = ["paused_gc"]


@contextmanager
def paused_gc() -> Iterator[None]:
    """Automatic collection off inside the block, restored as it was on leaving (also on an
    error; nested blocks leave it off until the outermost ends). Cost O(1)."""
    was = gc.isenabled()
    gc.disable()
    try:
        yield
    finally:
        if was:
            gc.enable()
