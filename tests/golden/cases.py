"""The golden cases: a project folder, extra command arguments, and how to run one.

Each case is run in a fresh subprocess (``python -m pipeline.cli run``) with a
fixed hash seed and ``SOURCE_DATE_EPOCH`` so the bytes do not depend on the
process that compares them.
"""

from __future__ import annotations

import os
import shutil
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
PROJECTS = Path(__file__).resolve().parent / "projects"

#: (case name, project folder, extra ``snugboard run`` arguments)
CASES = [
    ("demo", ROOT / "demo_project", ("--sweep",)),
    ("spice-twin", PROJECTS / "spice-twin", ()),
    ("user-layers", PROJECTS / "user-layers", ()),
    ("block-bay", PROJECTS / "block-bay", ()),
]


def run_case(project: Path, args: tuple[str, ...], out: Path) -> dict[str, bytes]:
    """Run one case into ``out`` (emptied first) and return ``{file name: bytes}``."""
    if out.exists():
        shutil.rmtree(out)
    env = {k: v for k, v in os.environ.items() if k != "SOURCE_DATE_EPOCH"}
    env["PYTHONHASHSEED"] = "0"
    env["SOURCE_DATE_EPOCH"] = "1700000000"
    r = subprocess.run([sys.executable, "-m", "pipeline.cli", "run", str(project), "--out", str(out), *args],
                       cwd=ROOT, env=env, capture_output=True, text=True)
    if r.returncode not in (0, 1):
        raise RuntimeError(f"{project}: exit {r.returncode}\n{r.stderr}")
    return {p.name: p.read_bytes() for p in sorted(out.iterdir()) if p.is_file()}
