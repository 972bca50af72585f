"""What a run leaves for analysis: plain arrays in normalised units, the same whether they come
from memory at the end of :func:`streamsim.run` or from a run folder via
:func:`streamsim.io.read_run`.

Conventions (all normalised: t in 1/omega_p, x in c/omega_p, u = gamma*beta, densities / n_ref):
- species order is the deck's order; ``names[s]`` is species s;
- contrast arrays have one column per species and a last column for the total number density of
  all species together ("pair total");
- ``mode_amplitude[:, m-1]`` is the complex Fourier coefficient of E for box mode m = 1..M,
  E_m = (1/N_cells) sum_i E_i exp(-i k_m x_i), k_m = 2 pi m / L; its modulus is |E_k|.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import TYPE_CHECKING

import numpy as np

if TYPE_CHECKING:  # typed fields only; no import of higher rooms at run time
    from .deck import Deck
    from .theory import Dispersion


class TimeSeries:
    """The recorded time series, by name (every array's first axis is time, ``t``).

    The standard ones, always present::

        t               (n,)      diagnostics times
        kinetic         (n, S)    kinetic energy sum w m (gamma - 1) per species
        field_energy    (n,)      integral of E^2/2 dx
        momentum        (n, S)    momentum sum w m u per species
        mode_amplitude  (n, M)    complex E_m, m = 1..M
        contrast_max    (n, S+1)  max over the grid of delta n / n (last column: all species)
        contrast_rms    (n, S+1)  rms over the grid of delta n / n

    A handler that records more adds its own names; they are written to and read from
    timeseries.h5 like these.
    """

    STANDARD = ("t", "kinetic", "field_energy", "momentum", "mode_amplitude", "contrast_max",
                "contrast_rms")

    def __init__(self, **arrays: np.ndarray):
        missing = [k for k in self.STANDARD if k not in arrays]
        if missing:
            raise ValueError(f"time series lack {', '.join(missing)}")
        self.arrays = {k: np.asarray(v) for k, v in arrays.items()}

    def __getattr__(self, name: str) -> np.ndarray:
        try:
            return self.__dict__["arrays"][name]
        except KeyError:
            raise AttributeError(name) from None

    def __contains__(self, name: str) -> bool:
        return name in self.arrays

    @property
    def total_energy(self) -> np.ndarray:
        return self.kinetic.sum(axis=1) + self.field_energy

    @property
    def total_momentum(self) -> np.ndarray:
        return self.momentum.sum(axis=1)


@dataclass
class DensitySnapshots:
    t: np.ndarray               # (n_f,)
    density: np.ndarray         # (n_f, S, cells) n_s(x) / n_ref on the grid nodes
    efield: np.ndarray          # (n_f, cells) E on the grid nodes


@dataclass
class ParticleSnapshot:
    """Positions of every macro-particle at one time (for the coherence form factor)."""
    t: float
    x: dict[str, np.ndarray]    # species name -> positions in [0, L)
    weight: dict[str, float]    # species name -> weight of each macro-particle (uniform)


@dataclass
class DensityProfile:
    """Grid densities of every species at one time: what a continuum (Vlasov) run keeps where a
    PIC run keeps particle positions (its form factor is that of the density, noise floor 0)."""
    t: float
    density: np.ndarray         # (S, cells) n_s(x) / n_ref on the grid nodes


@dataclass
class PhaseSpace:
    t: np.ndarray               # (n_p,)
    x: dict[str, np.ndarray]    # species -> (n_p, n_sub)
    u: dict[str, np.ndarray]    # species -> (n_p, n_sub)


@dataclass
class RunData:
    deck: "Deck"                # the resolved deck
    names: list[str]
    length: float
    cells: int
    dt: float
    series: TimeSeries
    snapshots: DensitySnapshots
    phase_space: PhaseSpace
    peak: ParticleSnapshot | None     # at the diagnostic time of maximum delta n/n of any species
    end: ParticleSnapshot | None      # at the end of the run
    theory: "Dispersion | None" = None  # the deck's linear theory (theory.json)
    extra: dict = field(default_factory=dict)
    #: continuum runs: the densities at the diagnostic time of maximum delta n/n of any species,
    #: and at the end (None for PIC runs, which keep the particle positions in peak/end)
    peak_density: DensityProfile | None = None
    end_density: DensityProfile | None = None
