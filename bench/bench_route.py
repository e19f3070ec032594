"""Routing benchmark: the demo and a generated 60-part board, routed inside a whole run.

Run from the repository root::

    .venv/bin/python bench/bench_route.py                # all three boards and both smallest-board searches
    .venv/bin/python bench/bench_route.py --no-large     # without the 2,000-part board
    .venv/bin/python bench/bench_route.py --no-smallest  # without the smallest-board searches (20 to 25 min loaded)

For each board it runs the whole pipeline twice (``--no-route`` and
routed) and prints side by side: the time of the rest of the run, the
routing time (the difference) and their ratio, the routing verdict, the
spreading the router needed (mm added around each courtyard), vias, track
length, the RUDY demand peak, and the courtyard area placed on the routed
board as a share of the board.

The 60-part board (issue 9's example, generated here): a quad op-amp
(SOIC-14), a quad comparator (TSSOP-14), four SOT-23 transistors, 0402
and 0603 passives, a six-pin header and four wire pads; four channels of
input filter, inverting amplifier, comparator with threshold divider and
pull-up, transistor driver; 60 parts, 148 pins, 35 nets.

The 2,000-part board: the scale benchmark's generated project
(:mod:`bench.generate`, four layers) with ground and supply as copper areas
on the inner layers, run in child processes (``python -m pipeline.cli
run``, as :mod:`bench.bench_scale`), so its peak memory (``ru_maxrss``) is
the run's own; ``--no-large`` leaves it out.

Targets (issue 9): the demo routed with no via in a pad, routing under 5 x
the rest of its run; the 60-part board routed; 2,000 parts routed or the
open nets named within 10 minutes, memory under 4 GiB; the smallest board
(outline mode "smallest", :mod:`pipeline.route.smallest`) of the demo at
most 1.5 x and of the 60-part board at most 2.5 x the courtyard sum, each
search printed with its time, placements and route attempts.
"""

from __future__ import annotations

import json
import sys
import tempfile
import time
from pathlib import Path

import ezdxf

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))
sys.path.insert(0, str(ROOT / "bench"))

from pipeline.project import load_project, run  # noqa: E402


def _sixty_part_design() -> str:
    parts: dict[str, tuple[str, str, str]] = {"U1": ("opamp-quad", "SOIC-14", ""),
                                              "U2": ("comparator-quad", "TSSOP-14", ""),
                                              "J1": ("header", "header-1x6", "")}
    nets: dict[str, list[str]] = {"VCC": ["U1.4", "U2.3", "J1.1"], "GND": ["U1.11", "U2.12", "J1.2"], "VREF": []}

    def two(ref, kind, package, value, a, b):
        parts[ref] = (kind, package, value)
        nets.setdefault(a, []).append(f"{ref}.1")
        nets.setdefault(b, []).append(f"{ref}.2")

    amp = [("2", "3", "1"), ("6", "5", "7"), ("9", "10", "8"), ("13", "12", "14")]       # -IN, +IN, OUT
    cmp_ = [("4", "5", "2"), ("6", "7", "1"), ("8", "9", "14"), ("10", "11", "13")]      # -IN, +IN, OUT
    for i in range(4):
        n = i + 1
        neg, pos, out = amp[i]
        cneg, cpos, cout = cmp_[i]
        parts[f"P{n}"] = ("wire-pad", "pad-1.5mm", "")
        nets[f"IN{n}"] = [f"P{n}.1"]
        nets[f"NINV{n}"] = [f"U1.{neg}"]
        nets["VREF"].append(f"U1.{pos}")
        nets[f"AOUT{n}"] = [f"U1.{out}"]
        nets[f"CIN{n}"] = [f"U2.{cpos}"]
        nets[f"TH{n}"] = [f"U2.{cneg}"]
        nets[f"COUT{n}"] = [f"U2.{cout}"]
        two(f"C{n}", "capacitor", "0603", "1n", f"IN{n}", "GND")
        two(f"R{n}", "resistor", "0402", "10k", f"IN{n}", f"NINV{n}")
        two(f"R{n + 10}", "resistor", "0402", "100k", f"NINV{n}", f"AOUT{n}")
        two(f"C{n + 10}", "capacitor", "0402", "100p", f"NINV{n}", f"AOUT{n}")
        two(f"R{n + 20}", "resistor", "0402", "1k", f"AOUT{n}", f"CIN{n}")
        two(f"R{n + 30}", "resistor", "0603", "10k", "VCC", f"TH{n}")
        two(f"R{n + 40}", "resistor", "0603", "10k", f"TH{n}", "GND")
        two(f"R{n + 50}", "resistor", "0402", "10k", "VCC", f"COUT{n}")
        two(f"R{n + 60}", "resistor", "0402", "4k7", f"COUT{n}", f"BASE{n}")
        two(f"R{n + 70}", "resistor", "0603", "1k", "VCC", f"COLL{n}")
        parts[f"Q{n}"] = ("npn", "SOT-23", "")
        nets[f"BASE{n}"].append(f"Q{n}.1")
        nets["GND"].append(f"Q{n}.2")
        nets[f"COLL{n}"].append(f"Q{n}.3")
        nets[f"COLL{n}"].append(f"J1.{n + 2}")
        if n < 4:
            two(f"R{n + 80}", "resistor", "0402", "1M", f"COUT{n}", f"CIN{n}")
    two("R91", "resistor", "0603", "10k", "VCC", "VREF")
    two("R92", "resistor", "0603", "10k", "VREF", "GND")
    two("C91", "capacitor", "0603", "100n", "VREF", "GND")
    two("C92", "capacitor", "0603", "100n", "VCC", "GND")
    two("C93", "capacitor", "0603", "100n", "VCC", "GND")
    two("C94", "capacitor", "0603", "1u", "VCC", "GND")
    assert len(parts) == 60, len(parts)
    lines = ['[design]\nname = "sixty"\nrevision = "A"\n']
    for ref, (kind, package, value) in parts.items():
        lines.append(f'[parts.{ref}]\nkind = "{kind}"\npackage = "{package}"\n' + (f'value = "{value}"\n' if value else ""))
    lines.append("[nets]")
    lines += [f'{name} = [{", ".join(repr(p).replace(chr(39), chr(34)) for p in pins)}]' for name, pins in nets.items()]
    return "\n".join(lines) + "\n"


