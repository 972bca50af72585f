"""`streamsim theory`: linear theory (growth rates, fastest mode, box modes) for a deck."""
from __future__ import annotations

import json
import math
import sys

from streamsim.cli.common import add_deck_arguments, deck_from_args, error

HELP = "linear theory of a deck: growth rate gamma(k), fastest mode, unstable band, box modes"

_MODELS = ("cold", "waterbag", "maxwellian", "juttner")


def add_arguments(parser) -> None:
    add_deck_arguments(parser)
    parser.add_argument("--json", action="store_true",
                        help="print one JSON object (normalised units: k in omega_p/c, rates in "
                             "omega_p, unless the key says otherwise)")
    parser.add_argument("--plot", metavar="FILE.png", default=None,
                        help="save a figure of gamma(k) and omega_r(k) with the box modes marked")
    parser.add_argument("--kmax", type=float, default=None, metavar="K",
                        help="upper end of the k range, omega_p/c (default: 1.5 x the top of the "
                             "cold unstable band)")
    parser.add_argument("--nk", type=int, default=400, metavar="N",
                        help="points of the growth curve (default 400)")
    parser.add_argument("--model", choices=_MODELS, default=None,
                        help="dielectric model (default: the one the deck implies: cold if every "
                             "species is cold, waterbag, or juttner for warm species)")


def _fmt(x, spec=".4g", none="-"):
    if x is None:
        return none
    if isinstance(x, float) and not math.isfinite(x):
        return none
    return format(x, spec)


def _table(d: dict, title: str) -> str:
    lines = [f"linear theory for '{title}' (model: {d['model']})"]
    n = d.get("density_cm3")
    if n:
        lines.append(f"  reference density {n:.4g} cm^-3: omega_p = {d['omega_p_rad_s']:.4g} rad/s, "
                     f"c/omega_p = {d['skin_depth_cm']:.4g} cm")
    f = d["fastest"]
    if f is None:
        lines.append("  stable: no growing mode in the k range examined")
    else:
        lines.append(f"  fastest-growing mode: k = {f['k']:.6g} omega_p/c "
                     f"(wavelength {f['wavelength']:.4g} c/omega_p"
                     + (f" = {f['wavelength_cm']:.4g} cm)" if f.get("wavelength_cm") else ")"))
        lines.append(f"    growth rate {f['growth']:.6g} omega_p, omega_r = {f['omega_r']:.4g} omega_p"
                     + (f", e-folding time {f['growth_time_ns']:.4g} ns (field amplitude)"
                        if f.get("growth_time_ns") else ""))
        if f.get("efoldings_in_run") is not None:
            lines.append(f"    e-foldings over the run (time.end): {f['efoldings_in_run']:.3g}")
    b = d["unstable_band"]
    if b:
        lines.append(f"  unstable band: {b[0]:.5g} < k < {b[1]:.5g} omega_p/c"
                     + ("  (reaches down to k -> 0)" if b[0] == 0.0 else ""))
    if len(d.get("unstable_bands", [])) > 1:
        lines.append("  all unstable bands: " + ", ".join(f"[{a:.4g}, {c:.4g}]"
                                                         for a, c in d["unstable_bands"]))
    modes = d["box_modes"]
    shown = [m for m in modes if m["growth"] and m["growth"] > 0]
    lines.append(f"  box modes k_m = 2 pi m / L, m = 1..{len(modes)}: {len(shown)} growing")
    alt = any("maxwellian_growth" in m for m in modes)
    if modes:
        lines.append("    {:>5} {:>12} {:>13} {:>12} {:>14}".format(
            "m", "k [w_p/c]", "growth [w_p]", "w_r [w_p]", "1/growth [ns]")
            + ("  maxwellian growth [w_p]" if alt else ""))
        best = sorted(modes, key=lambda m: -(m["growth"] or 0.0))
        rows = shown if len(shown) <= 12 else best[:12]
        if not rows:
            rows = modes[: min(6, len(modes))]
        for m in sorted(rows, key=lambda m: m["mode"]):
            lines.append("    {:>5d} {:>12} {:>13} {:>12} {:>14}".format(
                m["mode"], _fmt(m["k"], ".5g"), _fmt(m["growth"], ".5g"), _fmt(m["omega_r"], ".4g"),
                _fmt(m.get("growth_time_ns"), ".4g"))
                + ("  {:>24}".format(_fmt(m.get("maxwellian_growth"), ".5g")) if alt else ""))
        if len(shown) > len(rows):
            lines.append(f"    ... {len(shown) - len(rows)} more growing modes (see --json)")
    for note in d.get("notes", []):
        lines.append(f"  note: {note}")
    return "\n".join(lines)


def _plot(disp, d: dict, path: str, title: str) -> None:
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    import numpy as np

    fig, (ax1, ax2) = plt.subplots(2, 1, sharex=True, figsize=(7, 6))
    k = np.asarray(disp.k)
    ax1.plot(k, disp.growth, lw=1.5, label=f"continuum ({disp.model})")
    ax2.plot(k, disp.omega_r, lw=1.5)
    km = np.array([m.k for m in disp.box_modes])
    gm = np.array([m.growth for m in disp.box_modes])
    wm = np.array([np.nan if m.omega_r is None else m.omega_r for m in disp.box_modes])
    inside = km <= k[-1] * 1.0001
    if inside.any():
        ax1.plot(km[inside], gm[inside], "o", ms=4, mfc="none", label="box modes 2πm/L")
        ax2.plot(km[inside], wm[inside], "o", ms=4, mfc="none")
    if disp.fastest is not None:
        ax1.axvline(disp.fastest.k, ls=":", lw=1)
        ax1.annotate(f"fastest: k={disp.fastest.k:.4g}, γ={disp.fastest.growth:.4g}",
                     (disp.fastest.k, disp.fastest.growth), textcoords="offset points",
                     xytext=(6, -12), fontsize=8)
    ax1.axhline(0.0, color="0.6", lw=0.8)
    ax1.set_ylabel("growth rate γ [ω_p]")
    ax2.set_ylabel("real frequency ω_r [ω_p]")
    ax2.set_xlabel("k [ω_p/c]")
    ax1.legend(fontsize=8)
    ax1.set_title(f"linear theory: {title}", fontsize=10)
    fig.tight_layout()
    fig.savefig(path, dpi=120)
    plt.close(fig)


def main(args) -> int:
    deck = deck_from_args(args)
    if deck is None:
        return 2
    if args.kmax is not None and not (math.isfinite(args.kmax) and args.kmax > 0):
        error("argument", f"--kmax must be a finite number > 0 (got {args.kmax:g})")
        return 2
    if args.nk < 8:
        error("argument", f"--nk must be at least 8 (got {args.nk})")
        return 2
    from streamsim import theory
    try:
        disp = theory.theory_for_deck(deck, model=args.model, kmax=args.kmax, nk=args.nk)
    except (ValueError, ArithmeticError) as ex:
        error("theory", str(ex))
        return 2
    d = disp.to_dict()
    if args.plot:
        try:
            _plot(disp, d, args.plot, deck.title)
        except OSError as ex:
            error("output", f"cannot write {args.plot}: {ex}")
            return 4
    if args.json:
        print(json.dumps(d, allow_nan=False))
    else:
        print(_table(d, deck.title))
        if args.plot:
            print(f"  figure: {args.plot}")
    sys.stdout.flush()
    return 0
