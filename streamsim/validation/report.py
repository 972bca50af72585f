"""The validation report: report.md with PNG figures, results.csv, results.json.

Figures go through :func:`streamsim.io.save_figure` (atomic: a reader never sees half a PNG)."""
from __future__ import annotations

import datetime as _dt
import math
import platform
from pathlib import Path

import numpy as np

from streamsim.io import save_figure

from .checks import table_csv, table_markdown

LEAVES_OUT = ("transverse (electromagnetic) fields, the curvature of field lines, radiation "
              "reaction, pair creation and collisions")


def write_report(v, folder: Path) -> Path:
    """Write report.md, results.csv, results.json and one PNG per problem into ``folder``."""
    from streamsim import __version__, io
    folder.mkdir(parents=True, exist_ok=True)
    figures = {}
    for p in v.problems:
        out = v.outcomes[p.key]
        if out.error:
            continue
        try:
            path = folder / f"{p.key}.png"
            FIGURES[p.key](out.data, path)
            figures[p.key] = path.name
        except Exception as ex:  # noqa: BLE001 - a figure failure must not hide the table
            figures[p.key] = None
            out.data["figure_error"] = f"{ex.__class__.__name__}: {ex}"
    io.write_text(folder / "results.csv", table_csv(v.checks))
    io.write_json(folder / "results.json", {
        "streamsim_version": __version__, "level": v.level, "passed": v.passed,
        "seconds": v.seconds, "runs": v.runs, "particle_steps": v.particle_steps,
        "checks": [dict(c.row(), why=c.why, note=c.note, kind=c.kind,
                        tolerance_value=c.tolerance) for c in v.checks],
        "data": {k: o.data for k, o in v.outcomes.items()}})   # NaN/inf are written as null
    io.write_text(folder / "report.md", markdown(v, figures, __version__))
    return folder / "report.md"


def markdown(v, figures: dict, version: str) -> str:
    n, bad = len(v.checks), len(v.failed)
    now = _dt.datetime.now().strftime("%Y-%m-%d %H:%M")
    lines = [
        f"# streamsim validation ({v.level})", "",
        f"streamsim {version}, {now}, Python {platform.python_version()} on "
        f"{platform.machine()}; {v.runs} runs, {v.particle_steps:.3g} particle-steps, "
        f"{v.seconds:.0f} s. Reproduce with `streamsim validate --{v.level}`.", "",
        f"**{n - bad} of {n} checks pass" + (".**" if not bad else f"; {bad} fail.**"), "",
        "Every reference value comes from outside streamsim: a textbook formula, a published "
        "root, or an independent evaluation with scipy/numpy in `streamsim/validation/"
        "references.py` (never from streamsim.theory, which is checked against the same "
        "references on separate lines). Units are normalised: t in 1/ω_p, x in c/ω_p, "
        "u = γβ. Each tolerance is explained under its problem; \"common practice\" marks a "
        "rule of thumb without a published source.", "",
        "## Results", "", table_markdown(v.checks), "",
    ]
    for i, p in enumerate(v.problems, 1):
        out = v.outcomes[p.key]
        lines += [f"## {i}. {p.title}", "", p.explanation, "",
                  f"Reference: {p.equation} — {p.source}.", ""]
        if out.error:
            lines += [f"**The problem did not run to completion:** `{out.error}`", ""]
        if figures.get(p.key):
            lines += [f"![{p.title}]({figures[p.key]})", ""]
        lines += ["| quantity | measured ± error | reference | deviation | tolerance | why this "
                  "tolerance | result |", "|---|---|---|---|---|---|---|"]
        for c in out.checks:
            d = c.deviation
            if d is None:
                dev = "-"
            elif c.kind == "relative":
                dev = f"{100 * d:+.2f} %"
            else:
                dev = f"{d:+.3g}"
            why = c.why + (f" ({c.note})" if c.note else "")
            cells = [c.quantity, c.measured_text(), c.reference_text(), dev,
                     c.tolerance_text(), why, "pass" if c.passed else "**FAIL**"]
            lines.append("| " + " | ".join(x.replace("|", "\\|") for x in cells) + " |")
        lines += ["", f"_{out.seconds:.1f} s._", ""]
    lines += ["## What the model leaves out", "",
              f"streamsim is 1D electrostatic along a strong field: it leaves out {LEAVES_OUT}. "
              "None of these problems tests them.", ""]
    return "\n".join(lines)