def _rect_cavity(path: Path, w: float, h: float) -> None:
    doc = ezdxf.new("R2010", units=ezdxf.units.MM)
    doc.layers.add("CAVITY")
    doc.modelspace().add_lwpolyline([(0, 0), (w, 0), (w, h), (0, h)], close=True, dxfattribs={"layer": "CAVITY"})
    doc.saveas(path)


def _project(base: Path) -> Path:
    proj = base / "sixty"
    proj.mkdir()
    (proj / "design.toml").write_text(_sixty_part_design())
    _rect_cavity(proj / "bay.dxf", 40.0, 30.0)
    (proj / "project.toml").write_text('[project]\nname = "sixty"\ndesign = "design.toml"\ncavity = "bay.dxf"\n'
                                       '[board]\nlayers = 2\n[cavity]\ndepth_mm = 10.0\n')
    return proj


def measure(name: str, folder: Path, out: Path) -> dict:
    t0 = time.perf_counter()
    run(load_project(folder, out=str(out / "plain")), route=False)
    rest = time.perf_counter() - t0
    t0 = time.perf_counter()
    res = run(load_project(folder, out=str(out / "routed")))
    total = time.perf_counter() - t0
    fit = json.loads((out / "routed" / "fit.json").read_text())
    r = fit["routing"]
    board = fit.get("board_area_mm2") or 0.0
    return {"board": name, "parts": len(fit["placements"]), "rest_s": rest, "route_s": max(total - rest, 0.0),
            "verdict": r["verdict"], "spread_mm": r["spread_mm"], "vias": r["vias"],
            "wirelength_mm": r["wirelength_mm"], "demand_peak": r["demand_peak_ratio"],
            "courtyard_share": fit["courtyard_area_mm2"] / board if board else float("nan"),
            "exit": res.exit_status}


#: parts of the large case (issue 9: the 2,000-part case of the scale benchmark)
LARGE_PARTS = 2000
#: its copper areas (the [copper] key for nets as copper areas): ground and supply on the inner layers;
#: a routing time budget of 300 s (the default 60 s is for small boards), so the run stays in 10 minutes
LARGE_AREAS = '[copper]\nareas = { GND = "inner1", VCC = "inner2" }\ntime_budget_s = 300\n'


def _large_project(base: Path) -> Path:
    """The scale benchmark's generated project (:mod:`bench.generate`), ground and supply as copper areas."""
    import generate

    folder = base / f"large-{LARGE_PARTS}"
    generate.write_project(folder, LARGE_PARTS)
    (folder / "project.toml").write_text((folder / "project.toml").read_text() + "\n" + LARGE_AREAS)
    return folder


