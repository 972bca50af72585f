"""Analysis of a run: the blocks of :data:`registry.BLOCKS` (growth, oscillation, contrast,
clumps, coherence, phase space), each one module under :mod:`streamsim.analysis.blocks`.

    results = streamsim.analysis.compute(run_data)            # {name: BlockResult}
    summary = streamsim.analysis.summary_entries(results)     # the summary.json blocks
    print(streamsim.analysis.terminal_lines(results))
    streamsim.analysis.analyze("runs/out/my-run")             # read, compute, write, draw

Options (``analysis.*`` of the deck) are validated by the deck module; :func:`options_for`
applies overrides (the ``streamsim analyze`` flags) through the same key table.
"""
from __future__ import annotations

from pathlib import Path

from .base import BlockResult, Context, ScanColumn, Table
from .registry import BLOCKS

__all__ = ["analyze", "compute", "summary_entries", "terminal_lines", "options_for",
           "write_outputs", "scan_columns", "BLOCKS", "BlockResult", "Table", "Context"]


def options_for(deck, **overrides):
    """The deck's validated ``[analysis]`` options with ``overrides`` (None = keep) applied;
    a bad value raises the deck's one-line DeckError."""
    import dataclasses
    given = {k: v for k, v in overrides.items() if v is not None}
    if not given:
        return deck.analysis
    from ..deck.keys import schema_of
    from ..deck.validate import coerce
    keys = schema_of(type(deck.analysis))
    return dataclasses.replace(deck.analysis, **{k: coerce(f"analysis.{k}", keys[k], v)
                                                 for k, v in given.items()})


def compute(data, options=None, *, max_particles: int | None = None) -> dict[str, BlockResult]:
    """Run every block of the registry on a RunData; returns {block name: BlockResult}."""
    ctx = Context(data=data, options=options or data.deck.analysis, max_particles=max_particles)
    for block in BLOCKS:
        ctx.results[block.NAME] = block.compute(ctx)
    return ctx.results


def summary_entries(results: dict[str, BlockResult], options=None,
                    max_particles: int | None = None) -> dict:
    """The summary.json entries of every block (JSON-safe), and the options used."""
    from ..io import jsonable
    out = {}
    for res in results.values():
        out.update(res.summary)
    if options is not None:
        out["analysis_options"] = {**{f: getattr(options, f)
                                      for f in options.__dataclass_fields__},
                                   "max_particles": max_particles}
    return jsonable(out)


def terminal_lines(results: dict[str, BlockResult]) -> str:
    """The blocks' terminal lines, in registry order."""
    return "\n".join(line for res in results.values() for line in res.lines)


def scan_columns() -> list[ScanColumn]:
    """Every block's scan-table columns, in registry order."""
    return [c for block in BLOCKS for c in getattr(block, "SCAN_COLUMNS", [])]


def write_outputs(results, data, folder, *, figures: bool = True, painter=None) -> list[Path]:
    """Tables (CSV, analysis.h5) and, with ``figures``, every block's figures, drawn in other
    processes while the tables are written (:class:`streamsim.plots.Painter`; pass one made
    before the analysis to overlap its start with the computation)."""
    from .writers import write_tables
    if figures and painter is None:
        from ..plots import Painter
        painter = Painter(data, folder)
    if figures:
        painter.draw(results)
    try:
        paths = write_tables(results, folder)
    except BaseException:
        if painter is not None:
            painter.close()
        raise
    if figures:
        paths += painter.wait()
    elif painter is not None:
        painter.close()
    return paths


def analyze(source, *, folder=None, write: bool = True, figures: bool = True,
            max_particles: int | None = None, bulk_gamma=None, clump_threshold=None,
            coherence_drop=None, coherence_kmax_factor=None) -> dict:
    """Analyse a run folder (path) or a RunData / Result, and return the summary entries.

    With ``write`` and a folder (given, or the source's), the tables and figures are written and
    summary.json is updated once (atomically) with the new entries.
    """
    from .. import io
    if isinstance(source, (str, Path)):
        folder = Path(source) if folder is None else Path(folder)
        data = io.read_run(source)
    else:
        data = getattr(source, "data", source)
        if folder is None and getattr(source, "folder", None) is not None:
            folder = source.folder
    options = options_for(data.deck, bulk_gamma=bulk_gamma, clump_threshold=clump_threshold,
                          coherence_drop=coherence_drop,
                          coherence_kmax_factor=coherence_kmax_factor)
    results = compute(data, options, max_particles=max_particles)
    entries = summary_entries(results, options, max_particles)
    if write and folder is not None:
        write_outputs(results, data, folder, figures=figures)
        io.update_summary(Path(folder), entries)
    return entries
