"""Key-to-line scan of pipeline.tomlsrc: worked examples and the cost guard (issue 11)."""

from __future__ import annotations

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from pipeline import tomlsrc
from pipeline.tomlsrc import TomlSource

# worked examples: the expected lines are counted by hand in each text (TOML 1.0 grammar)
CASES = [
    ('a = 1\n[t]\nb = "x # not a comment ]"\nc = 2\n', {"a": 1, "t": 2, "t.b": 3, "t.c": 4}),
    ('s = """\nk = 1\n[not.a.table]\n"""\nafter = 1\n', {"s": 1, "after": 5}),
    ("s = '''one ''' \nlit = 'a[b'\nz = 0\n", {"s": 1, "lit": 2, "z": 3}),
    ('e = "q\\"[" # [x\nnext = 1\n', {"e": 1, "next": 2}),
    ("arr = [\n  {a = 1},\n  {a = 2}, # {\n]\nq = 3\n", {"arr": 1, "arr[0]": 2, "arr[1]": 3, "q": 5}),
    ('[[pin]]\nn = 1\n[[pin]]\nn = 2\n["quoted.key"]\nv = 1\n', {"pin.0": 1, "pin.0.n": 2, "pin.1.n": 4,
                                                                 "quoted.key": 5, "quoted.key.v": 6}),
    ("m = [[1, 2],\n [3]]\nw = 'x'\n", {"m": 1, "w": 3}),
]


@pytest.mark.parametrize("text, lines", CASES)
def test_scan_lines_finds_each_key_line(text, lines):
    src = TomlSource.from_text("t.toml", text)
    for key, no in lines.items():
        assert src.line(key) == no, key


@pytest.mark.parametrize("bad", ['a = "open\n', "a = [1,\n", "a = '''x\n"])
def test_scan_lines_survives_text_tomllib_refuses(bad):
    # the scan runs only after tomllib accepted the text; on its own it must not fail either
    assert tomlsrc._scan_lines(bad)["a"] == 1


def test_scan_lines_reads_each_line_once_and_only_its_significant_characters(monkeypatch):
    # cost guard: one value scan per line at most, and one pattern search per significant character
    # (quotes, brackets, braces, '#') plus one per line, whatever the line's length
    rows = [f'k{i} = [{{a = "{"x" * 200}"}}, "{"y" * 300}", 3]  # note {i}' for i in range(500)]
    text = "[t]\n" + "\n".join(rows) + "\n"
    calls = {"scan": 0, "search": 0}
    real_scan, real_re = tomlsrc._scan_value, tomlsrc._SIGNIFICANT_RE

    def scan(*a):
        calls["scan"] += 1
        return real_scan(*a)

    class Counting:
        def search(self, s, pos=0):
            calls["search"] += 1
            return real_re.search(s, pos)

    monkeypatch.setattr(tomlsrc, "_scan_value", scan)
    monkeypatch.setattr(tomlsrc, "_SIGNIFICANT_RE", Counting())
    lines = tomlsrc._scan_lines(text)
    assert lines["t.k499"] == 501 and lines["t.k7[0]"] == 9  # line 1 is [t], k0 is line 2
    significant = sum(text.count(c) for c in "#\"'[]{}")
    assert calls["scan"] <= text.count("\n")
    assert calls["search"] <= significant + text.count("\n")
    assert calls["search"] < len(text) / 20  # a per-character loop would visit every one


# The plain-line shortcut of the scan (one pattern match per plain line) must give exactly what the
# general scan gives (the reference here: the same function with plain=False, every line the long way).
_FRAGMENTS = [
    "[parts.R1]", "[ parts . R2 ]", "[[pin]]", '["q.k"]', "[t] # c", "kind = \"resistor\"",
    "value = \"4k7\" # note", "v = 'lit'", "n = 3", "a.b = 1", "pins = [\"R1.1\", \"U1.4\"]",
    "pins = [\"R1.1\",", "  \"U2.3\"]", "arr = [", "  {a = 1},", "]", "s = \"\"\"", "k = 1", "\"\"\"",
    "e = \"q\\\"[\"", "", "   ", "# comment", "x = {a = 1}", "m = [[1, 2],", " [3]]", "t = '''a'''",
    "l = '''", "'''", "odd = [\"a]\"]", "w\t=\t\"x\"", "\x0c", "k = [\"a\" # [\n",
]


@settings(max_examples=300, deadline=None)
@given(st.lists(st.sampled_from(_FRAGMENTS), max_size=30))
def test_plain_line_shortcut_gives_what_the_general_scan_gives(rows):
    text = "\n".join(rows) + "\n"
    assert tomlsrc._scan_lines(text) == tomlsrc._scan_lines(text, plain=False)


@pytest.mark.parametrize("text", [c[0] for c in CASES])
def test_plain_line_shortcut_on_the_worked_examples(text):
    assert tomlsrc._scan_lines(text) == tomlsrc._scan_lines(text, plain=False)


def test_plain_lines_skip_the_value_scan(monkeypatch):
    # cost guard: a design's usual lines (headers, key = "text", one-line pin lists) take one pattern
    # match each and no value scan
    text = "".join(f'[parts.R{i}]\nkind = "resistor"\nvalue = "10k"\n\n' for i in range(200))
    text += "[nets]\n" + "".join(f'N{i} = ["R{i}.1", "R{i + 1}.2"]\n' for i in range(199))
    calls = []
    real = tomlsrc._scan_value
    monkeypatch.setattr(tomlsrc, "_scan_value", lambda *a: calls.append(1) or real(*a))
    lines = tomlsrc._scan_lines(text)
    assert calls == []
    assert lines["parts.R199.value"] == 199 * 4 + 3 and lines["nets.N0"] == 802  # counted by hand
