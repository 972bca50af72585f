"""Periodic 1D electrostatic field solves by FFT, and the charge filter.

Normalised Gauss law: dE/dx = rho, with rho = sum_s q_s n_s / n_ref (x in c/omega_p, E in
m_e c omega_p / e). The k = 0 part of rho is dropped, which is the same as a uniform neutralising
background of the opposite mean charge.

The solve is written as E_k = G(k) rho_k with a Green's function G chosen once per run:

- spectral (Hockney & Eastwood 1988, sec. 5-2): G = -i / k, with the Nyquist mode set to zero
  so that E stays real and the force stays antisymmetric;
- finite_difference (Birdsall & Langdon 1991, sec. 2-5): the three-point Poisson equation
  (phi_{i+1} - 2 phi_i + phi_{i-1}) / dx^2 = -rho_i and the centred E_i = -(phi_{i+1} -
  phi_{i-1}) / (2 dx), i.e. G = -i [sin(k dx) / dx] / [2 sin(k dx / 2) / dx]^2.

Both are odd in k, so sum_i rho_i E_i = 0 and, with a gather that uses the deposit's weights,
the total force on the particles vanishes: momentum is conserved to round-off.
"""
from __future__ import annotations

import numpy as np


def wavenumbers(cells: int, length: float) -> np.ndarray:
    """k of the rfft modes of an N-node periodic grid: k_m = 2 pi m / L, m = 0..N/2."""
    return 2.0 * np.pi * np.fft.rfftfreq(cells, d=length / cells)


def binomial_response(k: np.ndarray, dx: float, passes: int) -> np.ndarray:
    """Response of ``passes`` (1, 2, 1)/4 binomial passes followed by one compensating pass.

    One (1,2,1)/4 pass multiplies mode k by cos^2(k dx / 2); the compensator with weights
    (-p/4, 1 + p/2, -p/4) multiplies by 1 + p sin^2(k dx / 2), which cancels the k^2 term of the
    p passes so that long wavelengths are left untouched to O(k^4) (Birdsall & Langdon 1991,
    appendix C).
    """
    if passes <= 0:
        return np.ones_like(k)
    s2 = np.sin(0.5 * k * dx) ** 2
    return (1.0 - s2) ** passes * (1.0 + passes * s2)


def green_function(cells: int, length: float, solver: str = "spectral",
                   smoothing_passes: int = 0) -> np.ndarray:
    """G(k) on the rfft modes such that E_k = G(k) rho_k (filter included)."""
    k = wavenumbers(cells, length)
    dx = length / cells
    g = np.zeros(k.size, dtype=complex)
    kk = k[1:]
    if solver == "spectral":
        g[1:] = -1j / kk
        if cells % 2 == 0:
            g[-1] = 0.0
    elif solver == "finite_difference":
        kappa2 = (2.0 * np.sin(0.5 * kk * dx) / dx) ** 2
        g[1:] = -1j * (np.sin(kk * dx) / dx) / kappa2
        if cells % 2 == 0:
            g[-1] = 0.0
    else:
        raise ValueError(f"unknown solver {solver!r}")
    return g * binomial_response(k, dx, smoothing_passes)


def solve(rho: np.ndarray, green: np.ndarray) -> np.ndarray:
    """E on the nodes from rho on the nodes: E = irfft(G rfft(rho))."""
    return np.fft.irfft(green * np.fft.rfft(rho), n=rho.size)


def field_energy(efield: np.ndarray, dx: float) -> float:
    """Electrostatic energy W_E = sum_i E_i^2 dx / 2 (in n_ref m_e c^2 c/omega_p)."""
    return 0.5 * dx * float(np.dot(efield, efield))


def mode_amplitudes(efield: np.ndarray, modes: int) -> np.ndarray:
    """Complex E_m = (1/N) sum_i E_i exp(-i k_m x_i) for m = 1..modes (|E_m| is the amplitude
    of the cosine wave 2|E_m| cos(k_m x + phase))."""
    return np.fft.rfft(efield)[1:modes + 1] / efield.size
