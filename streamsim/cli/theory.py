"""`streamsim theory`: linear theory (growth rates, fastest mode, box modes) for a deck."""
from __future__ import annotations

import json
import math
import sys

from streamsim.cli.common import ArgumentError, TheoryFailure, add_deck_arguments, deck_from_args

HELP = "linear theory of a deck: growth rate gamma(k), fastest mode, unstable band, box modes"

_MODELS = ("cold", "waterbag", "maxwellian", "juttner", "table")

#: growing box modes listed without --all (the ones nearest in m to the fastest box mode)
MAX_ROWS = 24
#: stable box modes listed when no mode grows (without --all)
STABLE_ROWS = 6
#: a value below this fraction of its mode's scale prints as 0 (it is rounding, not a frequency)
ZERO_REL = 1.0e-12


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
                        help="points of the growth curve in (0, kmax] (default 400, at least 8)")
    parser.add_argument("--model", choices=_MODELS, default=None, metavar="MODEL",
                        help=f"dielectric model, one of {', '.join(_MODELS)} (default: the one "
                             "the deck implies: cold if every species is cold, waterbag, juttner "
                             "for warm species, table for a tabulated species)")
    parser.add_argument("--all", action="store_true", dest="all_modes",
                        help=f"list every box mode in the table (default: the growing ones, at "
                             f"most {MAX_ROWS})")


def _fmt(x, spec=".4g", none="-", scale=None):
    """x formatted with ``spec``; ``none`` for a missing or non-finite value; "0" where |x| is
    below ZERO_REL of ``scale`` (round-off of a root that is exactly 0 in theory)."""
    if x is None:
        return none
    if isinstance(x, float) and not math.isfinite(x):
        return none
    if scale is not None and math.isfinite(scale) and abs(x) < ZERO_REL * scale:
        return "0"
    return format(x, spec)


def _mode_scale(m: dict, floor: float) -> float:
    """|omega| of a box mode's root, at least ``floor`` (the deck's growth scale)."""
    g = m.get("growth") or 0.0
    w = m.get("omega_r") or 0.0
    return max(math.hypot(g, w), floor)


def _ranges(ms) -> str:
    """[1, 2, 3, 7, 9, 10] -> "1..3, 7, 9..10"."""
    ms = sorted(ms)
    out = []
    i = 0
    while i < len(ms):
        j = i
        while j + 1 < len(ms) and ms[j + 1] == ms[j] + 1:
            j += 1
        out.append(str(ms[i]) if i == j else f"{ms[i]}..{ms[j]}")
        i = j + 1
    return ", ".join(out)


