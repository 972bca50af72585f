"""`streamsim bench [options]`: the speed benchmark (the options: `add_arguments`)."""
from __future__ import annotations

import json
import sys

HELP = "measure particle-steps/s of the engine against the memory roofline and a numpy peer"


def _count(text: str) -> int:
    value = float(text)
    if not value >= 1 or value != int(value):
        raise ValueError(text)
    return int(value)


def add_arguments(p) -> None:
    p.add_argument("--particles", type=_count, nargs="+", default=None, metavar="N",
                   help="total particle counts (default: 1e5 1e6 2097152 1e7; 1e6 style accepted)")
    p.add_argument("--threads", type=int, nargs="+", default=None, metavar="T",
                   help="thread counts (default: 1 .. all cores)")
    p.add_argument("--steps", type=int, default=10, metavar="S",
                   help="steps per timed batch at N <= 2e6 (fewer above; default 10)")
    p.add_argument("--repeats", type=int, default=5, metavar="R",
                   help="timed batches per configuration, best kept (default 5)")
    p.add_argument("--no-memory", action="store_true", help="skip the peak-memory subprocess")
    p.add_argument("--no-start", action="store_true", help="skip the cached start-up timing")
    p.add_argument("--no-whole-run", action="store_true",
                   help="skip the two whole `streamsim run` processes (50 and 800 steps)")
    p.add_argument("--whole-run-repeats", type=int, default=1, metavar="R",
                   help="pairs of whole-run processes, best kept (default 1)")
    p.add_argument("--json", action="store_true",
                   help="print the measurements as one JSON object instead of the table")


def main(args) -> int:
    from streamsim import bench
    from streamsim.cli.common import ArgumentError
    import numba
    particles = args.particles or list(bench.DEFAULT_PARTICLES)
    threads = args.threads
    if threads is not None and any(t < 1 or t > numba.config.NUMBA_NUM_THREADS for t in threads):
        raise ArgumentError("", f"--threads must be between 1 and "
                            f"{numba.config.NUMBA_NUM_THREADS}")
    if args.steps < 1 or args.repeats < 1 or args.whole_run_repeats < 1:
        raise ArgumentError("", "--steps, --repeats and --whole-run-repeats must be >= 1")

    def progress(row):
        if not args.json:
            print(f"  measured N = {row['particles']}, {row['threads']} thread(s): "
                  f"{row['particle_steps_per_s']:.3g} particle-steps/s", file=sys.stderr)

    result = bench.run(particles, threads, steps=args.steps, repeats=args.repeats,
                       memory=not args.no_memory, start=not args.no_start,
                       whole=not args.no_whole_run, whole_repeats=args.whole_run_repeats,
                       progress=progress)
    if args.json:
        print(json.dumps(result, indent=1))
    else:
        print(bench.format_table(result))
    return 0
