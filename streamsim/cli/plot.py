"""`streamsim plot RUN_DIR`: redraw the figures of a run into RUN_DIR/figures/."""
from __future__ import annotations

import json

from streamsim.cli.common import read_run_folder

HELP = "redraw the figures of a run folder into RUN_DIR/figures/"


def add_arguments(p) -> None:
    p.add_argument("run_dir", metavar="RUN_DIR", help="a run folder written by `streamsim run`")


def _last_options(folder, data):
    """The analysis options of the run's last analysis (summary.json), so that the figures show
    the numbers the summary holds; the deck's own when there is none."""
    from streamsim import analysis, io
    from streamsim.deck import DeckError
    try:
        s = json.loads((folder / io.FILES["summary"]).read_text(encoding="utf-8"))
        used = s.get("analysis_options") or {}
        keep = {k: used.get(k) for k in ("bulk_gamma", "clump_threshold", "coherence_drop",
                                         "coherence_kmax_factor")}
        return analysis.options_for(data.deck, **keep)
    except (OSError, ValueError, AttributeError, DeckError):
        return data.deck.analysis


def main(args) -> int:
    from streamsim import analysis
    from streamsim.plots import draw_figures
    folder, data = read_run_folder(args.run_dir)
    results = analysis.compute(data, _last_options(folder, data))
    for p in draw_figures(results, data, folder):
        print(p)
    return 0
