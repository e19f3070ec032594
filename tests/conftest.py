"""Shared small inputs for the tests."""

from __future__ import annotations

from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
SHARED = ROOT.parent / "shared"


@pytest.fixture(scope="session")
def library():
    from pipeline.library import load_library

    return load_library()


@pytest.fixture
def design_from(library):
    """Read design TOML text: ``design_from(text) -> (Design, warnings)``."""
    from pipeline.design import read_design_text

    def _read(text: str, display: str = "design.toml"):
        return read_design_text(text, library, display=display)

    return _read
