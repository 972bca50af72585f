"""Measured bulk Lorentz factor (``analysis.bulk_gamma = "measured"`` only): the typed
:class:`streamsim.analysis.driven.BulkGamma` the coherence block takes as its Gamma.

No summary key, table or figure of its own: the coherence block reports the Gamma it used
(``coherence.bulk_gamma``, ``bulk_gamma_measured``, ``bulk_gamma_source``). Value:
``ctx.results["bulk_gamma"].values["bulk_gamma"]`` (absent when Gamma is a number).
"""
from __future__ import annotations

from .. import driven as _dv
from ..base import BlockResult, Context

NAME = "bulk_gamma"


def compute(ctx: Context) -> BlockResult:
    if not _dv.is_measured(ctx.options):
        return BlockResult(NAME, {})
    return BlockResult(NAME, {}, values={"bulk_gamma": _dv.measured_bulk_gamma(ctx.data)})
