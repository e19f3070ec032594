"""Every output file of the demo and three test projects, byte for byte, against the set written
before a refactor (tests/golden/expected/). A change meant to alter outputs refreshes them with
``tests/golden/refresh.py`` and says why in its commit; any other difference is a regression."""

from __future__ import annotations

from pathlib import Path

import pytest

from golden.cases import CASES, run_case

EXPECTED = Path(__file__).resolve().parent / "golden" / "expected"


@pytest.mark.parametrize("name,project,args", CASES, ids=[c[0] for c in CASES])
def test_outputs_unchanged_byte_for_byte(name, project, args, tmp_path):
    got = run_case(project, args, tmp_path / "out")
    want = {p.name: p.read_bytes() for p in sorted((EXPECTED / name).iterdir())}
    assert sorted(got) == sorted(want)
    changed = [f for f in want if got[f] != want[f]]
    assert not changed, f"{name}: changed files {changed} (refresh only if the change is meant)"


def test_expected_sets_hold_no_checkout_path():
    """A golden file that embeds where the checkout lives would pass here and fail in a fresh clone."""
    root = str(Path(__file__).resolve().parents[1]).encode()
    leaks = [str(p.relative_to(EXPECTED)) for p in sorted(EXPECTED.rglob("*")) if p.is_file() and root in p.read_bytes()]
    assert leaks == []
