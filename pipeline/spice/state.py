"""The mutable state of one reading: candidates, contexts, the build."""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

from ..model import PartKind
from .expr import Scope
from .lines import Line, Reader
from .partsmap import PartsMap, Spec
from .collect import Netlist


@dataclass
class Cand:
    """An element that becomes (part of) a board part."""

    spice_name: str  # hierarchical, dotted: X1.R1
    ref: str
    letter: str
    nodes: list[str]  # net keys, SPICE order
    file: str
    line: int
    kind: PartKind
    package: str
    pins: tuple[str, ...]  # kind pin number per node ("" = not on the board part)
    value: float | None = None
    value_text: str = ""
    model: str = ""
    spec: Spec | None = None  # the most specific parts-map entry (for fields)
    record: dict[str, str] | None = None
    explicit_ref: bool = False


@dataclass
class Ctx:
    path: tuple[str, ...]  # instance names, outermost first, as written
    ports: dict[str, str]  # lower port name -> net key
    scope: Scope
    stack: tuple[str, ...]  # subcircuit names being expanded


@dataclass
class Build:
    library: Any
    pm: PartsMap
    nl: Netlist
    rd: Reader
    records: dict[str, dict[str, str]]  # lower element name -> part record
    cands: list[Cand] = field(default_factory=list)
    net_names: dict[str, str] = field(default_factory=dict)  # key -> display
    net_origin: dict[str, tuple[str, int, str]] = field(default_factory=dict)  # key -> (file, line, path)
    net_lines: dict[str, int] = field(default_factory=dict)
    elements: dict[str, tuple[str, int]] = field(default_factory=dict)  # lower spice name -> where
    sources: list[tuple[str, str, str, float, Line]] = field(default_factory=list)
    defaulted: dict[str, list[str]] = field(default_factory=dict)
    gscope: Scope | None = None
    expanded: int = 0  # element lines elaborated so far (limits.EXPANSION_PARTS)


def global_scope(b: Build) -> Scope:
    if b.gscope is None:
        b.gscope = Scope(b.nl.params, depth=b.rd.limits.expression_depth)
    return b.gscope
