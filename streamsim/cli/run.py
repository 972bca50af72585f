"""`streamsim run [DECK] [options]`: run a deck and analyse it (the options: `add_arguments`)."""
from __future__ import annotations

from pathlib import Path

from streamsim.cli.common import ArgumentError, add_deck_arguments, add_executor_arguments, warn
from streamsim.deck import load_deck

HELP = "run a deck (none: the built-in symmetric pair-beam demo) and analyse it"


def add_arguments(p) -> None:
    add_deck_arguments(p)
    p.add_argument("--out", metavar="DIR", help="run folder (default: the deck's output.folder, "
                   "runs/out/<title-slug>: the title in lower case, '-' for each run of "
                   "characters other than letters and digits)")
    p.add_argument("--quiet", action="store_true",
                   help="no progress bar and no summary (warnings and refusals still go to "
                        "stderr)")
    p.add_argument("--resume", nargs="?", const=True, default=None, metavar="RUN_DIR",
                   help="continue an interrupted run from its checkpoint, or extend a run to a "
                        "later end with --set time.end=T, keeping its cadences (RUN_DIR, else "
                        "--out, else the deck's folder; with no DECK the run folder's deck.toml "
                        "is used); with --replicas, continue the replicas' folder")
    p.add_argument("--threads", type=int, default=None, metavar="T",
                   help="numba threads (default: the deck's output.threads, 0 = all cores)")
    p.add_argument("--no-analysis", action="store_true", help="write the raw outputs only")
    p.add_argument("--force", action="store_true",
                   help="run even when a numerical-health rule refuses the deck, or over a "
                        "finished run of a different deck in the same folder")
    p.add_argument("--no-figures", action="store_true", help="analyse, but draw no figures")
    p.add_argument("--replicas", type=int, default=None, metavar="R",
                   help="run R seeds (random_seed, +1, ...) on the scan machinery and report the "
                        "mean +- standard error of the fastest growth rate and of "
                        "contrast.t_unity_ns (every replica in replicas.csv; folder: --out, else the deck's folder "
                        "+ '-replicas')")
    # where the replicas run (as for a scan; only with --replicas)
    add_executor_arguments(p)


def main(args) -> int:
    from streamsim import io
    if args.threads is not None and args.threads < 0:
        raise ArgumentError("", f"--threads must be >= 0 (0 = all cores), got {args.threads}")
    folder = args.out
    deck_src = args.deck
    if isinstance(args.resume, str):
        folder = args.resume
        if not (Path(folder) / io.FILES["checkpoint"]).is_file():
            raise io.OutputError(f"nothing to resume: {folder} holds no "
                                 f"{io.FILES['checkpoint']}")
        if deck_src is None:
            deck_src = str(Path(args.resume) / io.FILES["deck"])
    deck = load_deck(deck_src, args.overrides)
    if args.replicas is not None:
        return _replicas(args, deck, deck_src)
    for flag, given in (("--workers", args.workers is not None), ("--scheduler", args.scheduler),
                        ("--local-cluster", args.local_cluster)):
        if given:
            raise ArgumentError("", f"{flag} places the runs of --replicas R; a single run "
                                "uses --threads")
    if args.resume and folder is None:
        folder = deck.output.folder
    from streamsim.pipeline import run
    args.run_folder = folder or deck.output.folder   # named by a numerical error
    result = run(deck, out=folder, quiet=args.quiet, resume=bool(args.resume),
                 analyze=not args.no_analysis, threads=args.threads, force=args.force,
                 figures=not args.no_figures, warn=warn)
    if not args.quiet:
        _print_summary(result, demo=deck_src is None)
    return 0


def _replicas(args, deck, deck_src) -> int:
    from streamsim.scan.replicas import run_replicas
    if args.replicas < 2:
        raise ArgumentError("", f"--replicas must be >= 2 for an error bar, got {args.replicas}")
    if isinstance(args.resume, str):
        raise ArgumentError("", "--replicas continues its folder with --resume (no RUN_DIR)")
    out = args.out or f"{deck.output.folder}-replicas"
    res = run_replicas(deck_src=deck_src, overrides=args.overrides, replicas=args.replicas,
                       out=out, threads=args.threads, quiet=args.quiet,
                       resume=bool(args.resume), workers=args.workers,
                       scheduler=args.scheduler, local_cluster=args.local_cluster)
    for w in res.warnings:
        warn(w)
    if not args.quiet:
        print(replica_lines(res))
    return 0


