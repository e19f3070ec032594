"""Read ``project.toml`` and run the stages in order.

Entry points: :func:`load_project` (the project file to a frozen
:class:`Project`), :func:`run` (every stage, then all outputs written at
once), :func:`check_design` (a design file alone: read, graph, checks) and
:func:`check_project` (the same for a project folder, with its settings).

Nothing here prints or exits; :mod:`pipeline.cli` shows the
:class:`RunResult`. Bad input raises :class:`~pipeline.errors.InputError`
before any output is written (outputs are collected in memory and written
by :func:`pipeline.export.atomic.write_all`).

The keys of ``project.toml`` (CONTRACT section 1, extended; README.md
documents them):

=========  ====================================================================
table      keys (default)
=========  ====================================================================
project    name, design, cavity, parts_map
board      layers (2), thickness_mm (0.8), sides (1), density ("nominal"),
           edge_clearance_mm (0.5), wall_clearance_mm (0.3),
           outline ("region", "rectangle" or "smallest": the smallest board that
           places and routes, pipeline.route.smallest), min_inside_radius_mm (0.5),
           outline_units ("mm", another unit word, or "drawing": board-outline.dxf in
           the cavity's units)
cavity     depth_mm (5.0), units ("mm"; a word of pipeline.cavity.units.UNIT_WORDS),
           layers (role map), chord_tolerance_mm (0.02)
order      boards (1), spares_percent (0), min_spares (0), multiple (1)
analysis   draws (10000), seed (1), retune_above_share (0.01)
limits     spice_file_bytes, spice_include_splices, spice_expansion_parts,
           expression_depth (defaults in pipeline/spice/limits.py), dxf_bytes, dxf_entities,
           dxf_vertices, cavity_coordinate_mm (defaults in pipeline/cavity/limits.py; README "Limits")
copper     route (true), track_width_mm, clearance_mm, via_diameter_mm, via_drill_mm,
           edge_clearance_mm, vias_in_pads (false), areas, currents, ... (pipeline.route.rules)
=========  ====================================================================
"""

from __future__ import annotations

import dataclasses
import os
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Callable

from .errors import OutputError, ProjectError
from .findings_group import group_findings
from .model import DENSITY_LEVELS, BoardOptions, Design, FitResult, Finding, OrderOptions
from .cavity.limits import CHORD_TOL_MM, DEFAULT_DEPTH_MM, DEFAULT_UNITS
from .cavity.limits import DEFAULTS as CAVITY_LIMITS
from .cavity.units import unit_problem
from .spice.limits import DEFAULTS as SPICE_LIMITS
from .route.rules import COPPER_KEYS, CopperRules, read_copper
from .tomlsrc import TomlSource, load

__all__ = ["Project", "RunResult", "load_project", "run", "check_design", "check_project", "inspect_cavity",
           "read_any_design", "SPICE_SUFFIXES"]

NOT_FITTING = "the parts do not fit, so routing was not tried"
SPICE_SUFFIXES = (".cir", ".sp", ".spice", ".net")
STANDARD_THICKNESS = (0.4, 0.6, 0.8, 1.0, 1.2, 1.6, 2.0)  # REFERENCES.md section 4, common practice

Progress = Callable[[str, float], None]

_KEYS: dict[str, tuple[str, ...]] = {
    "project": ("name", "design", "cavity", "parts_map"),
    "board": ("layers", "thickness_mm", "sides", "density", "edge_clearance_mm", "wall_clearance_mm",
              "outline", "min_inside_radius_mm", "outline_units", "mount"),
    "cavity": ("depth_mm", "units", "layers", "chord_tolerance_mm",
               "mesh_up", "mesh_floor", "mesh_lid", "mesh_grid_mm", "mesh_zone_step_mm"),
    "order": ("boards", "spares_percent", "min_spares", "multiple"),
    "analysis": ("draws", "seed", "retune_above_share"),
    "limits": tuple(SPICE_LIMITS) + tuple(CAVITY_LIMITS),  # README "Limits"; each a whole number >= 1
    "copper": COPPER_KEYS,
}


@dataclass(frozen=True)
class Project:
    """Everything ``project.toml`` (and the command line) says.

    Paths are resolved; ``shown`` maps each to the text the user wrote.
    """

    name: str
    root: Path
    file: str
    design_path: Path
    design_shown: str
    cavity_path: Path | None
    cavity_shown: str
    parts_map: Path | None
    out_dir: Path
    board: BoardOptions
    order: OrderOptions
    depth_mm: float = DEFAULT_DEPTH_MM
    units: str = DEFAULT_UNITS
    layer_map: Any = None
    chord_tolerance_mm: float = CHORD_TOL_MM
    draws: int = 10000
    seed: int = 1
    warnings: tuple[Finding, ...] = ()
    retune_above_share: float | None = None     # None: pipeline.circuit.RETUNE_ABOVE_SHARE
    limits: tuple[tuple[str, int], ...] = ()  # [limits] keys given, sorted
    outline_units: str = "mm"  # board-outline.dxf in a unit word's units or "drawing" (the cavity drawing's)
    copper: CopperRules = CopperRules()
    mesh_options: tuple = ()  # [cavity] mesh_* keys, checked by the mesh reader (pipeline/cavity/mesh.py)
    mounts: tuple = ()  # [[board.mount]]: ((x, y), screw, key, line) each (pipeline/mount.py)


