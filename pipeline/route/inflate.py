"""Room for routing where the pins are: courtyards grown across their pin rows.

Entry points: :func:`pin_axes` (which courtyard axes each part's tracks
leave along) and :func:`inflate` (the grown placer items).

Method: pin-side courtyard inflation. Cell inflation for routability is
common practice in placement (from memory: the routability-driven placers
of the ISPD 2011 contest, e.g. SimPLR and Ripple, grow cells before placing
again). Our rule (our choice): tracks leave a part across its pin rows, so
the room is added on the sides that face the pins. A part's *pin axis* is
the axis along which its pad centres span the most (at rotation 0): a
0603's two pads lie along x, so it grows in length; a SOIC-8's two rows of
four lie at +-y, spanning more in y, so it grows in width. When the two
spans are within ``SQUARE`` of each other (quad packages) both axes grow; a
part with a single pad (a test pad: its one track leaves anywhere) or no
pad data grows in neither. Growth along an axis is ``s x pitch``
millimetres, ``s`` the spread step. (Scaling the growth by the part's
pins over the mean pins was tried as well and measured no better on the
demo: it grows the ICs so much that tight boards no longer place.)

Growing one axis instead of both adds about half the area of uniform
growth, so a tight board still places (the bottom-left packer of
pipeline/place.py fails quickly as courtyards grow). Margins are rounded
down to ``QUANTUM_MM`` so the placer's grid stays as coarse as the true
courtyards allow. Growth is the same on both sides of each axis, so a
grown courtyard placed legally holds the true one at its centre (the true
placement is legal).

Cost: O(pins).
"""

from __future__ import annotations

import dataclasses
import math

__all__ = ["inflate", "pin_axes", "QUANTUM_MM", "SQUARE"]

#: margins are whole multiples of this, mm (a size the placer's grid already divides; our choice).
QUANTUM_MM = 0.1
#: pad spans within this share of each other count as square: both axes grow (our choice).
SQUARE = 0.1


def pin_axes(items, library, level: str = "nominal") -> tuple[tuple[int, int], ...]:
    """Per part, ``(grow length, grow width)`` as 0/1 from its pads at rotation 0 (module notes)."""
    from ..errors import UnknownNameError
    from ..library.lands import pads_on_board

    out = []
    for it in items:
        try:
            pads = pads_on_board(library.package(it.package), 0.0, 0.0, 0, "top", level) if it.package else ()
        except UnknownNameError:  # a part the placer sized without pad data
            pads = ()
        if len(pads) < 2:
            out.append((0, 0))
            continue
        xs, ys = [p.x_mm for p in pads], [p.y_mm for p in pads]
        sx, sy = max(xs) - min(xs), max(ys) - min(ys)
        if abs(sx - sy) <= SQUARE * max(sx, sy):
            out.append((1, 1))
        else:
            out.append((int(sx > sy), int(sy > sx)))
    return tuple(out)


def inflate(items, axes, step: float, pitch_mm: float) -> tuple:
    """``items`` with each courtyard grown ``step x pitch`` mm along its ``axes`` (:func:`pin_axes`).

    Rounded down to ``QUANTUM_MM``, never negative; same order as ``items``.
    """
    m = math.floor(step * pitch_mm / QUANTUM_MM + 1e-9) * QUANTUM_MM
    return tuple(dataclasses.replace(it, length_mm=it.length_mm + gl * m, width_mm=it.width_mm + gw * m)
                 for it, (gl, gw) in zip(items, axes))
