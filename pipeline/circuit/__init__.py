"""Declared circuit blocks: what each really does, and how to fix it.

Entry point: :func:`analyse_blocks` (a pipeline stage run after the value
checks); :func:`pipeline.export.blocks.block_sections` turns its reports
into (heading, html) pairs for ``report.html``.

A design declares its circuit blocks in ``[blocks.NAME]`` tables (one per
block; the previous release's ``[stages.NAME]`` is still read, with a warning:
:mod:`pipeline.blocktables`)::

    [blocks.antinoise]
    type = "sallen-key-lowpass"
    parts = { R1 = "R3", R2 = "R4", Cf = "C3", Cg = "C4", amp = "U1" }   # role = ref
    targets = { f0 = "1.0kHz ±10%", q = "0.707 ±10%" }                 # figure = target
    series = { resistor = "E24", capacitor = "E12" }                   # retune series

:data:`BLOCK_TYPES` lists every type (one object per type, one file each
in :mod:`pipeline.circuit.types`) with its roles, figures and keys; the
README documents them from it. For each block the analysis gives

* the nominal figures from the sized values (closed forms of
  :mod:`pipeline.circuit.formulas`, ideal op-amps and comparators);
* each target as a pass/fail finding (``error`` when the nominal value is
  outside it, so ``snugboard run`` exits 1);
* the spread from component tolerances: the extremes over all ``2**n``
  tolerance corners (plus the nominal point; for a figure that is not
  monotonic in every part, such as ``q``, this bounds the corners, not
  every interior point) and a seeded Monte Carlo of ``draws`` builds with
  each part uniform within its tolerance, independent, giving the 1st /
  50th / 99th percentiles and the share of builds outside each target;
* for a filter, its frequency response H(j 2 pi f) (the transfer
  function's polynomials evaluated directly), nominal and the envelope
  over the tolerance corners;
* for a block that misses a target, retune proposals: preferred values
  (IEC 60063 series, default E24 resistors / E12 capacitors) ranked by the
  combined error on all targets at once.

The modules: :mod:`~pipeline.circuit.blocktype` (what a type is),
:mod:`~pipeline.circuit.types` (the types), :mod:`~pipeline.circuit.declare`
(a table to a checked declaration), :mod:`~pipeline.circuit.spread`
(corners, Monte Carlo, response), :mod:`~pipeline.circuit.retune` and
:mod:`~pipeline.circuit.analysis` (reports and findings); the reports are
dataclasses of :mod:`pipeline.model`.

A part without a tolerance is taken as 5 % (resistor) or 10 % (capacitor)
and an ``info`` finding says so.

Finding codes: the ``block.*`` rows of :data:`pipeline.codes.CODES`.
"""

from __future__ import annotations

from ..model import BlockReport, FigureReport, Proposal, Response, RolePart, Target
from .analysis import RETUNE_ABOVE_SHARE, analyse_blocks
from .blocktype import BlockType, FigureSpec, RoleSpec
from .declare import DEFAULT_SERIES, DEFAULT_TOLERANCE
from .spread import block_samples
from .targets import parse_target
from .types import BLOCK_TYPES

__all__ = [
    "analyse_blocks",
    "block_samples",
    "parse_target",
    "BlockReport",
    "FigureReport",
    "RolePart",
    "Target",
    "Proposal",
    "Response",
    "BlockType",
    "RoleSpec",
    "FigureSpec",
    "BLOCK_TYPES",
    "DEFAULT_TOLERANCE",
    "DEFAULT_SERIES",
    "RETUNE_ABOVE_SHARE",
]