@dataclass(frozen=True)
class RunResult:
    """What a run produced: findings, the fit, stage reports, written files."""

    design: Design
    findings: tuple[Finding, ...]
    fit: FitResult | None
    exit_status: int
    written: tuple[Path, ...] = ()
    stage_reports: tuple[Any, ...] = ()
    sweep: Any = None
    fit_json: dict = field(default_factory=dict)
    verdict: Any = None
    routing: Any = None   # pipeline.route.RouteVerdict, or None without a fit


#: The defaults of project.toml's keys, from :class:`Project`'s fields (their one home).
_DEFAULT = {f.name: f.default for f in dataclasses.fields(Project) if f.default is not dataclasses.MISSING}


def _or_default(table: dict, key: str) -> Any:
    """``table[key]`` as written, else the default of the :class:`Project` field ``key``."""
    return table.get(key, _DEFAULT[key])


# --------------------------------------------------------------------------
def _num(src: TomlSource, key: str, v: Any, **checks: Any) -> Any:
    return src.number(key, v, ProjectError, **checks)


def _text(src: TomlSource, key: str, v: Any, choices: tuple[str, ...] | None = None, *, path: bool = False) -> str:
    return src.text(key, v, ProjectError, choices=choices, path=path)


def _unit_word(src: TomlSource, key: str, v: Any, *, also: str | None = None) -> str:
    """``v`` if it is a word of :data:`pipeline.cavity.units.UNIT_WORDS` (or ``also``).

    Otherwise a :class:`ProjectError` at ``key`` listing the words.
    """
    problem = unit_problem(_text(src, key, v), also=also)
    if problem:
        raise src.error(key, problem, ProjectError)
    return v


def _shown(p: Path, root: Path) -> str:
    """A path as shown in messages and findings: relative to the project folder.

    Never absolute and never relative to the working folder, so that the
    files a run writes do not depend on where it was started.
    """
    try:
        return Path(os.path.relpath(p, root)).as_posix()
    except ValueError:  # another drive
        return p.name


def load_project(
    project_dir: str | os.PathLike,
    *,
    design: str | None = None,
    cavity: str | None = None,
    out: str | None = None,
) -> Project:
    """Read ``PROJECT_DIR/project.toml`` with the command line's overrides.

    Parameters
    ----------
    project_dir : str or path
        The project folder, holding ``project.toml``.
    design, cavity, out : str, optional
        Paths as typed on the command line (relative to the working
        folder); they win over ``[project] design`` / ``cavity`` and the
        output folder ``PROJECT_DIR/out``. Keys in the file are relative to
        the file.

    Returns
    -------
    Project
        Paths resolved, lengths in mm; ``warnings`` holds the file's own
        warnings (a board thickness that is not a stock thickness).

    Raises
    ------
    ProjectError
        No folder or file, an unknown table or key, or a bad value, naming
        its key and line; the first fault found, in the order of the steps.
    """
    root = Path(project_dir)
    if not root.is_dir():
        raise ProjectError(str(project_dir), "not a folder: give the project folder that holds project.toml")
    if not (root / "project.toml").is_file():
        raise ProjectError(str(root / "project.toml"), "file not found: a project folder holds project.toml "
                           "(snugboard new DIR writes one to start from)")
    src = load(root / "project.toml", "project.toml", ProjectError)
    _check_tables(src)
    data = src.data
    bd, cv = data.get("board", {}), data.get("cavity", {})
    inputs = _input_paths(src, root, design, cavity)
    board, warnings = _read_board(src, bd)
    order = _read_order(src, data.get("order", {}))
    layer_map = _layer_map(src, cv)
    # not resolved: a symbolic link as the output folder is refused by the writer, not followed
    out_dir = Path(os.path.abspath(out if out is not None else root.resolve() / "out"))
    name = _text(src, "project.name", data.get("project", {}).get("name", root.resolve().name or "project"))
    return Project(name=name, root=root.resolve(), file=src.display, **inputs, out_dir=out_dir, board=board,
                   order=order, **_cavity_settings(src, root, cv, bd), layer_map=layer_map,
                   **_analysis_settings(src, data.get("analysis", {})), warnings=tuple(warnings),
                   limits=tuple(sorted((k, _num(src, f"limits.{k}", v, integer=True, lo=1))
                                       for k, v in data.get("limits", {}).items())),
                   copper=read_copper(src, data.get("copper", {}), board.layers),
                   mounts=_read_mounts(src, bd.get("mount", [])))