# --------------------------------------------------------------------------------------------
# Figures (one per problem)
# --------------------------------------------------------------------------------------------
def _plt():
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    return plt


def _points(pts, xkey, ykey="growth", ekey="error"):
    x = np.array([q[xkey] for q in pts if q.get(ykey) is not None], float)
    y = np.array([q[ykey] for q in pts if q.get(ykey) is not None], float)
    e = np.array([q.get(ekey) or 0.0 for q in pts if q.get(ykey) is not None], float)
    return x, y, e


def fig_oscillation(d, path):
    plt = _plt()
    fig, ax = plt.subplots(figsize=(7, 3.2))
    t, s = np.array(d["t"]), np.array(d["signal"])
    ax.plot(t, s, lw=0.8, label="E_1(t), measured")
    ax.set_xlabel(r"$t$ [$1/\omega_p$]")
    ax.set_ylabel(r"$E_1$ [$m_e c\,\omega_p/e$]")
    ax.set_title(f"cold plasma oscillation: fitted ω = {d['omega']:.6f} ω_p (Δt = {d['dt']})",
                 fontsize=9)
    ax.legend(fontsize=8)
    save_figure(fig, path)


def _compare(path, curves, points, xlabel, ylabel, *, scale=1.0, log=False, vline=None,
             ylim0=False):
    """One figure: reference curves [(x, y, style, label)] and the measured points (x, y, err)."""
    plt = _plt()
    fig, ax = plt.subplots(figsize=(6, 4))
    draw = ax.loglog if log else ax.plot
    for x, y, style, label in curves:
        draw(x, np.asarray(y, float) / scale, style, label=label)
    x, y, e = points
    ax.errorbar(x, y / scale, yerr=e / scale, fmt="o", ms=5, label="streamsim")
    if vline is not None:
        ax.axvline(vline, ls=":", lw=0.8)
    ax.set_xlabel(xlabel)
    ax.set_ylabel(ylabel)
    if ylim0:
        ax.set_ylim(bottom=0)
    ax.legend(fontsize=8)
    save_figure(fig, path)


def fig_langmuir(d, path):
    _compare(path, [(d["k"], d["bohm_gross"], "-", "Bohm–Gross √(1+3k²λ_D²)"),
                    (d["k"], d["maxwellian"], "--", "Maxwellian root (wofz)")],
             _points(d["points"], "k_lambda", "omega"), r"$k\lambda_D$ [dimensionless]", r"$\omega/\omega_p$ [dimensionless]")


def fig_landau(d, path):
    plt = _plt()
    curves = d["curves"]
    fig, axes = plt.subplots(1, len(curves), figsize=(4 * len(curves), 3.4), squeeze=False)
    for ax, c in zip(axes[0], curves):
        t, s = np.array(c["t"]), np.array(c["signal"])
        ax.semilogy(t, np.abs(s) + 1e-300, lw=0.6, color="0.5", label="|E_1| (seeded − unseeded)")
        i0 = np.searchsorted(t, 3.0)
        a0 = np.abs(s[i0:i0 + 40]).max()
        ax.semilogy(t, a0 * np.exp(-c["ref_gamma"] * (t - t[i0])), "--",
                    label=f"e^(−γt), γ = {c['ref_gamma']:.4f} (root)")
        ax.set_ylim(a0 * 1e-3, a0 * 3)
        ax.set_title(f"kλ_D = {c['k_lambda']}: fitted γ = {c['fit_gamma']:.4f}", fontsize=9)
        ax.set_xlabel(r"$t$ [$1/\omega_p$]")
        ax.legend(fontsize=7, loc="lower left")
    save_figure(fig, path)


def fig_two_stream(d, path):
    _compare(path, [(d["x"], d["curve"], "-", "cold root")], _points(d["points"], "x"),
             r"$k v_0/\omega_b$ [dimensionless]", r"growth rate [$\omega_b$]", scale=d["omega_b"], vline=math.sqrt(3) / 2)


def fig_weak_beam(d, path):
    _compare(path, [(d["ratio"], d["law"], "-", "(√3/2^{4/3})(n_b/n_p)^{1/3}/γ_b"),
                    (d["ratio"], d["root"], "--", "exact cold root at k v_b = ω_p")],
             _points(d["points"], "ratio"), r"$n_b/n_p$ [dimensionless]", r"growth rate [$\omega_p$]", log=True)


