"""Tests for pipeline.ratings.check_values.

Figures are hand-computed from Joule's law P = V**2 / R and the derating rules of
REFERENCES.md section 7 (common practice): class II ceramic capacitors at most 50 % of the
rated voltage, resistors at most 50 % of the rated power. Polarised capacitors: aluminium
electrolytic 80 %, tantalum 50 % (common practice). Preferred values from the IEC 60063:2015
tables.
"""

from __future__ import annotations

import random

import pytest

from pipeline.model import Design, Finding, Net, Part, PinDef, PinRef
from pipeline.ratings import check_values

TWO = (PinDef("1", "1", "passive"), PinDef("2", "2", "passive"))
POL = (PinDef("1", "+", "passive"), PinDef("2", "-", "passive"))


def res(ref, ohms, watts=None, **kw):
    return Part(ref, "resistor", "0603", TWO, value=ohms, rating_w=watts, **kw)


def cap(ref, farads, volts=None, **kw):
    return Part(ref, "capacitor", "0603", TWO, value=farads, rating_v=volts, **kw)


def ecap(ref, farads, volts=None, **kw):
    return Part(ref, "capacitor-polarized", "1206", POL, value=farads, rating_v=volts, **kw)


def design(parts, voltages, wiring):
    """wiring: {net: [(ref, pin), ...]}; voltages: {net: v | (v, vmax) | (v, vmax, battery)}."""
    nets = []
    for name, pins in wiring.items():
        v = voltages.get(name)
        if isinstance(v, tuple):
            nom, vmax, *bat = v
            nets.append(Net(name, tuple(PinRef(r, p) for r, p in pins), nom, vmax, bool(bat and bat[0])))
        else:
            nets.append(Net(name, tuple(PinRef(r, p) for r, p in pins), v))
    return Design("t", "A", "t.toml", tuple(parts), tuple(nets))


def across(ref, top="VCC", bottom="GND"):
    return {top: [(ref, "1")], bottom: [(ref, "2")]}


def only(findings, prefix):
    return [f for f in findings if f.check.startswith(prefix)]


# --------------------------------------------------------------------------
# Resistor dissipation
# --------------------------------------------------------------------------
def test_resistor_above_rating_is_error():
    # Hand: 5 V across 100 ohm -> P = 25 / 100 = 0.25 W > 0.125 W rating (Joule's law).
    f = only(check_values(design([res("R1", 100.0, 0.125)], {"VCC": 5.0}, across("R1"))), "ratings")
    assert [(x.severity, x.check) for x in f] == [("error", "ratings.resistor-power")]
    assert f[0].subject == ("R1", "VCC", "GND")
    assert "250 mW" in f[0].message and "500 mW" in f[0].message  # needs 2 x 0.25 W


def test_resistor_above_half_rating_is_warning():
    # Hand: 3.3 V across 100 ohm -> 0.1089 W, 87 % of 0.125 W: above the 50 % margin.
    f = only(check_values(design([res("R1", 100.0, 0.125)], {"VCC": 3.3}, across("R1"))), "ratings")
    assert [(x.severity, x.check) for x in f] == [("warning", "ratings.resistor-power")]
    assert "109 mW" in f[0].message and "87.1 %" in f[0].message


@pytest.mark.parametrize(
    "volts, ohms, watts",
    [
        (5.0, 10e3, 0.1),  # hand: 2.5 mW, far below 50 mW
        (5.0, 200.0, 0.25),  # hand: exactly 0.125 W = 50 % of 0.25 W: allowed ("at most 50 %")
        (12.0, 1e3, 0.5),  # hand: 0.144 W <= 0.25 W
    ],
)
def test_resistor_within_margin_no_finding(volts, ohms, watts):
    assert only(check_values(design([res("R1", ohms, watts)], {"VCC": volts}, across("R1"))), "ratings") == []


def test_resistor_between_two_declared_rails():
    # Hand: 5 V - 3.3 V = 1.7 V across 10 ohm -> 0.289 W > 0.25 W rating.
    d = design([res("R1", 10.0, 0.25)], {"VCC": 5.0, "V33": 3.3}, across("R1", "VCC", "V33"))
    f = only(check_values(d), "ratings")
    assert [(x.severity, x.subject) for x in f] == [("error", ("R1", "VCC", "V33"))]
    assert "1.7 V" in f[0].message and "289 mW" in f[0].message