def measure_child(name: str, folder: Path) -> dict:
    """``measure`` in child processes (``python -m pipeline.cli run``), with the routed run's peak memory."""
    from bench_scale import _child

    plain = _child([sys.executable, "-m", "pipeline.cli", "run", str(folder), "--no-route", "--out",
                    str(folder / "plain")], cwd=ROOT)
    routed = _child([sys.executable, "-m", "pipeline.cli", "run", str(folder), "--out", str(folder / "routed")],
                    cwd=ROOT)
    fit = json.loads((folder / "routed" / "fit.json").read_text())
    r = fit["routing"]
    board = fit.get("board_area_mm2") or 0.0
    return {"board": name, "parts": len(fit["placements"]), "rest_s": plain["wall"],
            "route_s": max(routed["wall"] - plain["wall"], 0.0), "verdict": r["verdict"],
            "spread_mm": r["spread_mm"], "vias": r["vias"], "wirelength_mm": r["wirelength_mm"],
            "demand_peak": r["demand_peak_ratio"] or float("nan"),
            "courtyard_share": fit["courtyard_area_mm2"] / board if board else float("nan"),
            "exit": routed["status"], "rss_mib": routed["rss"], "cpu_s": routed["cpu"], "wall_s": routed["wall"],
            "open_nets": r["open_nets"], "congestion": r["congestion_at"]}


def measure_smallest(name: str, folder: Path, out: Path) -> dict:
    """The smallest board that places and routes (outline mode "smallest"), with its search time."""
    import dataclasses

    project = load_project(folder, out=str(out / "smallest"))
    project = dataclasses.replace(project, board=dataclasses.replace(project.board, outline="smallest"))
    t0 = time.perf_counter()
    run(project)
    took = time.perf_counter() - t0
    fit = json.loads((out / "smallest" / "fit.json").read_text())
    small = fit["routing"].get("smallest_board") or {}
    return {"board": name, "search_s": took, "ratio": small.get("ratio_to_courtyards", float("nan")),
            "thumb": small.get("rule_of_thumb_ratio", float("nan")), "area": small.get("area_mm2", float("nan")),
            "angle": small.get("angle_deg", float("nan")), "aspect": small.get("aspect_ratio", float("nan")),
            "shape": small.get("shape", "none routed"), "region": fit["region_area_mm2"] / fit["courtyard_area_mm2"],
            "screened": small.get("screened", {})}


#: issue 9's targets for the smallest board, x the courtyard sum
SMALLEST_TARGETS = {"demo": 1.5, "60 parts": 2.5}


def print_smallest(rows: list[dict]) -> None:
    """Smallest-board table; targets (issue 9): demo at most 1.5 x, 60 parts at most 2.5 x the courtyard sum."""
    print("board | smallest x courtyards | target x | rule of thumb x | region x | area mm2 | angle deg | aspect | "
          "shape | whole run s | placements | route attempts (routed)")
    for r in rows:
        sc = r["screened"]
        print(" | ".join([r["board"], f"{r['ratio']:.4f}", f"{SMALLEST_TARGETS.get(r['board'], float('nan')):g}",
                          f"{r['thumb']:.2f}", f"{r['region']:.2f}", f"{r['area']:.0f}", f"{r['angle']:g}",
                          f"{r['aspect']:.2f}", r["shape"], f"{r['search_s']:.0f}", str(sc.get("placements", "-")),
                          f"{sc.get('route attempts', '-')} ({sc.get('routed', '-')})"]))


def main() -> None:
    rows = []
    small = []
    with tempfile.TemporaryDirectory() as tmp:
        base = Path(tmp)
        rows.append(measure("demo", ROOT / "demo_project", base / "demo"))
        rows.append(measure("60 parts", _project(base), base / "sixty-out"))
        if "--no-large" not in sys.argv:
            rows.append(measure_child(f"{LARGE_PARTS} parts", _large_project(base)))
        if "--no-smallest" not in sys.argv:
            small.append(measure_smallest("demo", ROOT / "demo_project", base / "demo"))
            small.append(measure_smallest("60 parts", base / "sixty", base / "sixty-out"))
    head = ("board", "parts", "rest s", "route s", "route/rest", "verdict", "spread mm", "vias", "track mm",
            "RUDY peak", "courtyards/board")
    print(" | ".join(head))
    for r in rows:
        print(" | ".join([r["board"], str(r["parts"]), f"{r['rest_s']:.1f}", f"{r['route_s']:.1f}",
                          f"{r['route_s'] / r['rest_s']:.2f}", r["verdict"], f"{r['spread_mm']:g}", str(r["vias"]),
                          f"{r['wirelength_mm']:.0f}", f"{r['demand_peak']:.2f}", f"{r['courtyard_share']:.2f}"]))
    if small:
        print_smallest(small)

    for r in rows:
        if "rss_mib" in r:
            print(f"{r['board']}: routed run {r['wall_s']:.0f} s wall, {r['cpu_s']:.0f} s CPU, peak memory "
                  f"{r['rss_mib']:.0f} MiB (target: 600 s, 4096 MiB); {len(r['open_nets'])} nets open "
                  f"{', '.join(r['open_nets'][:12])}{' ...' if len(r['open_nets']) > 12 else ''}; congestion at "
                  f"{', '.join(f'({x:g}, {y:g})' for x, y in r['congestion'][:5])}")


if __name__ == "__main__":
    main()