def _rel(src: TomlSource, root: Path, key: str, value: Any) -> Path:
    """A path key of the file, relative to the project folder, resolved."""
    return (root / _text(src, key, value, path=True)).resolve()


def _input_paths(src: TomlSource, root: Path, design: str | None, cavity: str | None) -> dict[str, Any]:
    """Design, cavity and parts map, each resolved with its shown name, as :class:`Project` fields.

    A path typed on the command line wins over ``[project] KEY``; no design at all is an error.
    """
    pj = src.data.get("project", {})

    def given(typed: str | None, key: str) -> tuple[Path | None, str]:
        """An input file and its shown name: the command line's, else [project] KEY's, else (None, "")."""
        if typed is not None:
            return Path(typed).resolve(), typed
        if key not in pj:
            return None, ""
        path = _rel(src, root, f"project.{key}", pj[key])
        return path, _shown(path, root.resolve())

    design_path, design_shown = given(design, "design")
    if design_path is None:
        raise src.error("project.design", "no design: set [project] design = \"design.toml\" or pass --design",
                        ProjectError)
    cavity_path, cavity_shown = given(cavity, "cavity")
    parts_map = _rel(src, root, "project.parts_map", pj["parts_map"]) if "parts_map" in pj else None
    return dict(design_path=design_path, design_shown=design_shown, cavity_path=cavity_path,
                cavity_shown=cavity_shown, parts_map=parts_map)


def _layer_map(src: TomlSource, cv: dict) -> Any:
    """``[cavity] layers``, a table (its roles are checked by the cavity reader), or None."""
    layer_map = cv.get("layers")
    if layer_map is not None and not isinstance(layer_map, dict):
        raise src.error("cavity.layers", "expected a table such as { CAVITY = \"Outline\", KEEPOUT = [\"Bosses\"] }",
                        ProjectError)
    return layer_map


def _cavity_settings(src: TomlSource, root: Path, cv: dict, bd: dict) -> dict[str, Any]:
    """``[cavity]`` depth (mm), units, mesh keys and chord tolerance (mm), and ``[board] outline_units``."""
    return dict(
        depth_mm=float(_num(src, "cavity.depth_mm", _or_default(cv, "depth_mm"), lo=0, lo_open=True, hi=1000)),
        units=_unit_word(src, "cavity.units", _or_default(cv, "units")),
        outline_units=_unit_word(src, "board.outline_units", _or_default(bd, "outline_units"), also="drawing"),
        mesh_options=tuple(sorted((k, str(_rel(src, root, f"cavity.{k}", v)) if k == "mesh_lid" else v)
                                  for k, v in cv.items() if k.startswith("mesh_"))),
        chord_tolerance_mm=float(_num(src, "cavity.chord_tolerance_mm", _or_default(cv, "chord_tolerance_mm"),
                                      lo=0, lo_open=True, hi=5)),
    )


def _analysis_settings(src: TomlSource, an: dict) -> dict[str, Any]:
    """``[analysis]`` draws, seed and retune share (None: the circuit package's default)."""
    return dict(
        draws=_num(src, "analysis.draws", _or_default(an, "draws"), integer=True, lo=100, hi=1_000_000),
        seed=_num(src, "analysis.seed", _or_default(an, "seed"), integer=True, lo=0),
        retune_above_share=(float(_num(src, "analysis.retune_above_share", an["retune_above_share"], lo=0, hi=1))
                            if "retune_above_share" in an else None),
    )


def _read_mounts(src: TomlSource, body: Any) -> tuple:
    """``[[board.mount]]`` tables: ``at = [x, y]`` (mm, the drawing's frame) and ``screw``."""
    if isinstance(body, list) and not body:
        return ()
    from .mount import screw

    if not isinstance(body, list) or not all(isinstance(t, dict) for t in body):
        raise src.error("board.mount", "write each mounting boss as a [[board.mount]] table", ProjectError)
    out = []
    for i, t in enumerate(body):
        key, line = f"board.mount[{i}]", src.line(f"board.mount.{i}")
        for k in t:
            if k not in ("at", "screw"):
                raise ProjectError(src.display, f"unknown key {k!r}; expected at, screw", line=line, key=f"{key}.{k}")
        at = t.get("at")
        if not isinstance(at, list) or len(at) != 2:
            raise ProjectError(src.display, f"expected a point at = [x, y] in mm, found {at!r}", line=line,
                               key=f"{key}.at")
        xy = tuple(float(_num(src, f"{key}.at", v)) for v in at)
        s = screw(t.get("screw"), src.display, f"{key}.screw", line, ProjectError)
        out.append((xy, s.name, f"{key}.at", line))
    return tuple(out)


