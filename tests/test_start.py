"""Fast start: heavy modules are imported only by the steps that need them.

Counted in a fresh interpreter through ``sys.modules`` (never timed: the timing targets live in
bench/bench_start.py).
"""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
HEAVY = ("scipy", "numpy", "shapely", "ezdxf", "networkx", "trimesh")


def _modules_after(code: str) -> set[str]:
    """Every module name in ``sys.modules`` after running ``code`` in a fresh interpreter."""
    probe = f"{code}\nimport sys, json\nprint(json.dumps(sorted(sys.modules)))"
    out = subprocess.run([sys.executable, "-c", probe], cwd=ROOT, capture_output=True, text=True, check=True)
    return set(json.loads(out.stdout.strip().splitlines()[-1]))


def _imported_after(code: str) -> set[str]:
    """The top-level packages imported after running ``code``."""
    return {m.split(".")[0] for m in _modules_after(code)}


def _demo(out: Path, *options: str) -> str:
    return ("import sys\nfrom pipeline.cli import main\n"
            f"sys.argv = ['snugboard', 'run', {str(ROOT / 'demo_project')!r}, '--out', {str(out)!r}, *{options!r}]\n"
            "try:\n    main()\nexcept SystemExit:\n    pass")


def test_importing_the_cli_imports_no_heavy_module():
    assert not _imported_after("import pipeline.cli") & set(HEAVY)


def test_help_imports_no_heavy_module():
    code = ("import sys\nfrom pipeline.cli import main\nsys.argv = ['snugboard', '--help']\n"
            "try:\n    main()\nexcept SystemExit:\n    pass")
    assert not _imported_after(code) & set(HEAVY)


@pytest.mark.parametrize("module", ["pipeline.project", "pipeline.verdict", "pipeline.export.report",
                                    "pipeline.starter"])
def test_orchestration_modules_import_no_geometry_or_signal_library(module):
    assert not _imported_after(f"import {module}") & {"scipy", "shapely", "ezdxf", "networkx"}


def test_the_demo_run_imports_no_module_it_does_not_need(tmp_path):
    """The whole demo (placed and routed, every output) needs no scipy, mesh library, browser driver or
    XML parser: the small swap pass finds nearest slots without a k-d tree, the block analysis
    evaluates its responses with numpy."""
    out = tmp_path / "out"
    imported = _imported_after(_demo(out))
    assert (out / "routes.json").exists()  # the run really ran, and routed
    assert not imported & {"scipy", "trimesh", "selenium", "lxml"}


def test_the_demo_without_routing_imports_no_router(tmp_path):
    out = tmp_path / "out"
    modules = _modules_after(_demo(out, "--no-route"))
    assert (out / "report.html").exists() and not (out / "routes.json").exists()
    assert not modules & {"pipeline.route.router", "pipeline.route.grid", "pipeline.copper", "pipeline.export.routes"}
