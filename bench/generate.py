"""Generated benchmark projects: op-amp blocks in a superellipse bay.

:func:`write_project` writes ``design.toml``, ``project.toml`` and ``bay.dxf``
into a folder, ready for ``snugboard run``. Everything is seeded: the same
``n`` gives the same bytes.

The design is a chain of op-amp blocks. A block is one dual op-amp
(SOIC-8) or one quad (TSSOP-14) with, per channel, an inverting stage
(input and feedback resistors, a feedback capacitor) and an output RC
filter, plus one 100 nF decoupling capacitor per supply pin. Each channel's
input is the previous channel's filtered output, so nets are local (2 to 3
pins) except the supplies. Every eighth channel takes its input from a wire
pad and every eighth output goes to one. Passives are 0402 or 0603
(seeded); values are E12.

The bay is a superellipse ``|x/a|^4 + |y/b|^4 <= 1`` drawn as a
2,000-vertex closed polyline (aspect 1.6) with four round screw bosses
(``KEEPOUT``), a shallow lid rib across it (``DEPTH-2.2``: 1.4 mm above a
0.8 mm board, passives only) and a deeper pocket (``DEPTH-4``). The bay is
scaled so that the parts' courtyards (nominal density) take ``FILL`` of the
usable region (cavity minus the wall clearance and the bosses).
"""

from __future__ import annotations

import math
import sys
from dataclasses import dataclass
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
if str(ROOT) not in sys.path:
    sys.path.insert(0, str(ROOT))

#: share of the usable region the courtyards take
FILL = 0.65
#: vertices of the bay outline
VERTICES = 2000
#: superellipse exponent and aspect
EXPONENT = 4.0
ASPECT = 1.6
SEED = 20261202
E12 = ("1k", "1k2", "1k5", "2k2", "3k3", "4k7", "6k8", "10k", "22k", "47k", "100k")
CAPS = ("100p", "220p", "1n", "2n2", "10n", "100n")
WALL = 0.3


@dataclass
class Generated:
    """A generated design: TOML text, part count, courtyard sum (mm^2) and nets (lists of refs)."""

    toml: str
    parts: int
    nets: dict[str, list[str]]
    packages: dict[str, str]


def design_toml(n: int, seed: int = SEED) -> Generated:
    """A design of about ``n`` parts (exactly ``n`` when ``n`` >= 20)."""
    rng = np.random.default_rng(seed)
    parts: list[tuple[str, str, str, str]] = []  # ref, kind, package, value
    nets: dict[str, list[str]] = {"VCC": [], "GND": []}
    count = {"R": 0, "C": 0, "U": 0, "P": 0}

    def ref(prefix):
        count[prefix] += 1
        return f"{prefix}{count[prefix]}"

    def add(prefix, kind, pkg, value=""):
        r = ref(prefix)
        parts.append((r, kind, pkg, value))
        return r

    def connect(net, pin):
        nets.setdefault(net, []).append(pin)

    chain = "IN0"
    pad_in = add("P", "wire-pad", "pad-1.5mm")
    connect(chain, f"{pad_in}.1")
    ch_no = 0
    while len(parts) < n:
        quad = rng.random() < 0.4
        u = add("U", "opamp-quad" if quad else "opamp-dual", "TSSOP-14" if quad else "SOIC-8")
        # supply pins: dual 8 V+ 4 V-; quad 4 V+ 11 V-
        vp, vm = ("4", "11") if quad else ("8", "4")
        connect("VCC", f"{u}.{vp}")
        connect("GND", f"{u}.{vm}")
        for pin in (vp,):
            c = add("C", "capacitor", "0402", "100n")
            connect("VCC", f"{c}.1")
            connect("GND", f"{c}.2")
        channels = (("1", "2", "3"), ("7", "6", "5")) if not quad else \
            (("1", "2", "3"), ("7", "6", "5"), ("8", "9", "10"), ("14", "13", "12"))
        for out, inv, non in channels:
            ch_no += 1
            pkg = "0603" if rng.random() < 0.4 else "0402"
            rin = add("R", "resistor", pkg, E12[int(rng.integers(len(E12)))])
            rf = add("R", "resistor", pkg, E12[int(rng.integers(len(E12)))])
            cf = add("C", "capacitor", pkg, CAPS[int(rng.integers(len(CAPS)))])
            ro = add("R", "resistor", pkg, E12[int(rng.integers(len(E12)))])
            co = add("C", "capacitor", pkg, CAPS[int(rng.integers(len(CAPS)))])
            mid = f"S{ch_no}_INV"
            o = f"S{ch_no}_OUT"
            f = f"S{ch_no}_F"
            connect(chain, f"{rin}.1")
            connect(mid, f"{rin}.2")
            connect(mid, f"{u}.{inv}")
            connect(mid, f"{rf}.1")
            connect(mid, f"{cf}.1")
            connect(o, f"{rf}.2")
            connect(o, f"{cf}.2")
            connect(o, f"{u}.{out}")
            connect(o, f"{ro}.1")
            connect(f, f"{ro}.2")
            connect(f, f"{co}.1")
            connect("GND", f"{co}.2")
            connect("GND", f"{u}.{non}")
            chain = f
            if ch_no % 8 == 0:
                p = add("P", "wire-pad", "pad-1.5mm")
                connect(f, f"{p}.1")
                chain = f"IN{ch_no}"
                p = add("P", "wire-pad", "pad-1.5mm")
                connect(chain, f"{p}.1")
    # trim to n: drop trailing parts and their pins (a block may be cut; its nets stay valid)
    keep = {r for r, *_ in parts[:n]}
    parts = parts[:n]
    nets = {k: [p for p in v if p.split(".")[0] in keep] for k, v in nets.items()}
    nets = {k: v for k, v in nets.items() if len(v) >= 2}  # a cut block leaves no one-pin net
    lines = ["# generated by bench/generate.py: op-amp blocks, seeded", "[design]",
             f'name = "bench-{n}"', 'revision = "A"', ""]
    for r, kind, pkg, value in parts:
        lines += [f"[parts.{r}]", f'kind = "{kind}"', f'package = "{pkg}"']
        if value:
            lines.append(f'value = "{value}"')
        if kind == "capacitor":
            lines.append('rating = "16V"')
        lines.append("")
    lines.append("[nets]")
    for k, v in nets.items():
        lines.append(f"{k} = [{', '.join(chr(34) + p + chr(34) for p in v)}]")
    lines += ["", "[voltages]", "VCC = 3.3", "GND = 0", ""]
    return Generated("\n".join(lines), len(parts),
                     {k: sorted({p.split('.')[0] for p in v}) for k, v in nets.items()},
                     {r: pkg for r, _, pkg, _ in parts})


