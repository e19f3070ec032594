"""Rewrite the golden output sets in tests/golden/expected/ from the current code.

Run only when a change is *meant* to change outputs, and say in the commit
which files changed and why:

    .venv/bin/python tests/golden/refresh.py
"""

from __future__ import annotations

import shutil
import sys
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent))

from golden.cases import CASES, run_case  # noqa: E402


def main() -> None:
    for name, project, args in CASES:
        dest = HERE / "expected" / name
        if dest.exists():
            shutil.rmtree(dest)
        files = run_case(project, args, HERE / ".scratch" / name)
        dest.mkdir(parents=True)
        for fname, data in files.items():
            (dest / fname).write_bytes(data)
        print(f"{name}: {len(files)} files")
    shutil.rmtree(HERE / ".scratch", ignore_errors=True)


if __name__ == "__main__":
    main()