def _check_tables(src: TomlSource) -> None:
    """Every table and key of project.toml is one we know (:data:`_KEYS`); the first that is not is named."""
    for table, body in src.data.items():
        if table not in _KEYS:
            raise src.error(table, f"unknown table [{table}]; expected one of: {', '.join(_KEYS)}", ProjectError)
        if not isinstance(body, dict):
            raise src.error(table, f"[{table}] must be a table", ProjectError)
        for k in body:
            if k not in _KEYS[table]:
                raise src.error(f"{table}.{k}", f"unknown key '{k}' in [{table}]; expected one of: "
                                f"{', '.join(_KEYS[table])}", ProjectError)


def _read_board(src: TomlSource, bd: dict) -> tuple[BoardOptions, list[Finding]]:
    """The ``[board]`` table, and a warning for a thickness that is not a common stock thickness."""
    b = BoardOptions()

    def mm(key: str, default: float, **bounds: Any) -> float:
        return float(_num(src, f"board.{key}", bd.get(key, default), **bounds))

    board = BoardOptions(
        layers=_num(src, "board.layers", bd.get("layers", b.layers), integer=True, lo=1, hi=64),
        thickness_mm=mm("thickness_mm", b.thickness_mm, lo=0, lo_open=True, hi=10),
        sides=_num(src, "board.sides", bd.get("sides", b.sides), integer=True, lo=1, hi=2),
        density=_text(src, "board.density", bd.get("density", b.density), DENSITY_LEVELS),
        edge_clearance_mm=mm("edge_clearance_mm", b.edge_clearance_mm, lo=0, hi=50),
        wall_clearance_mm=mm("wall_clearance_mm", b.wall_clearance_mm, lo=0, hi=50),
        outline=_text(src, "board.outline", bd.get("outline", b.outline), ("region", "rectangle", "smallest")),
        min_inside_radius_mm=mm("min_inside_radius_mm", b.min_inside_radius_mm, lo=0, hi=50),
    )
    warnings = []
    if not any(abs(board.thickness_mm - t) < 1e-9 for t in STANDARD_THICKNESS):
        warnings.append(Finding("warning", "project.thickness", ("board.thickness_mm",),
                                f"{src.display}: board thickness {board.thickness_mm:g} mm is not a common stock thickness "
                                f"({', '.join(f'{t:g}' for t in STANDARD_THICKNESS)} mm); check your fabricator offers it."))
    return board, warnings


def _read_order(src: TomlSource, od: dict) -> OrderOptions:
    """The ``[order]`` table."""
    o = OrderOptions()
    return OrderOptions(
        boards=_num(src, "order.boards", od.get("boards", o.boards), integer=True, lo=1),
        spares_percent=float(_num(src, "order.spares_percent", od.get("spares_percent", o.spares_percent), lo=0, hi=1000)),
        min_spares=_num(src, "order.min_spares", od.get("min_spares", o.min_spares), integer=True, lo=0),
        multiple=_num(src, "order.multiple", od.get("multiple", o.multiple), integer=True, lo=1),
    )


# --------------------------------------------------------------------------
def read_any_design(path: Path, library: Any, *, shown: str, parts_map: Path | None = None,
                    root: Path | None = None, limits: tuple[tuple[str, int], ...] = ()) -> tuple[Design, list[Finding]]:
    """Read a TOML design or, by its ending, a SPICE netlist (``limits``: the project's ``[limits]``)."""
    if path.suffix.lower() in SPICE_SUFFIXES:
        from .spice import read_spice
        from .spice.limits import SpiceLimits
        return read_spice(path, library, display_name=shown, parts_map=parts_map,
                          root=root if root is not None else path.parent, limits=SpiceLimits.from_table(dict(limits)))
    from .design import read_design
    return read_design(path, library, display=shown)


def _categories(design: Design, library: Any) -> dict[str, str]:
    return {p.kind: library.kind(p.kind).category for p in design.parts}


def _read_and_check(path: Path, shown: str, parts_map: Path | None, root: Path | None, *,
                    limits: tuple[tuple[str, int], ...] = (), progress: Progress | None = None,
                    **analysis: Any):
    """Read a design, build its graph, run the connection and value checks and analyse its blocks.

    Returns ``(design, library with the design's own kinds, findings, block reports)``.
    """
    from .check import check_connections
    from .circuit import analyse_blocks
    from .graph import build_graph
    from .library import load_library
    from .ratings import check_values

    library = load_library()
    design, warnings = read_any_design(Path(path), library, shown=shown, parts_map=parts_map, root=root,
                                       limits=limits)
    lib = library.with_kinds(design.kinds).with_packages(design.packages)
    g = build_graph(design)
    findings = (*warnings, *check_connections(design, g, _categories(design, lib)), *check_values(design))
    reports, block_findings = analyse_blocks(design, progress=progress, **analysis)
    return design, lib, (*findings, *block_findings), reports


