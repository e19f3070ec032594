"""The command line: the only module that imports click, prints or exits.

Commands collect options and call one function each in
:mod:`pipeline.project` or :mod:`pipeline.library`; :class:`_Group` is the
one place where errors become messages and exit codes:

* :class:`~pipeline.errors.SnugboardError` (bad input, unwritable output):
  its message once on stderr, exit 2, no traceback;
* anything else is a bug: one line saying so, exit 3; set
  ``SNUGBOARD_DEBUG=1`` to see the traceback.

Exit status (CONTRACT section 4): 0 clean and fits, 1 does not fit or the
checks found errors, 2 bad input.
"""

from __future__ import annotations

import dataclasses
import gc
import json
import os
import signal
import sys
import threading
from contextlib import contextmanager
from typing import Any, Iterator

import click

from . import __version__
from .errors import SnugboardError, shown


def _say(text: str, err: bool = False) -> None:
    """Print one line of human text; characters from input files that could steer the terminal
    (ESC, CR, right-to-left overrides...) are shown escaped (:func:`pipeline.errors.shown`).
    JSON output is printed by ``json.dumps``, which escapes them itself (ASCII only)."""
    click.echo(shown(text), err=err)


class _Stopped(KeyboardInterrupt):
    """SIGTERM or SIGHUP, raised like Ctrl-C so that every clean-up on the way out runs."""

    def __init__(self, signum: int) -> None:
        super().__init__(signum)
        self.signum = signum


def _raise_stopped(signum: int, _frame: Any) -> None:
    raise _Stopped(signum)


@contextmanager
def _stoppable() -> Iterator[None]:
    """SIGTERM and SIGHUP end the command as Ctrl-C does (the main thread only; restored after)."""
    if threading.current_thread() is not threading.main_thread():
        yield
        return
    saved = {s: signal.signal(s, _raise_stopped) for s in (signal.SIGTERM, signal.SIGHUP)}
    try:
        yield
    finally:
        for s, h in saved.items():
            signal.signal(s, h)


#: Python's cyclic garbage collector's thresholds while a command runs (``gc.set_threshold``; the
#: interpreter's default is (700, 10, 10)). A run builds hundreds of thousands of long-lived objects
#: (parts, pins, pads, shapes, output text) and makes few reference cycles, so at the default every
#: 700 allocations start a collection and the older generations are traversed again and again to
#: free nothing: at 16,000 parts 19 full collections took about 14 s of a 40 s run (issue 11,
#: measured). Raising the first threshold to 50,000 and the older ones to 20 and 100 keeps the
#: collector for the cycles there are (the Python documentation, "gc: Garbage Collector interface",
#: describes the thresholds and this use); the thresholds are restored when the command ends.
GC_THRESHOLDS = (50_000, 20, 100)


@contextmanager
def _fewer_collections() -> Iterator[None]:
    """:data:`GC_THRESHOLDS` inside the block, the previous thresholds restored on leaving."""
    was = gc.get_threshold()
    gc.set_threshold(*GC_THRESHOLDS)
    try:
        yield
    finally:
        gc.set_threshold(*was)


class _Group(click.Group):
    def invoke(self, ctx: click.Context) -> Any:
        try:
            with _stoppable(), _fewer_collections():
                return super().invoke(ctx)
        except KeyboardInterrupt as exc:
            signum = getattr(exc, "signum", signal.SIGINT)
            _say("snugboard: stopped; the output folder keeps its previous files", err=True)
            ctx.exit(128 + signum)
        except SnugboardError as exc:
            if ctx.meta.get("snugboard.json"):
                click.echo(json.dumps({"exit_status": exc.exit_status, "error": str(exc),
                                       "findings": [], "fit": None}, indent=2))
            _say(f"snugboard: {exc}", err=True)
            ctx.exit(exc.exit_status)
        except (click.exceptions.Exit, click.exceptions.Abort, click.ClickException):
            raise
        except BrokenPipeError:  # output piped into `head` and closed: not an error
            devnull = os.open(os.devnull, os.O_WRONLY)
            os.dup2(devnull, sys.stdout.fileno())
            ctx.exit(0)
        except Exception as exc:  # a bug, not bad input
            if os.environ.get("SNUGBOARD_DEBUG"):
                raise
            _say(f"snugboard: internal error ({type(exc).__name__}: {exc}); "
                       "set SNUGBOARD_DEBUG=1 to see where, and please report it.", err=True)
            ctx.exit(3)


