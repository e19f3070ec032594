"""Notes of one kind grouped into one finding (pipeline/findings_group.py).

The figures here are counts and lists of refs. Each is checked against the
test's own count of the findings it built, and the order against the test's
own natural sort (digit runs as numbers, ``R2`` before ``R10``: common
practice, the order parts are numbered on a schematic).
"""

from __future__ import annotations

import json
import re
from pathlib import Path

import pytest
from click.testing import CliRunner
from hypothesis import given, settings
from hypothesis import strategies as st

from pipeline.cli import main
from pipeline.findings_group import GROUPED_CODES, KINDS, LIST_LIMIT, group_findings, listed
from pipeline.model import Finding


def _natural(ref: str) -> tuple:
    """The test's own natural order: letters, then the number as a number (common practice)."""
    m = re.fullmatch(r"([A-Za-z]+)(\d+)", ref)
    return (m.group(1), int(m.group(2)))


# findings made the way the steps make them (pipeline/place_rules.py, check.py, ratings.py: each names
# its kind); the tests below that run the real steps check that those steps still name it
def _decoupling(cap: str, ic: str, d: float = 7.5) -> Finding:
    return Finding("warning", "place.rule-unmet", (cap, ic),
                   f"{cap} should have a pad within 3 mm of {ic}'s supply pins 4, 8 (decoupling, the default "
                   f"rule), but the nearest place left for it is {d} mm away: give the board more room or fix "
                   "the capacitor's place with at.", kind="decoupling")


def _edge(ref: str) -> Finding:
    return Finding("warning", "place.rule-unmet", (ref,),
                   f"{ref} should sit at the board edge nearest the wire-entry zone (edge rule), but no room is "
                   "left there: it ended 4 mm from the zone.", kind="edge")


def _loose(ref: str) -> Finding:
    return Finding("error", "connect.unconnected-part", (ref,),
                   f"{ref} (resistor) is connected to nothing: add it to nets or remove it.",
                   kind="unconnected-part")


def _off_series(ref: str) -> Finding:
    return Finding("warning", "values.off-series", (ref,), f"{ref} is 1.23k ohm, in no E-series.")


def _other(n: int) -> Finding:
    return Finding("info", "fit.fits", (), f"All {n} fitted parts are placed inside the cavity.")


# ---------------------------------------------------------------------------- the grouping itself
@pytest.mark.parametrize("findings, want", [
    # several of one kind -> one finding naming all, in natural order, counted
    ([_decoupling("C10", "U2"), _decoupling("C2", "U1"), _decoupling("C3", "U1")],
     [("place.rule-unmet", "warning", ("C2", "C3", "C10"), "3 decoupling", "C2 (U1), C3 (U1), C10 (U2)")]),
    # two kinds of one code kept apart, each grouped; an ungrouped code left alone
    ([_edge("P2"), _decoupling("C1", "U1"), _edge("P1"), _decoupling("C4", "U1"), _off_series("R1"),
      _off_series("R2")],
     [("place.rule-unmet", "warning", ("P1", "P2"), "2 parts should sit at the board edge", "P1, P2"),
      ("place.rule-unmet", "warning", ("C1", "C4"), "2 decoupling", "C1 (U1), C4 (U1)"),
      ("values.off-series", "warning", ("R1",), "R1 is 1.23k", ""),
      ("values.off-series", "warning", ("R2",), "R2 is 1.23k", "")]),
    # mixed codes and severities: each group keeps its code and severity
    ([_loose("R7"), _decoupling("C1", "U1"), _loose("R3"), _decoupling("C2", "U1")],
     [("connect.unconnected-part", "error", ("R3", "R7"), "2 parts are connected to nothing", "R3, R7"),
      ("place.rule-unmet", "warning", ("C1", "C2"), "2 decoupling", "C1 (U1), C2 (U1)")]),
])
def test_kinds_grouped_apart_and_in_natural_order(findings, want):
    got = group_findings(findings)
    assert len(got) == len(want)
    for g, (code, severity, subject, opening, parts) in zip(got, want):
        assert (g.check, g.severity, g.subject) == (code, severity, subject)
        assert g.message.startswith(opening) and parts in g.message
        assert g.message.endswith(".") and not re.search(r"\. [A-Z]", g.message), g.message
        assert list(g.subject) == sorted(g.subject, key=_natural)


@pytest.mark.parametrize("findings", [
    [],
    [_decoupling("C1", "U1")],                                 # one of a kind: kept as it is
    [_decoupling("C1", "U1"), _edge("P1"), _loose("R1")],      # one of each kind
    [_off_series("R1"), _off_series("R2"), _other(3)],         # codes that are never grouped
])
def test_singletons_and_ungrouped_codes_unchanged(findings):
    assert group_findings(findings) == tuple(findings)


