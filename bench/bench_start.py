"""Start-up benchmark: how much of a command's time is snugboard's own.

Printed in one run, each figure the median of several fresh processes:

1. ``snugboard --help`` against a bare ``python -c pass``: the difference
   (target: within 0.15 s) and the ratio, and how much of it is importing
   click (the command-line library) alone;
2. the demo end to end (``snugboard run demo_project``, outputs to a
   temporary folder) against a bare import of the third-party modules that
   run really imports (found by running it once and reading ``sys.modules``):
   the ratio (target: within 1.5 x).

Usage: ``.venv/bin/python bench/bench_start.py [--repeat N]``
"""

from __future__ import annotations

import argparse
import json
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
SNUGBOARD = Path(sys.executable).parent / "snugboard"
HELP_TARGET_S = 0.15
DEMO_TARGET = 1.5


def _median_s(cmd: list[str], repeat: int) -> float:
    times = []
    for _ in range(repeat):
        t = time.perf_counter()
        subprocess.run(cmd, cwd=ROOT, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, check=False)
        times.append(time.perf_counter() - t)
    return statistics.median(times)


def _demo_cmd(out: Path) -> list[str]:
    return [str(SNUGBOARD), "run", str(ROOT / "demo_project"), "--out", str(out)]


def _modules_the_demo_imports(out: Path) -> list[str]:
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
    r = subprocess.run([sys.executable, "-c", probe], cwd=ROOT, capture_output=True, text=True, check=True)
    found = json.loads(r.stdout.strip().splitlines()[-1])
    # a subpackage's import includes its package: keep the most specific names only
    return [m for m in found if not any(o.startswith(m + ".") for o in found)]


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=7)
    n = ap.parse_args().repeat
    bare = _median_s([sys.executable, "-c", "pass"], n)
    helped = _median_s([str(SNUGBOARD), "--help"], n)
    clicked = _median_s([sys.executable, "-c", "import click"], n)
    print(f"snugboard --help      {helped:7.3f} s   bare python -c pass {bare:7.3f} s   "
          f"difference {helped - bare:+.3f} s (target <= {HELP_TARGET_S} s)   ratio {helped / bare:.2f} x")
    print(f"  of which importing click alone: {clicked - bare:+.3f} s; snugboard's own: {helped - clicked:+.3f} s")
    with tempfile.TemporaryDirectory() as tmp:
        out = Path(tmp) / "out"
        needed = _modules_the_demo_imports(out)
        imports = _median_s([sys.executable, "-c", "import " + ", ".join(needed)], n)
        demo = _median_s(_demo_cmd(out), n)
        placed = _median_s([*_demo_cmd(out), "--no-route"], n)
    print(f"demo end to end       {demo:7.3f} s   bare import of what it imports {imports:7.3f} s   "
          f"ratio {demo / imports:.2f} x (target <= {DEMO_TARGET} x)")
    # the routed proof is work of its own (bench_route.py budgets it against the rest of the run);
    # the placement-only run shows what the start and the other steps cost
    print(f"demo, --no-route      {placed:7.3f} s   bare import of what it imports {imports:7.3f} s   "
          f"ratio {placed / imports:.2f} x")
    print(f"  imported: {' '.join(needed)}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
