"""The analysis blocks, in the order they run (a later block may read an earlier one's result
from ``ctx.results``). Adding a block: one module in :mod:`streamsim.analysis.blocks` and one
line here."""
from __future__ import annotations

from .blocks import bulk_gamma, clumps, coherence, contrast, drive, growth, oscillation, \
    phase_space

BLOCKS = (
    growth,
    oscillation,
    contrast,
    clumps,
    bulk_gamma,
    coherence,
    phase_space,
    drive,
)
