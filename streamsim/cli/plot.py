"""`streamsim plot RUN_DIR`: redraw the figures of a run into RUN_DIR/figures/."""
from __future__ import annotations

import json

from streamsim.cli.common import output_failure, read_run_folder

HELP = "redraw the figures of a run folder into RUN_DIR/figures/"

_BLOCKS = ("growth", "modes", "field_energy_growth", "contrast", "clumps", "coherence")


def add_arguments(p) -> None:
    p.add_argument("run_dir", metavar="RUN_DIR", help="a run folder written by `streamsim run`")


def main(args) -> int:
    from streamsim import io
    folder, data = read_run_folder(args.run_dir)
    if data is None:
        return 2
    blocks = None
    summ = folder / io.FILES["summary"]
    if summ.is_file():
        try:
            s = json.loads(summ.read_text(encoding="utf-8"))
            if isinstance(s, dict) and all(k in s for k in _BLOCKS):
                blocks = {k: s[k] for k in _BLOCKS}
        except (OSError, ValueError):
            blocks = None
    try:
        if blocks is None:  # never analysed (or an old summary): analyse without writing
            from streamsim.analysis import compute
            blocks, _ = compute(data)
        from streamsim.plots import make_figures
        paths = make_figures(data, blocks, folder)
    except OSError as ex:
        return output_failure(ex, folder)
    for p in paths:
        print(p)
    return 0
