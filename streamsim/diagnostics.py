"""What is recorded during a run, and at which cadence.

Cadences are whole numbers of steps derived from the deck's ``output.*_every`` (in 1/omega_p).
The recorder keeps preallocated arrays, so a run's memory for diagnostics is fixed at the start,
and it can be saved into and restored from a checkpoint exactly.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .rundata import DensitySnapshots, PhaseSpace, TimeSeries


def stride(every: float, dt: float) -> int:
    """Steps between two records for a cadence ``every`` (>= 1)."""
    return max(1, int(round(every / dt)))


def record_steps(steps: int, every: int) -> int:
    """How many records a run of ``steps`` steps makes at a stride (step 0 and the last included)."""
    n = steps // every + 1
    if steps % every:
        n += 1
    return n


def contrast(density: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """max and rms over the grid of delta n/n = n(x)/<n> - 1, per row of ``density`` (S, N) and
    for the sum of all rows (the pair total) as the last entry."""
    rows = np.vstack([density, density.sum(axis=0, keepdims=True)])
    mean = rows.mean(axis=1, keepdims=True)
    dn = rows / mean - 1.0
    return dn.max(axis=1), np.sqrt(np.mean(dn * dn, axis=1))


@dataclass
class Cadence:
    diag: int
    fields: int
    phase: int
    checkpoint: int   # 0 = none

    @classmethod
    def from_deck(cls, deck) -> "Cadence":
        o, dt = deck.output, deck.time.dt
        ck = stride(o.checkpoint_every, dt) if o.checkpoint_every > 0 else 0
        return cls(stride(o.diagnostics_every, dt), stride(o.fields_every, dt),
                   stride(o.phase_space_every, dt), ck)


class Recorder:
    """Preallocated time series, density snapshots and phase-space samples."""

    SERIES = ("t", "kinetic", "field_energy", "momentum", "mode_amplitude", "contrast_max",
              "contrast_rms")

    def __init__(self, deck, steps: int, cadence: Cadence, n_sub: list[int]):
        S, N, M = len(deck.species), deck.box.cells, deck.output.modes
        nd = record_steps(steps, cadence.diag)
        nf = record_steps(steps, cadence.fields)
        npz = record_steps(steps, cadence.phase)
        self.names = [s.name for s in deck.species]
        self.arrays = {
            "t": np.zeros(nd), "kinetic": np.zeros((nd, S)), "field_energy": np.zeros(nd),
            "momentum": np.zeros((nd, S)), "mode_amplitude": np.zeros((nd, M), complex),
            "contrast_max": np.zeros((nd, S + 1)), "contrast_rms": np.zeros((nd, S + 1)),
            "snap_t": np.zeros(nf), "snap_density": np.zeros((nf, S, N)), "snap_efield": np.zeros((nf, N)),
            "ps_t": np.zeros(npz),
        }
        for name, k in zip(self.names, n_sub):
            self.arrays[f"ps_x/{name}"] = np.zeros((npz, k))
            self.arrays[f"ps_u/{name}"] = np.zeros((npz, k))
        self.counts = {"diag": 0, "fields": 0, "phase": 0}

    # -- recording ------------------------------------------------------------------------
    def series(self, t, kinetic, field_energy, momentum, modes, cmax, crms) -> None:
        i = self.counts["diag"]
        a = self.arrays
        a["t"][i] = t
        a["kinetic"][i] = kinetic
        a["field_energy"][i] = field_energy
        a["momentum"][i] = momentum
        a["mode_amplitude"][i] = modes
        a["contrast_max"][i] = cmax
        a["contrast_rms"][i] = crms
        self.counts["diag"] = i + 1

    def snapshot(self, t, density, efield) -> None:
        i = self.counts["fields"]
        self.arrays["snap_t"][i] = t
        self.arrays["snap_density"][i] = density
        self.arrays["snap_efield"][i] = efield
        self.counts["fields"] = i + 1

    def phase(self, t, xs, us) -> None:
        i = self.counts["phase"]
        self.arrays["ps_t"][i] = t
        for name, x, u in zip(self.names, xs, us):
            self.arrays[f"ps_x/{name}"][i] = x
            self.arrays[f"ps_u/{name}"][i] = u
        self.counts["phase"] = i + 1

    # -- views ----------------------------------------------------------------------------
    def timeseries(self) -> TimeSeries:
        n = self.counts["diag"]
        return TimeSeries(**{k: self.arrays[k][:n].copy() for k in self.SERIES})

    def density_snapshots(self) -> DensitySnapshots:
        n = self.counts["fields"]
        a = self.arrays
        return DensitySnapshots(t=a["snap_t"][:n].copy(), density=a["snap_density"][:n].copy(),
                                efield=a["snap_efield"][:n].copy())

    def phase_space(self) -> PhaseSpace:
        n = self.counts["phase"]
        a = self.arrays
        return PhaseSpace(t=a["ps_t"][:n].copy(),
                          x={s: a[f"ps_x/{s}"][:n].copy() for s in self.names},
                          u={s: a[f"ps_u/{s}"][:n].copy() for s in self.names})

    # -- checkpointing --------------------------------------------------------------------
    def state(self) -> tuple[dict[str, np.ndarray], dict[str, int]]:
        return self.arrays, dict(self.counts)

    def restore(self, arrays: dict[str, np.ndarray], counts: dict[str, int]) -> None:
        for k, v in arrays.items():
            if k not in self.arrays or self.arrays[k].shape != v.shape:
                raise ValueError(f"checkpoint does not match this deck (diagnostic {k!r})")
            self.arrays[k][...] = v
        self.counts = {k: int(counts[k]) for k in self.counts}