def test_resistor_missing_rating_info_with_need():
    # Hand: 5 V across 330 ohm -> 25 / 330 = 75.8 mW; with 50 % margin it needs 152 mW, more than
    # the 50 mW of the smallest common chip resistor (0201, 1/20 W; common practice, from memory).
    f = only(check_values(design([res("R1", 330.0)], {"VCC": 5.0}, across("R1"))), "ratings")
    assert [(x.severity, x.check) for x in f] == [("info", "ratings.missing")]
    assert "75.8 mW" in f[0].message and "152 mW" in f[0].message


@pytest.mark.parametrize("ohms, noted", [
    (1e3, False),     # hand: 25 mW, needs 50 mW: exactly 1/20 W, safe on any chip resistor
    (10e3, False),    # hand: 2.5 mW, needs 5 mW
    (470.0, True),    # hand: 53.2 mW, needs 106 mW > 50 mW
])
def test_unrated_resistor_noted_only_when_it_needs_more_than_the_smallest_rating(ohms, noted):
    f = only(check_values(design([res("R1", ohms)], {"VCC": 5.0}, across("R1"))), "ratings")
    assert [x.check for x in f] == (["ratings.missing"] if noted else [])


def test_board_with_every_voltage_declared_gets_no_rating_notes_for_safe_parts():
    # Issue 10 item 7: a 3.3 V board of 10k pull-ups and 100 nF decoupling, no ratings given.
    # Hand: 3.3^2 / 10k = 1.09 mW (needs 2.2 mW <= 50 mW); class II ceramic needs 6.6 V > 6.3 V,
    # so the capacitors are noted, once, listing both.
    parts = [res("R1", 10e3), res("R2", 10e3), cap("C1", 100e-9), cap("C2", 100e-9)]
    wiring = {"V33": [("R1", "1"), ("R2", "1"), ("C1", "1"), ("C2", "1")],
              "GND": [("R1", "2"), ("R2", "2"), ("C1", "2"), ("C2", "2")]}
    f = only(check_values(design(parts, {"V33": 3.3}, wiring)), "ratings")
    assert [(x.check, x.subject) for x in f] == [("ratings.missing", ("C1", "C2"))]
    assert "C1 sees up to 3.3 V" in f[0].message and "6.6 V" in f[0].message


def test_missing_ratings_are_grouped_per_kind():
    # No voltages at all: one note for the resistors, one for the capacitors, each listing its parts.
    parts = [res("R1", 1e3), res("R2", 2e3), res("R10", 3e3), cap("C1", 1e-9), cap("C2", 1e-9)]
    wiring = {"A": [(p.ref, "1") for p in parts], "B": [(p.ref, "2") for p in parts]}
    f = [x for x in check_values(design(parts, {}, wiring)) if x.check == "ratings.missing"]
    assert [x.subject for x in f] == [("R1", "R2", "R10"), ("C1", "C2")]
    assert f[0].message.startswith("R1, R2, R10 have no power rating")


@pytest.mark.parametrize("kind, unit_value, error", [
    ("capacitor", 0.0, True), ("capacitor-polarized", 0.0, True), ("inductor", 0.0, True),
    ("resistor", 0.0, False),        # a 0 ohm link is a part
    ("capacitor", 1e-9, False),
])
def test_defect_09_zero_capacitor(kind, unit_value, error):
    # Issue 13 item 9: a capacitor or inductor of value 0 is no part: an error finding.
    p = Part("X1", kind, "0603", POL if kind == "capacitor-polarized" else TWO, value=unit_value)
    f = check_values(design([p], {}, {"A": [("X1", "1")], "B": [("X1", "2")]}))
    assert [x.severity for x in f if x.check == "values.zero"] == (["error"] if error else [])


def test_defect_09_zero_capacitor_through_the_cli(tmp_path):
    # The same through `snugboard check`: exit 1 and the finding named.
    from click.testing import CliRunner

    from pipeline.cli import main
    d = tmp_path / "d.toml"
    d.write_text('[design]\nname = "z"\n\n[parts]\nC1 = { kind = "capacitor", package = "0603", value = "0" }\n'
                 'R1 = { kind = "resistor", package = "0603", value = "1k" }\n\n'
                 '[nets]\nA = ["C1.1", "R1.1"]\nB = ["C1.2", "R1.2"]\n', encoding="utf-8")
    r = CliRunner().invoke(main, ["check", str(d), "--json"])
    assert r.exit_code == 1, r.output
    import json
    assert [f["subject"] for f in json.loads(r.stdout)["findings"] if f["check"] == "values.zero"] == [["C1"]]