class _Progress:
    """Progress on stderr, only to a terminal and never under --json."""

    def __init__(self, enabled: bool) -> None:
        self.enabled = enabled and sys.stderr.isatty()
        self.last = ""

    def __call__(self, message: str, fraction: float) -> None:
        if not self.enabled:
            return
        text = f"{message} {100 * max(0.0, min(1.0, fraction)):3.0f}%"
        if text != self.last:
            click.echo("\r" + text.ljust(60), err=True, nl=False)
            self.last = text

    def done(self) -> None:
        if self.enabled and self.last:
            click.echo("\r" + " " * 60 + "\r", err=True, nl=False)


def _echo_findings(findings, err: bool, verbose: bool = False) -> None:
    """Errors and warnings always; notes (info) only with --verbose. A long subject is shortened
    ("and N more"); findings.json and --json keep it whole."""
    from .findings_group import listed
    from .model import SEVERITY_WORDS

    for f in findings:
        if f.severity == "info" and not verbose:
            continue
        subj = f" [{listed(f.subject)}]" if f.subject else ""
        _say(f"{SEVERITY_WORDS[f.severity]}: {f.message}{subj}", err=err)


def _echo_sweep(sw: dict, err: bool) -> None:
    _say(f"passive sizes ({len(sw['swept_refs'])} two-terminal passives swept):", err=err)
    _say(f"  {'size':<6}{'fits':<6}{'routing':<9}{'courtyards mm2':>15}{'estimate mm2':>14}{'margin mm2':>12}  not placed",
               err=err)
    for row in sw["sizes"]:
        _say(f"  {row['size']:<6}{'yes' if row['fits'] else 'no':<6}{row.get('routing', '-'):<9}"
             f"{row['courtyard_area_mm2']:>15.1f}"
                   f"{row['estimated_board_area_mm2']:>14.1f}{row['margin_mm2']:>12.1f}  "
                   f"{' '.join(row['unplaced']) or '-'}", err=err)
    best = sw.get("largest_fitting")
    if best:
        _say(f"  largest size that fits: {best} (margin {sw['margin_mm2']:.1f} mm2: {sw['margin_definition']})",
                   err=err)
    else:
        _say("  no size fits", err=err)


def _where(path) -> str:
    """A folder as the user would type it: relative when below the working folder."""
    rel = os.path.relpath(path)
    return str(path) if rel.startswith("..") else rel


def _counts(findings) -> str:
    n = {s: sum(1 for f in findings if f.severity == s) for s in ("error", "warning", "info")}
    return f"{n['error']} error(s), {n['warning']} warning(s), {n['info']} note(s)"


