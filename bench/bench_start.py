"""Start-up benchmark: how much of a command's time is snugboard's own.

Printed in one run, each figure the median of several fresh processes, as
wall-clock seconds and as CPU seconds (user + system of the child, from
``os.wait4``; the steadier figure on a shared machine, and the one the
targets are judged on):

1. ``snugboard --help`` against a bare ``python -c pass``: the difference
   (issue 10 target: within 0.15 s) and how much of it is importing click
   alone;
2. the demo end to end (``snugboard run demo_project``, outputs to a
   temporary folder), routed and with ``--no-route``, against
   a. a bare import of the third-party modules that the run really imports
      (found by running it once and reading ``sys.modules``): issue 10
      target within 1.5 x;
   b. a bare import of numpy, shapely, ezdxf, networkx and click: issue 11
      target at most 1.0 x;
   and the routing's own share (routed less ``--no-route``) beside the room
   the issue 10 target leaves it.

Every child runs with Python's bytecode cache on (as an installed tool
does), kept in a temporary folder (``PYTHONPYCACHEPREFIX``), after one
warm-up run; ``PYTHONDONTWRITEBYTECODE`` in the caller's environment would
otherwise make every run compile snugboard's sources again.

Usage: ``.venv/bin/python bench/bench_start.py [--repeat N]``
"""

from __future__ import annotations

import argparse
import json
import os
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
SNUGBOARD = Path(sys.executable).parent / "snugboard"
HELP_TARGET_S = 0.15
DEPENDENCIES_TARGET = 1.5  # issue 10: the demo against a bare import of what it imports
FIVE_TARGET = 1.0  # issue 11: the demo against a bare import of the five libraries below
FIVE = ("numpy", "shapely", "ezdxf", "networkx", "click")


def _env(cache: Path) -> dict[str, str]:
    env = {k: v for k, v in os.environ.items() if k != "PYTHONDONTWRITEBYTECODE"}
    env["PYTHONPYCACHEPREFIX"] = str(cache)
    return env


def _once(cmd: list[str], env: dict[str, str]) -> tuple[float, float]:
    """Wall and CPU (user + system) seconds of one child process."""
    t = time.perf_counter()
    p = subprocess.Popen(cmd, cwd=ROOT, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, env=env)
    _, _, use = os.wait4(p.pid, 0)
    p.returncode = 0  # reaped by wait4
    return time.perf_counter() - t, use.ru_utime + use.ru_stime


def _median(cmd: list[str], repeat: int, env: dict[str, str]) -> tuple[float, float]:
    _once(cmd, env)  # warm-up: fills the bytecode cache and the file cache
    runs = [_once(cmd, env) for _ in range(repeat)]
    return statistics.median(r[0] for r in runs), statistics.median(r[1] for r in runs)


def _demo_cmd(out: Path) -> list[str]:
    return [str(SNUGBOARD), "run", str(ROOT / "demo_project"), "--out", str(out)]


def _modules_the_demo_imports(out: Path, env: dict[str, str]) -> list[str]:
    """Third-party packages and their public subpackages (one level) that a demo run has imported."""
    probe = (
        "import sys, json\nfrom pipeline.cli import main\n"
        f"try:\n    main(['run', {str(ROOT / 'demo_project')!r}, '--out', {str(out)!r}])\n"
        "except SystemExit:\n    pass\n"
        "names = [m for m, mod in list(sys.modules.items()) if 'site-packages' in (getattr(mod, '__file__', '') or '')"
        " and m.count('.') <= 1 and not any(p.startswith('_') for p in m.split('.'))"
        " and m.split('.')[0] not in ('pipeline', 'snugboard')]\n"
        "print(json.dumps(sorted(names)))"
    )
    r = subprocess.run([sys.executable, "-c", probe], cwd=ROOT, capture_output=True, text=True, check=True, env=env)
    found = json.loads(r.stdout.strip().splitlines()[-1])
    # a subpackage's import includes its package: keep the most specific names only
    return [m for m in found if not any(o.startswith(m + ".") for o in found)]


def _line(label: str, run: tuple[float, float], base: tuple[float, float], base_label: str, target: float) -> str:
    ratio_wall, ratio_cpu = run[0] / base[0], run[1] / base[1]
    verdict = "met" if ratio_cpu <= target else "MISSED"
    return (f"{label:<22} {run[1]:6.2f} s CPU ({run[0]:6.2f} s wall)  vs {base_label} {base[1]:5.2f} s CPU "
            f"({base[0]:5.2f} s wall):  {ratio_cpu:4.2f} x CPU, {ratio_wall:4.2f} x wall  "
            f"(target <= {target} x: {verdict})")


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=5)
    n = ap.parse_args().repeat
    with tempfile.TemporaryDirectory() as tmp:
        env = _env(Path(tmp) / "pycache")
        out = Path(tmp) / "out"
        bare = _median([sys.executable, "-c", "pass"], n, env)
        helped = _median([str(SNUGBOARD), "--help"], n, env)
        clicked = _median([sys.executable, "-c", "import click"], n, env)
        needed = _modules_the_demo_imports(out, env)
        imports = _median([sys.executable, "-c", "import " + ", ".join(needed)], n, env)
        five = _median([sys.executable, "-c", "import " + ", ".join(FIVE)], n, env)
        demo = _median(_demo_cmd(out), n, env)
        placed = _median([*_demo_cmd(out), "--no-route"], n, env)
    diff = helped[1] - bare[1]
    print(f"snugboard --help {helped[1]:.3f} s CPU ({helped[0]:.3f} s wall), bare python -c pass {bare[1]:.3f} s CPU "
          f"({bare[0]:.3f} s wall): difference {diff:+.3f} s CPU, {helped[0] - bare[0]:+.3f} s wall "
          f"(issue 10 target <= {HELP_TARGET_S} s: {'met' if diff <= HELP_TARGET_S else 'MISSED'})")
    print(f"  of which importing click alone: {clicked[1] - bare[1]:+.3f} s CPU; snugboard's own: "
          f"{helped[1] - clicked[1]:+.3f} s CPU")
    tops = sorted({m.split(".")[0] for m in needed})
    print(f"issue 10: the demo against a bare import of what it imports ({len(needed)} modules of {', '.join(tops)})")
    print("  " + _line("demo routed", demo, imports, "imports", DEPENDENCIES_TARGET))
    print("  " + _line("demo --no-route", placed, imports, "imports", DEPENDENCIES_TARGET))
    room = DEPENDENCIES_TARGET * imports[1] - placed[1]
    print(f"  routing's own: routed - --no-route = {demo[1] - placed[1]:+.2f} s CPU; the target leaves it "
          f"{room:+.2f} s CPU ({DEPENDENCIES_TARGET} x imports - --no-route)")
    print(f"issue 11: the demo against a bare import of {', '.join(FIVE)}")
    print("  " + _line("demo routed", demo, five, "five", FIVE_TARGET))
    print("  " + _line("demo --no-route", placed, five, "five", FIVE_TARGET))
    print(f"medians of {n} runs after one warm-up each; targets judged on CPU seconds")
    return 0


if __name__ == "__main__":
    sys.exit(main())
