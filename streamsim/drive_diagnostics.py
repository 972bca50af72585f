"""What a driven run records (only with a ``[drive]`` block): the handler :class:`DriveRecorder`.

At the diagnostics cadence, on the same times as the standard series (``t``):

    drive_e0           (n,)     the mean field E0(t_n), m_e c omega_p / e
    drive_current      (n,)     <J>(t_n), the mean of <J> over u^{n-1/2} and u^{n+1/2}, e n_ref c
    drive_current_ext  (n,)     J_ext(t_n), e n_ref c
    drive_work         (n,)     L int_0^{t_n} J_ext E0 dt (the work of the imposed current),
                                n_ref m_e c^2 c/omega_p, summed step by step as
                                L dt J_ext^{n+1/2} (E0^n + E0^{n+1}) / 2
    drive_gamma_mean   (n, S)   <gamma> per species
    drive_gamma_rms    (n, S)   sqrt(<gamma^2>) per species
    drive_gamma_max    (n, S)   max gamma per species
    drive_gamma_bulk   (n, S)   bulk Lorentz factor of the flow from the mean four-velocity
                                (:func:`streamsim.drive.bulk_lorentz_factor`)

The gamma statistics are time-centred: the means (and mean squares) over u^{n-1/2} and u^{n+1/2}
averaged, the maximum the larger of the two. At the field cadence, on its own time axis:

    drive_gamma_hist_t      (n_f,)        times of the histograms (x^n, u^{n-1/2})
    drive_gamma_hist        (n_f, S, B)   fraction of each species' particles per bin
    drive_gamma_hist_edges  (B + 1,)      bin edges in log10(gamma - 1) (not a time axis)

Values below the first edge count in the first bin, above the last in the last bin.
"""
from __future__ import annotations

import numpy as np

from . import drive as _drive
from . import fields
from .diagnostics import Handler, allocate, record_steps, restore_rows, stride

__all__ = ["DriveRecorder", "GAMMA_HIST_EDGES"]

#: bin edges of the gamma histogram in log10(gamma - 1): 0.1 dex from 1e-8 to 1e6
GAMMA_HIST_EDGES = np.linspace(-8.0, 6.0, 141)


def _gamma_moments(u: np.ndarray) -> tuple[float, float, float, float]:
    """(<gamma>, <gamma^2>, max gamma, <u>) of one species' momenta."""
    if u.size == 0:
        return 1.0, 1.0, 1.0, 0.0
    g = np.sqrt(1.0 + u * u)
    return float(g.mean()), float(1.0 + np.mean(u * u)), float(g.max()), float(u.mean())


def _histogram(u: np.ndarray) -> np.ndarray:
    """Fraction of the particles per bin of log10(gamma - 1) (gamma - 1 = u^2 / (gamma + 1),
    no cancellation)."""
    n = GAMMA_HIST_EDGES.size - 1
    if u.size == 0:
        return np.zeros(n)
    gm1 = u * u / (np.sqrt(1.0 + u * u) + 1.0)
    with np.errstate(divide="ignore"):
        lg = np.log10(gm1)
    lo, hi = GAMMA_HIST_EDGES[0], GAMMA_HIST_EDGES[-1]
    idx = np.floor((np.clip(lg, lo, hi) - lo) / (hi - lo) * n).astype(np.int64)
    return np.bincount(np.minimum(idx, n - 1), minlength=n) / u.size