def _analysis(project: Project) -> dict[str, Any]:
    """The ``[analysis]`` keys as keyword arguments of :func:`pipeline.circuit.analyse_blocks`."""
    out: dict[str, Any] = {"draws": project.draws, "seed": project.seed}
    if project.retune_above_share is not None:
        out["retune_above_share"] = project.retune_above_share
    return out


def check_design(path: Path, *, shown: str | None = None, parts_map: Path | None = None,
                 root: Path | None = None) -> tuple[Design, tuple[Finding, ...]]:
    """Read a design file alone and run every check that needs no drawing: connections, values
    and the declared blocks (Monte Carlo with the default draws and seed of ``[analysis]``)."""
    design, _, findings, _ = _read_and_check(Path(path), shown or str(path), parts_map, root)
    return design, group_findings(findings)  # grouped as run() groups them: check and run agree


def check_project(project: Project) -> tuple[Design, tuple[Finding, ...]]:
    """Every check of ``project`` that needs no drawing, as :func:`run` makes it: the project file's
    own warnings, then the design's reading, connection, value and block findings with the project's
    parts map, ``[limits]`` and ``[analysis]`` draws and seed, grouped as :func:`run` groups them.

    The findings are those :func:`run` reports before the cavity's (the same design, settings and
    seed give the same figures). Nothing is written. Cost: reading and the block analysis.
    """
    design, _, checked, _ = _read_and_check_project(project)
    return design, group_findings((*project.warnings, *checked))


def _read_and_check_project(project: Project, progress: Progress | None = None):
    """:func:`_read_and_check` of ``project``'s design with its parts map, ``[limits]`` and
    ``[analysis]`` settings: the one call :func:`run` and :func:`check_project` share, so the two
    check the design alike."""
    return _read_and_check(project.design_path, project.design_shown, project.parts_map, project.root,
                           limits=project.limits, progress=progress, **_analysis(project))


def inspect_cavity(path: Path, *, shown: str | None = None, project: Project | None = None):
    """Read a cavity drawing alone and derive its usable region.

    Layer map, units, depth and board options come from ``project`` when
    given, else the defaults of CONTRACT section 1. Returns ``(cavity,
    region, findings)``; bad drawings raise
    :class:`~pipeline.errors.CavityError`.
    """
    from .region import usable_region

    cavity, cw = _cavity(Path(path), shown or str(path), project)
    region, rw = usable_region(cavity, project.board if project else BoardOptions())
    return cavity, region, (*cw, *rw)


def _cavity(path: Path, shown: str, project: Project | None) -> tuple[Any, list[Finding]]:
    """Read a cavity drawing with the project's ``[cavity]`` settings and ``[limits]``, its mounting
    bosses marked; without a project, with the cavity reader's defaults."""
    from .cavity import Limits, read_cavity

    if project is None:
        return read_cavity(path, display_name=shown)
    cavity, warnings = read_cavity(path, display_name=shown, layer_map=project.layer_map,
                                   default_units=project.units, depth_mm=project.depth_mm,
                                   chord_tol_mm=project.chord_tolerance_mm,
                                   limits=Limits.from_table(dict(project.limits)),
                                   mesh_options=dict(project.mesh_options))
    return _with_mounts(cavity, project), warnings


def write_cavity_dxf(cavity: Any, out: Path, *, shown: str) -> None:
    """Write ``cavity`` as a DXF drawing to ``out``, a new file: never over an existing one."""
    from .export.dxf import cavity_dxf

    data = cavity_dxf(cavity, timestamp=_source_date_epoch())
    try:
        with open(out, "xb") as f:  # "x": fails when the file exists, so nothing is overwritten
            f.write(data)
    except FileExistsError:
        raise OutputError(shown, "exists already: give a new file name (snugboard never writes over a file)") from None
    except OSError as exc:
        raise OutputError(shown, f"cannot be written ({exc.strerror or exc})") from None


def _source_date_epoch() -> int | None:
    v = os.environ.get("SOURCE_DATE_EPOCH")
    if v is None or not v.strip():
        return None
    try:
        return int(v)
    except ValueError:
        raise ProjectError("SOURCE_DATE_EPOCH", f"must be a whole number of seconds, found {v!r}") from None