def mode_rows(modes: list[dict], all_modes: bool = False, cap: int = MAX_ROWS):
    """(rows, cut): the box modes the table lists, in order of m, and the growing ones left out.

    With ``all_modes`` every mode.  Otherwise every growing mode, or, when more than ``cap``
    grow, the ``cap`` growing modes nearest in m to the fastest-growing box mode; when none
    grows, the first STABLE_ROWS modes.
    """
    modes = sorted(modes, key=lambda m: m["mode"])
    if all_modes:
        return modes, []
    growing = [m for m in modes if m["growth"] and m["growth"] > 0]
    if not growing:
        return modes[:STABLE_ROWS], []
    if len(growing) <= cap:
        return growing, []
    i = max(range(len(growing)), key=lambda j: growing[j]["growth"])
    lo = min(max(i - cap // 2, 0), len(growing) - cap)
    rows = growing[lo:lo + cap]
    return rows, growing[:lo] + growing[lo + cap:]


def _table(d: dict, title: str, all_modes: bool = False) -> str:
    lines = [f"linear theory for '{title}' (model: {d['model']})"]
    n = d.get("density_cm3")
    if n:
        lines.append(f"  reference density {n:.4g} cm^-3: omega_p = {d['omega_p_rad_s']:.4g} rad/s, "
                     f"c/omega_p = {d['skin_depth_cm']:.4g} cm")
    st = d.get("stability")
    if st:
        lines.append(f"  verdict: {st['text']}")
    f = d["fastest"]
    floor = 0.0
    if f is None:
        lines.append("  stable: no growing mode in the k range examined")
    else:
        floor = abs(f["growth"])
        scale = math.hypot(f["growth"], f["omega_r"])
        lines.append(f"  fastest-growing mode: k = {f['k']:.6g} omega_p/c "
                     f"(wavelength {f['wavelength']:.4g} c/omega_p"
                     + (f" = {f['wavelength_cm']:.4g} cm)" if f.get("wavelength_cm") else ")"))
        lines.append(f"    growth rate {f['growth']:.6g} omega_p, "
                     f"omega_r = {_fmt(f['omega_r'], '.4g', scale=scale)} omega_p"
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
    growing = [m for m in modes if m["growth"] and m["growth"] > 0]
    lines.append(f"  box modes k_m = 2 pi m / L, m = 1..{len(modes)}: {len(growing)} growing")
    alt = any("maxwellian_growth" in m for m in modes)
    if modes:
        floor = max([floor] + [abs(m["growth"] or 0.0) for m in modes])
        lines.append("    {:>5} {:>12} {:>13} {:>12} {:>14}".format(
            "m", "k [omega_p/c]", "growth [omega_p]", "omega_r [omega_p]", "1/growth [ns]")
            + ("  maxwellian growth [omega_p]" if alt else ""))
        rows, cut = mode_rows(modes, all_modes)
        for m in rows:
            s = _mode_scale(m, floor)
            lines.append("    {:>5d} {:>12} {:>13} {:>12} {:>14}".format(
                m["mode"], _fmt(m["k"], ".5g"), _fmt(m["growth"], ".5g", scale=s),
                _fmt(m["omega_r"], ".4g", scale=s), _fmt(m.get("growth_time_ns"), ".4g"))
                + ("  {:>24}".format(_fmt(m.get("maxwellian_growth"), ".5g")) if alt else ""))
        if cut:
            lines.append(f"    ... {len(cut)} more growing modes not listed "
                         f"(m = {_ranges([m['mode'] for m in cut])}; --all lists every mode)")
        elif len(rows) < len(modes) and not growing:
            lines.append(f"    ... {len(modes) - len(rows)} more stable modes "
                         "(--all lists every mode)")
    for note in d.get("notes", []):
        lines.append(f"  note: {note}")
    return "\n".join(lines)


def plot_arrays(disp) -> dict:
    """The arrays the figure draws, from a :class:`streamsim.theory.Dispersion`.

    omega_r is drawn only where it is the real frequency of the growing root the growth curve
    tracks: where the deck has a growing root anywhere, omega_r is NaN (not drawn) wherever the
    growth is not positive, since the root reported there is another branch (the highest real
    frequency of the cold/waterbag roots, or the least damped maxwellian root).  A deck with no
    growing root keeps the one root reported everywhere.  The box modes likewise.  As in the
    table, |omega_r| below ZERO_REL of the root's scale (max of |omega| and the largest |growth|)
    is drawn as 0: it is the round-off of a purely growing root, not a frequency.
    Keys: k, growth, omega_r (the curve) and box_k, box_growth, box_omega_r (modes with k inside
    the curve's range).
    """
    import numpy as np

    k = np.asarray(disp.k, float)
    g = np.asarray(disp.growth, float)
    w = np.asarray(disp.omega_r, float)
    km = np.array([m.k for m in disp.box_modes], float)
    gm = np.array([m.growth for m in disp.box_modes], float)
    wm = np.array([np.nan if m.omega_r is None else m.omega_r for m in disp.box_modes], float)
    with np.errstate(invalid="ignore"):
        grows = bool(np.any(g > 0)) or bool(np.any(gm > 0)) or disp.fastest is not None
        if grows:
            w = np.where(g > 0, w, np.nan)
            wm = np.where(gm > 0, wm, np.nan)
        floor = float(np.nanmax(np.abs(np.concatenate([g, gm, [0.0]]))))
        w = np.where(np.abs(w) < ZERO_REL * np.maximum(np.hypot(g, w), floor), 0.0, w)
        wm = np.where(np.abs(wm) < ZERO_REL * np.maximum(np.hypot(gm, wm), floor), 0.0, wm)
    inside = km <= (k[-1] * 1.0001 if k.size else -np.inf)
    return {"k": k, "growth": g, "omega_r": w,
            "box_k": km[inside], "box_growth": gm[inside], "box_omega_r": wm[inside]}


def _plot(disp, path: str, title: str) -> None:
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    from streamsim.io import save_figure

    a = plot_arrays(disp)
    fig, (ax1, ax2) = plt.subplots(2, 1, sharex=True, figsize=(7, 6))
    ax1.plot(a["k"], a["growth"], lw=1.5, label=f"continuum ({disp.model})")
    ax2.plot(a["k"], a["omega_r"], lw=1.5)
    if a["box_k"].size:
        ax1.plot(a["box_k"], a["box_growth"], "o", ms=4, mfc="none", label="box modes 2πm/L")
        ax2.plot(a["box_k"], a["box_omega_r"], "o", ms=4, mfc="none")
    if disp.fastest is not None:
        ax1.axvline(disp.fastest.k, ls=":", lw=1)
        ax1.annotate(f"fastest: k={disp.fastest.k:.4g}, γ={disp.fastest.growth:.4g}",
                     (disp.fastest.k, disp.fastest.growth), textcoords="offset points",
                     xytext=(6, -12), fontsize=8)
    ax1.axhline(0.0, color="0.6", lw=0.8)
    ax1.set_ylabel(r"growth rate $\gamma$ [$\omega_p$]")
    ax2.set_ylabel(r"real frequency $\omega_r$ [$\omega_p$]"
                   + ("\n(growing root only)" if disp.fastest is not None else ""))
    ax2.set_xlabel(r"$k$ [$\omega_p/c$]")
    ax1.legend(fontsize=8)
    ax1.set_title(f"linear theory: {title}", fontsize=10)
    save_figure(fig, path, dpi=120)


def main(args) -> int:
    deck = deck_from_args(args)
    if args.kmax is not None and not (math.isfinite(args.kmax) and args.kmax > 0):
        raise ArgumentError("", f"--kmax must be a finite number > 0 (got {args.kmax:g})")
    if args.nk < 8:
        raise ArgumentError("", f"--nk must be at least 8 (got {args.nk})")
    from streamsim import theory
    try:
        disp = theory.theory_for_deck(deck, model=args.model, kmax=args.kmax, nk=args.nk)
    except (ValueError, ArithmeticError) as ex:
        raise TheoryFailure("", str(ex)) from None
    d = disp.to_dict()
    if args.plot:
        try:
            _plot(disp, args.plot, deck.title)
        except OSError as ex:
            from streamsim.io import OutputError
            if isinstance(ex, OutputError):
                raise
            raise OutputError(f"cannot write {args.plot}: {ex.strerror or ex}") from None
    if args.json:
        print(json.dumps(d, allow_nan=False))
    else:
        print(_table(d, deck.title, all_modes=getattr(args, "all_modes", False)))
        if args.plot:
            print(f"  figure: {args.plot}")
    sys.stdout.flush()
    return 0
