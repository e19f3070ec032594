"""dump_json (pipeline.export.netlist): the same text as the standard library's indented encoder."""

from __future__ import annotations

import json
import math

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from pipeline.export.netlist import dump_json

_LEAVES = (st.none() | st.booleans() | st.integers() | st.floats(allow_nan=False, allow_infinity=False)
           | st.text())
_TREES = st.recursive(_LEAVES, lambda kids: st.lists(kids, max_size=4) | st.dictionaries(st.text(), kids, max_size=4),
                      max_leaves=40)


def _reference(obj) -> bytes:
    # reference: Python's json module (RFC 8259 text), the encoder the writer replaces
    return (json.dumps(obj, indent=2, ensure_ascii=False, allow_nan=False) + "\n").encode("utf-8")


@given(_TREES)
@settings(max_examples=300, deadline=None)
def test_dump_json_matches_the_standard_library(obj):
    assert dump_json(obj) == _reference(obj)


@pytest.mark.parametrize("obj", [{"a": (1, 2.5, None)}, {1: "x", 2.5: True, None: False, True: []}, [[], {}, ""],
                                 {"s": "é \u2028 \" \\ \x01"}, -0.0, 10**30, 1e300])
def test_dump_json_matches_on_tuples_number_keys_and_escapes(obj):
    assert dump_json(obj) == _reference(obj)


@pytest.mark.parametrize("bad, error", [(math.nan, ValueError), ({"x": [math.inf]}, ValueError), ({"x": {1, 2}}, TypeError),
                                        ({(1, 2): 1}, TypeError)])
def test_dump_json_refuses_what_json_refuses(bad, error):
    with pytest.raises(error):
        _reference(bad)
    with pytest.raises(error):
        dump_json(bad)


_NASTY = st.text(alphabet='"\\,[]{}: a\n\u00e9', max_size=8)
_NASTY_TREES = st.recursive(_NASTY | st.integers(-3, 3), lambda kids: st.lists(kids, max_size=3)
                            | st.dictionaries(_NASTY, kids, max_size=3), max_leaves=25)


@given(_NASTY_TREES)
@settings(max_examples=400, deadline=None)
def test_dump_json_matches_on_strings_full_of_quotes_backslashes_and_brackets(obj):
    # the line breaks go outside strings only: a quote after an even run of backslashes ends one
    assert dump_json(obj) == _reference(obj)
