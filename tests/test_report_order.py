"""The report's order section against bom.csv and bom-totals.csv of the same run."""

from __future__ import annotations

import csv
import io
import json
from html.parser import HTMLParser
from pathlib import Path

from click.testing import CliRunner
from shapely.geometry import Polygon

from pipeline.cli import main

ROOT = Path(__file__).resolve().parents[1]


class _Tables(HTMLParser):
    """Cells of each table in the order section, keyed by the table's data-file (or 'board')."""

    def __init__(self):
        super().__init__(convert_charrefs=True)
        self.in_order = 0
        self.tables: dict[str, list[list[str]]] = {}
        self.key = None
        self.cell = None
        self.headings: list[str] = []
        self._h = None

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        if tag == "section":
            self.in_order += 1 if a.get("id") == "order" or self.in_order else 0
        if not self.in_order:
            return
        if tag == "table":
            self.key = a.get("data-file") or ("board" if "board-order" in a.get("class", "") else "other")
            self.tables[self.key] = []
        elif tag == "tr" and self.key:
            self.tables[self.key].append([])
        elif tag in ("td", "th") and self.key:
            self.cell = ""
        elif tag == "h2":
            self._h = ""

    def handle_endtag(self, tag):
        if tag == "section" and self.in_order:
            self.in_order -= 1
        elif tag in ("td", "th") and self.cell is not None:
            self.tables[self.key][-1].append(self.cell)
            self.cell = None
        elif tag == "table":
            self.key = None
        elif tag == "h2" and self._h is not None:
            self.headings.append(self._h)
            self._h = None

    def handle_data(self, data):
        if self.cell is not None:
            self.cell += data
        if self._h is not None:
            self._h += data


def _csv(path: Path) -> list[list[str]]:
    return list(csv.reader(io.StringIO(path.read_text())))


def test_order_section_matches_the_bom_files_of_the_same_run(tmp_path):
    out = tmp_path / "out"
    r = CliRunner().invoke(main, ["run", str(ROOT / "demo_project"), "--out", str(out)], catch_exceptions=False)
    assert r.exit_code == 0, r.stderr
    page = _Tables()
    page.feed((out / "report.html").read_text())
    totals = dict(_csv(out / "bom-totals.csv")[1:])
    assert page.headings == [f"Order for {totals['boards']} boards"] and totals["boards"] == "10"
    # every line and every cell of the BOM files, in order (the CSV module reads them independently);
    # only columns empty on every row are left out of the page
    for name in ("bom.csv", "bom-totals.csv", "bom-unfitted.csv", "board-features.csv"):
        want = _csv(out / name)
        keep = [i for i in range(len(want[0])) if any(row[i] for row in want[1:])]
        assert page.tables[name] == [[row[i] for i in keep] for row in want], name
    assert "manufacturer" not in page.tables["bom.csv"][0] and "qty_order" in page.tables["bom.csv"][0]
    # the board features are kept apart: none of their refs is on an order line (CONTRACT section 5)
    features = {row[0] for row in _csv(out / "board-features.csv")[1:]}
    ordered = {ref for row in _csv(out / "bom.csv")[1:] for ref in row[2].split()}
    assert features and not features & ordered
    # parts to order add up: the sum of qty_order over the lines is the total's parts_to_order
    lines = _csv(out / "bom.csv")
    col = lines[0].index("qty_order")
    assert sum(int(row[col]) for row in lines[1:]) == int(totals["parts_to_order"])


def test_order_section_states_the_board_as_ordered(tmp_path):
    out = tmp_path / "out"
    CliRunner().invoke(main, ["run", str(ROOT / "demo_project"), "--out", str(out)], catch_exceptions=False)
    page = _Tables()
    page.feed((out / "report.html").read_text())
    board = dict(page.tables["board"])
    fit = json.loads((out / "fit.json").read_text())
    # shapely, a general-purpose geometry library, measures the outline as fit.json writes it (with cut-outs)
    outline = Polygon(fit["board_outline"], fit["board_outline_holes"])
    x0, y0, x1, y1 = outline.bounds
    assert board["Outline size"].startswith(f"{x1 - x0:.2f} x {y1 - y0:.2f} mm")
    assert board["Outline area"] == f"{outline.area:.1f} mm\u00b2"
    # the demo's project.toml: 2 layers, 0.8 mm, one side, 10 boards
    assert (board["Copper layers"], board["Thickness"], board["Sides carrying parts"], board["Boards"]) == (
        "2", "0.8 mm", "top only", "10")