class DriveRecorder(Handler):
    """E0, <J>, J_ext, the work of the imposed current and the Lorentz factors (module
    docstring); also the running error of the energy balance W - W0 = L int J_ext E0 dt, which
    the energy watch and summary.json ``energy`` report in a driven run (``energy_rank``)."""
    name = "drive"
    memory_item = "drive"
    what = "the drive series"
    energy_rank = 2

    @classmethod
    def layout(cls, deck, every):
        S = len(deck.species)
        n = record_steps(deck.time.steps, every)
        nf = record_steps(deck.time.steps, stride(deck.output.fields_interval, deck.time.dt))
        B = GAMMA_HIST_EDGES.size - 1
        return {"drive_e0": ((n,), float), "drive_current": ((n,), float),
                "drive_current_ext": ((n,), float), "drive_work": ((n,), float),
                **{f"drive_gamma_{k}": ((n, S), float) for k in ("mean", "rms", "max", "bulk")},
                "drive_gamma_hist_t": ((nf,), float), "drive_gamma_hist": ((nf, S, B), float)}

    def __init__(self, sim, every: int, hist_every: int | None = None):
        self.every = every
        self.hist_every = (stride(sim.deck.output.fields_interval, sim.dt) if hist_every is None
                           else hist_every)
        self.arrays = allocate(self.layout(sim.deck, every))
        self.count = self.hist_count = 0
        self.length, self.dx = sim.deck.box.length, sim.deck.box.dx
        self.w_m = np.array(sim.weights) * sim.masses
        self.work = 0.0
        self._pending = None
        self.energy0 = None
        self.balance_max = 0.0      # max |W - W0 - work|
        self.gain_max = 0.0         # max |W - W0|

    # -- the loop ----------------------------------------------------------------------------
    def before(self, sim, n):
        if self.due(n):
            self._pending = [_gamma_moments(u) for u in sim.u]
        if self.hist_every and n % self.hist_every == 0:
            self._hist(sim, n * sim.dt)

    def after(self, sim, n):
        if self.due(n):
            new = [_gamma_moments(u) for u in sim.u]
            self._record(sim, n * sim.dt, sim.prev_e0, 0.5 * (sim.old_current + sim.new_current),
                         self._pending or new, new, sim.prev_density, sim.prev_efield,
                         sim.old_sums, sim.new_sums)
            self._pending = None
        self.work += self.length * sim.dt * sim.current_ext_half * 0.5 * (sim.prev_e0 + sim.e0)

    def finish(self, sim):
        nxt = sim.next_momenta()
        self._record(sim, sim.step * sim.dt, sim.e0, sim.final_current(nxt),
                     [_gamma_moments(u) for u in sim.u], [_gamma_moments(u) for u in nxt],
                     sim.density, sim.efield, sim.sums_half, sim.final_sums())
        if self.arrays["drive_gamma_hist_t"].size > self.hist_count:
            self._hist(sim, sim.step * sim.dt)

    def _hist(self, sim, t):
        i = self.hist_count
        self.arrays["drive_gamma_hist_t"][i] = t
        for s, u in enumerate(sim.u):
            self.arrays["drive_gamma_hist"][i, s] = _histogram(u)
        self.hist_count = i + 1

    def _record(self, sim, t, e0, current, mom_old, mom_new, density, efield, old_sums,
                new_sums):
        i = self.count
        a = self.arrays
        a["drive_e0"][i] = e0
        a["drive_current"][i] = current
        a["drive_current_ext"][i] = _drive.external_current(sim.drive, t)
        a["drive_work"][i] = self.work
        mo, mn = np.array(mom_old), np.array(mom_new)
        mean_g = 0.5 * (mo[:, 0] + mn[:, 0])
        a["drive_gamma_mean"][i] = mean_g
        a["drive_gamma_rms"][i] = np.sqrt(0.5 * (mo[:, 1] + mn[:, 1]))
        a["drive_gamma_max"][i] = np.maximum(mo[:, 2], mn[:, 2])
        a["drive_gamma_bulk"][i] = _drive.bulk_lorentz_factor(mean_g, 0.5 * (mo[:, 3] + mn[:, 3]))
        self.count = i + 1
        # the energy balance, with the standard series' energies at t_n
        kinetic = 0.5 * (old_sums[:, 0] + new_sums[:, 0]) * self.w_m
        total = float(kinetic.sum() + fields.field_energy(efield, self.dx))
        if self.energy0 is None:
            self.energy0 = total
        gain = total - self.energy0
        self.gain_max = max(self.gain_max, abs(gain))
        self.balance_max = max(self.balance_max, abs(gain - self.work))

    @property
    def energy_err_max(self) -> float:
        """max |W - W0 - L int J_ext E0 dt| / max(|W0|, max |W - W0|) so far."""
        scale = max(abs(self.energy0 or 0.0), self.gain_max)
        return self.balance_max / scale if scale > 0 else 0.0

    # -- results and checkpoints -------------------------------------------------------------
    def series_arrays(self) -> dict[str, np.ndarray]:
        """The recorded arrays for the TimeSeries (written to timeseries.h5)."""
        out = {k: v[:self.count].copy() for k, v in self.arrays.items()
               if not k.startswith("drive_gamma_hist")}
        out["drive_gamma_hist_t"] = self.arrays["drive_gamma_hist_t"][:self.hist_count].copy()
        out["drive_gamma_hist"] = self.arrays["drive_gamma_hist"][:self.hist_count].copy()
        out["drive_gamma_hist_edges"] = GAMMA_HIST_EDGES.copy()
        return out

    @classmethod
    def start_lines(cls, deck):
        """The imposed current against the carrying limit."""
        lim = _drive.carrying_limit(deck.species)
        j = _drive.max_abs_current(deck.drive, deck.time.end)
        return [f"drive: max |J_ext| = {j:.4g} e n_ref c, carrying_limit = {lim:.4g} e n_ref c, "
                f"ratio = {j / lim:.4g}" + (" (charge-starved)" if j > lim else "")]

    def run_summary(self, deck):
        """Energy is not conserved when driven: summary.json ``energy`` reports the balance."""
        err = self.energy_err_max
        return {"energy": {"relative_error_max": err,
                           "warning": err > deck.analysis.energy_tolerance,
                           "measure": "driven run: max |W - W0 - L int J_ext E0 dt| / "
                                      "max(|W0|, max |W - W0|)"}}

    def state(self):
        return {**self.arrays, "count": np.array(self.count),
                "hist_count": np.array(self.hist_count)}

    def restore(self, arrays):
        for k, dst in self.arrays.items():
            restore_rows(dst, arrays.get(k), f"{self.name}/{k}")
        self.count, self.hist_count = int(arrays["count"]), int(arrays["hist_count"])

    def meta(self):
        return {"work": self.work, "energy0": self.energy0, "balance_max": self.balance_max,
                "gain_max": self.gain_max}

    def restore_meta(self, meta):
        for k, v in meta.items():
            setattr(self, k, v)