@click.group(cls=_Group, context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(__version__, prog_name="snugboard")
def main() -> None:
    """Check that a small add-on board fits the free cavity inside an enclosure,
    and write its outline, netlist and ordering BOM."""


@main.command("run")
@click.argument("project_dir", type=click.Path(file_okay=False))
@click.option("--design", "design", metavar="FILE", help="Design file to use instead of [project] design.")
@click.option("--cavity", "cavity", metavar="FILE", help="Cavity drawing (DXF) to use instead of [project] cavity.")
@click.option("--out", "out", metavar="DIR", help="Output folder (default PROJECT_DIR/out).")
@click.option("--sweep", is_flag=True, help="Also re-run the fit with every two-terminal passive at 0201..1206.")
@click.option("--json", "as_json", is_flag=True, help="Print one JSON object to stdout; human text to stderr.")
@click.option("-v", "--verbose", is_flag=True, help="Also show notes (info findings).")
@click.option("--no-route", is_flag=True, help="Skip routing: the verdict is placement only.")
@click.pass_context
def run_cmd(ctx: click.Context, project_dir: str, design: str | None, cavity: str | None, out: str | None,
            sweep: bool, as_json: bool, verbose: bool, no_route: bool) -> None:
    """Read PROJECT_DIR/project.toml, check the design, fit it in the cavity, write the outputs."""
    from .project import load_project, run

    ctx.meta["snugboard.json"] = as_json
    project = load_project(project_dir, design=design, cavity=cavity, out=out)
    progress = _Progress(not as_json)
    try:
        result = run(project, progress=progress, sweep=sweep, route=not no_route)
    finally:
        progress.done()
    err = as_json
    _echo_findings(result.findings, err, verbose)
    if not verbose:  # the declared blocks' figures, spread and retune proposals show even without -v
        for f in result.findings:
            if f.check in ("block.summary", "block.retune"):
                _say(f"block: {f.message}", err=err)
    if result.sweep is not None:
        _echo_sweep(result.sweep.to_dict(), err)
    if result.fit is not None:
        f = result.fit
        _say(f"fit: usable region {f.region_area_mm2:.1f} mm2, courtyards {f.courtyard_area_mm2:.1f} mm2, "
                   f"estimated board {f.estimate.low_mm2:.0f}..{f.estimate.high_mm2:.0f} mm2 "
                   f"(expected {f.estimate.expected_mm2:.0f})", err=err)
    if result.routing is not None:
        _say(f"routing: {result.routing.label}", err=err)
        small = getattr(result.routing, "smallest", None)
        if small is not None and result.fit is not None:
            est = result.fit.estimate.expected_mm2 / result.fit.courtyard_area_mm2
            _say(f"smallest board: {small.area_mm2:.0f} mm2 = {small.ratio:.2f} x the courtyard sum "
                 f"(routed, at {small.angle_deg:g} deg); rule of thumb {est:.2f} x", err=err)
    _say(f"{result.design.name}: {_counts(result.findings)}; wrote {len(result.written)} files to "
               f"{_where(project.out_dir)}", err=err)
    _echo_verdict(result.verdict, err)
    if as_json:
        from .export.results import findings_list
        click.echo(json.dumps({"exit_status": result.verdict.exit_status, "verdict": result.verdict.to_dict(),
                               "findings": findings_list(result.findings), "fit": result.fit_json or None},
                              indent=2))
    ctx.exit(result.verdict.exit_status)


def _echo_verdict(verdict, err: bool) -> None:
    """The verdict last, where the eye lands: its headline, then each blocking reason."""
    _say(f"verdict: {verdict.headline}", err=err)
    for r in verdict.reasons:
        if r.blocking:
            _say(f"  blocks: {r.message}", err=err)


@main.command("check")
@click.argument("design_file", metavar="DESIGN_FILE|PROJECT_DIR", type=click.Path())
@click.option("--parts-map", metavar="FILE", help="Parts map for a SPICE design (kinds and packages).")
@click.option("--json", "as_json", is_flag=True, help="Print one JSON object to stdout.")
@click.option("-v", "--verbose", is_flag=True, help="Also show notes (info findings).")
@click.pass_context
def check_cmd(ctx: click.Context, design_file: str, parts_map: str | None, as_json: bool, verbose: bool) -> None:
    """Check a design without its drawing: connections, values and declared blocks (everything but the fit).

    Given a project folder, its design with the project's parts map, limits and [analysis] settings:
    the same findings and verdict that run gives before the cavity.
    """
    from pathlib import Path

    from .project import check_design, check_project, load_project

    ctx.meta["snugboard.json"] = as_json
    from .verdict import decide

    if Path(design_file).is_dir():
        if parts_map:
            raise click.UsageError("--parts-map is for a design file; a project folder names its own "
                                   "([project] parts_map in project.toml)")
        design, findings = check_project(load_project(design_file))
    else:
        design, findings = check_design(Path(design_file), shown=design_file,
                                        parts_map=Path(parts_map) if parts_map else None)
    verdict = decide(findings, None, fit_asked=False)
    if as_json:
        from .export.results import findings_list
        click.echo(json.dumps({"exit_status": verdict.exit_status, "verdict": verdict.to_dict(),
                               "findings": findings_list(findings), "fit": None}, indent=2))
    else:
        _echo_findings(findings, False, verbose)
        _say(f"{design.name}: {len(design.parts)} parts, {len(design.nets)} nets; {_counts(findings)}")
        _echo_verdict(verdict, False)
    ctx.exit(verdict.exit_status)


@main.command("new")
@click.argument("folder", type=click.Path())
@click.pass_context
def new_cmd(ctx: click.Context, folder: str) -> None:
    """Write a starter project into FOLDER (new or empty): project.toml, a design and a cavity drawing."""
    from .starter import write_starter

    written = write_starter(folder)
    _say(f"wrote {', '.join(p.name for p in written)} to {_where(folder)}; "
               f"try: snugboard run {_where(folder)}")


@main.command("cavity")
@click.argument("dxf_file", type=click.Path(dir_okay=False))
@click.option("--project", "project_dir", metavar="DIR",
              help="Take the layer map, units, depth and board options from DIR/project.toml.")
@click.option("--json", "as_json", is_flag=True, help="Print one JSON object to stdout.")
@click.option("--write-dxf", "write_dxf", metavar="OUT", help="Also write the cavity as a DXF drawing on "
              "snugboard's layers, in its own units (a new file; never over an existing one).")
@click.pass_context
def cavity_cmd(ctx: click.Context, dxf_file: str, project_dir: str | None, as_json: bool,
               write_dxf: str | None) -> None:
    """Read a cavity drawing, measured-cavity file or shell mesh (STL, OBJ, 3MF) alone: units, outline,
    keep-outs, depth zones, region."""
    from pathlib import Path

    from .project import inspect_cavity, load_project, write_cavity_dxf

    ctx.meta["snugboard.json"] = as_json
    project = load_project(project_dir) if project_dir else None
    cavity, region, findings = inspect_cavity(Path(dxf_file), shown=dxf_file, project=project)
    if write_dxf:
        write_cavity_dxf(cavity, Path(write_dxf), shown=write_dxf)
    zones = [{"max_part_height_mm": round(z.max_height_mm, 4), "area_mm2": round(z.polygon.area, 4)}
             for z in region.zones]
    x0, y0, x1, y1 = (round(v, 4) for v in cavity.outline.bounds)
    info = {
        "units": cavity.unit_name, "mm_per_unit": cavity.mm_per_unit,
        "cavity_area_mm2": round(cavity.outline.area, 4), "cavity_bounds_mm": [x0, y0, x1, y1],
        "keepouts": len(cavity.keepouts),
        "depth_zones": [{"depth_mm": z.depth_mm, "layer": z.layer, "area_mm2": round(z.polygon.area, 4)}
                        for z in cavity.depth_zones],
        "board_given": cavity.board is not None,
        "region_area_mm2": round(region.area_mm2, 4), "height_zones": zones,
    }
    if as_json:
        from .export.results import findings_list
        click.echo(json.dumps({"exit_status": 0, "cavity": info, "findings": findings_list(findings)}, indent=2))
        return
    _echo_findings(findings, False)
    _say(f"{dxf_file}: units {cavity.unit_name} ({cavity.mm_per_unit:g} mm each); cavity "
               f"{x1 - x0:.2f} x {y1 - y0:.2f} mm, {cavity.outline.area:.1f} mm2; {len(cavity.keepouts)} keep-out(s); "
               f"{len(cavity.depth_zones)} depth zone(s)" + ("; BOARD outline given" if cavity.board is not None else ""))
    for f in findings:
        if f.check == "cavity.mesh-floor":
            _say(f"  {f.message}")
    mounted = {m.keepout: m for m in region.mounts}
    for i, k in enumerate(cavity.keepouts):
        c, m = k.centroid, mounted.get(i)
        extra = f"; mounting boss: {m.screw} hole {m.hole_mm:g} mm, head ring {m.ring_mm:g} mm" if m else ""
        _say(f"  keep-out {i + 1}: centre ({round(c.x, 2) + 0.0:.2f}, {round(c.y, 2) + 0.0:.2f}) mm, {k.area:.1f} mm2"
             + extra)
    for z in cavity.depth_zones:
        _say(f"  depth zone {z.layer}: {z.depth_mm:g} mm deep on {z.polygon.area:.1f} mm2")
    _say(f"usable board region {region.area_mm2:.1f} mm2:")
    for z in region.zones:
        _say(f"  parts up to {z.max_height_mm:.2f} mm tall on {z.polygon.area:.1f} mm2")


@main.command("packages")
@click.argument("names", nargs=-1)
@click.option("--json", "as_json", is_flag=True, help="Print JSON instead of a table.")
@click.pass_context
def packages_cmd(ctx: click.Context, names: tuple[str, ...], as_json: bool) -> None:
    """List the footprint library's packages with their sizes and courtyards (mm)."""
    from .library import load_library

    ctx.meta["snugboard.json"] = as_json
    lib = load_library()
    pkgs = [lib.package(n) for n in names] if names else list(lib.packages())
    if as_json:
        click.echo(json.dumps([_package_dict(p) for p in pkgs], indent=2))
        return
    head = f"{'package':<18}{'pins':>5}{'pitch':>7}{'body LxW':>13}{'H max':>7}{'land LxW':>13}  courtyard most / nominal / least"
    _say(head)
    for p in pkgs:
        cy = " / ".join(f"{c.length_mm:.2f}x{c.width_mm:.2f}" for c in p.courtyards)
        _say(f"{p.name:<18}{p.pin_count:>5}{p.pitch_mm:>7.2f}{p.body_length_mm:>7.2f}x{p.body_width_mm:<5.2f}"
             f"{p.height_mm:>7.2f}{p.land_length_mm:>7.2f}x{p.land_width_mm:<5.2f}  {cy}")
        if names:
            _say(f"  aliases: {', '.join(p.aliases) or '-'}; source: {p.source}")
            _say("  pads at the nominal level (x, y, size mm; package frame, pin 1 first):")
            for d in p.pads:
                hole = f" hole {d.drill_mm:.2f}" if d.drill_mm else ""
                _say(f"    {d.number:>3} {d.shape:<9} at ({d.x_mm:7.3f}, {d.y_mm:7.3f})"
                     f"  {d.width_mm:.3f} x {d.height_mm:.3f}{hole}")


def _package_dict(p) -> dict[str, Any]:
    return {
        "name": p.name, "aliases": list(p.aliases), "family": p.family, "pin_count": p.pin_count,
        "pitch_mm": p.pitch_mm, "body_length_mm": p.body_length_mm, "body_width_mm": p.body_width_mm,
        "height_mm": p.height_mm, "land_length_mm": p.land_length_mm, "land_width_mm": p.land_width_mm,
        "courtyards": {c.level: [c.length_mm, c.width_mm] for c in p.courtyards}, "source": p.source,
        "pads": {lv: [dataclasses.asdict(d) for d in pads] for lv, pads in p.pads_by_level},
    }


@main.command("kinds")
@click.argument("names", nargs=-1)
@click.option("--json", "as_json", is_flag=True, help="Print JSON instead of a table.")
@click.pass_context
def kinds_cmd(ctx: click.Context, names: tuple[str, ...], as_json: bool) -> None:
    """List the part kinds with their pins, pin names and electrical roles."""
    from .library import load_library

    ctx.meta["snugboard.json"] = as_json
    lib = load_library()
    kinds = [lib.kind(n) for n in names] if names else list(lib.kinds())
    if as_json:
        click.echo(json.dumps([{"name": k.name, "category": k.category, "value_unit": k.value_unit,
                                "pins_from_package": k.pins_from_package, "source": k.source,
                                "pins": [{"number": p.number, "name": p.name, "role": p.role} for p in k.pins]}
                               for k in kinds], indent=2))
        return
    for k in kinds:
        pins = "pins 1..N from the package" if k.pins_from_package else \
            ", ".join(f"{p.number} {p.name} ({p.role})" for p in k.pins)
        _say(f"{k.name:<22}{k.category:<14}{pins}")


if __name__ == "__main__":  # python -m pipeline.cli
    main()