def run(project: Project, *, progress: Progress | None = None, sweep: bool = False, route: bool = True) -> RunResult:
    """Run every stage of ``project`` and write all its outputs at once.

    Parameters
    ----------
    project : Project
        From :func:`load_project`.
    progress : callable, optional
        ``progress(message, fraction)`` during the long steps (placement, sweep, routing).
    sweep : bool
        Also place once per passive size (:func:`pipeline.sweep.sweep_sizes`).
    route : bool
        Route a fitting board unless ``[copper] route = false`` (``--no-route`` sets it false).

    Returns
    -------
    RunResult
        Findings in the order the stages made them (notes of one kind grouped into one:
        :func:`pipeline.findings_group.group_findings`), the fit, the verdict and the files written.

    Notes
    -----
    Order: design -> graph -> connection checks -> value and rating checks ->
    declared blocks -> (with a cavity) cavity -> region -> area -> placement
    and outline -> routing -> outputs, all kept in memory and written together
    by :func:`pipeline.export.atomic.write_all`. Raises
    :class:`~pipeline.errors.InputError` on bad input, before anything is
    written. Cost: the placement and routing steps dominate.
    """
    from .export import atomic

    timestamp = _source_date_epoch()
    design, lib, checked, reports = _read_and_check_project(project, progress)
    files, order_files = _design_files(design, lib, project, reports, timestamp)
    placed, findings = _placed(project, design, lib, sweep, route, files, [*project.warnings, *checked], progress)
    findings = list(group_findings(findings))  # every finding made: notes of one kind as one (findings_group)
    if placed.fit is not None:  # fit.json's warnings and the report show the same grouped notes
        placed = dataclasses.replace(placed, fit=dataclasses.replace(placed.fit,
                                                                     warnings=group_findings(placed.fit.warnings)))
    verdict = _run_verdict(findings, placed)
    fit_json, svg = _drawing_files(project, design, lib, placed, verdict, files)
    files.update(_report_files(project, design, reports, placed, findings, svg, verdict, order_files))
    written = atomic.write_all(project.out_dir, files, protect=_protected(project, design))
    return RunResult(design=design, findings=tuple(findings), fit=placed.fit, exit_status=verdict.exit_status,
                     written=tuple(written), stage_reports=tuple(reports), sweep=placed.sweep, fit_json=fit_json,
                     verdict=verdict, routing=placed.routing)


@dataclass
class _Placed:
    """The cavity half of a run: all ``None`` (``extra`` empty) when the project gives no cavity."""

    cavity: Any = None
    region: Any = None
    items: Any = None          # the placer's items (pipeline.area.items_from_design)
    fit: FitResult | None = None
    sweep: Any = None          # pipeline.sweep.SweepResult with --sweep
    routing: Any = None        # pipeline.route.RouteVerdict
    routed: Any = None         # pipeline.route.RouteOutcome when the router ran
    extra: dict = field(default_factory=dict)  # fit.json's passive_sizes and routing


def _design_files(design: Design, lib: Any, project: Project, reports: Any,
                  timestamp: int | None) -> tuple[dict[str, bytes], dict[str, bytes]]:
    """The outputs of the design alone (BOM, netlists, blocks.json), and the BOM files (the report's order)."""
    from .export import bom, edif, netlist, results
    from .export import spice as spice_out

    files: dict[str, bytes] = {}
    features = frozenset(k.name for k in lib.kinds() if k.board_feature)  # never ordered
    order_files = bom.bom_files(design, project.order, features)
    files.update(order_files)
    files["netlist.csv"] = netlist.netlist_csv(design)
    files["netlist.json"] = netlist.netlist_json(design)
    files["netlist.edf"] = edif.edif_netlist(design, timestamp=timestamp)
    files["design.cir"] = spice_out.spice_netlist(design)
    if reports:
        files["blocks.json"] = results.dump_json([r.to_dict() for r in reports])
    return files, order_files


def _placed(project: Project, design: Design, lib: Any, sweep: bool, route: bool, files: dict[str, bytes],
            findings: list[Finding], progress: Progress | None) -> tuple[_Placed, list[Finding]]:
    """Cavity, placement, sweep and routing (adding their files to ``files``), and the findings so far."""
    if project.cavity_path is None:
        return _Placed(), [*findings, Finding(
            "info", "fit.no-cavity", (),
            "No cavity drawing given: the fit was not checked. Set [project] cavity or pass --cavity.")]
    cavity, region, items, fit, sweep_result, fit_findings = _fit(project, design, lib, sweep, progress, route)
    findings = [*findings, *fit_findings]
    extra: dict[str, Any] = {}
    if sweep_result is not None:
        extra["passive_sizes"] = sweep_result.to_dict()
    fit, route_verdict, routed = _route(project, route, fit, items, region, cavity.board, design, lib, files,
                                        progress)
    if route_verdict.spread_mm:  # the routed placement is a spread one: say where its rules stand
        from .place_rules import refresh_near_notes
        findings = refresh_near_notes(findings, items, fit.placements)
        fit = dataclasses.replace(fit, warnings=tuple(refresh_near_notes(fit.warnings, items, fit.placements)))
    findings = [*findings, *_route_findings(route_verdict)]
    extra["routing"] = route_verdict.to_dict()
    return _Placed(cavity, region, items, fit, sweep_result, route_verdict, routed, extra), findings