def test_unknown_voltage():
    # A net without a declared voltage (and not ground) is unknown: no power check, but a part
    # with no rating still gets its info finding.
    d = design([res("R1", 1e3), res("R2", 1e3, 0.1)], {}, {"SIG": [("R1", "1"), ("R2", "1")], "GND": [("R1", "2"), ("R2", "2")]})
    f = check_values(d)
    assert [(x.check, x.subject) for x in only(f, "ratings.")] == [
        ("ratings.no-voltages", ()),
        ("ratings.missing", ("R1",)),
    ]


def test_zero_ohm_link():
    # A 0 ohm link between 5 V and ground would short them; a link on one net is fine;
    # zero ohm is in no E-series and gets no preferred-value finding.
    f = check_values(design([res("R1", 0.0)], {"VCC": 5.0}, across("R1")))
    assert [(x.severity, x.check) for x in f] == [("warning", "ratings.resistor-power")]
    assert check_values(design([res("R1", 0.0)], {"VCC": 5.0}, {"VCC": [("R1", "1"), ("R1", "2")]})) == ()


# --------------------------------------------------------------------------
# Capacitor voltage
# --------------------------------------------------------------------------
def test_ceramic_at_6v3_with_5v_is_warning():
    # Hand: 5 V / 6.3 V = 79 % > 50 % (class II ceramic rule, REFERENCES.md section 7).
    f = only(check_values(design([cap("C1", 100e-9, 6.3)], {"VCC": 5.0}, across("C1"))), "ratings")
    assert [(x.severity, x.check) for x in f] == [("warning", "ratings.capacitor-voltage")]
    assert "10 V" in f[0].message  # needs 5 V / 0.5


@pytest.mark.parametrize(
    "rating, severity",
    [
        (4.0, "error"),  # hand: 5 V > 4 V rating
        (6.3, "warning"),  # hand: 5 V > 3.15 V
        (10.0, None),  # hand: 5 V = 50 % of 10 V: allowed
        (16.0, None),
    ],
)
def test_ceramic_ratings(rating, severity):
    f = only(check_values(design([cap("C1", 1e-6, rating)], {"VCC": 5.0}, across("C1"))), "ratings")
    assert [x.severity for x in f] == ([severity] if severity else [])


def test_class_one_ceramic_note_allows_80_percent():
    # Note names C0G: class I, 80 % (common practice); hand: 5 / 6.3 = 79 % <= 80 %.
    c = cap("C1", 1e-9, 6.3, note="C0G dielectric")
    assert only(check_values(design([c], {"VCC": 5.0}, across("C1"))), "ratings") == []


def test_battery_max_voltage_is_used():
    # Hand: VBAT nominal 3.7 V, max 4.2 V; 4.2 V > 0.5 x 8 V = 4 V -> warning; with nominal only it
    # would pass (3.7 <= 4).
    d = design([cap("C1", 1e-6, 8.0)], {"VBAT": (3.7, 4.2, True)}, across("C1", "VBAT"))
    f = only(check_values(d), "ratings")
    assert [(x.severity, x.check) for x in f] == [("warning", "ratings.capacitor-voltage")]
    assert "4.2 V" in f[0].message
    d = design([cap("C1", 1e-6, 10.0)], {"VBAT": (3.7, 4.2, True)}, across("C1", "VBAT"))
    assert only(check_values(d), "ratings") == []


def test_capacitor_missing_rating_info():
    # Hand: 3.3 V on a class II ceramic needs at least 6.6 V.
    f = only(check_values(design([cap("C1", 100e-9)], {"VCC": 3.3}, across("C1"))), "ratings")
    assert [(x.severity, x.check) for x in f] == [("info", "ratings.missing")]
    assert "6.6 V" in f[0].message


@pytest.mark.parametrize(
    "note, rating, expected",
    [
        ("", 10.0, []),  # hand: 5 V = 50 % of 10 V, fine as aluminium and as tantalum
        ("", 6.3, [("info", "ratings.capacitor-voltage")]),  # 79 %: ok aluminium (80 %), not tantalum
        ("aluminium", 6.3, []),  # stated aluminium: 79 % <= 80 %
        ("tantalum", 6.3, [("warning", "ratings.capacitor-voltage")]),  # 79 % > 50 %
        ("tantalum", 10.0, []),
        ("", 6.0, [("warning", "ratings.capacitor-voltage")]),  # hand: 83 % > 80 %
        ("", 4.0, [("error", "ratings.capacitor-voltage")]),  # above the rating
    ],
)
def test_polarized_capacitor(note, rating, expected):
    c = ecap("C1", 10e-6, rating, note=note)
    f = only(check_values(design([c], {"VCC": 5.0}, across("C1"))), "ratings")
    assert [(x.severity, x.check) for x in f] == expected


