"""The form factor of a continuum density (a Vlasov run keeps densities, not particles).

    F_s(k_m) = sum_j n_s(x_j) e^{i k_m x_j} / sum_j n_s(x_j),   k_m = 2 pi m / L, m = 1..N/2

— the particle form factor of :mod:`streamsim.analysis.coherence` with the particles replaced by
the density they sample (its N -> infinity limit), by one FFT of the grid density. There is no
shot noise: the floor is 0, so the cutoff criterion (:func:`coherence.coherence_cutoff`) needs
no margin above it; the grid limits k to its Nyquist wavenumber pi/dx.
"""
from __future__ import annotations

import math

import numpy as np

from .coherence import emission_cutoff_hz, envelope_cutoff

__all__ = ["density_form_factor", "density_coherence"]


def density_form_factor(density, length: float, modes: int) -> tuple[np.ndarray, np.ndarray]:
    """(k, |F(k)|^2) of a grid density for box modes m = 1..min(modes, N/2)."""
    n = np.asarray(density, float)
    m = min(int(modes), n.size // 2)
    total = float(n.sum())
    F = np.fft.rfft(n)[1:m + 1] / total if total else np.zeros(m, complex)
    k = 2.0 * math.pi * np.arange(1, m + 1) / length
    return k, np.abs(F) ** 2


def density_coherence(density, length: float, modes: int, *, drop: float, density_cm3: float,
                      bulk_gamma: float = 1.0, bins_per_decade: int = 8, seed: int = 0) -> dict:
    """What :func:`coherence.species_coherence` gives for particles, for a grid density: form
    factor, noise floor (0), the envelope cutoff with its error, and the emission cutoff."""
    k, P = density_form_factor(density, length, modes)
    cut = envelope_cutoff(k, P, 0.0, drop, bins_per_decade, seed=seed)
    env = cut.pop("envelope")
    nu = emission_cutoff_hz(cut["k_cutoff"], bulk_gamma, density_cm3) \
        if cut["k_cutoff"] is not None else None
    nu_err = emission_cutoff_hz(cut["k_cutoff_err"], bulk_gamma, density_cm3) \
        if cut.get("k_cutoff_err") is not None else None
    return {"k": k, "power": P, "particles": None, "particles_used": None, "noise_floor": 0.0,
            **cut, "frequency_cutoff_hz": nu, "frequency_cutoff_err_hz": nu_err,
            "envelope": env, "source": "continuum density"}
