"""Growth-rate fits: the linear phase of ln|E_k|(t), found automatically.

The linear phase of an instability is where ln|E_k| is a straight line in t: above the noise floor
(where ln|E_k| wanders) and below saturation (where it bends over).  :func:`find_linear_phase`
searches every window [t0, t1] (edges on a coarse grid, sums on the full series) for the longest
one whose least-squares line

- rises by at least ``min_efolds`` e-folds (default 3),
- is straight: rms residual <= ``max_rms`` and largest residual <= ``max_dev`` (ln units),

and fits the rate there by ordinary least squares (:func:`least_squares_line`).  When no window qualifies the answer
is "no linear phase found" -- the noise is never fitted.

The standard error of the slope is the ordinary least-squares one inflated for the correlation of
neighbouring residuals (lag-1 autocorrelation rho, effective sample size n (1 - rho)/(1 + rho);
Bretherton et al. 1999, J. Climate 12, 1990, eq. 31).  A systematic spread (half the difference of
the slopes fitted to the two halves of the window) is reported beside it.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..numbers import finite_or_none
from .fits import effective_sample_size, error_inflation  # noqa: F401 - public here too

__all__ = ["LinearFit", "find_linear_phase", "effective_sample_size", "fit_modes",
           "fit_field_energy", "NO_PHASE"]

NO_PHASE = "no linear phase found"

#: defaults of the window search (common practice; see module docstring)
MIN_EFOLDS = 3.0
MAX_RMS = 0.05
MAX_DEV = 0.15
EDGE_POINTS = 240
#: a fitted rate above this multiple of the theory's largest rate is nonlinear driving
#: (common practice: 25 % above the fastest linear root leaves room for fit error)
DRIVEN_FACTOR = 1.25


@dataclass
class LinearFit:
    rate: float          # slope of ln(signal) in 1/t
    rate_err: float      # standard error, corrected for correlated residuals
    systematic: float    # half the difference of the slopes over the two half-windows
    intercept: float
    t0: float
    t1: float
    i0: int
    i1: int              # inclusive
    efolds: float        # rise of the fitted line over the window
    rms: float           # rms residual (ln units)

    def as_dict(self) -> dict:
        return {"measured": self.rate, "measured_err": self.rate_err,
                "systematic": self.systematic, "window": [self.t0, self.t1],
                "efolds": self.efolds, "rms_residual": self.rms}


def _window_stats(t, y, c, i0, i1):
    """Least-squares slope, intercept, rss of y(t) over [i0, i1] (inclusive) from cumulative sums."""
    S1, St, Sy, Stt, Sty, Syy = c
    n = (i1 - i0 + 1).astype(float)
    a = lambda S: S[i1 + 1] - S[i0]  # noqa: E731
    st, sy, stt, sty, syy = a(St), a(Sy), a(Stt), a(Sty), a(Syy)
    vt = stt - st * st / n
    cty = sty - st * sy / n
    vy = syy - sy * sy / n
    with np.errstate(divide="ignore", invalid="ignore"):
        slope = np.where(vt > 0, cty / vt, 0.0)
        rss = np.maximum(vy - slope * cty, 0.0)
    inter = (sy - slope * st) / n
    return n, slope, inter, rss


def find_linear_phase(t, signal, *, log=False, min_efolds=MIN_EFOLDS, max_rms=MAX_RMS,
                      max_dev=MAX_DEV, min_points=8, edge_points=EDGE_POINTS,
                      t_max: float | None = None) -> LinearFit | None:
    """The longest straight, growing window of ln(signal) (see module docstring), or None.

    ``signal`` is a positive amplitude (|E_k|, field energy, ...); with ``log=True`` it is already
    ln of one.  ``t_max`` restricts the search to t <= t_max.
    """
    t = np.asarray(t, float)
    y = np.asarray(signal, float) if log else None
    if not log:
        s = np.abs(np.asarray(signal, float))
        with np.errstate(divide="ignore"):
            y = np.log(s)
    good = np.isfinite(y) & np.isfinite(t)
    if t_max is not None:
        good &= t <= t_max
    if good.sum() < min_points:
        return None
    # work on the longest run of finite samples
    idx = np.flatnonzero(good)
    breaks = np.flatnonzero(np.diff(idx) > 1)
    starts = np.concatenate([[0], breaks + 1])
    ends = np.concatenate([breaks, [idx.size - 1]])
    j = int(np.argmax(ends - starts))
    sel = idx[starts[j]:ends[j] + 1]
    t, y = t[sel], y[sel]
    n_all = t.size
    if n_all < min_points:
        return None
    tc = t - t[0]
    zero = np.zeros(1)
    c = [np.concatenate([zero, np.cumsum(v)]) for v in
         (np.ones_like(tc), tc, y, tc * tc, tc * y, y * y)]
    edges = np.unique(np.linspace(0, n_all - 1, min(edge_points, n_all)).round().astype(int))
    I0, I1 = np.meshgrid(edges, edges, indexing="ij")
    ok = (I1 - I0 + 1) >= min_points
    I0, I1 = I0[ok], I1[ok]
    n, slope, inter, rss = _window_stats(tc, y, c, I0, I1)
    rise = slope * (tc[I1] - tc[I0])
    rms = np.sqrt(rss / n)
    cand = (slope > 0) & (rise >= min_efolds) & (rms <= max_rms)
    if not cand.any():
        return None
    order = np.flatnonzero(cand)
    order = order[np.lexsort((-rise[order], -(tc[I1[order]] - tc[I0[order]])))]
    for w in order[:400]:
        i0, i1 = int(I0[w]), int(I1[w])
        res = y[i0:i1 + 1] - (inter[w] + slope[w] * tc[i0:i1 + 1])
        if np.max(np.abs(res)) <= max_dev:
            return _fit(t, y, i0, i1, sel)
    return None


def least_squares_line(x, y) -> tuple[float, float, float]:
    """(slope b, intercept a, standard error of b) of the ordinary least-squares line y = a + b x:
    b = S_xy / S_xx, a = mean(y) - b mean(x), se(b) = sqrt(sum(r^2) / (n - 2) / S_xx) with
    S_xx = sum((x - mean x)^2), S_xy = sum((x - mean x)(y - mean y)) and the residuals r
    (Bevington & Robinson, Data Reduction and Error Analysis, 3rd ed., 2003, ch. 6). The same
    numbers as scipy.stats.linregress, without importing scipy.stats (a third of a second)."""
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
    dx = x - x.mean()
    dy = y - y.mean()
    sxx = float(dx @ dx)
    slope = float(dx @ dy) / sxx
    intercept = float(y.mean() - slope * x.mean())
    n = x.size
    if n > 2:
        r = dy - slope * dx
        stderr = math.sqrt(max(float(r @ r), 0.0) / (n - 2) / sxx)
    else:
        stderr = 0.0
    return slope, intercept, stderr


def _fit(t, y, i0, i1, sel) -> LinearFit:
    tt, yy = t[i0:i1 + 1], y[i0:i1 + 1]
    slope, intercept, stderr = least_squares_line(tt, yy)
    res = yy - (intercept + slope * tt)
    n = tt.size
    err = float(stderr) * error_inflation(res, 2)
    h = n // 2
    if h >= 4:
        a = least_squares_line(tt[:h], yy[:h])[0]
        b = least_squares_line(tt[h:], yy[h:])[0]
        syst = 0.5 * abs(a - b)
    else:
        syst = 0.0
    return LinearFit(rate=float(slope), rate_err=float(err), systematic=float(syst),
                     intercept=float(intercept), t0=float(tt[0]), t1=float(tt[-1]),
                     i0=int(sel[i0]), i1=int(sel[i1]),
                     efolds=float(slope * (tt[-1] - tt[0])),
                     rms=float(np.sqrt(np.mean(res * res))))


def fit_modes(t, mode_amplitude, length, theory_growth: dict[int, float] | None = None,
              g_max: float | None = None, driven_factor: float = DRIVEN_FACTOR,
              **kw) -> list[dict]:
    """One row per box mode m = 1..M: the fitted growth of |E_m| and the theory of the same mode.

    ``theory_growth`` maps a box mode m to its linear growth rate; ``g_max`` is the largest
    linear rate of the theory (fastest root), used to recognise nonlinearly driven growth.

    Rates in omega_p; ``ratio`` = measured / theory when the theory grows (> 0), else None.

    A window growing faster than ``driven_factor`` x the theory's largest rate cannot be a linear
    phase (no linear root grows faster than the fastest one): it is growth driven by the
    nonlinear coupling of growing modes (harmonics and beats, which grow at sums of their rates).
    It is reported under "driven" and the search is repeated before it.
    """
    amp = np.abs(np.asarray(mode_amplitude))
    th = dict(theory_growth or {})
    rows = []
    for m in range(1, amp.shape[1] + 1):
        k = 2.0 * math.pi * m / length
        g_th = finite_or_none(th.get(m))
        row = {"mode": m, "k": k, "measured": None, "measured_err": None, "systematic": None,
               "theory": g_th, "ratio": None, "window": None, "efolds": None,
               "status": NO_PHASE}
        fit = find_linear_phase(t, amp[:, m - 1], **kw)
        t_max = kw.pop("t_max", None)
        for _ in range(4):
            if fit is None or g_max is None or g_max <= 0 or fit.rate <= driven_factor * g_max:
                break
            row.setdefault("driven", {"rate": fit.rate, "window": [fit.t0, fit.t1]})
            fit = find_linear_phase(t, amp[:, m - 1], t_max=fit.t0 if t_max is None
                                    else min(t_max, fit.t0), **kw)
        if t_max is not None:
            kw["t_max"] = t_max
        if fit is None and "driven" in row:
            row["status"] = NO_PHASE + " (later growth is nonlinearly driven)"
        if fit is not None:
            row.update(fit.as_dict())
            row["status"] = "fit"
            if g_th is not None and g_th > 0:
                row["ratio"] = fit.rate / g_th
        rows.append(row)
    return rows


def fit_field_energy(t, field_energy, theory_growth: float | None = None, **kw) -> dict:
    """Fit ln W_E(t): the field energy grows at twice the amplitude rate (W_E ~ |E|^2 ~ e^{2 gamma t}).

    The window needs 2 * min_efolds e-folds of energy (the same amplitude rise as for a mode).
    """
    kw = dict(kw)
    kw["min_efolds"] = 2.0 * kw.get("min_efolds", MIN_EFOLDS)
    kw["max_rms"] = 2.0 * kw.get("max_rms", MAX_RMS)
    kw["max_dev"] = 2.0 * kw.get("max_dev", MAX_DEV)
    fit = find_linear_phase(t, field_energy, **kw)
    out = {"measured": None, "measured_err": None, "window": None, "amplitude_rate": None,
           "amplitude_rate_err": None, "theory": None, "ratio": None, "status": NO_PHASE}
    if theory_growth is not None and theory_growth > 0:
        out["theory"] = 2.0 * theory_growth
    if fit is not None:
        out.update({"measured": fit.rate, "measured_err": fit.rate_err,
                    "window": [fit.t0, fit.t1], "amplitude_rate": fit.rate / 2.0,
                    "amplitude_rate_err": fit.rate_err / 2.0, "efolds": fit.efolds,
                    "status": "fit"})
        if out["theory"]:
            out["ratio"] = fit.rate / out["theory"]
    return out


# -- noise-seeded runs --------------------------------------------------------------------------
#: method names reported as growth.fit / modes[].fit
STRAIGHT = "straight_window"
EIGENMODE = "eigenmode"     # prefix: "eigenmode+straight_window", "eigenmode+noise_floor"
NOISE_FLOOR = "noise_floor"


def is_seeded_quiet_start(deck) -> bool:
    """True when every species has a quiet start and the deck seeds modes (perturbation amplitude
    > 0): the growing mode then stands far above the noise from t = 0 and the straight-window fit
    applies. Any random loading, or a quiet start without a seed, is noise-seeded."""
    pert = getattr(deck, "perturbation", None)
    amp = getattr(pert, "amplitude", 0.0) or 0.0
    modes = getattr(pert, "modes", ()) or ()
    return (all(getattr(s, "loading", "quiet") == "quiet" for s in deck.species)
            and amp > 0 and len(modes) > 0)


def fit_modes_noise(t, mode_amplitude, length, theory_growth: dict[int, float] | None = None,
                    g_max: float | None = None, *, density_modes=None, charges=None,
                    bases: dict | None = None, driven_factor: float = DRIVEN_FACTOR,
                    particles_per_cell: int | None = None) -> list[dict]:
    """One row per box mode, as :func:`fit_modes`, for a noise-seeded run.

    Per mode, in this order, the first that gives a rate: on the growing eigenmode's amplitude
    E_g (when the theory grows at that mode and the species' density modes were recorded:
    ``bases[m]`` a :class:`streamsim.theory.ModeBasis`) the straight window of ln|E_g|
    (``eigenmode+straight_window``: the projection often leaves no floor) or the noise-floor fit
    of |E_g|^2 (``eigenmode+noise_floor``); then on E_k the noise-floor fit of |E_k|^2
    (``noise_floor``) or the straight window of ln|E_k| (``straight_window``, 3 clean e-folds).
    See :mod:`streamsim.analysis.noise_growth`.
    A straight window's ``measured_err`` here adds its ``systematic`` (half the difference of the
    half-window slopes) in quadrature to the statistical error (kept as ``statistical_err``).
    Each row carries ``fit``; a row without a rate carries ``reason`` (in numbers) and
    ``particles_per_cell_needed`` (shot-noise law) for :data:`noise_growth.TARGET_EFOLDS`.
    """
    from . import noise_growth as ng
    amp = np.asarray(mode_amplitude)
    th = dict(theory_growth or {})
    bases = bases or {}
    rows = []
    for m in range(1, amp.shape[1] + 1):
        k = 2.0 * math.pi * m / length
        g_th = finite_or_none(th.get(m))
        row = {"mode": m, "k": k, "measured": None, "measured_err": None, "systematic": None,
               "theory": g_th, "ratio": None, "window": None, "efolds": None,
               "status": NO_PHASE, "fit": None, "reason": None,
               "particles_per_cell_needed": None, "noise_level": None}
        signals = []
        basis = bases.get(m)
        if basis is not None and density_modes is not None:
            eg = ng.eigenmode_signal(t, density_modes[:, :, m - 1], charges, basis)
            signals.append((EIGENMODE, np.abs(eg) ** 2))
        signals.append(("", np.abs(amp[:, m - 1]) ** 2))
        fit = method = None
        too_fast = lambda f: (g_max is not None and g_max > 0  # noqa: E731
                              and f.rate > driven_factor * g_max)
        for name, power in signals:
            # the projected signal may have no floor left: a straight window first there
            order = ((STRAIGHT, NOISE_FLOOR) if name == EIGENMODE else (NOISE_FLOOR, STRAIGHT))
            for how in order:
                t_max = None
                for _ in range(4):
                    if how == STRAIGHT:
                        fit = find_linear_phase(t, np.sqrt(power), t_max=t_max)
                        start = None if fit is None else fit.t0
                    else:
                        fit = ng.fit_noise_floor(t, power, t_max=t_max)
                        # where the (driven) exponential left the noise
                        start = None if fit is None else fit.t1 - fit.efolds / fit.rate
                    if fit is None or not too_fast(fit):
                        break
                    row.setdefault("driven", {"rate": fit.rate, "window": [fit.t0, fit.t1]})
                    t_max, fit = start, None
                if fit is not None:
                    method = f"{name}+{how}" if name else how
                    break
            if fit is not None:
                break
        if fit is not None:
            row.update(fit.as_dict())
            if isinstance(fit, LinearFit):
                # noise-seeded: the window choice is part of the error (as in the noise fit)
                row["statistical_err"] = fit.rate_err
                row["measured_err"] = math.hypot(fit.rate_err, fit.systematic)
            row["status"] = "fit"
            row["fit"] = method
            if g_th is not None and g_th > 0:
                row["ratio"] = fit.rate / g_th
        else:
            lv = ng.levels(t, signals[0][1])
            row["reason"] = ng.reason_text(lv)
            if "driven" in row:
                row["reason"] += "; later growth is nonlinearly driven"
                row["status"] = NO_PHASE + " (later growth is nonlinearly driven)"
            row["noise_level"] = lv.noise
            row["saturation_level"] = lv.saturation
            row["efolds_available"] = lv.efolds
            if particles_per_cell:
                row["particles_per_cell_needed"] = ng.particles_per_cell_needed(
                    particles_per_cell, lv.efolds)
        rows.append(row)
    return rows


def fit_band_energy(t, mode_amplitude, length, band_modes, theory_growth: float | None = None,
                    ) -> dict:
    """Noise-floor fit of the field energy of the unstable band, W_band = L Sum_{m in band}
    |E_m|^2 (the energy of the cosine waves 2|E_m| cos(k_m x + phase) per box of length L), so
    that grid-scale noise outside the band does not flatten the slope; grows at 2 gamma."""
    from . import noise_growth as ng
    amp = np.abs(np.asarray(mode_amplitude))
    cols = [m - 1 for m in band_modes if 0 < m <= amp.shape[1]]
    out = {"measured": None, "measured_err": None, "window": None, "amplitude_rate": None,
           "amplitude_rate_err": None, "theory": None, "ratio": None, "status": NO_PHASE,
           "fit": NOISE_FLOOR + " (unstable band)", "band_modes": [c + 1 for c in cols]}
    if theory_growth is not None and theory_growth > 0:
        out["theory"] = 2.0 * theory_growth
    if not cols:
        return out
    w = length * np.sum(amp[:, cols] ** 2, axis=1)
    fit = ng.fit_noise_floor(t, w)
    if fit is None:                  # no floor left in the band: the straight window of ln W
        straight = fit_field_energy(t, w, theory_growth)
        straight["fit"] = STRAIGHT + " (unstable band)"
        straight["band_modes"] = out["band_modes"]
        return straight
    if fit is not None:
        out.update({"measured": 2 * fit.rate, "measured_err": 2 * fit.rate_err,
                    "window": [fit.t0, fit.t1], "amplitude_rate": fit.rate,
                    "amplitude_rate_err": fit.rate_err, "efolds": 2 * fit.efolds,
                    "status": "fit", "noise_level": fit.noise ** 2})
        if out["theory"]:
            out["ratio"] = out["measured"] / out["theory"]
    return out


#: the field-energy rate is flagged when it is further than this many of its standard errors
#: from 2 gamma of the theory (two-sided 95 %)
ENERGY_FLAG_SIGMA = 2.0


def flag_field_energy(fe: dict) -> dict:
    """Adds ``consistent_with_theory`` (bool, None without a fit or theory) and ``flag`` (one line
    or None): a field-energy rate more than ENERGY_FLAG_SIGMA standard errors from 2 gamma."""
    fe["consistent_with_theory"] = None
    fe["flag"] = None
    m, e, th = (finite_or_none(fe.get(k)) for k in ("measured", "measured_err", "theory"))
    if m is None or th is None or e is None:
        return fe
    dev = (m - th) / e if e > 0 else math.inf
    fe["deviation_sigma"] = dev
    fe["consistent_with_theory"] = bool(abs(dev) <= ENERGY_FLAG_SIGMA)
    if not fe["consistent_with_theory"]:
        fe["flag"] = (f"field-energy rate {m:.4g} +- {e:.2g} disagrees with 2*gamma = {th:.4g} "
                      f"by {dev:+.1f} sigma: the total field energy sums every mode, so other "
                      "modes, noise or the onset of saturation share its window; trust the "
                      "per-mode fit, and seed the fastest mode (perturbation.modes) or raise "
                      "the particles per cell for a clean single-mode phase")
    return fe
