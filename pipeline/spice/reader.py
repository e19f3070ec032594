"""The entry point :func:`read_spice` and its named steps.

Method, one step a function: physical lines -> logical lines (comments
dropped, continuations joined) -> includes spliced in (:func:`_lines`) ->
``.subckt`` bodies, ``.model``, ``.param`` and ``.global`` collected -> the
top level elaborated, expanding each unmapped ``X`` instance into its body
with the instance's node map and parameter scope (recursion refused, depth
at most 50, element lines elaborated at most ``limits.expansion_parts``;
:func:`_elaborated`) -> candidates grouped by board reference (sections
merged) -> nets (:func:`_assembled`) -> the design (:func:`_design`).

Example
-------
>>> import tempfile, pathlib
>>> from pipeline.library import load_library
>>> d = pathlib.Path(tempfile.mkdtemp())
>>> _ = (d / "rc.cir").write_text("RC low-pass\\nR1 in out 10kOhm\\nC1 out 0 100n\\n.end\\n")
>>> design, findings = read_spice(d / "rc.cir", load_library(), display_name="rc.cir")
>>> design.name, [(p.ref, p.kind, p.package, p.value) for p in design.parts]
('RC low-pass', [('R1', 'resistor', '0603', 10000.0), ('C1', 'capacitor', '0603', 1e-07)])
>>> [(n.name, [str(p) for p in n.pins]) for n in design.nets]
[('in', ['R1.1']), ('out', ['R1.2', 'C1.1']), ('GND', ['C1.2'])]
"""

from __future__ import annotations

from pathlib import Path
from typing import Any, Callable

from ..errors import DesignError
from ..model import Design, Finding, Net, Part, PartKind
from .assemble import assemble
from .collect import collect
from .elaborate import elaborate
from .limits import SpiceLimits
from .lines import Line, Reader, expand_includes, logical_lines, read_text
from .partsmap import PART_LETTERS, PartsMap, letters_text, read_parts_map
from .records import RecordSet, loose_part, record_kinds, sort_records, stage_tables
from .state import Build, Ctx, global_scope


def read_spice(
    path: Path, library: Any, *, display_name: str | None = None, parts_map: Path | None = None,
    root: Path | None = None, limits: SpiceLimits | None = None,
) -> tuple[Design, list[Finding]]:
    """Read a SPICE netlist as a sized design.

    Parameters
    ----------
    path : Path
        The SPICE file (``.cir``, ``.sp``, ``.spice``, ``.net``).
    library : pipeline.library.Library
        Part kinds and packages to resolve against.
    display_name : str, optional
        The file as the user named it, for messages and ``Design.source``
        (default ``str(path)``). Included files are shown relative to it.
    parts_map : Path, optional
        The parts-map TOML file (module docstring). Shown relative to
        ``root`` when inside it.
    root : Path, optional
        The project folder; includes may not leave it (default: the folder
        of ``path``).
    limits : SpiceLimits, optional
        Size and count limits (default: :mod:`pipeline.spice.limits`).

    Returns
    -------
    (Design, list of Finding)
        Parts in file order (flattened subcircuits where their instance
        stands), nets in order of first use with pins in line order.
        ``Design.inputs`` lists every file read (the design, its includes,
        the parts map), resolved and sorted.

    Raises
    ------
    DesignError
        Bad input, naming the file (an included one where the fault is
        there, the parts map for its own faults) and line.

    Notes
    -----
    Method and an example: this module's docstring. Cost: linear in the
    size of the flattened netlist; parameters are evaluated lazily, once per
    scope. Every count that could grow from a small file (bytes, splices,
    element lines, expression depth) is checked as it grows (``limits``).
    """
    shown = display_name or str(Path(path))
    root_dir, here = _resolved(Path(path), root, shown)
    rd = Reader(root=root_dir, shown=shown, limits=limits or SpiceLimits())
    read_map = _map_reader(parts_map, root_dir)
    pm = read_map(library)
    lines = _lines(here, shown, rd)
    kinds = record_kinds(rd)
    lib = library.with_kinds(kinds) if kinds else library
    pm = read_map(lib) if kinds and parts_map is not None else pm  # the map may name a design's kind
    nl = collect(lines, rd)
    recs = sort_records(rd)
    b = _elaborated(Build(library=lib, pm=pm, nl=nl, rd=rd, records=recs.parts), recs, shown)
    parts, nets = _assembled(b, recs, shown)
    return _design(parts, nets, kinds, pm, recs, rd, shown, parts_map), pm.notes + rd.findings


