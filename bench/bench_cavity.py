"""Cavity reader benchmark: large drawings refused or read (issue 13, item 14).

Run from the repository root::

    .venv/bin/python bench/bench_cavity.py            # 1,000,000 lines; 19,600 holes
    .venv/bin/python bench/bench_cavity.py 200000 2500

Prints, for each case, the wall time and the peak memory (the process's
maximum resident size growth, from ``resource.getrusage``) of
:func:`pipeline.cavity.read_cavity`, each as a ratio to a reference in the
same run:

* ``lines``: an ASCII DXF of N LINE entities on an ignored layer (51 MB for
  a million), refused for its entity count by the pre-scan. The reference is
  reading the same file's bytes (``Path.read_bytes``), the least any
  refusal after looking at the file can cost. Issue 13 measured 141 s and
  800 MiB before the pre-scan.
* ``holes``: one 1.5 m square outline with a grid of M circular holes
  (19,600 = 140 x 140 in the issue), read and turned into the usable
  region. The reference is ezdxf loading the same file alone
  (``ezdxf.readfile``). Issue 13 measured 75 s and 1.4 GiB before the holes
  were indexed with a tree.

Each case runs in a fresh subprocess so that its memory figure is its own;
imports happen before the clock starts.
"""

from __future__ import annotations

import json
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]


def write_lines(path: Path, n: int) -> None:
    """An R12-style ASCII DXF with ``n`` LINEs, written directly (ezdxf would take minutes)."""
    with path.open("w") as f:
        f.write("  0\nSECTION\n  2\nHEADER\n  9\n$INSUNITS\n 70\n4\n  0\nENDSEC\n")
        f.write("  0\nSECTION\n  2\nENTITIES\n")
        for i in range(n):
            f.write(f"  0\nLINE\n  8\nHatch\n 10\n{i % 1000}.0\n 20\n0.0\n 11\n{i % 1000}.0\n 21\n1.0\n")
        f.write("  0\nENDSEC\n  0\nEOF\n")


def write_holes(path: Path, m: int) -> None:
    import math

    import ezdxf

    side = int(math.isqrt(m))
    doc = ezdxf.new("R2013", units=4)
    msp = doc.modelspace()
    size = 10.0 * side + 10.0
    msp.add_lwpolyline([(0, 0), (size, 0), (size, size), (0, size)], close=True, dxfattribs={"layer": "CAVITY"})
    for i in range(side):
        for j in range(side):
            msp.add_circle((10.0 + 10 * i, 10.0 + 10 * j), 2.0, dxfattribs={"layer": "CAVITY"})
    doc.saveas(path)


_CHILD = r'''
import json, resource, sys, time
from pathlib import Path
kind, path = sys.argv[1], Path(sys.argv[2])
from pipeline.cavity import read_cavity
from pipeline.errors import CavityError
from pipeline.model import BoardOptions
from pipeline.region import usable_region
import ezdxf
before = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
t = time.perf_counter()
outcome = "read"
if kind == "bytes":
    path.read_bytes()
elif kind == "ezdxf":
    ezdxf.readfile(str(path))
else:
    try:
        cavity, _ = read_cavity(path, limits=None)
        usable_region(cavity, BoardOptions())
    except CavityError as exc:
        outcome = "refused: " + str(exc)[:90]
dt = time.perf_counter() - t
peak = (resource.getrusage(resource.RUSAGE_SELF).ru_maxrss - before) / 1024
print(json.dumps({"s": dt, "mib": peak, "outcome": outcome}))
'''


def _child(kind: str, path: Path) -> dict:
    r = subprocess.run([sys.executable, "-c", _CHILD, kind, str(path)], cwd=ROOT, capture_output=True,
                       text=True, check=True)
    return json.loads(r.stdout.strip().splitlines()[-1])


def main(n_lines: int = 1_000_000, n_holes: int = 19_600) -> None:
    with tempfile.TemporaryDirectory() as tmp:
        lines, holes = Path(tmp) / "lines.dxf", Path(tmp) / "holes.dxf"
        t = time.perf_counter()
        write_lines(lines, n_lines)
        write_holes(holes, n_holes)
        print(f"inputs written in {time.perf_counter() - t:.1f} s: {lines.stat().st_size / 1e6:.1f} MB of "
              f"{n_lines} lines, {holes.stat().st_size / 1e6:.1f} MB with {n_holes} holes")
        for label, path, ref in (("lines", lines, "bytes"), ("holes", holes, "ezdxf")):
            ours, base = _child("read", path), _child(ref, path)
            print(f"{label}: snugboard {ours['s']:.2f} s, {ours['mib']:.0f} MiB ({ours['outcome']}); "
                  f"{ref} alone {base['s']:.2f} s, {base['mib']:.0f} MiB; ratio time "
                  f"{ours['s'] / max(base['s'], 1e-9):.2f} x, memory {ours['mib'] / max(base['mib'], 1e-9):.2f} x")


if __name__ == "__main__":
    main(*(int(a) for a in sys.argv[1:3]))
