"""Reproducible files: byte-identical outputs across runs, folders and PYTHONHASHSEED values."""

from __future__ import annotations

import os
import shutil
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]


def _copy_demo(dest: Path) -> Path:
    """The demo project and its outline in a fresh folder tree (same relative layout)."""
    shutil.copytree(ROOT / "demo_project", dest / "demo_project", ignore=shutil.ignore_patterns("out"))
    shutil.copytree(ROOT / "outlines", dest / "outlines", ignore=shutil.ignore_patterns("*.py", "__pycache__"))
    return dest / "demo_project"


def _run(project: Path, seed: str, cwd: Path, epoch: str | None = None) -> dict[str, bytes]:
    env = {k: v for k, v in os.environ.items() if k not in ("SOURCE_DATE_EPOCH",)}
    env["PYTHONHASHSEED"] = seed
    if epoch is not None:
        env["SOURCE_DATE_EPOCH"] = epoch
    r = subprocess.run([sys.executable, "-m", "pipeline.cli", "run", str(project)], cwd=cwd, env=env,
                       capture_output=True, text=True)
    assert r.returncode in (0, 1), r.stderr
    out = project / "out"
    return {p.name: p.read_bytes() for p in sorted(out.iterdir())}


def test_two_folders_two_hash_seeds_same_bytes(tmp_path):
    a = _copy_demo(tmp_path / "first")
    b = _copy_demo(tmp_path / "second place")
    fa = _run(a, "0", tmp_path)
    fb = _run(b, "4242", a)  # another working folder too
    assert sorted(fa) == sorted(fb)
    for name in fa:
        assert fa[name] == fb[name], name
    # no absolute path of either folder leaks into any file
    for name, data in fa.items():
        assert str(tmp_path).encode() not in data, name


def test_source_date_epoch_sets_the_edif_date(tmp_path):
    a = _copy_demo(tmp_path / "a")
    f1 = _run(a, "1", tmp_path, epoch="1700000000")
    f2 = _run(a, "2", tmp_path, epoch="1700000000")
    assert f1["netlist.edf"] == f2["netlist.edf"]
    # 1700000000 s after the epoch is 2023-11-14 22:13:20 UTC (POSIX time; checked with `date -u -d @1700000000`)
    assert b"2023 11 14 22 13 20" in f1["netlist.edf"]
