"""The report's order section: what to order for N boards, and the board itself.

Entry point: :func:`order_section`.

It renders what the BOM export wrote (:func:`pipeline.export.bom.bom_files`),
cell for cell (leaving out only columns empty on every row), so the page
and the CSV files cannot disagree: the parts
lines of ``bom.csv``, every other file the export gives (the board
features kept apart, the unfitted parts) as a table of its own, the totals of ``bom-totals.csv``, and the
bare board as a fabricator quotes it: outline size (the outline's bounding
box in the drawing's frame, as ``board-outline.dxf`` holds it), area,
copper layers, thickness, sides carrying parts and the number of boards.
"""

from __future__ import annotations

import csv
import io
from typing import Mapping

from ..model import BoardOptions, FitResult
from ..values import format_area
from .markup import escape

__all__ = ["order_section", "csv_table"]

#: Headings of the files the BOM export writes; any other bom-*.csv gets its name as heading.
_HEADINGS = {
    "bom.csv": "Parts to order",
    "bom-unfitted.csv": "Not fitted (not ordered)",
    "bom-totals.csv": "Totals",
    "board-features.csv": "Board features (copper on the board itself: not ordered)",
}
#: Columns of bom.csv shown as numbers (right-aligned).
_NUMERIC = ("line", "qty", "boards", "spares", "qty_order", "count")


def csv_table(data: bytes) -> tuple[list[str], list[list[str]]]:
    """Header and rows of a CSV file written by :mod:`pipeline.export.csvcell`."""
    rows = list(csv.reader(io.StringIO(data.decode("utf-8"))))
    return (rows[0], rows[1:]) if rows else ([], [])


def order_section(files: Mapping[str, bytes], fit: FitResult | None, board: BoardOptions | None) -> str:
    """The order section as an HTML fragment (every cell escaped)."""
    totals = dict(csv_table(files["bom-totals.csv"])[1]) if "bom-totals.csv" in files else {}
    boards = totals.get("boards", "")
    out = [f'<section id="order"><h2>Order{f" for {escape(boards)} boards" if boards else ""}</h2>']
    out.append(_board(fit, board, boards))
    names = ["bom.csv"] + sorted(n for n in files if n not in ("bom.csv", "bom-totals.csv")) + ["bom-totals.csv"]
    for name in names:
        if name not in files:
            continue
        head, rows = csv_table(files[name])
        title = _HEADINGS.get(name, name.removesuffix(".csv").replace("-", " ").capitalize())
        out.append(f'<h3>{escape(title)} <span class="quiet">({escape(name)})</span></h3>')
        if not rows:
            out.append('<p class="quiet">None.</p>')
            continue
        out.append(f'<div class="wide"><table class="order" data-file="{escape(name)}">{_table(head, rows)}</table></div>')
    out.append("</section>")
    return "".join(out)


def _table(head: list[str], rows: list[list[str]]) -> str:
    """Header and body; a column empty on every row (no part number given anywhere, say) is left out."""
    keep = [i for i in range(len(head)) if any(i < len(r) and r[i] for r in rows)]
    head = [head[i] for i in keep]
    rows = [[r[i] if i < len(r) else "" for i in keep] for r in rows]
    num = [h in _NUMERIC for h in head]
    th = "".join(f'<th{" class=num" if n else ""}>{escape(h)}</th>' for h, n in zip(head, num))
    body = "".join(
        "<tr>" + "".join(f'<td{" class=num" if n else ""}>{escape(c)}</td>' for c, n in zip(row, num)) + "</tr>"
        for row in rows)
    return f"<thead><tr>{th}</tr></thead><tbody>{body}</tbody>"


def _board(fit: FitResult | None, board: BoardOptions | None, boards: str) -> str:
    """The bare board as one orders it from a fabricator."""
    rows: list[tuple[str, str]] = []
    outline = fit.board_outline if fit is not None else None
    if outline is not None and not outline.is_empty:
        x0, y0, x1, y1 = outline.bounds
        rows.append(("Outline size", f"{x1 - x0:.2f} x {y1 - y0:.2f} mm (board-outline.dxf)"))
        rows.append(("Outline area", format_area(outline.area)))
    else:
        rows.append(("Outline", "none yet: no cavity drawing, so no outline was proposed"))
    if board is not None:
        rows.append(("Copper layers", str(board.layers)))
        rows.append(("Thickness", f"{board.thickness_mm:g} mm"))
        rows.append(("Sides carrying parts", "top and bottom" if board.sides == 2 else "top only"))
    if boards:
        rows.append(("Boards", boards))
    body = "".join(f'<tr><th scope="row">{escape(k)}</th><td>{escape(v)}</td></tr>' for k, v in rows)
    return f'<h3>The board</h3><table class="figures board-order">{body}</table>'