def replica_lines(res) -> str:
    """The terminal report of a replica ensemble."""
    def pm(st, f):
        if st.mean is None:
            return "none measured"
        e = f" +- {st.standard_error:.2g}" if st.standard_error is not None else " (one value)"
        return f"{st.mean:{f}}{e} (n = {st.n})"
    done = sum(r["status"] == "completed" for r in res.rows)
    th = f" (theory {res.theory_growth:.4g})" if res.theory_growth else ""
    return "\n".join([
        f"{done} of {len(res.rows)} replicas completed; mean +- standard error of the mean:",
        f"  fastest growth rate: {pm(res.growth, '.4g')} omega_p{th}",
        f"  t_unity: {pm(res.t_unity_ns, '.4g')} ns",
        *_emission_lines(getattr(res, "emission", {}) or {}),
        f"  every replica in {res.out / 'replicas.csv'}"])


def _emission_lines(em: dict) -> list[str]:
    """nu_c and clump size over the replicas, with one run's budget and its dominant term."""
    out = []
    for key, what, scale, unit in (("coherence.frequency_cutoff_hz", "nu_c", 1e-9, "GHz"),
                                   ("clumps.size_median_cm", "clump size", 1.0, "cm")):
        e = em.get(key) or {}
        if e.get("mean") is None:
            continue
        b = e.get("one_run_budget") or {}
        se = e.get("standard_error_of_mean")
        terms = ", ".join(f"{k} {v * scale:.2g}" for k, v in (b.get("terms") or {}).items()
                          if v is not None)
        out.append(f"  {what}: {e['mean'] * scale:.4g}"
                   + (f" +- {se * scale:.2g}" if se is not None else "") + f" {unit} "
                   f"(n = {e['n']}); one run's error: {terms}"
                   + (f"; combined {b['combined'] * scale:.2g} (dominant: {b['dominant']})"
                      if b.get("combined") is not None else ""))
    return out


def _tolerance(e: dict) -> str:
    """The energy error against its tolerance, with what to do when it is exceeded."""
    tol = e.get("tolerance")
    if tol is None:
        return ""
    if e.get("warning"):
        return (f" > tolerance {tol:g} (analysis.energy_tolerance): lower time.dt or refine "
                "box.cells")
    return f" (within the tolerance {tol:g})"


#: a deck whose emission numbers are not grid-limited (warm beams resolve their clumps; measured:
#: coherence.grid_limited and clumps.grid_limited false) at the demo's density
TRUSTED_EMISSION_DECK = "runs/band-pair-beams.toml"


def _demo_advice(s: dict) -> str | None:
    """The last line of the built-in demo when its emission numbers are grid-limited: the
    command that gives numbers the grid does not set."""
    co, cl = s.get("coherence") or {}, s.get("clumps") or {}
    if not (co.get("grid_limited") or cl.get("grid_limited")):
        return None
    return ("the demo's cold beams have no intrinsic clump scale, so its clump sizes and nu_c "
            "are set by the grid; for numbers the grid does not set run warm beams at the same "
            f"density: streamsim run {TRUSTED_EMISSION_DECK}")


def _print_summary(result, demo: bool = False) -> None:
    from streamsim.analysis import terminal_lines
    s = result.summary
    n = s["normalization"]
    v = s.get("vlasov")
    size = (f"{v['phase_space_cells']} phase-space cells (Vlasov), {s['wall_s']:.1f} s "
            f"({v['cell_steps_per_s'] or 0:.3g} cell-steps/s)" if v else
            f"{s['particles']} particles, {s['wall_s']:.1f} s "
            f"({s['particle_steps_per_s']:.3g} particle-steps/s)")
    lines = [f"{s['deck_title']}: {s['steps']} steps, {size}",
             f"  n_ref = {n['density_cm3']:.3g} cm^-3: 1/omega_p = {n['time_unit_ns']:.4g} ns, "
             f"c/omega_p = {n['skin_depth_cm']:.4g} cm",
             f"  energy error max {s['energy']['relative_error_max']:.2e}"
             + _tolerance(s["energy"])]
    text = terminal_lines(result.analysis)
    if text:
        lines.append(text)
    if "analysis_error" in s:
        lines.append(f"  analysis failed: {s['analysis_error']}")
    if result.folder is not None:
        lines.append(f"  outputs in {result.folder}")
    advice = _demo_advice(s) if demo else None
    if advice:
        lines.append(advice)
    print("\n".join(lines))