def test_polarized_capacitor_reversed():
    # + on GND, - on 5 V: reverse-biased.
    f = only(check_values(design([ecap("C1", 10e-6, 16.0)], {"VCC": 5.0}, across("C1", "GND", "VCC"))), "ratings")
    assert [(x.severity, x.check) for x in f] == [("error", "ratings.capacitor-polarity")]


def test_dnp_parts_get_no_rating_findings():
    p = res("R1", 100.0, 0.125, dnp=True)
    f = check_values(design([p], {"VCC": 5.0}, across("R1")))
    assert only(f, "ratings") == []
    assert [x.check for x in f] == ["values.series"]


# --------------------------------------------------------------------------
# Safety caution
# --------------------------------------------------------------------------
def test_caution_above_30v():
    d = design([res("R1", 100e3, 0.25)], {"HV": 48.0}, across("R1", "HV"))
    f = only(check_values(d), "safety")
    assert len(f) == 1 and f[0].severity == "warning" and f[0].subject == ("HV",)
    for word in ("unpowered", "local electrical codes", "licensed practice", "30 V"):
        assert word in f[0].message


def test_caution_battery_once():
    d = design(
        [cap("C1", 1e-6, 10.0), cap("C2", 1e-6, 50.0)],
        {"VBAT": (3.7, 4.2, True), "VBUS": 36.0},
        {"VBAT": [("C1", "1")], "VBUS": [("C2", "1")], "GND": [("C1", "2"), ("C2", "2")]},
    )
    f = only(check_values(d), "safety")
    assert len(f) == 1 and f[0].subject == ("VBAT", "VBUS")
    assert "lithium" in f[0].message and "unpowered" in f[0].message


@pytest.mark.parametrize("volts", [30.0, 12.0, -12.0])
def test_no_caution_at_or_below_30v(volts):
    d = design([res("R1", 100e3, 0.25)], {"V": volts}, across("R1", "V"))
    assert only(check_values(d), "safety") == []


def test_caution_negative_rail():
    d = design([res("R1", 100e3, 0.25)], {"VNEG": -48.0}, across("R1", "VNEG"))
    assert [x.check for x in only(check_values(d), "safety")] == ["safety.caution"]


# --------------------------------------------------------------------------
# Preferred values
# --------------------------------------------------------------------------
def test_series_info_names_coarsest_series():
    # IEC 60063: 10k is an E3 value (and in every finer series).
    f = only(check_values(design([res("R1", 10e3, 0.1)], {"VCC": 5.0}, across("R1"))), "values")
    assert [(x.severity, x.check) for x in f] == [("info", "values.series")]
    assert "E3" in f[0].message


def test_off_series_names_nearest():
    # IEC 60063 tables: 4.8k lies between E192 4.75k and 4.81k, and between E96 4.75k and 4.87k;
    # its 1 % tolerance suggests E96.
    f = only(check_values(design([res("R1", 4800.0, 0.1, tolerance=0.01)], {}, across("R1"))), "values")
    assert [(x.severity, x.check, x.subject) for x in f] == [("warning", "values.off-series", ("R1",))]
    for text in ("4.75k", "4.81k", "4.87k", "E96", "E192"):
        assert text in f[0].message


def test_off_series_default_series_for_capacitor():
    # No tolerance: E12 assumed for capacitors; 2.9 nF (in no series: E24 has 2.7 and 3.0) lies
    # between E12 2.7 nF and 3.3 nF and between E192 2.87 nF and 2.91 nF (IEC 60063 tables).
    f = only(check_values(design([cap("C1", 2.9e-9, 50.0)], {}, across("C1"))), "values")
    assert [x.check for x in f] == ["values.off-series"]
    for text in ("2.7nF", "3.3nF", "2.87nF", "2.91nF", "E12"):
        assert text in f[0].message


def test_value_in_coarse_series_only_is_fine():
    # 4.7k with 1 % tolerance is not in E96 but is in E24: a preferred value, info only.
    f = only(check_values(design([res("R1", 4700.0, 0.1, tolerance=0.01)], {}, across("R1"))), "values")
    assert [x.check for x in f] == ["values.series"]


