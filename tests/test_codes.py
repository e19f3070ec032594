"""The table of finding codes: README shows exactly it, findings use only its codes."""

from __future__ import annotations

import re
from pathlib import Path

import pytest

from pipeline.codes import CODES, allowed, markdown_table
from pipeline.model import Finding

ROOT = Path(__file__).resolve().parents[1]


def test_readme_table_is_the_generated_table():
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    m = re.search(r"<!-- codes:start[^>]*-->\n(.*?)<!-- codes:end -->", text, re.S)
    assert m, "README lost its codes:start / codes:end markers"
    assert m.group(1) == markdown_table()


def test_every_code_written_in_the_source_is_in_the_table():
    """Scan pipeline/ for dotted code strings given to findings: none may be missing from the table."""
    used: set[str] = set()
    for path in (ROOT / "pipeline").rglob("*.py"):
        text = path.read_text(encoding="utf-8")
        used |= set(re.findall(r"""["'](?:error|warning|info)["'],\s*["']([a-z]+\.[a-z0-9.-]+)["']""", text))
    assert used, "the scan found no codes: the pattern no longer matches how findings are made"
    assert sorted(used - set(CODES)) == []


@pytest.mark.parametrize("code,severity,ok", [
    ("connect.empty-net", "error", True),
    ("connect.empty-net", "info", False),
    ("ratings.capacitor-voltage", "warning", True),
    ("no.such-code", "error", False),
])
def test_finding_checks_its_code(code, severity, ok):
    assert allowed(code, severity) is ok
    if ok:
        assert Finding(severity, code, (), "m").check == code
    else:
        with pytest.raises(AssertionError, match="pipeline/codes.py"):
            Finding(severity, code, (), "m")
