"""The analysis blocks, in the order they run (a later block may read an earlier one's result
from ``ctx.results``). Adding a block: one module in :mod:`streamsim.analysis.blocks` and one
line here."""
from __future__ import annotations

from .blocks import bulk_gamma, clumps, coherence, contrast, drive, emission, growth, \
    oscillation, phase_space

BLOCKS = (
    growth,
    oscillation,
    contrast,
    bulk_gamma,
    emission,
    clumps,
    coherence,
    phase_space,
    drive,
)
