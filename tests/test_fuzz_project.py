"""Fuzz the project-file reader through the real command (issue 13): every key with hostile values,
unknown tables and keys, hostile paths, byte mutations. Properties in tests/fuzzing.py. The default run
is bounded and in-process; ``pytest -m fuzz tests/test_fuzz_project.py`` runs ``SNUGBOARD_FUZZ_EXAMPLES``
(2000) cases in forked children under a time and memory bound and prints the counts by outcome."""

from __future__ import annotations


import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from fuzzing import ANY_VALUE, HOSTILE_TEXT, Case, check_case, mutated, long_run, toml_tables
from generated import chain_design

KEYS = {
    "project": ["name", "design", "cavity", "parts_map"],
    "board": ["layers", "thickness_mm", "sides", "density", "edge_clearance_mm", "wall_clearance_mm", "outline",
              "min_inside_radius_mm"],
    "cavity": ["depth_mm", "units", "layers", "chord_tolerance_mm"],
    "order": ["boards", "spares_percent", "min_spares", "multiple"],
    "analysis": ["draws", "seed"],
    "extra": ["colour"],
}
GOOD = {"design": "design.toml", "cavity": "bay.dxf", "parts_map": "parts.toml", "density": "nominal",
        "outline": "rectangle", "units": "mm"}
PATHS = st.sampled_from(["design.toml", "bay.dxf", "missing.toml", ".", "..", "/dev/zero", "project.toml",
                         "a\x00b", "out", "/", "design.toml/x"])
BAY = ("0\nSECTION\n2\nHEADER\n9\n$INSUNITS\n70\n4\n0\nENDSEC\n0\nSECTION\n2\nENTITIES\n0\nLWPOLYLINE\n8\nCAVITY\n"
       "90\n4\n70\n1\n10\n0\n20\n0\n10\n40\n20\n0\n10\n40\n20\n30\n10\n0\n20\n30\n0\nENDSEC\n0\nEOF\n").encode()


@st.composite
def projects(draw) -> str:
    tables: dict[str, dict] = {"project": {"design": "design.toml"}}
    for table in draw(st.lists(st.sampled_from(sorted(KEYS)), max_size=4, unique=True)):
        body = tables.setdefault(table, {})
        for key in draw(st.lists(st.sampled_from(KEYS[table]), max_size=3, unique=True)):
            if key in ("design", "cavity", "parts_map"):
                body[key] = draw(st.one_of(PATHS, HOSTILE_TEXT))
            elif key in GOOD and draw(st.booleans()):
                body[key] = GOOD[key]
            else:
                body[key] = draw(ANY_VALUE)
    return toml_tables(tables)


@st.composite
def project_cases(draw) -> Case:
    text = draw(projects())
    data = draw(mutated(text)) if draw(st.booleans()) else text.encode("utf-8")
    args = draw(st.sampled_from([("run", "{proj}"), ("run", "{proj}", "--out", "{proj}"),
                                 ("cavity", "{proj}/bay.dxf", "--project", "{proj}")]))
    return Case({"project.toml": data, "design.toml": chain_design(3).encode(), "bay.dxf": BAY}, args)


@settings(max_examples=10, deadline=None, suppress_health_check=[HealthCheck.too_slow], database=None)
@given(project_cases())
def test_project_reader_properties(case):
    check_case(case)


@pytest.mark.fuzz
def test_project_reader_properties_long():
    long_run(project_cases(), "project fuzz")