def test_the_group_stands_where_its_first_member_stood():
    fs = [_other(1), _edge("P9"), _off_series("R1"), _edge("P1"), _other(2)]
    got = group_findings(fs)
    assert [f.check for f in got] == ["fit.fits", "place.rule-unmet", "values.off-series", "fit.fits"]
    assert got[0] is fs[0] and got[2] is fs[2] and got[3] is fs[4]


@pytest.mark.parametrize("n", [LIST_LIMIT - 1, LIST_LIMIT, LIST_LIMIT + 1, 3 * LIST_LIMIT + 5])
def test_long_lists_shortened_in_the_message_full_in_the_subject(n):
    refs = [f"C{k}" for k in range(n, 0, -1)]  # given backwards
    (g,) = group_findings([_decoupling(r, "U1") for r in refs])
    assert g.subject == tuple(sorted(refs, key=_natural)) and len(g.subject) == n
    assert g.message.startswith(f"{n} decoupling")
    shown = re.findall(r"\bC\d+ \(U1\)", g.message)
    assert len(shown) == min(n, LIST_LIMIT)
    assert shown == [f"C{k} (U1)" for k in range(1, min(n, LIST_LIMIT) + 1)]
    assert (f"and {n - LIST_LIMIT} more" in g.message) == (n > LIST_LIMIT)
    assert g.message.count(". ") == 0 and g.message.endswith(".")  # one sentence (CONTRACT section 4)
    assert g.to_dict()["subject"] == [f"C{k}" for k in range(1, n + 1)]  # findings.json keeps them all


@pytest.mark.parametrize("names, limit, want", [
    ([], 3, ""),
    (["R1"], 3, "R1"),
    (["R1", "R2", "R3"], 3, "R1, R2, R3"),
    (["R1", "R2", "R3", "R4"], 3, "R1, R2, R3 and 1 more"),
])
def test_listed(names, limit, want):
    assert listed(names, limit) == want


_REFS = st.lists(st.integers(1, 60), min_size=0, max_size=12, unique=True)


@settings(max_examples=60, deadline=None)
@given(caps=_REFS, pads=_REFS, loose=_REFS, seed=st.randoms(use_true_random=False))
def test_deterministic_whatever_the_order_and_nothing_lost(caps, pads, loose, seed):
    fs = ([_decoupling(f"C{k}", f"U{k % 3 + 1}") for k in caps] + [_edge(f"P{k}") for k in pads]
          + [_loose(f"R{k}") for k in loose] + [_other(1)])
    shuffled = list(fs)
    seed.shuffle(shuffled)
    got = group_findings(shuffled)
    # the same findings in any order give the same findings (the stages' order decides only where)
    assert sorted(got, key=repr) == sorted(group_findings(fs), key=repr)
    assert group_findings(got) == got  # grouping twice changes nothing
    # every ref is still named, once, under its code and severity
    for code, refs in (("place.rule-unmet", [f"C{k}" for k in caps] + [f"P{k}" for k in pads]),
                       ("connect.unconnected-part", [f"R{k}" for k in loose])):
        named = [r for f in got if f.check == code for r in f.subject if not r.startswith("U")]
        assert sorted(named) == sorted(refs)
    for f in got:
        assert f.severity == {"place.rule-unmet": "warning", "connect.unconnected-part": "error",
                              "fit.fits": "info"}[f.check]
    # one finding per kind that had any
    assert sum(f.check == "connect.unconnected-part" for f in got) == (1 if loose else 0)
    assert sum(f.check == "place.rule-unmet" for f in got) == (1 if caps else 0) + (1 if pads else 0)


def test_grouped_codes_are_the_kinds_codes_and_known():
    from pipeline.codes import CODES

    assert GROUPED_CODES == tuple(dict.fromkeys(k.code for k in KINDS))
    assert all(code in CODES for code in GROUPED_CODES)
    assert len({(k.code, k.name) for k in KINDS}) == len(KINDS)
    assert not any(code.startswith(("spice.", "cavity.", "design.")) for code in GROUPED_CODES)  # located