def _map_reader(parts_map: Path | None, root_dir: Path) -> Callable[[Any], PartsMap]:
    """Read the parts map against a library (an empty map when none is given)."""
    if parts_map is None:
        return lambda library: PartsMap()
    pm_shown = _parts_map_shown(parts_map, root_dir)
    return lambda library: read_parts_map(Path(parts_map), pm_shown, library)


def _lines(here: Path, shown: str, rd: Reader) -> list[Line]:
    """The top file's logical lines with every include spliced in."""
    top = logical_lines(read_text(here, shown, None, rd), shown, rd, has_title=True)
    return expand_includes(top, here, rd, (here,))


def _elaborated(b: Build, recs: RecordSet, shown: str) -> Build:
    """Elaborate the top level and the loose part records into ``b``; note unused map entries and defaults."""
    elaborate(b.nl.top, Ctx(path=(), ports={}, scope=global_scope(b), stack=()), b)
    for kv, file, line in recs.loose:
        loose_part(b, kv, file, line)
    _note_unused_map_entries(b.pm, b.rd, shown)
    for what, refs in sorted(b.defaulted.items()):
        b.rd.note("info", "spice.default-kind", tuple(refs),
                  f"{shown}: {', '.join(refs)} read as {what} by default; name others in the parts map.")
    return b


def _assembled(b: Build, recs: RecordSet, shown: str) -> tuple[tuple[Part, ...], tuple[Net, ...]]:
    """The board parts and nets; a design without a board part is refused."""
    parts, nets = assemble(b, recs.nets)
    if not parts:
        raise DesignError(shown, f"no board parts found: expected {letters_text((*PART_LETTERS, 'x'))} element lines")
    return parts, nets


def _design(parts: tuple[Part, ...], nets: tuple[Net, ...], kinds: list[PartKind], pm: PartsMap, recs: RecordSet,
            rd: Reader, shown: str, parts_map: Path | None) -> Design:
    """The design: name from a record, ``.title`` or the title line (else the file stem); revision from the map.

    ``inputs`` are the files read (design, includes) and the parts map, resolved and sorted.
    """
    inputs = set(rd.inputs) | ({str(Path(parts_map).resolve())} if parts_map is not None else set())
    return Design(name=recs.design.get("name") or rd.dot_title or rd.title or Path(shown).stem,
                  revision=pm.revision if pm.revision is not None else recs.design.get("revision", ""),
                  source=shown, parts=parts, nets=nets, stages=stage_tables(pm.stages, recs),
                  kinds=tuple(kinds), inputs=tuple(sorted(inputs)))


def _resolved(path: Path, root: Path | None, shown: str) -> tuple[Path, Path]:
    """The project folder and the design file, resolved (links followed)."""
    root_dir = Path(root) if root is not None else path.parent
    if "\x00" in str(path) or "\x00" in str(root_dir):
        raise DesignError(shown, "the path holds a NUL character")
    try:
        return root_dir.resolve(), path.resolve()
    except (OSError, RuntimeError, ValueError):
        raise DesignError(shown, "cannot follow the file's path") from None


def _parts_map_shown(parts_map: Path, root_dir: Path) -> str:
    """The parts map as messages show it: relative to the project folder when inside it."""
    pm_path = Path(parts_map)
    try:
        return pm_path.resolve().relative_to(root_dir).as_posix()
    except (ValueError, OSError, RuntimeError):
        return str(pm_path)


def _note_unused_map_entries(pm: PartsMap, rd: Reader, shown: str) -> None:
    """A warning per ``refs``, ``subckt`` or ``models`` entry that matched no element."""
    for key in sorted(set(pm.refs) | set(pm.subckt) | set(pm.models)):
        for group in (pm.refs, pm.subckt, pm.models):
            s = group.get(key)
            if s is not None and s.key not in pm.used:
                rd.note("warning", "spice.parts-map-unused", (s.key,),
                        f"{s.file}: [{s.key}] matches no element of {shown}; check the name.")
