"""CSV cells no spreadsheet evaluates (issue 13 item 22).

Sources: OWASP, "CSV Injection" (cells starting with = + - @ tab CR are read as formulas; prefix
them with an apostrophe); RFC 4180 section 2 (fields holding a comma, a double quote, CR or LF are
enclosed in double quotes, and inner double quotes doubled; records end in CRLF).
"""

from __future__ import annotations

import csv
import io

import pytest

from pipeline.export.csvcell import csv_bytes, inert
from pipeline.export.netlist import netlist_csv
from pipeline.model import Design, Net, Part, PinDef, PinRef


@pytest.mark.parametrize("name, shown", [
    ("+A1", "'+A1"), ("-A1", "'-A1"),            # cell references: the net names of the defect
    ("-INA", "'-INA"), ("+IN1", "'+IN1"),        # signed pin names: IN1 is a cell reference too
    ("=1+1", "'=1+1"), ("@SUM(A1)", "'@SUM(A1)"), ("\tx", "'\tx"), ("\rx", "'\rx"),
    ("-1+cmd|' /C calc'!A0", "'-1+cmd|' /C calc'!A0"),
    ("+", "+"), ("-", "-"),                      # a lone sign refers to nothing
    ("A1", "A1"), ("10k", "10k"), ("", ""), ("a=b", "a=b"),
])
def test_defect_22_cells_starting_with_a_formula_trigger_are_inert(name, shown):
    assert inert(name) == shown


def test_defect_22_net_names_in_netlist_csv_are_inert():
    pins = (PinDef("1", "1", "passive"), PinDef("2", "2", "passive"))
    parts = (Part("R1", "resistor", "0603", pins), Part("R2", "resistor", "0603", pins))
    nets = (Net("+A1", (PinRef("R1", "1"), PinRef("R2", "1"))), Net("-A1", (PinRef("R1", "2"), PinRef("R2", "2"))))
    data = netlist_csv(Design("n", "A", "n.toml", parts=parts, nets=nets))
    rows = list(csv.reader(io.StringIO(data.decode("utf-8"), newline="")))
    assert {r[0] for r in rows[1:]} == {"'+A1", "'-A1"}
    assert not any(cell.startswith(("=", "+", "-", "@")) for r in rows for cell in r)


def test_rfc4180_quoting_and_crlf():
    data = csv_bytes(["a", "b"], [['x,y', 'say "hi"'], ["line\nbreak", None]])
    # RFC 4180 2.6 / 2.7: quoted fields, inner quotes doubled; 2.1: CRLF line ends
    assert data == b'a,b\r\n"x,y","say ""hi"""\r\n"line\nbreak",\r\n'