def superellipse(a: float, b: float, n: int = VERTICES) -> list[tuple[float, float]]:
    """``n`` points on ``|x/a|^4 + |y/b|^4 = 1``, counter-clockwise, centred on (a, b)."""
    t = np.linspace(0.0, 2 * math.pi, n, endpoint=False)
    c, s = np.cos(t), np.sin(t)
    e = 2.0 / EXPONENT
    x = a * np.sign(c) * np.abs(c) ** e
    y = b * np.sign(s) * np.abs(s) ** e
    return [(float(a + u), float(b + v)) for u, v in zip(x, y)]


def bay_features(a: float, b: float):
    """Bosses (centre, radius) and depth zones (layer, rectangle) of a bay of half-axes ``a``, ``b``."""
    r = max(1.5, 0.03 * b)
    bosses = [(a * (1 + sx * 0.55), b * (1 + sy * 0.55), r) for sx in (-1, 1) for sy in (-1, 1)]
    rib_w = max(2.0, 0.06 * a)
    zones = [("DEPTH-2.2", (a * 0.9, 0.0, a * 0.9 + rib_w, 2 * b)),
             ("DEPTH-4", (a * 1.3, b * 0.2, a * 1.7, b * 0.8))]
    return bosses, zones


def usable_area(a: float, b: float) -> float:
    """Bay area minus the wall clearance and the bosses (shapely), mm^2."""
    from shapely.geometry import Point, Polygon

    poly = Polygon(superellipse(a, b)).buffer(-WALL)
    bosses, _ = bay_features(a, b)
    for x, y, r in bosses:
        poly = poly.difference(Point(x, y).buffer(r + WALL))
    return float(poly.area)


def courtyard_sum(gen: Generated) -> float:
    from pipeline.library import load_library

    lib = load_library()
    total = 0.0
    for pkg in gen.packages.values():
        c = lib.package(pkg).courtyard("nominal")
        total += c.length_mm * c.width_mm
    return total


def write_project(folder: Path, n: int, seed: int = SEED) -> Generated:
    """Write a generated project of ``n`` parts into ``folder``."""
    import ezdxf

    gen = design_toml(n, seed)
    target = courtyard_sum(gen) / FILL
    a = math.sqrt(target / (ASPECT * 3.7))  # superellipse n=4 area ~ 3.708 a b
    for _ in range(6):  # secant on the scale: usable area grows as a^2
        a *= math.sqrt(target / usable_area(a * ASPECT, a))
    a, b = a * ASPECT, a
    folder.mkdir(parents=True, exist_ok=True)
    (folder / "design.toml").write_text(gen.toml, encoding="utf-8")
    doc = ezdxf.new(units=ezdxf.units.MM)
    msp = doc.modelspace()
    msp.add_lwpolyline(superellipse(a, b), close=True, dxfattribs={"layer": "CAVITY"})
    bosses, zones = bay_features(a, b)
    for x, y, r in bosses:
        msp.add_circle((x, y), r, dxfattribs={"layer": "KEEPOUT"})
    for layer, (x1, y1, x2, y2) in zones:
        msp.add_lwpolyline([(x1, y1), (x2, y1), (x2, y2), (x1, y2)], close=True, dxfattribs={"layer": layer})
    doc.header["$TDCREATE"] = 2451545.0
    doc.saveas(folder / "bay.dxf")
    (folder / "project.toml").write_text(
        f'[project]\nname = "bench-{n}"\ndesign = "design.toml"\ncavity = "bay.dxf"\n\n'
        f'[board]\nlayers = 4\nthickness_mm = 0.8\nedge_clearance_mm = 0.3\nwall_clearance_mm = {WALL}\n\n'
        '[cavity]\ndepth_mm = 6.0\n', encoding="utf-8")
    return gen


if __name__ == "__main__":
    out = Path(sys.argv[2] if len(sys.argv) > 2 else "bench-project")
    g = write_project(out, int(sys.argv[1]) if len(sys.argv) > 1 else 250)
    print(f"wrote {g.parts} parts to {out}")