# --------------------------------------------------------------------------
# Determinism and order
# --------------------------------------------------------------------------
def test_sorted_by_natural_ref_and_deterministic():
    parts = [res(f"R{i}", 100.0, 0.125) for i in (10, 2, 1, 33)] + [cap("C3", 1e-6, 6.3)]
    wiring = {"VCC": [(p.ref, "1") for p in parts], "GND": [(p.ref, "2") for p in parts]}
    first = check_values(design(parts, {"VCC": 5.0, "VBAT": (3.7, 4.2, True)}, {**wiring, "VBAT": []}))
    refs = [f.subject[0] for f in first if f.subject and f.check != "safety.caution"]
    assert refs == sorted(refs, key=lambda r: (r[0], int(r[1:])))
    assert first[0].check == "safety.caution"
    rng = random.Random(7)
    for _ in range(5):
        shuffled = parts[:]
        rng.shuffle(shuffled)
        again = check_values(design(shuffled, {"VCC": 5.0, "VBAT": (3.7, 4.2, True)}, {**wiring, "VBAT": []}))
        assert again == first
    assert all(isinstance(f, Finding) and f.message.endswith(".") for f in first)


def test_docstring_examples_run():
    # The numpydoc examples of the module are executed (they double as documentation).
    import doctest

    import pipeline.ratings

    result = doctest.testmod(pipeline.ratings)
    assert result.attempted > 0 and result.failed == 0


def test_series_findings_grouped_into_one():
    # IEC 60063 tables: 10k is in E3; 2.7k first appears in E12; 1.02k first appears in E96
    # (E48 has 1.00 and 1.05, E96 has 1.02).
    parts = [res("R1", 10e3, 0.1), res("R2", 1.02e3, 0.1), res("R3", 2.7e3, 0.1)]
    f = only(check_values(design(parts, {}, {"A": [(p.ref, "1") for p in parts],
                                             "B": [(p.ref, "2") for p in parts]})), "values")
    assert [x.check for x in f] == ["values.series"]
    assert f[0].subject == ("R1", "R2", "R3")
    msg = f[0].message
    assert "E3: R1 10k" in msg and "E12: R3 2.7k" in msg and "E96: R2 1.02k" in msg, msg
    # the cross-check against the independent tables of the eseries package
    import eseries
    assert 1.02 in [round(v, 2) for v in eseries.erange(eseries.E96, 1, 10)]
    assert 1.02 not in [round(v, 2) for v in eseries.erange(eseries.E48, 1, 10)]


def test_each_kind_value_and_tolerance_is_judged_once():
    """Cost guard (issue 11): the series test and message of a value are made once per distinct
    kind, value and tolerance, however many parts share them (counted by the cache, not timed); the
    summary still lists every part (reference: IEC 60063, E3 = 1.0, 2.2, 4.7 and E6 adds 1.5, 3.3, 6.8;
    so 10k and 4.7k are E3 values and 1.5 ohm an E6 one)."""
    from pipeline import ratings
    from pipeline.model import Design, Part, PinDef

    pins = (PinDef("1", "1", "passive"), PinDef("2", "2", "passive"))
    values = (10e3, 4.7e3, 1.5)
    parts = tuple(Part(f"R{i}", "resistor", "0603", pins, value=values[i % 3]) for i in range(1, 301))
    ratings._value_note.cache_clear()
    found = ratings.check_values(Design("d", "A", "d.toml", parts, ()))
    assert ratings._value_note.cache_info().misses == 3
    series = [f for f in found if f.check == "values.series"]
    assert len(series) == 1 and len(series[0].subject) == 300
    assert "E3: R1 4.7k ohm, R3 10k ohm, R4 4.7k ohm" in series[0].message
    assert "E6: R2 1.5 ohm, R5 1.5 ohm" in series[0].message


@pytest.mark.parametrize("count, tail", [(12, None), (13, " and 1 more"), (40, " and 28 more")])
def test_long_part_lists_are_shortened_in_the_message_and_kept_whole_in_the_subject(count, tail):
    # Issue 10 item 7: a note listing every part drowned a 1,000-part run (12,000 characters); past
    # pipeline.findings_group.LIST_LIMIT (12) parts a message counts the rest, the subject keeps all.
    parts = [res(f"R{i}", 10e3) for i in range(1, count + 1)]
    wiring = {"A": [(p.ref, "1") for p in parts], "B": [(p.ref, "2") for p in parts]}
    found = check_values(design(parts, {}, wiring))
    for code in ("ratings.missing", "values.series"):
        f = [x for x in found if x.check == code]
        assert len(f) == 1 and f[0].subject == tuple(p.ref for p in parts)
        assert f"R{count} " not in f[0].message + " " if tail else f"R{count}" in f[0].message
        assert (tail in f[0].message) if tail else ("more" not in f[0].message)
