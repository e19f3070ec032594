"""Fuzz the design-TOML reader through the real command (issue 13): generated designs, hostile values
and byte mutations. Properties in tests/fuzzing.py. The default run tries a bounded number of cases
in-process; ``pytest -m fuzz tests/test_fuzz_design.py`` runs ``SNUGBOARD_FUZZ_EXAMPLES`` (2000) cases in
forked children under a time and memory bound and prints the counts by outcome."""

from __future__ import annotations


import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from fuzzing import ANY_VALUE, HOSTILE_TEXT, NUMBERS, Case, check_case, mutated, long_run, \
    toml_tables

PROJECT = b'[project]\ndesign = "design.toml"\n'
KINDS = ["resistor", "capacitor", "inductor", "wire-pad", "diode", "opamp-single", "header", "widget"]
PACKAGES = ["0603", "0402", "SOT-23-5", "pad-1.5mm", "SOD-123", "header-1x3-2.54", "XYZ-9"]
VALUES = st.one_of(st.sampled_from(["10k", "4k7", "100n", "1u0", "0", "-1k", "1e308", "nan", "inf", "", "1.5M",
                                    "abc", "10kk", "1e-30", "3.3V"]), NUMBERS)
PIN_NAMES = st.sampled_from(["1", "2", "3", "9", "K", "A", "-IN", "+IN", "OUT", "", "x"])


@st.composite
def designs(draw) -> str:
    refs = draw(st.lists(st.sampled_from(["R1", "R2", "C1", "L1", "D1", "U1", "P1", "P2", "J1"]), min_size=1,
                         max_size=6, unique=True))
    tables = {"design": {"name": draw(st.one_of(st.just("fz"), HOSTILE_TEXT))}}
    for ref in refs:
        part = {"kind": draw(st.sampled_from(KINDS)), "package": draw(st.sampled_from(PACKAGES))}
        if draw(st.booleans()):
            part["value"] = draw(VALUES)
        for key in draw(st.lists(st.sampled_from(["tolerance", "rating", "dnp", "mpn", "note", "colour"]),
                                 max_size=2, unique=True)):
            part[key] = draw(ANY_VALUE)
        tables[f"parts.{ref}"] = part
    nets = {}
    for i in range(draw(st.integers(0, 5))):
        name = draw(st.sampled_from(["GND", "VCC", "N1", "N2", "+A1", "a b", f"N{i + 3}"]))
        nets[name] = [f"{draw(st.sampled_from(refs + ['Q9']))}.{draw(PIN_NAMES)}"
                      for _ in range(draw(st.integers(1, 3)))]
    tables["nets"] = nets
    if nets and draw(st.booleans()):
        tables["voltages"] = {draw(st.sampled_from(sorted(nets))): draw(st.one_of(NUMBERS, VALUES))}
    return toml_tables(tables)


@st.composite
def sound_designs(draw) -> str:
    """Designs a reader accepts (two-pin parts in a chain, pads at the ends): the runs go past the
    reader, into the checks, blocks and outputs, with values and voltages still drawn at random."""
    n = draw(st.integers(1, 6))
    kinds = [draw(st.sampled_from([("resistor", "R", "10k"), ("capacitor", "C", "100n"), ("inductor", "L", "10u"),
                                   ("diode", "D", None)])) for _ in range(n)]
    tables: dict[str, dict] = {"design": {"name": "fz"}}
    refs = []
    for i, (kind, letter, value) in enumerate(kinds, start=1):
        ref = f"{letter}{i}"
        refs.append(ref)
        part = {"kind": kind, "package": "SOD-123" if kind == "diode" else draw(st.sampled_from(["0402", "0603", "1206"]))}
        if value:
            part["value"] = draw(st.one_of(st.just(value), VALUES))
        tables[f"parts.{ref}"] = part
    tables["parts.P1"] = {"kind": "wire-pad", "package": "pad-1.5mm"}
    tables["parts.P2"] = {"kind": "wire-pad", "package": "pad-1.5mm"}
    ends = ["P1.1", *[f"{r}.{{a}}" for r in refs], "P2.1"]
    nets = {}
    for i in range(len(ends) - 1):
        nets["GND" if i == len(ends) - 2 else f"N{i}"] = [ends[i].format(a=2), ends[i + 1].format(a=1)]
    tables["nets"] = nets
    if draw(st.booleans()):
        tables["voltages"] = {"N0": draw(st.one_of(NUMBERS, VALUES))}
    return toml_tables(tables)


@st.composite
def design_cases(draw) -> Case:
    text = draw(st.one_of(designs(), sound_designs()))
    data = draw(mutated(text)) if draw(st.booleans()) else text.encode("utf-8")
    args = draw(st.sampled_from([("run", "{proj}"), ("check", "{proj}/design.toml")]))
    return Case({"project.toml": PROJECT, "design.toml": data}, args)


@settings(max_examples=10, deadline=None, suppress_health_check=[HealthCheck.too_slow], database=None)
@given(design_cases())
def test_design_reader_properties(case):
    check_case(case)


@pytest.mark.fuzz
def test_design_reader_properties_long():
    long_run(design_cases(), "design fuzz")
