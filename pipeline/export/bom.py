"""The ordering bill of materials: ``bom.csv``, ``bom-unfitted.csv``, ``bom-totals.csv``,
and the board features apart: ``board-features.csv``.

Entry points: :func:`bom_lines` (the grouped lines, as values) and
:func:`bom_files` (the three CSV files as bytes).

Grouping: fitted parts that would be ordered as the same item — same kind,
value (compared as a number, so ``4k7`` and ``4.7k`` group), package,
tolerance, rating, manufacturer, part number, supplier and order code — make
one line. Notes of grouped parts are joined. Lines are ordered by their
first ref in natural order (``C1``, ``R2``, ``R10``), refs within a line
likewise.

Order quantity per line, with ``n = qty x boards``::

    spares    = max(ceil(n x spares_percent / 100), min_spares)
    qty_order = ceil((n + spares) / multiple) x multiple

computed in exact rational arithmetic (no float rounding at the ceiling).
Unfitted (``dnp``) parts are never ordered; they are listed in
``bom-unfitted.csv``. Board features (parts whose kind is one of
``feature_kinds``: wire pads, test points, mounting holes, fiducials) are
copper or holes of the board itself, so they are never ordered either; they
are listed in ``board-features.csv`` (and stay in the netlists). Every cell is made inert for spreadsheets
(:mod:`pipeline.export.csvcell`).

Columns of ``bom.csv`` (README.md documents them): ``line``, ``qty``,
``refs``, ``kind``, ``value``, ``package``, ``tolerance``, ``rating``,
``manufacturer``, ``mpn``, ``supplier``, ``order_code``, ``note``,
``boards``, ``spares``, ``qty_order``.
"""

from __future__ import annotations

from dataclasses import dataclass
from fractions import Fraction
from math import ceil
from typing import Collection, Iterable

from ..order import natural_key
from ..model import Design, OrderOptions, Part
from ..values import format_value
from .csvcell import csv_bytes

__all__ = ["BomLine", "bom_lines", "order_quantity", "bom_files", "BOM_COLUMNS"]

BOM_COLUMNS = (
    "line", "qty", "refs", "kind", "value", "package", "tolerance", "rating",
    "manufacturer", "mpn", "supplier", "order_code", "note", "boards", "spares", "qty_order",
)
UNFITTED_COLUMNS = ("ref", "kind", "value", "package", "note")
FEATURE_COLUMNS = ("ref", "kind", "package", "note")


@dataclass(frozen=True)
class BomLine:
    """One orderable line: identical fitted parts and what to order."""

    refs: tuple[str, ...]
    kind: str
    value: str
    package: str
    tolerance: str
    rating: str
    manufacturer: str
    mpn: str
    supplier: str
    order_code: str
    note: str
    boards: int
    spares: int
    qty_order: int

    @property
    def qty(self) -> int:
        return len(self.refs)


def order_quantity(qty: int, order: OrderOptions) -> tuple[int, int]:
    """Spares and quantity to order for ``qty`` parts per board.

    >>> order_quantity(3, OrderOptions(boards=10, spares_percent=5))
    (2, 32)
    >>> order_quantity(1, OrderOptions(boards=10, min_spares=5, multiple=10))
    (10, 20)
    """
    n = qty * order.boards
    spares = max(ceil(Fraction(n) * Fraction(str(order.spares_percent)) / 100), order.min_spares)
    m = max(1, order.multiple)
    total = ceil(Fraction(n + spares, m)) * m
    return total - n, total


def _value_text(p: Part) -> str:
    return format_value(p.value) if p.value is not None else p.value_text


def _extra(p: Part, key: str) -> str:
    return dict(p.extra).get(key, "")


def _group_key(p: Part) -> tuple:
    return (p.kind, p.value if p.value is not None else p.value_text, p.package, p.tolerance,
            p.rating_v, p.rating_w, p.manufacturer, p.mpn, _extra(p, "supplier"), _extra(p, "order_code"))


def bom_lines(design: Design, order: OrderOptions,
              feature_kinds: Collection[str] = ()) -> tuple[BomLine, ...]:
    """Group the fitted parts of ``design`` into order lines (see module docstring).

    Parts of a kind in ``feature_kinds`` are board features and are left out.
    """
    groups: dict[tuple, list[Part]] = {}
    for p in design.parts:
        if not p.dnp and p.kind not in feature_kinds:
            groups.setdefault(_group_key(p), []).append(p)
    lines = []
    for parts in groups.values():
        parts = sorted(parts, key=lambda p: natural_key(p.ref))
        first = parts[0]
        notes = []
        for p in parts:
            if p.note and p.note not in notes:
                notes.append(p.note)
        spares, total = order_quantity(len(parts), order)
        lines.append(BomLine(
            refs=tuple(p.ref for p in parts), kind=first.kind, value=_value_text(first),
            package=first.package, tolerance=first.tolerance_text, rating=first.rating_text,
            manufacturer=first.manufacturer, mpn=first.mpn, supplier=_extra(first, "supplier"),
            order_code=_extra(first, "order_code"), note="; ".join(notes),
            boards=order.boards, spares=spares, qty_order=total,
        ))
    return tuple(sorted(lines, key=lambda l: natural_key(l.refs[0])))


def _rows(lines: Iterable[BomLine]):
    for i, l in enumerate(lines, start=1):
        yield (i, l.qty, " ".join(l.refs), l.kind, l.value, l.package, l.tolerance, l.rating,
               l.manufacturer, l.mpn, l.supplier, l.order_code, l.note, l.boards, l.spares, l.qty_order)


def bom_files(design: Design, order: OrderOptions,
              feature_kinds: Collection[str] = ()) -> dict[str, bytes]:
    """``bom.csv``, ``bom-unfitted.csv``, ``bom-totals.csv`` and ``board-features.csv`` as bytes.

    ``feature_kinds`` names the kinds that are board features (the library's
    kinds marked ``board_feature``); their fitted parts go to
    ``board-features.csv`` instead of the order.
    """
    lines = bom_lines(design, order, feature_kinds)
    unfitted = sorted((p for p in design.parts if p.dnp), key=lambda p: natural_key(p.ref))
    features = sorted((p for p in design.parts if not p.dnp and p.kind in feature_kinds),
                      key=lambda p: natural_key(p.ref))
    totals = [
        ("lines", len(lines)),
        ("fitted_parts_per_board", sum(l.qty for l in lines)),
        ("unfitted_parts_per_board", len(unfitted)),
        ("board_features_per_board", len(features)),
        ("boards", order.boards),
        ("parts_to_order", sum(l.qty_order for l in lines)),
        ("spares_to_order", sum(l.spares for l in lines)),
    ]
    return {
        "bom.csv": csv_bytes(BOM_COLUMNS, _rows(lines)),
        "bom-unfitted.csv": csv_bytes(UNFITTED_COLUMNS,
                                      ((p.ref, p.kind, _value_text(p), p.package, p.note) for p in unfitted)),
        "bom-totals.csv": csv_bytes(("item", "count"), totals),
        "board-features.csv": csv_bytes(FEATURE_COLUMNS,
                                        ((p.ref, p.kind, p.package, p.note) for p in features)),
    }