def _run_verdict(findings: list[Finding], placed: _Placed) -> Any:
    """The overall verdict; routing counts only when it was tried (a board that does not fit is not routed)."""
    from .verdict import decide

    tried = placed.routing is not None and placed.routing.reason != NOT_FITTING
    return decide(findings, placed.fit, routing=placed.routing if tried else None)


def _drawing_files(project: Project, design: Design, lib: Any, placed: _Placed, verdict: Any,
                   files: dict[str, bytes]) -> tuple[dict, bytes | None]:
    """Add fit.json, fit.svg and board-outline.dxf to ``files`` (with a fit); return fit.json's dict and the SVG."""
    fit, routed = placed.fit, placed.routed
    if fit is None:
        return {}, None
    from .cavity.units import cavity_units, unit_scale
    from .export import dxf as dxf_out
    from .export import results
    from .export import svg as svg_out
    fit_json = results.fit_dict(fit, placed.extra, verdict=verdict)
    files["fit.json"] = results.dump_json(fit_json)
    svg = svg_out.fit_svg(placed.cavity, placed.region, fit, title=design.name, verdict=verdict,
                          facts=svg_out.part_facts(design, placed.items), pads=_pads(fit, design, lib),
                          routing=routed.routing if routed else None, demand=routed.demand if routed else None)
    files["fit.svg"] = svg
    if fit.board_outline is not None and not fit.board_outline.is_empty:
        drawing = project.outline_units == "drawing"
        units = cavity_units(placed.cavity) if drawing else unit_scale(project.outline_units)
        files["board-outline.dxf"] = dxf_out.board_outline_dxf(fit.board_outline, units=units)
    return fit_json, svg


def _report_files(project: Project, design: Design, reports: Any, placed: _Placed, findings: list[Finding],
                  svg: bytes | None, verdict: Any, order_files: dict[str, bytes]) -> dict[str, bytes]:
    """findings.json and report.html (with the declared blocks' sections)."""
    from .export import report as report_out
    from .export import results
    from .export.blocks import block_sections

    return {"findings.json": results.findings_json(findings),
            "report.html": report_out.report_html(
                title=_report_title(design), fit=placed.fit, findings=findings, fit_svg=svg,
                sections=list(block_sections(reports)), verdict=verdict, order_files=order_files,
                board=project.board)}


def _report_title(design: Design) -> str:
    """The report's title: the design's name, and its revision said as one ("Trigger click, revision A")."""
    return f"{design.name}, revision {design.revision}" if design.revision else design.name


def _protected(project: Project, design: Design) -> list[Path]:
    """Every input of the run: the writer never writes over one."""
    protect = [project.design_path, project.root / "project.toml", *design.inputs]
    if project.cavity_path is not None:
        protect.append(project.cavity_path)
    if project.parts_map is not None:
        protect.append(project.parts_map)
    return protect


def _fit(project: Project, design: Design, lib: Any, sweep: bool, progress: Progress | None, route: bool = True):
    """Cavity, region, placement (with tried advice) and, with ``sweep``, the size sweep.

    Returns ``(cavity, region, placer items, fit, sweep_result, findings)``.
    """
    from .advice import tried_advice
    from .area import items_from_design
    from .place import place_and_fit
    from .region import usable_region

    cavity, cw = _cavity(project.cavity_path, project.cavity_shown, project)
    region, rw = usable_region(cavity, project.board)
    items = items_from_design(design, lib, project.board.density)
    fit = place_and_fit(items, region, project.board, user_board=cavity.board, progress=progress)
    fit = tried_advice(fit, items, cavity, project.board, STANDARD_THICKNESS, progress=progress)
    placer = fit.warnings  # fit.tight, fit.region-split, fit.self-check, fit.bottom-side: findings too
    fit = dataclasses.replace(fit, warnings=(*cw, *rw, *placer))
    sweep_result = None
    if sweep:
        from .sweep import sweep_sizes
        sweep_result = sweep_sizes(design, lib, region, project.board, progress=progress, user_board=cavity.board,
                                   rules=project.copper if route else None)
    return cavity, region, items, fit, sweep_result, [*cw, *rw, *placer, *_fit_findings(fit)]