def fig_relativistic(d, path):
    _compare(path, [(d["gamma0"], d["law"], "-", "ω_b/2 ∝ γ₀^{-3/2}")],
             _points(d["points"], "gamma0"), r"$\gamma_0$ [dimensionless]", r"max growth rate [$\omega_p$]", log=True)


def fig_warm(d, path):
    _compare(path, [(d["k"], d["curve"], "-", "Jüttner kinetic root (quad)"),
                    (d["k"], d["cold"], ":", "cold root (same drift)")],
             _points(d["points"], "k"), r"$k$ [$\omega_p/c$]", r"growth rate [$\omega_p$]", ylim0=True)


def fig_conservation(d, path):
    plt = _plt()
    fig, (a1, a2) = plt.subplots(1, 2, figsize=(9, 3.4))
    for name, c in d["curves"].items():
        t = np.array(c["t"])
        a1.semilogy(t, np.array(c["energy"]) + 1e-17, label=name)
        a2.semilogy(t, np.array(c["momentum"]) + 1e-18, label=name)
    a1.set_ylabel(r"$|W(t) - W(0)|/W(0)$ [dimensionless]")
    a2.set_ylabel(r"$|P(t) - P(0)|/\Sigma|P|$ [dimensionless]")
    for a in (a1, a2):
        a.set_xlabel(r"$t$ [$1/\omega_p$]")
        a.legend(fontsize=7)
    save_figure(fig, path)


def fig_convergence(d, path):
    plt = _plt()
    fig, (a1, a2) = plt.subplots(1, 2, figsize=(9, 3.6))
    dt = np.array(d["dt"])
    w = np.array(d["omega"], float)
    a1.loglog(dt, np.abs(w - 1.0), "o", label="|ω − ω_p|, streamsim")
    fine = np.geomspace(dt.min() / 1.5, dt.max() * 1.5, 50)
    a1.loglog(fine, [2 / x * math.asin(x / 2) - 1 for x in fine], "-",
              label="leapfrog (2/Δt) asin(Δt/2) − 1")
    from matplotlib.ticker import NullFormatter
    a1.xaxis.set_minor_formatter(NullFormatter())
    a1.set_xlabel(r"$\omega_p \Delta t$ [dimensionless]")
    a1.set_ylabel(r"frequency error [$\omega_p$]")
    a1.legend(fontsize=7)
    ppc = np.array(d["ppc"])
    a2.errorbar(ppc, d["rms"], yerr=d["rms_err"], fmt="o", label="rms δn/n, random start")
    a2.loglog(ppc, d["rms_expected"], "-", label="√((2/3 − 1/N_c)/ppc)")
    a2.set_xscale("log")
    a2.set_yscale("log")
    a2.set_xlabel("particles per cell")
    a2.legend(fontsize=7)
    save_figure(fig, path)


def fig_pic_vlasov(d, path):
    plt = _plt()
    fig, ax = plt.subplots(figsize=(6.4, 4))
    ax.semilogy(d["t"], d["field_energy_pic"], lw=1, label="PIC")
    ax.semilogy(d["t"], d["field_energy_vlasov"], "--", lw=1, label="Vlasov")
    ax.set_xlabel(r"$t$ [$1/\omega_p$]")
    ax.set_ylabel(r"field energy [$n_{ref} m_e c^2\,c/\omega_p$]")
    ax.set_title("warm pair beams: PIC and Vlasov")
    ax.legend()
    save_figure(fig, path)


def fig_tabulated(d, path):
    wb = d["waterbag"]
    _compare(path, [(d["k"], d["curve"], "-", "Jüttner pair: kinetic root (quad)"),
                    (d["waterbag_k"], d["waterbag_curve"], "--", "waterbag pair: algebraic relation"),
                    ([q["k"] for q in wb], [q["waterbag_table"] for q in wb], "s",
                     "waterbag pair as tables: streamsim theory")],
             _points(d["points"], "k"), "k [ω_p/c]", "growth / ω_p", ylim0=True)


FIGURES = {"plasma_oscillation": fig_oscillation, "langmuir": fig_langmuir,
           "landau": fig_landau, "two_stream": fig_two_stream, "weak_beam": fig_weak_beam,
           "relativistic": fig_relativistic, "warm_beams": fig_warm,
           "conservation": fig_conservation, "convergence": fig_convergence,
           "pic_vlasov": fig_pic_vlasov, "tabulated": fig_tabulated}