# ---------------------------------------------------------------------------- the real steps' wordings
def test_the_placers_edge_notes_are_grouped():
    """26 wire pads on a 12 x 12 mm board: the edge band holds 16, the other ten become one note
    (the count is the test's own: one note per pad the placer names)."""
    from shapely.geometry import box

    from pipeline.area import items_from_design
    from pipeline.design import read_design_text
    from pipeline.library import load_library
    from pipeline.model import BoardOptions, HeightZone, Region
    from pipeline.place import place_and_fit

    lib = load_library()
    n = 26
    text = ('[design]\nname = "e"\n'
            + "".join(f'[parts.P{k}]\nkind = "wire-pad"\npackage = "pad-1.5mm"\n' for k in range(1, n + 1))
            + "[nets]\n" + "".join(f'N{k} = ["P{k}.1", "P{k + 1}.1"]\n' for k in range(1, n, 2)))
    design, _ = read_design_text(text, lib)
    region = Region(box(0, 0, 12, 12), (HeightZone(box(0, 0, 12, 12), 5.0),), 0.8, wire_entry=box(0, -1, 3, 2))
    fit = place_and_fit(items_from_design(design, lib, "nominal"), region, BoardOptions(edge_clearance_mm=0.5))
    notes = [f for f in fit.warnings if f.check == "place.rule-unmet"]
    assert len(notes) >= 2
    (g,) = [f for f in group_findings(fit.warnings) if f.check == "place.rule-unmet"]
    assert g.subject == tuple(sorted((f.subject[0] for f in notes), key=_natural))
    assert g.message.startswith(f"{len(notes)} parts should sit at the board edge")


def _part(ref: str, kind: str, package: str, value: str = "", at: tuple[float, float] | None = None) -> str:
    return (f'[parts.{ref}]\nkind = "{kind}"\npackage = "{package}"\n' + (f'value = "{value}"\n' if value else "")
            + (f"at = [{at[0]}, {at[1]}]\n" if at else ""))


def _project(tmp_path: Path, design: str, cavity: str | None = None) -> Path:
    """A project folder holding ``design`` and, given its text, a measured cavity (5 mm deep)."""
    d = tmp_path / "proj"
    d.mkdir()
    (d / "design.toml").write_text(design)
    head = '[project]\nname = "g"\ndesign = "design.toml"\n'
    if cavity is not None:
        (d / "bay.cavity.toml").write_text(cavity)
        head += 'cavity = "bay.cavity.toml"\n[cavity]\ndepth_mm = 5.0\n'
    (d / "project.toml").write_text(head)
    return d


def _check_design(extra: str, across: tuple[str, ...] = ()) -> str:
    """Two op-amps with their resistors, the supply from two wire pads, ``extra`` parts, and the
    capacitors ``across`` the supply."""
    parts = "".join(_part(f"U{k}", "opamp-dual", "SOIC-8") + _part(f"R{k}", "resistor", "0603", "10k") for k in (1, 2))
    nets = "".join(f'O{k} = ["U{k}.1", "U{k}.2", "R{k}.2"]\nI{k} = ["U{k}.3", "U{k}.5", "R{k}.1"]\n'
                   f'B{k} = ["U{k}.6", "U{k}.7"]\n' for k in (1, 2))
    return ('[design]\nname = "g"\n' + _part("P1", "wire-pad", "pad-1.5mm") + _part("P2", "wire-pad", "pad-1.5mm")
            + parts + extra + "[nets]\n" + nets
            + f'VCC = {["U1.8", "U2.8", "P1.1", *(f"{c}.1" for c in across)]}\n'.replace("'", '"')
            + f'GND = {["U1.4", "U2.4", "P2.1", *(f"{c}.2" for c in across)]}\n'.replace("'", '"'))


@pytest.mark.parametrize("extra, code, refs, severity", [
    ("", "connect.no-decoupling", ("U1", "U2"), "warning"),   # neither IC has a capacitor
    (_part("R8", "resistor", "0603", "1k") + _part("R9", "resistor", "0603", "1k"),
     "connect.unconnected-part", ("R8", "R9"), "error"),
    (_part("C8", "capacitor", "0603", "0") + _part("C9", "capacitor", "0603", "0"),
     "values.zero", ("C8", "C9"), "error"),
])
def test_check_and_run_show_the_same_grouped_finding(tmp_path, extra, code, refs, severity):
    """The real checks' findings of one kind, grouped alike by ``check`` and ``run`` (issue 10 item 6),
    with README's exit status (1 for an error, 0 for warnings only)."""
    d = _project(tmp_path, _check_design(extra, across=tuple(r for r in refs if r.startswith("C"))))
    runs = {cmd: CliRunner().invoke(main, args, catch_exceptions=False)
            for cmd, args in (("check", ["check", str(d / "design.toml"), "--json"]),
                              ("run", ["run", str(d), "--json", "--no-route"]))}
    shown = {}
    for cmd, r in runs.items():
        doc = json.loads(r.stdout)
        (g,) = [f for f in doc["findings"] if f["check"] == code]
        assert tuple(g["subject"]) == refs and g["severity"] == severity
        assert g["message"].startswith(f"{len(refs)} ")
        shown[cmd] = g
        assert r.exit_code == doc["exit_status"] == (1 if severity == "error" else 0)
    assert shown["check"] == shown["run"]