def _with_mounts(cavity: Any, project: Project) -> Any:
    """The cavity with project.toml's ``[[board.mount]]`` bosses marked (pipeline/mount.py)."""
    from .mount import mark_points

    return mark_points(cavity, project.mounts, project.file, ProjectError) if project.mounts else cavity


def _pads(fit: FitResult, design: Design, lib: Any) -> tuple:
    """The placed parts' copper pads (the routing step's one pad adapter), for the picture."""
    from shapely.geometry import Polygon

    from .route.pads import board_from_placement

    outline = fit.board_outline if fit.board_outline is not None else Polygon()
    return board_from_placement(outline, fit.placements, design, lib, ("top", "bottom")).pads


def _route(project: Project, route: bool, fit: FitResult, items: Any, region: Any, user_board: Any, design: Design,
           lib: Any, files: dict[str, bytes], progress: Progress | None):
    """Route the placed board (issue 9), spreading the parts when it must.

    Returns ``(fit, verdict, outcome)``: the fit whose placement was routed
    and the :class:`pipeline.route.RouteOutcome` (None when skipped). Adds
    routes.json, board-copper.dxf and placement.csv to ``files``.
    """
    from .export.placement import placement_csv
    from .route import skipped

    out = None
    if not (route and project.copper.route):
        verdict = skipped("routing is switched off (--no-route or [copper] route = false): the verdict is placement only")
    elif not fit.fits or fit.board_outline is None or fit.board_outline.is_empty:
        verdict = skipped(NOT_FITTING)
    else:  # the router and its writers are imported only when routing runs
        from .export.results import dump_json
        from .export.routes import routes_dxf
        from .route import route_fit
        fit, out = route_fit(fit, items, region, project.board, design, lib, project.copper, user_board=user_board,
                             progress=progress)
        if project.board.outline == "smallest":
            from .route.smallest import smallest_board
            found = smallest_board(fit, items, region, project.board, design, lib, project.copper, progress=progress)
            if found is not None:
                fit, out = found.fit, found.outcome
                out = dataclasses.replace(out, verdict=dataclasses.replace(out.verdict, smallest=found))
        files["routes.json"] = dump_json(out.document)
        files["board-copper.dxf"] = routes_dxf(out.board, project.copper, out.routing, timestamp=_source_date_epoch())
        verdict = out.verdict
    if fit.placements:
        files["placement.csv"] = placement_csv(fit.placements)
    return fit, verdict, out


def _route_findings(v) -> list[Finding]:
    small = [Finding("info", "route.smallest", (), _smallest_note(v.smallest))] if v.smallest is not None else []
    return small + _verdict_findings(v)


def _smallest_note(s) -> str:
    return (f"Smallest board that places and routes: {s.area_mm2:.0f} mm2, {s.ratio:.2f} x the courtyard sum "
            f"(rule of thumb {s.rule_of_thumb_ratio:.2f} x); a {s.mode} at {s.angle_deg:g} deg, aspect "
            f"{s.aspect:.2f}, found in {s.tries} tries.")


def _verdict_findings(v) -> list[Finding]:
    if v.status == "routed":
        spread = (f" after spreading the parts ({v.spread_mm:g} mm more room around each courtyard)"
                  if v.spread_mm else "")
        return [Finding("info", "route.routed", (), f"Routed{spread}: every connection made ({v.vias} vias, "
                        f"{v.wirelength_mm:.0f} mm of track) and the independent copper check is clean.")]
    if v.status == "skipped":
        return [Finding("info", "route.skipped", (), f"Routing skipped: {v.reason}.")]
    out = [Finding("error", "route.defect", (), f"Router defect: the independent copper check found: {d}")
           for d in v.defects]
    if v.open_nets:  # the verdict makes the open nets its blocking reason; this note gives the figures
        where = "; congestion near " + ", ".join(f"({x:.1f}, {y:.1f}) mm" for x, y in v.congestion[:3]) \
            if v.congestion else ""
        out.append(Finding("info", "route.demand", v.open_nets,
                           f"Placed, routing not proven: {len(v.open_nets)} net(s) open ({', '.join(v.open_nets)}); "
                           f"routing demand peak {v.demand_peak:.2f}, 90th percentile {v.demand_p90:.2f} of "
                           f"capacity{where}. Give the board more room or more layers."))
    return out


def _fit_findings(fit: FitResult) -> list[Finding]:
    if fit.fits:
        return [Finding("info", "fit.fits", (), f"All {len(fit.placements)} fitted parts are placed inside the cavity.")]
    return [Finding("error", "fit.blocked", tuple(fit.unplaced), reason) for reason in fit.blocked_by] or [
        Finding("error", "fit.blocked", tuple(fit.unplaced), "The parts do not fit in the cavity.")]