# ---------------------------------------------------------------------------- through the CLI, with a fit
#: U1 at (5, 10) mm; its two decoupling capacitors fixed 21 mm away, at (26, 4) and (26, 16)
_DECOUPLED = ('[design]\nname = "two-caps"\n' + _part("U1", "opamp-dual", "SOIC-8", at=(5, 10))
              + _part("C1", "capacitor", "0603", "100n", (26, 4)) + _part("C2", "capacitor", "0603", "100n", (26, 16))
              + _part("R1", "resistor", "0603", "10k")
              + '[nets]\nVCC = ["U1.8", "C1.1", "C2.1"]\nGND = ["U1.4", "C1.2", "C2.2"]\n'
                'OUT = ["U1.1", "U1.2", "R1.2"]\nIN = ["U1.3", "U1.5", "R1.1"]\nOUTB = ["U1.6", "U1.7"]\n')


def test_two_caps_off_their_rule_make_one_finding_and_the_same_verdict(tmp_path, monkeypatch):
    """C1 and C2 fixed 20 mm from U1: the default decoupling rule (3 mm) fails for both; the run shows
    one finding naming both, in the terminal, --json, findings.json, fit.json and the report, and the
    verdict's level and exit status are those of the ungrouped run."""
    d = _project(tmp_path, _DECOUPLED, cavity='units = "mm"\n[pocket]\nsize = [30, 20]\n')
    r = CliRunner().invoke(main, ["run", str(d), "--json", "--no-route"], catch_exceptions=False)
    doc = json.loads(r.stdout)
    (g,) = [f for f in doc["findings"] if f["check"] == "place.rule-unmet"]
    assert g["subject"] == ["C1", "C2"] and g["severity"] == "warning"
    assert g["message"].startswith("2 decoupling") and "C1 (U1), C2 (U1)" in g["message"]
    assert g["message"] in r.stderr  # the terminal
    out = d / "out"
    assert json.loads((out / "findings.json").read_text()) == doc["findings"]
    assert [w for w in json.loads((out / "fit.json").read_text())["warnings"]
            if w["check"] == "place.rule-unmet"] == [g]
    assert (out / "report.html").read_text().count("decoupling, the default rule") == 0  # no ungrouped note
    assert "C1 (U1), C2 (U1)" in (out / "report.html").read_text()

    import pipeline.project
    monkeypatch.setattr(pipeline.project, "group_findings", tuple)  # the same run without grouping
    plain = CliRunner().invoke(main, ["run", str(d), "--json", "--no-route", "--out", str(tmp_path / "o2")],
                               catch_exceptions=False)
    pdoc = json.loads(plain.stdout)
    members = [f for f in pdoc["findings"] if f["check"] == "place.rule-unmet"]
    assert [f["subject"] for f in members] == [["C1", "U1"], ["C2", "U1"]]
    assert plain.exit_code == r.exit_code == pdoc["exit_status"] == doc["exit_status"] == 0
    assert pdoc["verdict"]["level"] == doc["verdict"]["level"] == "attention"


def test_the_terminal_shortens_a_long_subject_json_keeps_it(tmp_path):
    """LIST_LIMIT + 2 loose resistors: one line naming LIST_LIMIT of them and "and 2 more", twice (the
    message and its subject in brackets); --json lists every one."""
    n = LIST_LIMIT + 2
    extra = "".join(_part(f"R{k}", "resistor", "0603", "1k") for k in range(10, 10 + n))
    path = _project(tmp_path, _check_design(extra)) / "design.toml"
    text = CliRunner().invoke(main, ["check", str(path)])
    (line,) = [ln for ln in text.output.splitlines() if ln.startswith("error:") and "connected to nothing" in ln]
    assert line.count("and 2 more") == 2 and f"R{10 + LIST_LIMIT - 1}" in line and f"R{10 + LIST_LIMIT}" not in line
    doc = json.loads(CliRunner().invoke(main, ["check", str(path), "--json"]).stdout)
    (g,) = [f for f in doc["findings"] if f["check"] == "connect.unconnected-part"]
    assert g["subject"] == [f"R{k}" for k in range(10, 10 + n)]
